"""Best-known answers of the reference problems: a dense grid, each point polished locally.

For every reference problem (``REFERENCES``) the launch date and the loop duration
are laid on a grid (``--launch-step-days`` x ``--loop-step-days``, both ends
included). At each grid point the other six decision variables (launch v-infinity and
direction, DSM fraction, flyby altitude and B-plane angle) are searched by
1. the best few of ``--samples`` uniform random points (one compiled batch), each
   polished by BOBYQA (Powell 2009, through pygmo's nlopt) with the grid values fixed;
2. a continuation sweep: each point is polished again from its grid neighbours' answers.
The best ``--final`` grid points, and the best point of every launch date (so that a
basin at the edge of the window is not crowded out), are then polished in all eight
variables by a chain of local steps, each kept only if it improves and stays strictly
feasible: BOBYQA on the penalised objective; SLSQP (Kraft 1988, scipy) on the objective
without penalty subject to every limit margin >= 0 (BOBYQA stalls on the kink a
penalty has where a limit becomes active); BOBYQA again; monotonic basin hopping
around it (pygmo mbh); SLSQP again. With ``--from-runs FILE`` the designs that search runs
ended on (``search_quality --save-runs FILE``) go through the same full polish as
extra starts: a grid can step over a narrow basin that the runs found (earth-3yr's
did, twice). ``--polish-only`` skips the grid and polishes the existing entry's design
with the runs' designs (the entry keeps the earlier grid's description). The best is the best-known answer; the entry says where it came from. Writes ``benchmarks/best_known.json`` (objective in the problem's own units:
km/s for min_dsm, -km/s of gain for max_gain).

Each answer is then checked by ``--narrowed-seeds`` default searches (seeds 1..N,
in this process) with the launch date and the loop duration bounded to
+-``--narrowed-days`` around it: a narrowed run that beats it by more than 1 m/s means
the grid and polish missed the basin's bottom (the entry records their objectives).

The problem files are used as they are: their ephemeris (the default, JPL DE421) and
their ``[margins]`` (the limits the search sees are tightened by them, and so are the
ones here). Each answer also records the ephemeris, the margins and the
verification's verdict (``leverage.verify``: re-flown apart from the kernels against
the stated limits), as ``leverage run`` gives it in best.json.

Usage: python -m benchmarks.best_known [--only NAME] [--launch-step-days D]
       [--loop-step-days D] [--from-runs FILE] [--smoke] [--out FILE]
"""

import argparse
import json
import sys
import time
from pathlib import Path

import numba
import numpy as np
import pygmo as pg

from benchmarks.common import BENCH_PROBLEMS, DEMO, print_footer, print_header
from leverage.core import layout as L
from leverage.core import trajectory
from leverage.core.constants import DAY_S
from leverage.problem.load import load_problem
from leverage.search.udp import LeveragingUDP

OUT = Path(__file__).resolve().parent / "best_known.json"
REFERENCES = {
    "demo": DEMO,
    "earth-3yr": BENCH_PROBLEMS / "earth-3yr.toml",
    "earth-gain": BENCH_PROBLEMS / "earth-gain.toml",
    "earth-incl-aphelion": BENCH_PROBLEMS / "earth-incl-aphelion.toml",
    "earth-vinf-dla": BENCH_PROBLEMS / "earth-vinf-dla.toml",
    "earth-one-or-two-year": BENCH_PROBLEMS / "earth-one-or-two-year.toml",
    # the bundled template (invented numbers): a whole-year window, loops of one to two
    # years with 0 or 1 revolutions, four loop families set by the launch direction;
    # a search over the whole circle found the best one in 4 of 20 seeds, one sector
    # of it per epoch in 20 of 20 (benchmarks/README.md, "Launch-direction sectors")
    "inclination-raise": DEMO.parent / "inclination-raise.toml",
}
GRID_VARS = (L.X_LAUNCH_EPOCH_DAYS, L.X_LOOP_DURATION_DAYS)
FREE_VARS = (
    L.X_LAUNCH_VINF_KM_S,
    L.X_LAUNCH_IN_PLANE_ANGLE_DEG,
    L.X_LAUNCH_OUT_OF_PLANE_ANGLE_DEG,
    L.X_DSM_FRACTION,
    L.X_FLYBY_ALTITUDE_KM,
    L.X_BPLANE_ANGLE_DEG,
)


