"""Refinement of a patched-conic design in an n-body model (``leverage refine``).

One job per module:

* ``forces``: DE421 body states (jplephem) and GMs from the ephemeris' own constants;
  the point-mass force model and what it leaves out.
* ``integrators``: REBOUND IAS15 (main) and scipy DOP853 (cross-check) propagators.
* ``limits``: the problem's limits read from the result folder's ``problem.toml``.
* ``shooting``: unknowns, segments, matching and limit functions, the solvers.
* ``report``: refined.json, summary.txt, states.oem, trajectory.png, written as one
  folder atomically.

Frames: integration in solar-system-barycentric ICRF axes (DE421's frame); reports in
heliocentric ecliptic J2000 like best.json. Units km, s, km/s; epochs TDB seconds past
J2000.
"""

OPT_MAX_ITER = 200  # trust-constr iterations at most (here: the command line reads it cheaply)
