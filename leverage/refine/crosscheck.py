"""Cross-check of a refined trajectory with the second integrator.

Each segment of the refined design is flown again from the same start state with
``integrators.Dop853`` (DE421 positions of the bodies at every step) and its end
state compared with the main integrator's (``integrators.Ias15``, bodies integrated
from DE421 at the segment start). The differences measure both integrators and the
IAS15 bodies' drift from DE421 together. Units km and m/s.
"""

import numpy as np

from leverage.refine.integrators import Dop853


def cross_check(refiner, best) -> dict:
    """{"integrator", "segments": [{segment, position_km, velocity_m_s}]}."""
    ep, st = best.epochs, best.states
    legs = [
        ("departure periapsis -> DSM", ep["launch"], st["launch"], ep["dsm"]),
        ("flyby periapsis -> DSM (backward)", ep["flyby"], st["periapsis_in"], ep["dsm"]),
    ]
    if "arrival" in ep:
        legs.append(("flyby periapsis -> arrival", ep["flyby"], st["periapsis_out"], ep["arrival"]))
    else:
        legs.append(
            (
                "flyby periapsis -> outgoing point",
                ep["flyby"],
                st["periapsis_out"],
                ep["flyby"] + refiner.t_out_s,
            )
        )
    times = [t for _, a, _, b in legs for t in (a, b)]
    other = Dop853(refiner.de, min(times), max(times))
    out = []
    for label, t0, (r0, v0), t1 in legs:
        ra, va = refiner.prop.propagate(t0, r0, v0, t1)
        rb, vb = other.propagate(t0, r0, v0, t1)
        out.append(
            {
                "segment": label,
                "position_km": float(np.linalg.norm(ra - rb)),
                "velocity_m_s": float(np.linalg.norm(va - vb) * 1e3),
            }
        )
    return {"integrator": other.name, "segments": out}