class FixedGridPoint:
    """pygmo problem over the six free variables with launch day and loop duration fixed."""

    def __init__(self, params, lower, upper, fixed):
        self.params = params
        self.full = np.array(fixed, dtype=float)
        self.lower = np.asarray(lower, float)[list(FREE_VARS)]
        self.upper = np.asarray(upper, float)[list(FREE_VARS)]

    def expand(self, y):
        x = self.full.copy()
        x[list(FREE_VARS)] = y
        return x

    def fitness(self, y):
        return trajectory.fitness(self.expand(np.asarray(y, float)), self.params)

    def get_bounds(self):
        return (self.lower, self.upper)


def bobyqa(maxeval=3000):
    uda = pg.nlopt("bobyqa")
    uda.xtol_rel = 1e-10
    uda.ftol_rel = 1e-14
    uda.maxeval = maxeval
    return pg.algorithm(uda)


def polish(udp_like, start, algo):
    """(x, f, evaluations) after a local polish of ``start`` (clipped to the bounds)."""
    lo, hi = udp_like.get_bounds()
    prob = pg.problem(udp_like)
    pop = pg.population(prob)
    pop.push_back(np.clip(start, lo, hi))
    pop = algo.evolve(pop)
    return pop.champion_x.copy(), float(pop.champion_f[0]), int(pop.problem.get_fevals())


def grid_axis(low, high, step):
    n = max(1, int(round((high - low) / step)))
    return np.linspace(low, high, n + 1)


def search_grid(compiled, launch_step, loop_step, samples, starts, rng, log):
    """Best (objective, free-variable vector) at every grid point; returns arrays."""
    p, lo, hi = compiled.params, compiled.lower, compiled.upper
    days = grid_axis(lo[L.X_LAUNCH_EPOCH_DAYS], hi[L.X_LAUNCH_EPOCH_DAYS], launch_step)
    loops = grid_axis(lo[L.X_LOOP_DURATION_DAYS], hi[L.X_LOOP_DURATION_DAYS], loop_step)
    best_f = np.full((days.size, loops.size), np.inf)
    best_y = np.zeros((days.size, loops.size, len(FREE_VARS)))
    algo = bobyqa()
    evals = 0
    free = list(FREE_VARS)
    start = time.perf_counter()
    for i, day in enumerate(days):
        for j, loop in enumerate(loops):
            fixed = lo.copy()
            fixed[L.X_LAUNCH_EPOCH_DAYS], fixed[L.X_LOOP_DURATION_DAYS] = day, loop
            sub = FixedGridPoint(p, lo, hi, fixed)
            xs = np.tile(fixed, (samples, 1))
            xs[:, free] = sub.lower + rng.random((samples, len(free))) * (sub.upper - sub.lower)
            f = trajectory.batch_fitness(xs, p)[:, 0]
            evals += samples
            for k in np.argsort(f)[:starts]:
                y, fy, n = polish(sub, xs[k, free], algo)
                evals += n
                if fy < best_f[i, j]:
                    best_f[i, j], best_y[i, j] = fy, y
        log(
            f"    launch day {i + 1}/{days.size} done, {evals:,} evaluations, "
            f"{time.perf_counter() - start:.0f} s, best so far {np.min(best_f):.6f}"
        )
    # Continuation: neighbours' answers as starts, so one unlucky point cannot hide a basin.
    for i in range(days.size):
        for j in range(loops.size):
            fixed = lo.copy()
            fixed[L.X_LAUNCH_EPOCH_DAYS], fixed[L.X_LOOP_DURATION_DAYS] = days[i], loops[j]
            sub = FixedGridPoint(p, lo, hi, fixed)
            for di, dj in ((-1, 0), (1, 0), (0, -1), (0, 1)):
                a, b = i + di, j + dj
                if 0 <= a < days.size and 0 <= b < loops.size and best_f[a, b] < best_f[i, j]:
                    y, fy, n = polish(sub, best_y[a, b], algo)
                    evals += n
                    if fy < best_f[i, j]:
                        best_f[i, j], best_y[i, j] = fy, y
    log(
        f"    continuation sweep done, {evals:,} evaluations, "
        f"{time.perf_counter() - start:.0f} s, best {np.min(best_f):.6f}"
    )
    return days, loops, best_f, best_y, evals


