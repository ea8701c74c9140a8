"""leverage check PROBLEM: validate, list the decision variables, sample a few points,
and screen whether the goal is reachable at all (``leverage.screen``)."""

import sys

from . import EXIT_OK, EXIT_UNREACHABLE, print_warnings


def add_parser(sub):
    p = sub.add_parser(
        "check",
        help="validate a problem file and show its scales",
        description="Validate PROBLEM, print the decision variables with bounds "
        "and units, evaluate a few random points, and estimate "
        "whether the goal is reachable with the launch C3 and DSM "
        "budget (Tisserand's parameter, turn limit).",
    )
    p.add_argument("problem", help="problem file (TOML)")
    p.add_argument("--samples", type=int, default=5, help="random points to evaluate (default 5)")
    p.add_argument("--seed", type=int, default=0, help="seed of the random points")
    return p


def report(problem, samples: int, seed: int, result=None) -> str:
    import numpy as np

    from leverage.core import layout as L
    from leverage.problem.screen import screen
    from leverage.search.udp import LeveragingUDP

    compiled = problem.compile()
    udp = LeveragingUDP.from_compiled(compiled, problem.name)
    lines = [
        f"{problem.source}: valid ({problem.name}, goal {problem.values['goal']['kind']}, "
        f"flyby body {problem.body.name})",
        "",
        "decision variables",
    ]
    lines.append(f"  {'name':<28}{'lower':>14}{'upper':>14}  unit")
    for name, lo, hi, unit in zip(compiled.names, compiled.lower, compiled.upper, compiled.units):
        lines.append(f"  {name:<28}{lo:>14.6g}{hi:>14.6g}  {unit}")
    rng = np.random.default_rng(seed)
    lines += [
        "",
        f"{samples} random points (seed {seed})",
        f"  {'objective':>12}{'C3 km2/s2':>11}{'DSM km/s':>10}{'vinf in km/s':>13}"
        f"{'alt km':>10}{'penalty':>10}",
    ]
    for _ in range(samples):
        x = compiled.lower + rng.random(compiled.lower.shape) * (compiled.upper - compiled.lower)
        q = udp.details(x)
        f = udp.fitness(x)
        if q[L.Q_OK] != 1.0:
            lines.append(f"  {f[0]:>12.4g}  (a leg could not be solved)")
            continue
        lines.append(
            f"  {f[0]:>12.4g}{q[L.Q_C3]:>11.3f}{q[L.Q_DSM]:>10.3f}{q[L.Q_VINF_IN]:>13.3f}"
            f"{q[L.Q_ALT]:>10.0f}{q[L.Q_PENALTY]:>10.3g}"
        )
    lines += [""] + (result or screen(problem)).lines()
    return "\n".join(lines)


def main(args) -> int:
    """0, or 7 when the feasibility screen finds the goal unreachable (one line says so)."""
    # Imported here, not at the top: building the command imports every subcommand
    # module, and `show`, `new` and friends must not pay for what they never use.
    from leverage.problem.load import load_problem
    from leverage.problem.screen import screen
    from leverage.run.compile_notice import CompileNotice

    problem = load_problem(args.problem)
    print_warnings(problem)
    with CompileNotice():  # a first run on a new install compiles the model: say so
        result = screen(problem)
        text = report(problem, args.samples, args.seed, result)
    print(text)
    if result.verdict == "unreachable":
        print(
            f"leverage: {problem.source}: the feasibility screen finds the goal unreachable "
            "with this launch C3 and DSM budget (see the screen above)",
            file=sys.stderr,
        )
        return EXIT_UNREACHABLE
    return EXIT_OK
