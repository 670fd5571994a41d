"""The face-rate band of a fixed-grid dissolution front: how far a nodal (enthalpy-type) scheme's
face rate can lie from the rate of the front it reports.

In the lumped Galerkin scheme (``galerkin``) the node whose undissolved solute is dissolving
holds the saturation potential U at its own position while the front, read from its
undissolved fraction, lies anywhere in the node's dual cell: the dissolved region is held
between the face and the node, not the front. The face rate then runs in steps, one per node
the front leaves, of relative size up to (half a cell) / (distance to the front); the steps of
nested meshes (ratio 2) coincide wherever the dissolving node is a node of the coarser mesh, so
there the meshes agree to round-off and their difference says nothing of the step (measured:
the three meshes of a coating 40 times above its solubility agreed to 7e-7 of the peak rate at
6 h, while a mesh four times finer differed by 1.2e-2). The same stepping is the known
behaviour of fixed-grid enthalpy methods for moving boundaries (V.R. Voller, M. Cross, Int. J.
Heat Mass Transfer 24 (1981) 545, the "staircase" in nodal histories).

Band. Treat the dissolved region between the face node f and the dissolving node j as the chain
of its element resistances (r^n-weighted, ``1 / stiffness`` of each element, stiffness
``D K int r^n / h^2``): the quasi-steady inflow is ``(U_j - u_f) / rho_j`` with ``rho_j`` the
chain's resistance. Placing the saturation point at the front instead of at node j changes
``rho_j`` by at most half the resistance of an element next to node j, ``d_rho = 1 / (2
stiffness)``, and so the inflow by ``(U_j - u_f) d_rho / rho_j^2`` to first order. Diffusion
between the front and the face only smooths how a shift of the front reaches the face (the
response of the face rate to a step at the far end of a slab rises monotonically to its
quasi-steady value, as the outflow of a membrane in the time-lag solution: J. Crank, *The
Mathematics of Diffusion*, 2nd ed., 1975, ch. 4), so this quasi-steady figure bounds the
step. Behind a mass-transfer film of resistance rho_film (face node not held) the same shift
changes the inflow q = (U_j - u_b) / (rho_j + rho_film) by q d_rho / (rho_j + rho_film), at
most q d_rho / rho_j = (U_j - u_f) d_rho / rho_j^2 since u_f = u_b + q rho_film: the chain to
the face node bounds that face too (resistances in series, common practice). Units: the
r^n-weighted flux r^n J, amount m^(n-2)/s (divide by the face's r^n for a
flux density, amount/(m^2 s)).

Measured (fine mesh against a mesh eight times finer, nine cases: slabs at 3, 25 and 40 times
the solubility into a perfect sink or a stirred medium, a bead whose medium saturates, a tube
releasing inward, a sphere and a cylinder): the error at most 0.32 of the grid band plus this
band, where the grid band alone was exceeded up to 7e3-fold (40 times the solubility, 6 h).
At 3 times the solubility the step is smoothed (error 2e-5 of the peak rate against a band of
5e-3): the bound is loose there; on none of the nine was it short.
"""

from __future__ import annotations

import numpy as np

__all__ = ["staircase_inflow_band"]


def staircase_inflow_band(stiffness: np.ndarray, solid: np.ndarray, present: np.ndarray,
                          u: np.ndarray, saturation: np.ndarray, side: str) -> float:
    """Bound of the face inflow's step error on one mesh at one time.

    Parameters
    ----------
    stiffness : ndarray
        Per element of the mesh (inner to outer), ``D K int r^n / h^2`` (r^n-weighted, m^(n+1)
        per s: D in m^2/s, int r^n dr in m^(n+1), h in m; K dimensionless).
    solid : ndarray
        Undissolved amount per node (r^n-weighted).
    present : ndarray
        Per node, the amount below which a node's undissolved solute counts as gone.
    u : ndarray
        Dissolved potential C/K per node.
    saturation : ndarray
        Saturation potential S/K per node (inf where no solubility limits it).
    side : str
        ``"inner"`` (the face node is the first) or ``"outer"`` (the last).

    Returns
    -------
    float
        The band of the r^n-weighted inflow through that face (amount m^(n-2)/s, with ``u``
        and ``saturation`` in amount/m^3); 0 where no node holds
        undissolved solute, where the face node itself does (no dissolved region to step) or
        where the dissolving node has no finite saturation potential.
    """
    holding = np.flatnonzero(solid > present)
    if holding.size == 0:
        return 0.0
    last = u.size - 1
    if side == "outer":
        j, face = int(holding.max()), last
        chain = stiffness[j:last]
    elif side == "inner":
        j, face = int(holding.min()), 0
        chain = stiffness[:j]
    else:
        raise ValueError(f"side: expected 'inner' or 'outer', got {side!r}")
    if j == face or not np.isfinite(saturation[j]) or chain.size == 0:
        return 0.0
    rho = float(np.sum(1.0 / chain))
    beside = [stiffness[e] for e in (j - 1, j) if 0 <= e < stiffness.size]
    d_rho = 0.5 * max(1.0 / s for s in beside)
    return abs(float(saturation[j]) - float(u[face])) * d_rho / (rho * rho)
