"""Flow along a lumen: laminar (Poiseuille) flow in a tube of radius R with radial diffusion in
the fluid and axial convection, axial diffusion neglected.

Modules
-------
graetz
    The Graetz eigenfunction series for a wall held at one concentration (Dirichlet), a wall of
    finite conductance (Robin) and a uniform wall flux; the Leveque short-length asymptote.
marching
    Finite volumes in the radius, Crank-Nicolson marching in the axial position, any wall law
    ``flux(c_wall)`` (Newton at every step); three-mesh refinement studies.
layer_walls
    Wall laws from the layers' steady radial solve (``model.Problem``): an exact conductance
    wall for linear kinetics (the Robin wall of the Graetz series), a general law otherwise.
krogh
    The Krogh cylinder: the Krogh-Erlang profile in a tissue annulus with zero-order uptake and
    the linear fall of the mixing-cup concentration along the capillary.

The coordinate along the tube is measured from the inlet. The dimensionless axial position is
``z* = z / (D_h Pe) = pi D z / (4 F)`` (D_h = 2R, Pe = u_m D_h / D, F the volume flow rate), and
Sherwood numbers are on the hydraulic diameter, ``Sh = k D_h / D`` (R.K. Shah, A.L. London,
*Laminar Flow Forced Convection in Ducts*, Academic Press, 1978, ch. 5, with mass in place of
heat).

These functions check design calculations for devices that feed or drain living tissue; their
results support, but do not replace, design verification testing and qualified review, and
local regulations and licensed practice govern their use.
"""
