"""The transient engine: ``run_transient`` solves a transient case and checks it.

A transient case is solved by the method of lines (``method_of_lines``) on three meshes, always,
and by an independent route of another kind: the exact eigenfunction series (``exact_series``:
one layer, no or first-order reaction, a concentration or mass-transfer face) and the exact
Laplace-domain solution (``laplace``: any layers, linear kinetics) where the kinetics are
linear, else the Galerkin second discretisation (``galerkin``). The exact route is primary where
one exists. Each method is a ``Route`` (``routes``), and the record gets the primary route's
release series at the requested times, t50/t90/time lag, the final profile and probe rows, and
these checks, each aggregated over the requested times with the worst time named in its detail:

* the route cross-checks of ``compare``: ``cross_check.initial_load``,
  ``cross_check.release_fraction`` (each route divides by its own load;
  ``cross_check.released`` for an initially empty body), ``cross_check.remaining``,
  ``cross_check.consumed``, ``cross_check.flux_inner``/``flux_outer``, ``cross_check.profile``,
  ``cross_check.probes``, ``cross_check.t50``, ``cross_check.t90`` (one route only fails),
  ``cross_check.concentration_min`` (each route's true minimum of each layer at every requested
  time) and ``cross_check.time_to_steady`` (``uptake``: a case approaching a nonzero steady
  state), and
  ``cross_check.time_lag`` (``checks``): numerical routes at their grid-extrapolated values
  (Celik et al. 2008, eq. 4; the fine-mesh value where the three meshes do not converge
  monotonically). The error at each time is ``|a - b| / max(|b|, CROSS_CHECK_FLOOR * scale)``:
  relative where the value is large, absolute (a fraction of the load or throughput) where it
  is small, as the membrane series needs at small times;
* ``mass_balance``: initial = remaining (dissolved and undissolved) + released + consumed,
  relative to the larger of the initial load and the throughput;
* ``convergence.space``: GCI_fine of the release (three meshes, ratio 2), worst requested time;
* ``convergence.time``: change of the amounts under a ``TIME_TIGHTENING`` times tighter
  integrator tolerance (on the coarse mesh), relative to the amount scale; for a kinked case
  (zero order, a reachable solubility: ``implicit_steps``) the change when every accepted step
  is halved, with the observed order in time from the steps quartered (a zero-order case with a
  compartment whose time error exceeds a quarter of what the record resolves is integrated
  again with a tighter tolerance first: ``solve.fv_on_meshes``);
* ``steady_limit``: the state integrated ``STEADY_HORIZON`` capacity-resistance times past
  the duration against the steady engine (``exact_steady.solve_exact``, else
  ``fv_steady.solve_fv``);
* ``non_negativity``: the most negative of the reported profile, probe rows, amount held and
  the method of lines' cells.

Default limits are ``worker.engine.limits.TRANSIENT_LIMITS``; ``problem.tolerances`` overrides
them by the check's full name or by its family (``cross_check``, ``mass_balance``, ``gci`` for
``convergence.space``, ``convergence`` for ``convergence.time``, ``steady_limit``,
``non_negativity``).

Modules: ``solve`` (the solves), ``checks`` (the checks), ``record`` (series, profile, probes,
events), ``scales`` (scales and error measures), ``run`` (``run_transient``), ``exact_series``
and ``eigen_roots`` (the series), ``method_of_lines`` (the finite volumes in time), ``laplace``
(``solve_transient_laplace``: the exact Laplace-domain solution of every linear case, any number
of layers and every boundary kind, inverted by the fixed Talbot method), ``galerkin`` (a second
discretisation: P1 Galerkin elements and extrapolated implicit Euler, with its three-mesh study
``galerkin_study``), ``refinement`` (the three-mesh study of any solver's amounts), ``routes``
(each method as a route), ``compare`` (the route cross-checks), ``uptake`` (which bodies
release, the true minima over time, the time to steady), ``dispersed_exact`` (closed forms of
release from a layer loaded above its solubility and their ranges of validity) and
``dispersed_checks`` (``cross_check.dispersed_similarity`` and ``cross_check.pseudo_steady``:
a route's release and front against those closed forms, inside their ranges).
"""

from worker.engine.transient.run import run_transient

__all__ = ["run_transient"]
