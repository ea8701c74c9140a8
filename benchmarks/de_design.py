"""How to carry a JPL DE ephemeris into the compiled model: three designs, measured.

Earth (heliocentric, ecliptic J2000) from DE421 over 2029-2037, per state evaluated
inside compiled code (numba loop over random epochs, best of ``--repeats``):

1. one Chebyshev table per body, terms combined at build time (``de_tables``; what
   the model uses);
2. three Chebyshev tables (EMB, geocentric Moon, Sun) combined at evaluation time:
   Earth = EMB - Moon / (1 + EMRAT) - Sun;
3. a dense table of states with cubic Hermite interpolation (positions and
   velocities at a fixed step; velocity from the derivative of the cubic), for
   several steps, with its largest error against design 1 (km, mm/s) and its size;
4. Standish mean elements (the default model), for scale.

Usage: python -m benchmarks.de_design [--epochs N] [--repeats N]
"""

import argparse
import sys
import time

import numpy as np
from numba import njit

from benchmarks.common import print_footer, print_header
from leverage.astro import bodies
from leverage.astro import de_tables as D
from leverage.core import ephemeris as E
from leverage.core.constants import DAY_S

T0 = (2029 - 2000) * 365.25 * DAY_S
T1 = (2037 - 2000) * 365.25 * DAY_S


@njit(cache=True)
def _loop_one(p, ts):
    acc = 0.0
    for t in ts:
        r, v = E.body_state_in(p, 0, t)
        acc += r[0] + v[0]
    return acc


@njit(cache=True)
def _loop_three(p, ts, slot_moon, slot_sun, moon_share):
    acc = 0.0
    for t in ts:
        re, ve = E.chebyshev_state(p, 0, t)
        rm, vm = E.chebyshev_state(p, slot_moon, t)
        rs, vs = E.chebyshev_state(p, slot_sun, t)
        r = re - moon_share * rm - rs
        v = ve - moon_share * vm - vs
        acc += r[0] + v[0]
    return acc


@njit(cache=True)
def hermite_state(tab, t0, h, t):
    """Cubic Hermite interpolation in a table of states (rows r, v at t0 + k h)."""
    u = (t - t0) / h
    k = int(u)
    s = u - k
    r = np.empty(3)
    v = np.empty(3)
    h00 = (1 + 2 * s) * (1 - s) ** 2
    h10 = s * (1 - s) ** 2
    h01 = s * s * (3 - 2 * s)
    h11 = s * s * (s - 1)
    d00 = 6 * s * s - 6 * s
    d10 = 3 * s * s - 4 * s + 1
    d01 = -d00
    d11 = 3 * s * s - 2 * s
    for c in range(3):
        p0, p1 = tab[k, c], tab[k + 1, c]
        m0, m1 = tab[k, 3 + c] * h, tab[k + 1, 3 + c] * h
        r[c] = h00 * p0 + h10 * m0 + h01 * p1 + h11 * m1
        v[c] = (d00 * p0 + d10 * m0 + d01 * p1 + d11 * m1) / h
    return r, v


@njit(cache=True)
def _loop_hermite(tab, t0, h, ts):
    acc = 0.0
    for t in ts:
        r, v = hermite_state(tab, t0, h, t)
        acc += r[0] + v[0]
    return acc


@njit(cache=True)
def _loop_mean(eph, ts):
    acc = 0.0
    for t in ts:
        r, v = E.body_state(eph, t)
        acc += r[0] + v[0]
    return acc


def best_ns(repeats, func, n):
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return min(times) / n * 1e9