def constrained_polish(compiled, x):
    """SLSQP from x on the objective without penalty, every finite margin >= 0.

    Variables scaled to [0, 1] over the bounds; margins divided by the penalty scales
    of ``leverage.core.penalties``. Returns (x, kernel objective, evaluations).
    """
    from scipy.optimize import minimize

    from leverage.core.penalties import MARGIN_SCALES

    p, lo, hi = compiled.params, compiled.lower, compiled.upper
    span = hi - lo
    slots = [
        k
        for k in range(L.N_MARGINS)
        if np.isfinite(trajectory.details(x, p)[L.Q_MARGIN_ALT_KM + k])
    ]
    count = [0]

    def unscale(z):
        return lo + np.clip(z, 0.0, 1.0) * span

    def objective(z):
        count[0] += 1
        q = trajectory.details(unscale(z), p)
        return trajectory.fitness(unscale(z), p)[0] - q[L.Q_PENALTY]

    def margins(z):
        count[0] += 1
        q = trajectory.details(unscale(z), p)
        m = np.array([q[L.Q_MARGIN_ALT_KM + k] / MARGIN_SCALES[k] for k in slots])
        # A hair inside each limit (1e-7 of its scale), so the answer is strictly feasible.
        return np.where(np.isfinite(m), m, 1.0e3) - 1.0e-7

    res = minimize(
        objective,
        (x - lo) / span,
        method="SLSQP",
        bounds=[(0.0, 1.0)] * lo.size,
        constraints=[{"type": "ineq", "fun": margins}],
        options={"ftol": 1e-12, "maxiter": 500, "eps": 1e-8},
    )
    x_new = unscale(res.x)
    return x_new, float(trajectory.fitness(x_new, p)[0]), count[0]


def feasible(compiled, x) -> bool:
    """The rule of leverage.result: every leg solved and every limit margin >= 0."""
    q = trajectory.details(x, compiled.params)
    return bool(
        q[L.Q_OK] == 1.0 and np.all(q[L.Q_MARGIN_ALT_KM : L.Q_MARGIN_ALT_KM + L.N_MARGINS] >= 0.0)
    )


def polish_chain(compiled):
    """The local steps every full polish takes, in order (see the module docstring)."""
    udp = LeveragingUDP.from_compiled(compiled)
    hopper = pg.algorithm(pg.mbh(bobyqa(2000), stop=5, perturb=0.002, seed=1))
    # Each step starts from the best strictly feasible point so far; SLSQP can wander
    # off where the best Lambert branch changes (a kink), BOBYQA stalls at active limits.
    return [
        lambda x: polish(udp, x, bobyqa()),
        lambda x: constrained_polish(compiled, x),
        lambda x: polish(udp, x, bobyqa()),
        lambda x: polish(udp, x, hopper),
        lambda x: constrained_polish(compiled, x),
    ]


def polish_start(compiled, steps, x):
    """(x, f, evaluations): the chain from x, each step kept only if it improves and the
    point is feasible (a feasible start counts as it is)."""
    f = float(trajectory.fitness(x, compiled.params)[0]) if feasible(compiled, x) else np.inf
    evals = 0
    for step in steps:
        x2, f2, n = step(x)
        evals += n
        if f2 < f and feasible(compiled, x2):
            x, f = x2, f2
    return x, f, evals


