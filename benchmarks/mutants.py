"""Mutation check: does the test suite catch plausible bugs?

Each mutant is one textual edit of one source file (a sign flip, a factor 2, radius for
altitude, degrees for radians, a wrong GM, ...). For each, the repository is copied to a
temporary folder, the edit applied there (the working tree is never touched), and the
fast test files named for that mutant run in the copy with their own empty numba cache
(``NUMBA_CACHE_DIR`` in a fresh folder: numba must never load machine code compiled
from the unmutated source). A mutant is *caught* when those tests fail (pytest exit
code 1); an exit code other than 0 or 1 (a collection error, an interrupted run) is
reported as an error, not as caught. Before the mutants, the same test files run once
on an unmutated copy and must pass: otherwise a "caught" would mean nothing.

The table says, per mutant, which test failed first (pytest ``-x``).

Usage: python -m benchmarks.mutants [--only NAME ...] [--list] [--smoke] [--keep]
  --smoke  one mutant only (the unpowered turn halved, caught by Curtis's Example 8.6 in
           tests/core/test_flyby.py, which compiles two small kernels), plus its clean run
"""

import argparse
import os
import re
import shutil
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass
from pathlib import Path

from benchmarks.common import ROOT, print_footer, print_header

IGNORE = shutil.ignore_patterns(
    ".git",
    ".venv",
    "results",
    "__pycache__",
    ".hypothesis",
    ".pytest_cache",
    ".ruff_cache",
    "*.egg-info",
    "build",
)


@dataclass(frozen=True)
class Mutant:
    name: str
    path: str  # file, relative to the repository root
    old: str  # exact text, must occur once
    new: str
    tests: tuple  # test files or node ids (relative to the root) that should catch it
    why: str


