"""Feasibility screen: can the goal be reached at all with this launch C3 and DSM?

A quick estimate made before a long search, in a simplified model: the body on a
circular orbit of radius a_b (its mean semi-major axis) in the ecliptic, speed
V_b = sqrt(mu_sun / a_b); the launch v-infinity in that plane; one tangential DSM at
an apsis of the launch orbit (the classic v-infinity leveraging maneuver: Sims,
Longuski and Staugler 1997, "V-infinity leveraging for interplanetary missions:
multiple-revolution orbit techniques", J. Guidance, Control and Dynamics 20(3); from
memory); the return v-infinity from Tisserand's parameter with respect to the body,

    T = a_b/a + 2 cos(i) sqrt(a (1 - e^2) / a_b),    v_inf = V_b sqrt(3 - T)

(the Tisserand relation as used for gravity-assist design, e.g. Strange and
Longuski 2002, "Graphical method for gravity-assist trajectory design", J. Spacecraft
and Rockets 39(1); from memory), and one flyby turning it by at most the turn at the
minimum periapsis, 2 asin(1 / (1 + r_p v_inf^2 / mu)). Every outgoing direction
within that turn is tried. Launch declination limits, the timing of the return
(phasing) and the eccentricity of the body's orbit are ignored, so "reachable" means
"not ruled out": the search can still need more DSM than the estimate, and a goal
within a few tenths of a km/s of the edge deserves a run rather than a verdict.
"""

import math
from dataclasses import dataclass, field

import numpy as np

from leverage.astro import bodies
from leverage.core.flyby import tisserand, turn_angle

DV_MAX_KMS = 3.0  # largest DSM the screen looks at
DV_STEP_KMS = 0.02
_N_VINF = 5  # launch v-infinity samples between the C3 limits
_N_PUMP = 25  # launch directions in the orbit plane, 0..180 deg from the body's velocity
_N_CONE = 6  # outgoing directions: angles from the incoming one, 0..largest turn
_N_CLOCK = 24  # ... and clock angles around it


@dataclass
class Requirement:
    name: str
    unit: str
    required: float  # in ``unit``
    best: float = -math.inf  # best reached within the DSM budget, in ``unit``
    at_least: bool = True  # True: value must be >= required; False: <=

    def shortfall(self) -> float:
        """How far the best estimate falls short, in ``unit`` (0 if it does not)."""
        gap = self.required - self.best if self.at_least else self.best - self.required
        return max(0.0, gap)


@dataclass
class ScreenResult:
    verdict: str  # "reachable", "unreachable" or "no requirement"
    budget_kms: float | None  # DSM budget screened against (None: none given)
    min_dsm_kms: float | None  # smallest DSM meeting every requirement (None: not found)
    best_gain_kms: float  # largest v-infinity gain within the budget
    requirements: list = field(default_factory=list)
    notes: list = field(default_factory=list)

    def lines(self) -> list[str]:
        """Human-readable lines for ``leverage check``."""
        out = [
            "feasibility screen (circular coplanar body orbit, Tisserand's parameter, one "
            "tangential DSM at an apsis, turn limit at the minimum periapsis; see "
            "leverage/screen.py)"
        ]
        budget = (
            f"DSM budget {self.budget_kms:.3f} km/s"
            if self.budget_kms is not None
            else f"no DSM budget (looked up to {DV_MAX_KMS:.1f} km/s)"
        )
        out.append(f"  verdict: {self.verdict.upper()}  ({budget})")
        for r in self.requirements:
            sign = ">=" if r.at_least else "<="
            best = "none" if not math.isfinite(r.best) else f"{r.best:.3f}"
            gap = r.shortfall()
            state = "ok" if gap == 0.0 else f"short by {gap:.3f} {r.unit}"
            out.append(
                f"  {r.name:<28} required {sign} {r.required:.3f} {r.unit}; "
                f"best estimate {best} {r.unit}: {state}"
            )
        if self.min_dsm_kms is not None:
            out.append(
                f"  smallest DSM meeting every requirement: about {self.min_dsm_kms:.2f} km/s"
                " (an estimate; phasing may need more)"
            )
        elif self.requirements:
            out.append(f"  no DSM up to {DV_MAX_KMS:.1f} km/s meets every requirement")
        if self.budget_kms is not None:
            out.append(
                f"  largest v-infinity gain within the budget: about {self.best_gain_kms:.2f} km/s"
            )
        out += [f"  note: {n}" for n in self.notes]
        return out