def full_polish(compiled, days, loops, best_f, best_y, final, extra_starts=()):
    """Polish the best grid points (and ``extra_starts``, full decision vectors) in all
    eight variables; the best (x, f, evals, index of the start it came from: a grid
    point's flat index, or ("run", k) for extra start k)."""
    chosen = set(np.argsort(best_f, axis=None)[:final].tolist())
    chosen |= {
        int(np.ravel_multi_index((i, int(np.argmin(best_f[i]))), best_f.shape))
        for i in range(days.size)
    }
    steps = polish_chain(compiled)
    starts = []
    for flat in sorted(chosen):
        i, j = np.unravel_index(flat, best_f.shape)
        x = compiled.lower.copy()
        x[L.X_LAUNCH_EPOCH_DAYS], x[L.X_LOOP_DURATION_DAYS] = days[i], loops[j]
        x[list(FREE_VARS)] = best_y[i, j]
        starts.append((("grid", int(flat)), x))
    starts += [(("run", k), np.array(x, float)) for k, x in enumerate(extra_starts)]
    best_x, best, origin = None, np.inf, None
    evals = 0
    for where, x in starts:
        x, f, n = polish_start(compiled, steps, x)
        evals += n
        if f < best:
            best_x, best, origin = x, f, where
    if best_x is None:
        raise RuntimeError("no feasible design found; a reference problem must have one")
    return best_x, best, evals, origin


def verification(problem, compiled, x) -> dict:
    """The verification's verdict on x (``leverage.verify``: the design re-flown apart
    from the kernels, every stated limit re-checked), as ``leverage run`` gives it."""
    from types import SimpleNamespace

    from leverage.record.design import base_record, design_record
    from leverage.verify.report import verify_record

    settings = SimpleNamespace(
        algorithm="benchmarks.best_known",
        islands=0,
        population=0,
        generations=0,
        generations_per_migration=0,
        seed=0,
        polish="bobyqa, slsqp, mbh",
    )
    record = base_record(problem, settings, "best known")
    record.update(design_record(compiled, LeveragingUDP.from_compiled(compiled), x))
    verdict = verify_record(record)["verdict"]
    return {
        "holds": bool(verdict["holds"]),
        "model": verdict["model"],
        "broken": [b["limit"] for b in verdict["broken"]],
    }


def narrowed_text(text: str, launch_days=None, loop_days=None) -> str:
    """The problem file's text with the launch window and/or the loop duration replaced
    by [first, last] (days past J2000 TDB for the launch, days for the loop)."""
    import re

    from leverage.astro.times import utc_iso

    def sub(key, value, text):
        new, n = re.subn(rf"(?m)^{key}\s*=.*$", f"{key} = {value}", text)
        if n != 1:
            raise ValueError(f"{key} occurs {n} times in the problem file")
        return new

    if launch_days is not None:
        for key, day in zip(("window_open_utc", "window_close_utc"), launch_days):
            text = sub(key, f'"{utc_iso(day * DAY_S)}"', text)
    if loop_days is not None:
        text = sub("duration_days", f"[{loop_days[0]:.3f}, {loop_days[1]:.3f}]", text)
    return text


def narrowed_runs(path, x, seeds, half_width_days, log) -> list:
    """The default search (in this process) with the launch date and the loop duration
    bounded to +-``half_width_days`` around x (inside the file's own bounds): the
    check of a best-known answer by narrowed-bound runs. Returns each seed's
    (objective, feasible)."""
    from leverage.problem.load import load_problem_text
    from leverage.run import runner
    from leverage.search.islands import SerialIslands

    base = load_problem(path)
    lo, hi = base.compile().lower, base.compile().upper
    bounds = []
    for slot in GRID_VARS:
        a = max(lo[slot], x[slot] - half_width_days)
        b = min(hi[slot], x[slot] + half_width_days)
        bounds.append((a, b))
    text = narrowed_text(Path(path).read_text(), bounds[0], bounds[1])
    problem = load_problem_text(text, str(path), base.name)
    out = []
    for seed in range(1, seeds + 1):
        settings = runner.settings_from(problem, {"seed": seed})
        compiled, udp, search = runner.prepare(problem, settings, SerialIslands())
        while not search.done:
            search.step()
        record = runner.finish(problem, settings, compiled, udp, search, "complete")
        out.append((float(record["objective"][0]), bool(record["feasible"])))
        log(f"    narrowed run, seed {seed}: {out[-1][0]:.6f} (feasible {out[-1][1]})")
    return out


