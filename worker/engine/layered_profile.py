"""A concentration profile made of one closed-form piece per layer.

Evaluates ``C`` and the outward flux ``J = -D dC/dr`` (positive towards increasing r) at arrays
of positions, placing each position in its layer; a position exactly on an interface takes the
inner layer's value unless a layer index is given (see ``SteadySolution`` in ``model.py``).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np

# Positions this far outside a layer (relative to the body size) are still accepted as its edge.
EDGE_TOLERANCE = 1e-12

PieceFunction = Callable[[np.ndarray], tuple[np.ndarray, np.ndarray]]


class LayeredProfile:
    """Piecewise closed-form profile.

    Parameters
    ----------
    edges : sequence of float
        Inner face, interfaces and outer face, m (length = number of layers + 1).
    diffusivities : sequence of float
        D of each layer, m^2/s.
    pieces : sequence of callables
        ``pieces[i](r) -> (C, dC/dr)`` for r inside layer i (C in amount/m^3, dC/dr per m).
    presampled : mapping of int to (positions, C, dC/dr), optional
        Values of ``pieces[i]`` already computed at positions inside layer i: ``profile_at``
        with equal positions and that layer returns them instead of evaluating again.
    """

    def __init__(self, edges: Sequence[float] | np.ndarray, diffusivities: Sequence[float],
                 pieces: Sequence[PieceFunction], presampled: dict | None = None):
        self.edges = np.asarray(edges, dtype=float)
        self.diffusivities = np.asarray(diffusivities, dtype=float)
        self.pieces = list(pieces)
        self._slack = EDGE_TOLERANCE * max(abs(self.edges[-1]), self.edges[-1] - self.edges[0])
        self._bounds = self.edges.tolist()
        self._presampled = dict(presampled or {})

    def _layer_of(self, r: np.ndarray, layer: int | None) -> np.ndarray:
        low, high = self.edges[0] - self._slack, self.edges[-1] + self._slack
        if np.any(~np.isfinite(r)) or np.any(r < low) or np.any(r > high):
            raise ValueError(
                f"r: expected positions within the body [{self.edges[0]!r}, {self.edges[-1]!r}] m,"
                f" got values from {np.min(r)!r} to {np.max(r)!r}")
        if layer is None:
            index = np.searchsorted(self.edges, r, side="left") - 1
            return np.clip(index, 0, len(self.pieces) - 1)
        if not 0 <= layer < len(self.pieces):
            raise ValueError(f"layer: expected an index 0..{len(self.pieces) - 1}, got {layer!r}")
        a, b = self.edges[layer] - self._slack, self.edges[layer + 1] + self._slack
        if np.any(r < a) or np.any(r > b):
            raise ValueError(f"r: expected positions within layer {layer} "
                             f"[{self.edges[layer]!r}, {self.edges[layer + 1]!r}] m")
        return np.full(r.shape, layer, dtype=int)

    def _in_one_layer(self, flat: np.ndarray, layer: int | None):
        """(C, dC/dr) when every position lies in the given layer, else None."""
        if layer is None or not 0 <= layer < len(self.pieces) or not flat.size:
            return None
        a, b = self._bounds[layer], self._bounds[layer + 1]
        low, high = float(flat.min()), float(flat.max())
        if a - self._slack <= low and high <= b + self._slack:  # NaN fails both tests
            return self.pieces[layer](flat if a <= low and high <= b else np.clip(flat, a, b))
        return None

    def profile_at(self, r, layer: int | None = None) -> tuple[np.ndarray, np.ndarray]:
        """(concentration, outward flux) at positions ``r`` from one evaluation."""
        r = np.asarray(r, dtype=float)
        known = self._presampled.get(layer)
        if known is not None and r.shape == known[0].shape and np.array_equal(r, known[0]):
            return known[1].copy(), -self.diffusivities[layer] * known[2]
        flat = r if r.ndim == 1 else np.atleast_1d(r).ravel()
        both = self._in_one_layer(flat, layer)
        if both is None:
            return self.concentration_at(r, layer), self.flux_at(r, layer)
        value, gradient = both
        flux = -self.diffusivities[layer] * np.asarray(gradient, dtype=float)
        if r.ndim == 1:
            return np.asarray(value, dtype=float), flux
        return (np.asarray(value, dtype=float).reshape(r.shape), flux.reshape(r.shape))

    def _evaluate(self, r, layer: int | None, want_flux: bool) -> np.ndarray:
        r = np.asarray(r, dtype=float)
        flat = np.atleast_1d(r).ravel()
        both = self._in_one_layer(flat, layer)
        if both is not None:
            value, gradient = both
            out = -self.diffusivities[layer] * gradient if want_flux else value
            return np.asarray(out, dtype=float).reshape(r.shape)
        index = self._layer_of(flat, layer)
        out = np.empty_like(flat)
        for i in np.unique(index):
            mask = index == i
            position = np.clip(flat[mask], self.edges[i], self.edges[i + 1])
            value, gradient = self.pieces[i](position)
            out[mask] = -self.diffusivities[i] * gradient if want_flux else value
        return out.reshape(r.shape)

    def concentration_at(self, r, layer: int | None = None) -> np.ndarray:
        """Material-side concentration at positions ``r`` (m), amount/m^3."""
        return self._evaluate(r, layer, want_flux=False)

    def flux_at(self, r, layer: int | None = None) -> np.ndarray:
        """Outward flux density ``-D dC/dr`` at positions ``r`` (m), amount/(m^2*s)."""
        return self._evaluate(r, layer, want_flux=True)