class _Model:
    """The circular, coplanar screen model in units of a_b, V_b (mu_sun = 1)."""

    def __init__(self, problem):
        body = problem.body
        self.a_b = body.mean_elements[0] * bodies.AU_KM
        self.v_b = math.sqrt(bodies.GM_SUN_KM3_S2 / self.a_b)
        launch, flyby = problem.values["launch"], problem.values["flyby"]
        self.v_launch = (
            np.linspace(
                math.sqrt(launch["min_c3_km2_s2"]), math.sqrt(launch["max_c3_km2_s2"]), _N_VINF
            )
            / self.v_b
        )
        self.pump = np.linspace(0.0, math.pi, _N_PUMP)
        self.mu_b = body.gm_km3_s2
        self.rp_min = body.equatorial_radius_km + flyby["min_altitude_km"]

    def returns(self, dv_kms: float):
        """Return v-infinity (normalized) and its pump-angle cosine and sine, and the
        launch v-infinity, of every launch sample after a tangential DSM of +-dv at
        either apsis; only loops that still cross the body's orbit."""
        v0, pump = np.meshgrid(self.v_launch, self.pump, indexing="ij")
        v0, pump = v0.ravel(), pump.ravel()
        h = 1.0 + v0 * np.cos(pump)  # angular momentum (r = 1)
        energy = 0.5 * ((1.0 + v0 * np.cos(pump)) ** 2 + (v0 * np.sin(pump)) ** 2) - 1.0
        bound = (energy < 0.0) & (h > 0.0)
        a = np.where(bound, -0.5 / np.where(bound, energy, -1.0), np.nan)
        p = h * h
        e = np.sqrt(np.clip(1.0 - p / a, 0.0, None))
        outs = []
        d = dv_kms / self.v_b
        for r_apsis in (p / (1.0 + e), p / np.maximum(1.0 - e, 1e-12)):
            for sign in (1.0, -1.0) if d > 0.0 else (1.0,):
                v_new = h / r_apsis + sign * d
                h_new = r_apsis * v_new
                en_new = 0.5 * v_new * v_new - 1.0 / r_apsis
                ok = bound & (v_new > 0.0) & (en_new < 0.0)
                a_new = -0.5 / np.where(ok, en_new, -1.0)
                e_new = np.sqrt(np.clip(1.0 - h_new * h_new / a_new, 0.0, None))
                # coplanar (i = 0), lengths in units of a_b
                w2 = 3.0 - tisserand(1.0, a_new, e_new, np.zeros_like(a_new))
                vt = h_new - 1.0  # along-track part of v_inf at r = 1
                vr2 = w2 - vt * vt  # >= 0 exactly when the orbit crosses r = 1
                ok &= (w2 > 0.0) & (vr2 >= -1e-12)
                w = np.sqrt(np.clip(w2, 0.0, None))
                outs.append((w[ok], vt[ok], np.sqrt(np.clip(vr2[ok], 0.0, None)), v0[ok]))
        w, vt, vr, v0s = (np.concatenate([o[k] for o in outs]) for k in range(4))
        return w, vt, vr, v0s

    def outgoing(self, w, vt, vr):
        """Outgoing orbits (normalized aphelion, perihelion, inclination rad) over every
        direction within the largest turn of each return sample, both radial senses.
        Arrays of shape (samples, directions)."""
        turn = turn_angle(self.mu_b, w * self.v_b, self.rp_min)
        beta = np.linspace(0.0, 1.0, _N_CONE)[None, :, None] * turn[:, None, None]
        clock = np.linspace(0.0, 2.0 * np.pi, _N_CLOCK, endpoint=False)[None, None, :]
        results = []
        for radial in (vr, -vr):
            # unit incoming direction (t, r, n) and two unit vectors across it
            wn = np.where(w > 0.0, w, 1.0)
            u = np.stack([vt / wn, radial / wn, np.zeros_like(w)], axis=1)
            e2 = np.stack([-u[:, 1], u[:, 0], np.zeros_like(w)], axis=1)
            e3 = np.zeros_like(u)
            e3[:, 2] = 1.0
            d = np.cos(beta)[..., None] * u[:, None, None, :] + np.sin(beta)[..., None] * (
                np.cos(clock)[..., None] * e2[:, None, None, :]
                + np.sin(clock)[..., None] * e3[:, None, None, :]
            )
            vel = w[:, None, None, None] * d
            vel[..., 0] += 1.0  # add the body's velocity (along-track)
            v_t, v_r, v_n = vel[..., 0], vel[..., 1], vel[..., 2]
            h = np.sqrt(v_t * v_t + v_n * v_n)
            energy = 0.5 * (v_t * v_t + v_r * v_r + v_n * v_n) - 1.0
            p = h * h
            with np.errstate(divide="ignore", invalid="ignore"):
                e = np.sqrt(np.clip(1.0 + 2.0 * energy * p, 0.0, None))
                apo = np.where(energy < 0.0, p / np.maximum(1.0 - e, 1e-12), np.inf)
                peri = p / (1.0 + e)
                inc = np.arccos(np.clip(v_t / np.where(h > 0, h, 1.0), -1.0, 1.0))
            n = len(w)
            results.append((apo.reshape(n, -1), peri.reshape(n, -1), inc.reshape(n, -1)))
        return tuple(np.concatenate([r[k] for r in results], axis=1) for k in range(3))


