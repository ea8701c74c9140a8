"""Command-line values checked with the same rules as problem-file keys."""


def search_overrides(args) -> dict:
    """Validated [search] overrides from --seed/--generations/--islands/--algorithm/--population."""
    from leverage.problem.load import convert  # astropy, numba: only when a search runs
    from leverage.problem.schema import keys_by_section

    keys = keys_by_section()["search"]
    out = {}
    for name in ("seed", "generations", "islands", "algorithm", "population"):
        value = getattr(args, name, None)
        if value is not None:
            out[name] = convert("command line", _as_option(keys[name]), value)
    return out


class _as_option:
    """A Key seen as a command-line option, so errors name --option."""

    def __init__(self, key):
        self._key = key

    def __getattr__(self, item):
        return getattr(self._key, item)

    @property
    def path(self):
        return f"--{self._key.name}"


def add_search_options(parser):
    from leverage.problem.schema import ALGORITHMS, FRONT_ALGORITHMS

    parser.add_argument("--seed", type=int, help="random seed (overrides [search] seed)")
    parser.add_argument("--generations", type=int, help="generations per island in all")
    parser.add_argument("--islands", type=int, help="islands (worker processes)")
    parser.add_argument("--population", type=int, help="individuals per island")
    parser.add_argument(
        "--algorithm",
        help=f"global algorithm: {', '.join(ALGORITHMS)} (one objective; de is the default); "
        f"{', '.join(FRONT_ALGORITHMS)} (a front; nsga2 is the default)",
    )