def packed(*tables):
    """Headers (EPHEMERIS_SIZE each) followed by the tables, offsets filled in."""
    n_head = E.EPHEMERIS_SIZE * len(tables)
    heads, offset = [], n_head
    for tab in tables:
        h = tab.header.copy()
        h[E.CHEB_TABLE] = offset
        offset += tab.coefficients.size
        heads.append(h)
    return np.concatenate(heads + [t.coefficients for t in tables])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--epochs", type=int, default=200_000)
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--smoke", action="store_true", help="tiny sizes: checks that it runs")
    args = ap.parse_args(argv)
    if args.smoke:
        args.epochs, args.repeats = 2000, 1
    print_header("DE ephemeris in compiled code: design measurements")
    rng = np.random.default_rng(3)
    ts = T0 + 1.0 + rng.random(args.epochs) * (T1 - T0 - 2.0)
    earth = D.build_table("de421", "earth", T0, T1)
    p1 = packed(earth)
    print(
        f"Earth from DE421, {D._calendar(T0)} .. {D._calendar(T1)}: {int(earth.header[2])} "
        f"granules x 3 x {int(earth.header[3])} coefficients = "
        f"{D.table_bytes(earth) / 1e6:.3f} MB"
    )

    # Raw terms, each on its own table (rotated to ecliptic; the cost is the same).
    import de421
    from jplephem import Ephemeris

    emrat = Ephemeris(de421).EMRAT
    raw = []
    for name in ("earthmoon", "moon", "sun"):
        terms, _, _ = D._packaged_terms("de421", "earth")
        series = {"earthmoon": terms[0][1], "moon": terms[1][1], "sun": terms[2][1]}[name]
        coef, start, g = D._combine([(1.0, series)], T0, T1, "de421")
        header = earth.header.copy()
        header[E.CHEB_GRANULES], header[E.CHEB_NCOEF] = coef.shape[0], coef.shape[2]
        header[E.CHEB_T_START], header[E.CHEB_GRANULE_S] = start, g
        header[E.CHEB_T_END] = start + coef.shape[0] * g
        raw.append(D.DeTable(header, coef.ravel()))
    p3 = packed(*raw)
    share = 1.0 / (1.0 + emrat)
    r_chk = np.array([E.body_state_in(p1, 0, t)[0] for t in ts[:200]])
    r_three = np.array(
        [
            E.chebyshev_state(p3, 0, t)[0]
            - share * E.chebyshev_state(p3, E.EPHEMERIS_SIZE, t)[0]
            - E.chebyshev_state(p3, 2 * E.EPHEMERIS_SIZE, t)[0]
            for t in ts[:200]
        ]
    )
    print(
        f"build-time vs evaluation-time combination: largest difference "
        f"{np.abs(r_chk - r_three).max():.2e} km (200 epochs)"
    )

    _loop_one(p1, ts[:10])
    _loop_three(p3, ts[:10], E.EPHEMERIS_SIZE, 2 * E.EPHEMERIS_SIZE, share)
    eph = bodies.PLANETS["earth"].ephemeris_array()
    _loop_mean(eph, ts[:10])
    n = len(ts)
    one = best_ns(args.repeats, lambda: _loop_one(p1, ts), n)
    three = best_ns(
        args.repeats, lambda: _loop_three(p3, ts, E.EPHEMERIS_SIZE, 2 * E.EPHEMERIS_SIZE, share), n
    )
    mean = best_ns(args.repeats, lambda: _loop_mean(eph, ts), n)
    print(f"  1. one table, combined at build time     {one:7.1f} ns/state")
    print(f"  2. three tables, combined per evaluation {three:7.1f} ns/state")
    print(f"  4. Standish mean elements                {mean:7.1f} ns/state")

    print("  3. dense table + cubic Hermite (error against 1. at 20,000 epochs):")
    check = ts[:20000]
    ref = [E.body_state_in(p1, 0, t) for t in check]
    r_ref = np.array([a for a, _ in ref])
    v_ref = np.array([b for _, b in ref])
    for step_days in (2.0, 1.0, 0.5, 0.25):
        h = step_days * DAY_S
        grid = T0 + h * np.arange(int((T1 - T0) / h) + 1)
        tab = np.array([np.concatenate(E.body_state_in(p1, 0, t)) for t in grid])
        _loop_hermite(tab, T0, h, check[:10])
        got = [hermite_state(tab, T0, h, t) for t in check]
        dr = np.abs(np.array([a for a, _ in got]) - r_ref).max()
        dv = np.abs(np.array([b for _, b in got]) - v_ref).max() * 1e6
        cost = best_ns(args.repeats, lambda: _loop_hermite(tab, T0, h, ts), n)
        print(
            f"     step {step_days:4.2f} d: {tab.nbytes / 1e6:6.3f} MB, largest error "
            f"{dr:9.3f} km, {dv:9.3f} mm/s, {cost:7.1f} ns/state"
        )
    print_footer()
    return 0


if __name__ == "__main__":
    sys.exit(main())