def _requirements(problem, model: _Model) -> list:
    goal = problem.values["goal"]
    reqs = []
    if goal["min_outgoing_vinf_km_s"] > 0.0:
        reqs.append(Requirement("outgoing v-infinity", "km/s", goal["min_outgoing_vinf_km_s"]))
    if goal["min_outgoing_aphelion_au"] > 0.0:
        reqs.append(Requirement("outgoing aphelion", "au", goal["min_outgoing_aphelion_au"]))
    if goal["min_outgoing_inclination_deg"] > 0.0:
        reqs.append(
            Requirement("outgoing inclination", "deg", goal["min_outgoing_inclination_deg"])
        )
    target = problem.target
    if target is not None:
        if target.perihelion_km > model.a_b:
            reqs.append(
                Requirement(
                    f"aphelion to reach {target.name}", "au", target.perihelion_km / bodies.AU_KM
                )
            )
        elif target.aphelion_km < model.a_b:
            reqs.append(
                Requirement(
                    f"perihelion to reach {target.name}",
                    "au",
                    target.aphelion_km / bodies.AU_KM,
                    best=math.inf,
                    at_least=False,
                )
            )
    return reqs


def _level(model: _Model, dv_kms: float, reqs: list):
    """(values reached per requirement, all met by one design?, best gain km/s) at one
    DSM size."""
    w, vt, vr, v0 = model.returns(dv_kms)
    if len(w) == 0:
        return [(-math.inf if r.at_least else math.inf) for r in reqs], False, -math.inf
    gain = float(np.max(w - v0) * model.v_b)
    need_geometry = any(r.unit in ("au", "deg") for r in reqs)
    if need_geometry:
        apo, peri, inc = model.outgoing(w, vt, vr)
    values, met = [], np.ones((len(w), apo.shape[1] if need_geometry else 1), dtype=bool)
    au = model.a_b / bodies.AU_KM  # normalized length -> au
    for r in reqs:
        if r.unit == "km/s":
            v = (w * model.v_b)[:, None]
        elif r.name.startswith("perihelion"):
            v = peri * au
        elif r.unit == "au":
            v = apo * au
        else:
            v = np.degrees(inc)
        ok = v >= r.required if r.at_least else v <= r.required
        met &= ok
        values.append(float(np.max(v) if r.at_least else np.min(v)))
    return values, bool(met.any()), gain


def screen(problem) -> ScreenResult:
    """Screen a validated problem (see the module docstring for the model)."""
    model = _Model(problem)
    reqs = _requirements(problem, model)
    budget = problem.values["goal"]["dsm_budget_km_s"]
    top = DV_MAX_KMS if budget is None else max(budget, DV_MAX_KMS)
    levels = np.arange(0.0, top + 0.5 * DV_STEP_KMS, DV_STEP_KMS)
    if budget is not None and budget not in levels:
        levels = np.sort(np.append(levels, budget))
    min_dsm, best_gain = None, -math.inf
    for dv in levels:
        values, all_met, gain = _level(model, float(dv), reqs)
        within = budget is None or dv <= budget + 1e-12
        if within:
            best_gain = max(best_gain, gain)
            for r, v in zip(reqs, values):
                r.best = max(r.best, v) if r.at_least else min(r.best, v)
        if reqs and all_met and min_dsm is None:
            min_dsm = float(dv)
        # Stop once the smallest DSM is known and the budget (if any) is covered.
        if min_dsm is not None and (budget is None or dv >= budget):
            break
        if not reqs and budget is None:
            break  # nothing to screen and no budget to state a gain for
    notes = []
    if problem.target is not None:
        notes.append("the target's phase and the arrival v-infinity limit are not screened")
    if not reqs:
        verdict = "no requirement"
        min_dsm = None
    elif min_dsm is not None and (budget is None or min_dsm <= budget + 1e-12):
        verdict = "reachable"
    else:
        verdict = "unreachable"
    return ScreenResult(
        verdict=verdict,
        budget_kms=budget,
        min_dsm_kms=min_dsm,
        best_gain_kms=best_gain,
        requirements=reqs,
        notes=notes,
    )