def runs_of(path, name) -> list:
    """The feasible runs of ``name`` in a ``search_quality --save-runs`` file ([] without one)."""
    if not path:
        return []
    return [
        r
        for r in json.loads(Path(path).read_text())
        if r["problem"] == name and r.get("feasible") and r.get("x")
    ]


def establish(name, path, args, log, earlier=None):
    problem = load_problem(path)
    compiled = problem.compile()
    rng = np.random.default_rng(args.seed)
    start = time.perf_counter()
    runs = runs_of(args.from_runs, name)
    if args.polish_only:
        # No new grid: the earlier entry's design (same problem file) and the runs'.
        if not earlier or earlier.get("sha256") != problem.sha256:
            raise SystemExit(f"--polish-only: no entry for {name} with this problem file")
        starts = [earlier["decision_vector"]["values"]] + [r["x"] for r in runs]
        steps = polish_chain(compiled)
        x, f, evals, origin = None, np.inf, 0, None
        for k, x0 in enumerate(starts):
            x1, f1, n = polish_start(compiled, steps, np.array(x0, float))
            evals += n
            if f1 < f:
                x, f, origin = x1, f1, ("earlier", None) if k == 0 else ("run", k - 1)
    else:
        days, loops, best_f, best_y, evals = search_grid(
            compiled,
            args.launch_step_days,
            args.loop_step_days,
            args.samples,
            args.starts,
            rng,
            log,
        )
        x, f, n, origin = full_polish(
            compiled, days, loops, best_f, best_y, args.final, [r["x"] for r in runs]
        )
        evals += n
    q = trajectory.details(x, compiled.params)
    check = verification(problem, compiled, x)
    narrowed = (
        narrowed_runs(path, x, args.narrowed_seeds, args.narrowed_days, log)
        if args.narrowed_seeds
        else []
    )
    return {
        "file": str(Path(path).resolve().relative_to(Path(__file__).resolve().parent.parent)),
        "sha256": problem.sha256,
        "goal": problem.values["goal"]["kind"],
        "objective": f,
        "objective_unit": "km/s" if problem.values["goal"]["kind"] != "weighted" else "weighted",
        "total_dv_km_s": float(q[L.Q_TOTAL_DV]),
        "vinf_gain_km_s": float(q[L.Q_GAIN]),
        "penalty": float(q[L.Q_PENALTY]),
        "feasible": feasible(compiled, x),
        "verification": check,
        "ephemeris": compiled.ephemeris,
        "margins": {k: v for k, v in problem.values["margins"].items() if v > 0.0},
        "decision_vector": {"names": compiled.names, "values": [float(v) for v in x]},
        "grid": (
            dict(earlier["grid"], reused_from=earlier["date"])
            if args.polish_only
            else {
                "launch_days": [float(days[0]), float(days[-1]), int(days.size)],
                "loop_days": [float(loops[0]), float(loops[-1]), int(loops.size)],
                "samples_per_point": args.samples,
                "polished_starts_per_point": args.starts,
                "final_full_polishes": args.final,
                "grid_best_objective": float(np.min(best_f)),
            }
        ),
        "from_runs": (
            {
                "file": Path(args.from_runs).name,
                "runs": len(runs),
                "best_run_objective": min(float(r["objective"]) for r in runs),
            }
            if runs
            else None
        ),
        "narrowed_runs": (
            {
                "half_width_days": args.narrowed_days,
                "seeds": len(narrowed),
                "objectives": [round(f, 9) for f, _ in narrowed],
                "feasible": [ok for _, ok in narrowed],
                "beat_by_more_than_1_m_s": any(ok and o < f - 0.001 for o, ok in narrowed),
            }
            if narrowed
            else None
        ),
        "best_came_from": (
            f"run seed {runs[origin[1]]['seed']}, polished"
            if origin[0] == "run"
            else ("the earlier entry, polished" if origin[0] == "earlier" else "grid")
        ),
        "evaluations": int(evals),
        "wall_s": round(time.perf_counter() - start, 1),
        "date": time.strftime("%Y-%m-%d"),
    }


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument(
        "--only",
        action="append",
        choices=sorted(REFERENCES),
        help="establish only this reference (repeatable)",
    )
    ap.add_argument("--launch-step-days", type=float, default=5.0)
    ap.add_argument("--loop-step-days", type=float, default=5.0)
    ap.add_argument("--samples", type=int, default=1024, help="random points per grid point")
    ap.add_argument("--starts", type=int, default=3, help="polished starts per grid point")
    ap.add_argument(
        "--final",
        type=int,
        default=40,
        help="best grid points polished in full (besides the best of each date)",
    )
    ap.add_argument(
        "--polish-only",
        action="store_true",
        help="no new grid: polish the existing entry's design and the --from-runs designs",
    )
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument(
        "--narrowed-seeds",
        type=int,
        default=3,
        help="default searches (seeds 1..N) with the launch date and loop duration bounded "
        "around the answer, as a check (0: none)",
    )
    ap.add_argument("--narrowed-days", type=float, default=10.0, help="their half-width")
    ap.add_argument(
        "--from-runs",
        metavar="FILE",
        help="also polish (in full) the designs of a search_quality --save-runs file",
    )
    ap.add_argument("--out", default=str(OUT), help="JSON file to update")
    ap.add_argument(
        "--smoke",
        action="store_true",
        help="a 2 x 2 grid, printed only (best_known.json untouched)",
    )
    args = ap.parse_args(argv)
    if args.smoke:
        args.launch_step_days, args.loop_step_days = 1000.0, 1000.0
        args.samples, args.starts, args.final = 64, 1, 1
        args.narrowed_seeds = 0
        args.only = args.only or ["demo"]
    print_header("best-known answers" + (" (smoke: tiny grid, not written)" if args.smoke else ""))
    numba.set_num_threads(1)  # the other core stays free for whoever shares the machine
    out_path = Path(args.out)
    known = json.loads(out_path.read_text()) if out_path.exists() else {}
    for name in args.only or REFERENCES:
        print(f"\n{name}: {REFERENCES[name]}")
        entry = establish(
            name, REFERENCES[name], args, lambda s: print(s, flush=True), known.get(name)
        )
        print(
            f"  best-known objective {entry['objective']:.6f} (total DSM "
            f"{entry['total_dv_km_s']:.6f} km/s, gain {entry['vinf_gain_km_s']:.6f} km/s, "
            f"feasible {entry['feasible']}, holds in the verification "
            f"{entry['verification']['holds']}), {entry['evaluations']:,} evaluations, "
            f"{entry['wall_s']} s"
        )
        print(
            f"  ephemeris: {entry['ephemeris']}; margins: {entry['margins'] or 'none'}"
            + (
                f"; broken in the verification: {', '.join(entry['verification']['broken'])}"
                if entry["verification"]["broken"]
                else ""
            )
        )
        print(
            "  x = "
            + ", ".join(
                f"{n} {v:.6f}"
                for n, v in zip(
                    entry["decision_vector"]["names"], entry["decision_vector"]["values"]
                )
            )
        )
        if not args.smoke:
            known[name] = entry
            out_path.write_text(json.dumps(known, indent=2) + "\n")
            print(f"  written to {out_path}")
    print_footer()
    return 0


if __name__ == "__main__":
    sys.exit(main())