MUTANTS = (
    Mutant(
        "alt-margin-from-radius",
        "leverage/core/trajectory.py",
        "q[L.Q_MARGIN_ALT_KM] = q[L.Q_ALT] - p[L.P_MIN_ALT_KM]",
        "q[L.Q_MARGIN_ALT_KM] = q[L.Q_RP] - p[L.P_MIN_ALT_KM]",
        ("tests/problem/test_target.py",),
        "flyby altitude margin from the periapsis radius (radius vs altitude)",
    ),
    Mutant(
        "screen-dsm-doubled",
        "leverage/problem/screen.py",
        "d = dv_kms / self.v_b",
        "d = 2.0 * dv_kms / self.v_b",
        ("tests/problem/test_screen.py",),
        "the screen's DSM counted twice (factor 2)",
    ),
    Mutant(
        "turn-angle-half",
        "leverage/core/flyby.py",
        "return 2.0 * np.arcsin(1.0 / hyperbola_ecc(mu, vinf, rp))",
        "return np.arcsin(1.0 / hyperbola_ecc(mu, vinf, rp))",
        ("tests/core/test_flyby.py::test_curtis_example_8_6_vinf_and_turn",),
        "unpowered turn asin(1/e) instead of 2 asin(1/e) (factor 2)",
    ),
    Mutant(
        "periapsis-is-altitude",
        "leverage/core/trajectory.py",
        "rp = p[L.P_BODY_RADIUS_KM] + alt",
        "rp = alt",
        ("tests/core/test_trajectory.py",),
        "free flyby periapsis radius taken as the altitude (radius vs altitude)",
    ),
    Mutant(
        "launch-angle-degrees",
        "leverage/core/trajectory.py",
        "x[L.X_LAUNCH_IN_PLANE_ANGLE_DEG] * _DEG,",
        "x[L.X_LAUNCH_IN_PLANE_ANGLE_DEG],",
        ("tests/core/test_trajectory.py",),
        "launch in-plane angle used in degrees as radians",
    ),
    Mutant(
        "flyby-mu-of-the-sun",
        "leverage/core/trajectory.py",
        "turn = turn_angle(p[L.P_BODY_MU], speed_in, rp)",
        "turn = turn_angle(p[L.P_MU_SUN], speed_in, rp)",
        ("tests/core/test_trajectory.py",),
        "flyby turned with the Sun's GM (wrong mu)",
    ),
    Mutant(
        "penalty-sign",
        "leverage/core/penalties.py",
        "v = -margin / scale",
        "v = margin / scale",
        ("tests/core/test_penalties.py",),
        "violation measured with the wrong sign",
    ),
    Mutant(
        "penalty-skips-last-margin",
        "leverage/core/penalties.py",
        "for k in range(L.N_MARGINS):\n        s += margin_penalty",
        "for k in range(L.N_MARGINS - 1):\n        s += margin_penalty",
        ("tests/core/test_penalties.py",),
        "the last margin (arrival window) never penalised",
    ),
    Mutant(
        "feasible-flag-of-last-branch",
        "leverage/core/trajectory.py",
        "        q[L.Q_FEASIBLE] = best_feasible  # the scoring pass's q holds the last branch",
        "        pass",
        ("tests/core/test_penalties.py",),
        "the scoring pass's feasibility flag is the last Lambert branch's, not the kept one's",
    ),
    Mutant(
        "powered-burn-half-well",
        "leverage/core/flyby.py",
        "k = 2.0 * mu / rp",
        "k = mu / rp",
        ("tests/core/test_powered_flyby.py",),
        "periapsis speed from v^2 + mu/rp instead of v^2 + 2 mu/rp (factor 2)",
    ),
    Mutant(
        "powered-turn-one-speed",
        "leverage/core/flyby.py",
        "1.0 / hyperbola_ecc(mu, vinf_out, rp)\n    )",
        "1.0 / hyperbola_ecc(mu, vinf_in, rp)\n    )",
        ("tests/core/test_powered_flyby.py",),
        "powered turn with the incoming speed on both halves",
    ),
    Mutant(
        "dsm-sign",
        "leverage/core/trajectory.py",
        "dsm = v1p - v1m",
        "dsm = v1m - v1p",
        ("tests/core/test_trajectory.py",),
        "DSM vector reversed (same size, wrong direction)",
    ),
    Mutant(
        "gain-sign",
        "leverage/core/trajectory.py",
        "q[L.Q_GAIN] = speed_in - q[L.Q_VINF_LAUNCH]",
        "q[L.Q_GAIN] = q[L.Q_VINF_LAUNCH] - speed_in",
        ("tests/core/test_trajectory.py",),
        "v-infinity gain with the wrong sign",
    ),
    Mutant(
        "lambert-label-swapped",
        "leverage/core/trajectory.py",
        "q[L.Q_LOW_PATH] = 1.0 if low else 0.0",
        "q[L.Q_LOW_PATH] = 0.0 if low else 1.0",
        ("tests/reports/test_summary.py",),
        "low-path/high-path label swapped in the record and summary",
    ),
    Mutant(
        "retrograde-loop-arc",
        "leverage/core/trajectory.py",
        "lambert(p[L.P_MU_SUN], r1, r2, t2 - t1, revs, True, low)",
        "lambert(p[L.P_MU_SUN], r1, r2, t2 - t1, revs, False, low)",
        ("tests/core/test_trajectory.py",),
        "DSM-to-flyby Lambert arc solved retrograde",
    ),
    Mutant(
        "obliquity-in-degrees",
        "leverage/core/constants.py",
        "OBLIQUITY_J2000_RAD = 84381.448 / 3600.0 * math.pi / 180.0",
        "OBLIQUITY_J2000_RAD = 84381.448 / 3600.0",
        ("tests/core/test_frames.py",),
        "obliquity of the ecliptic in degrees used as radians",
    ),
    Mutant(
        "element-rates-per-year",
        "leverage/core/ephemeris.py",
        "cent = t / JULIAN_CENTURY_S",
        "cent = t / (JULIAN_CENTURY_S / 100.0)",
        ("tests/core/test_ephemeris.py",),
        "Standish's per-century element rates applied per year",
    ),
    Mutant(
        "rocket-equation-without-g0",
        "leverage/core/mass.py",
        "np.exp(-dv / (G0_KM_S2 * isp_s))",
        "np.exp(-dv / isp_s)",
        ("tests/problem/test_vehicle.py",),
        "rocket equation without g0 (units)",
    ),
    Mutant(
        "sun-gm-off-by-1e-6",
        "leverage/astro/bodies.py",
        "GM_SUN_KM3_S2 = 132_712_440_041.279419",
        "GM_SUN_KM3_S2 = 132_712_440_041.279419 * (1.0 + 1e-6)",
        ("tests/astro/test_bodies.py",),
        "the Sun's GM a millionth off (wrong mu)",
    ),
    Mutant(
        "dates-in-utc-not-tdb",
        "leverage/astro/times.py",
        "t = to_time(value, scale).tdb",
        "t = to_time(value, scale).utc",
        ("tests/astro/test_times.py",),
        "calendar dates counted in UTC instead of TDB (a 69 s time-scale mix-up)",
    ),
    Mutant(
        "nsga2-tournament-crowded",
        "leverage/core/nsga2.py",
        "return a if crowd[a] > crowd[b] else b",
        "return a if crowd[a] < crowd[b] else b",
        ("tests/core/test_nsga2.py",),
        "the crowded tournament prefers the more crowded member (a sign flip)",
    ),
    Mutant(
        "nsga2-sweep-duplicates",
        "leverage/core/nsga2.py",
        "(latest_second[k] == b and latest_first[k] < a)",
        "(latest_second[k] == b and latest_first[k] <= a)",
        ("tests/core/test_nsga2.py",),
        "two-objective sort lets an equal row dominate (< for <=)",
    ),
    Mutant(
        "nsga2-sbx-bound-exponent",
        "leverage/core/nsga2.py",
        "else 2.0 - beta ** -(eta_c + 1.0)",
        "else 2.0 - beta ** -(eta_c + 2.0)",
        ("tests/core/test_nsga2.py",),
        "bounded SBX cuts the distribution at the wrong place (exponent off by one)",
    ),
    Mutant(
        "nsga2-sbx-far-too-near",
        "leverage/core/nsga2.py",
        "beta_far = 2.0 ** (54.0 / (eta_c + 1.0))",
        "beta_far = 2.0 ** (5.4 / (eta_c + 1.0))",
        ("tests/core/test_nsga2.py",),
        "SBX takes alpha = 2 (no bound) where the bound still matters (a factor 10)",
    ),
    Mutant(
        "nsga2-sbx-shared-spread",
        "leverage/core/nsga2.py",
        "spread_high = spread_low if alpha_high == alpha_low else",
        "spread_high = spread_low if True else",
        ("tests/core/test_nsga2.py",),
        "both SBX children take the spread of the low one, whatever their bounds",
    ),
    Mutant(
        "nsga2-archive-covered-inverted",
        "leverage/core/nsga2.py",
        "return after > 0 and af[after - 1, 1] <= b",
        "return after > 0 and af[after - 1, 1] >= b",
        ("tests/core/test_nsga2.py",),
        "the archive skips the offers that would stay instead of those that would leave",
    ),
    Mutant(
        "worker-keeps-stop-signals-blocked",
        "leverage/search/workers.py",
        "    signal.pthread_sigmask(signal.SIG_UNBLOCK, STOP_SIGNALS)\n",
        "",
        ("tests/search/test_workers.py",),
        "a worker never unblocks SIGTERM after its start, so a group SIGTERM cannot end it",
    ),
    Mutant(
        "stream-past-count",
        "leverage/search/workers.py",
        "for value in itertools.islice(fn(arg), count):",
        "for value in fn(arg):",
        ("tests/search/test_workers.py",),
        "a worker's stream goes on past the values asked for",
    ),
    Mutant(
        "de-target-in-mutant",
        "leverage/core/diffevo.py",
        "r1 = _distinct(n, i, i, i)",
        "r1 = np.random.randint(0, n)",
        ("tests/core/test_diffevo.py",),
        "the mutant may be built from the target member itself (r1 = i allowed)",
    ),
    Mutant(
        "de-crossover-one-short",
        "leverage/core/diffevo.py",
        "if taken >= d or np.random.random() >= crossover:",
        "if taken >= d - 1 or np.random.random() >= crossover:",
        ("tests/core/test_diffevo.py",),
        "exponential crossover never takes every component (a bound off by one)",
    ),
    Mutant(
        "de-keeps-the-worse",
        "leverage/core/diffevo.py",
        "if f_trial[0] <= f_old[i]:",
        "if f_trial[0] >= f_old[i]:",
        ("tests/core/test_diffevo.py",),
        "selection keeps the worse of trial and member (a sign flip)",
    ),
    Mutant(
        "sectors-not-applied",
        "leverage/search/single.py",
        "u = u.narrowed(SECTOR_SLOT, *self._sector_box(epoch))",
        "u = u.narrowed(SECTOR_SLOT, *sector(u.lower[2], u.upper[2], 0, 1, BOUND_WIDENING))",
        ("tests/search/test_single.py",),
        "every restart epoch searches the whole circle of launch directions",
    ),
    Mutant(
        "log-rows-at-island-weight",
        "leverage/search/single.py",
        "f = self._scorer.batch_fitness(xs)  # the problem's own penalty weight",
        "f = pop.get_f()[:, 0]",
        ("tests/search/test_single.py",),
        "log rows show objectives scored with the islands' gentler penalty",
    ),
    Mutant(
        "never-settles",
        "leverage/search/single.py",
        "return epoch, SCOUT_PENALTY_FACTOR if scouting else SETTLE_PENALTY_FACTOR",
        "return epoch, SCOUT_PENALTY_FACTOR",
        ("tests/search/test_single.py",),
        "the islands keep the gentlest penalty to the end of every epoch",
    ),
    Mutant(
        "near-search-whole-box",
        "leverage/search/single.py",
        "u.box_lower = np.maximum(x - NEAR_FRACTION * span, self.udp.lower)",
        "u.box_lower = np.maximum(x - span, self.udp.lower)",
        ("tests/search/test_single.py",),
        "the short DE before the polish searches far from the champion",
    ),
)
SMOKE = "turn-angle-half"


def copy_tree(dest: Path) -> Path:
    repo = dest / "repo"
    shutil.copytree(ROOT, repo, ignore=IGNORE)
    return repo


def apply(repo: Path, mutant: Mutant) -> None:
    path = repo / mutant.path
    text = path.read_text(encoding="utf-8")
    count = text.count(mutant.old)
    if count != 1:
        raise SystemExit(
            f"mutant {mutant.name}: the text to replace occurs {count} times in "
            f"{mutant.path} (the source changed; update benchmarks/mutants.py)"
        )
    path.write_text(text.replace(mutant.old, mutant.new), encoding="utf-8")


def run_tests(repo: Path, tests, cache: Path) -> tuple[int, str, float]:
    """(pytest exit code, first failing test id or '', wall seconds) in the copy."""
    env = dict(
        os.environ, NUMBA_CACHE_DIR=str(cache), PYTHONPATH=str(repo), PYTHONDONTWRITEBYTECODE="1"
    )
    cmd = [
        sys.executable,
        "-m",
        "pytest",
        "-x",
        "-q",
        "-p",
        "no:cacheprovider",
        "--hypothesis-seed=0",
        *tests,
    ]
    start = time.perf_counter()
    proc = subprocess.run(cmd, cwd=repo, env=env, capture_output=True, text=True)
    wall = time.perf_counter() - start
    failed = re.findall(r"^FAILED (\S+)", proc.stdout, flags=re.M)
    detail = failed[0] if failed else ""
    if proc.returncode not in (0, 1):
        detail = (proc.stdout + proc.stderr).strip().splitlines()[-1:] or [""]
        detail = detail[0][:120]
    return proc.returncode, detail, wall


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--only", nargs="+", metavar="NAME", help="run only these mutants")
    parser.add_argument("--list", action="store_true", help="list the mutants and exit")
    parser.add_argument("--smoke", action="store_true", help=f"one mutant only ({SMOKE})")
    parser.add_argument("--keep", action="store_true", help="keep the temporary copies")
    args = parser.parse_args(argv)
    if args.list:
        for m in MUTANTS:
            print(f"{m.name:<28} {m.path:<32} {m.why}")
        return 0
    chosen = list(MUTANTS)
    if args.smoke:
        chosen = [m for m in MUTANTS if m.name == SMOKE]
    elif args.only:
        unknown = set(args.only) - {m.name for m in MUTANTS}
        if unknown:
            parser.error(f"unknown mutant(s): {', '.join(sorted(unknown))}")
        chosen = [m for m in MUTANTS if m.name in args.only]

    print_header("mutation check" + (" (smoke)" if args.smoke else ""))
    work = Path(tempfile.mkdtemp(prefix="leverage-mutants-"))
    try:
        tests = sorted({t for m in chosen for t in m.tests})
        clean = copy_tree(work / "clean")
        code, detail, wall = run_tests(clean, tests, work / "clean" / "numba")
        print(f"unmutated copy, {len(tests)} test file(s) or test(s): exit {code} in {wall:.0f} s")
        if code != 0:
            print(f"  the tests fail without any mutant ({detail}); no mutant can be judged")
            return 2
        rows = []
        for m in chosen:
            folder = work / m.name
            repo = copy_tree(folder)
            apply(repo, m)
            code, detail, wall = run_tests(repo, m.tests, folder / "numba")
            verdict = {0: "SURVIVED", 1: "caught"}.get(code, f"error ({code})")
            rows.append((m, verdict, detail, wall))
            print(f"  {m.name:<28} {verdict:<9} {wall:5.0f} s  {detail or ', '.join(m.tests)}")
            sys.stdout.flush()
            if not args.keep:
                shutil.rmtree(folder, ignore_errors=True)
        print()
        print(f"{'mutant':<28} {'file':<30} {'result':<9} caught by")
        for m, verdict, detail, _ in rows:
            print(
                f"{m.name:<28} {m.path.removeprefix('leverage/'):<30} {verdict:<9} "
                f"{detail if verdict == 'caught' else '-'}"
            )
        caught = sum(1 for _, v, _, _ in rows if v == "caught")
        print(f"caught {caught} of {len(rows)}")
        print_footer()
        return 0 if caught == len(rows) else 1
    finally:
        if args.keep:
            print(f"copies kept in {work}")
        else:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
