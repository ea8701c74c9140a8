"""The limits a refined design must meet, read from a result folder's ``problem.toml``.

The copy of the problem file that ``leverage run`` writes into the result folder is
loaded with ``leverage.problem.load_problem`` (same validation and defaults as the
search: e.g. the body's common-practice minimum flyby altitude when the file sets
none). A limit the problem does not set is None. Units in the field names. Each limit
is moved inward by the problem's ``[margins]`` design margin: the refined design must
keep the same margins as the patched-conic one.
"""

from dataclasses import dataclass
from pathlib import Path

from leverage.errors import NO_VALUE, ProblemError
from leverage.problem.load import load_problem

SUPPORTED_GOALS = ("min_dsm",)


@dataclass
class Limits:
    """Limits and the objective of one problem (None: not set)."""

    source: str
    body: str
    goal: str
    max_c3_km2_s2: float
    min_dla_deg: float
    max_dla_deg: float
    min_flyby_altitude_km: float
    min_outgoing_vinf_km_s: float | None
    min_outgoing_inclination_deg: float | None
    min_outgoing_aphelion_au: float | None
    dsm_budget_km_s: float | None
    has_target: bool
    target_is_planet: bool
    target_name: str | None
    max_arrival_vinf_km_s: float | None
    powered_flyby: bool
    arrival_burn: bool
    parking_altitude_km: float = 200.0


def _positive_or_none(value):
    return None if value is None or value <= 0.0 else float(value)


def read_limits(result_dir) -> Limits:
    """Limits of the problem copied into ``result_dir``; ProblemError (one line) if the
    file is missing or the goal is one refine cannot optimise."""
    path = Path(result_dir) / "problem.toml"
    problem = load_problem(path)
    v = problem.values
    goal = v["goal"]["kind"]
    if goal not in SUPPORTED_GOALS:
        raise ProblemError(
            str(path),
            "[goal] kind",
            goal,
            f"refine optimises only {', '.join(SUPPORTED_GOALS)} (every burn after launch)",
        )
    t = v.get("target")
    m = v["margins"]

    def raised(value, margin):
        value = _positive_or_none(value)
        return None if value is None else value + margin

    budget = v["goal"]["dsm_budget_km_s"]
    arrival = t["max_arrival_vinf_km_s"] if t is not None else None
    return Limits(
        source=str(path),
        body=v["body"]["name"],
        goal=goal,
        max_c3_km2_s2=float(v["launch"]["max_c3_km2_s2"]) - m["c3_km2_s2"],
        min_dla_deg=float(v["launch"]["min_dla_deg"]) + m["dla_deg"],
        max_dla_deg=float(v["launch"]["max_dla_deg"]) - m["dla_deg"],
        min_flyby_altitude_km=float(v["flyby"]["min_altitude_km"]) + m["flyby_altitude_km"],
        min_outgoing_vinf_km_s=raised(v["goal"]["min_outgoing_vinf_km_s"], m["outgoing_vinf_km_s"]),
        min_outgoing_inclination_deg=raised(
            v["goal"]["min_outgoing_inclination_deg"], m["outgoing_inclination_deg"]
        ),
        min_outgoing_aphelion_au=raised(
            v["goal"]["min_outgoing_aphelion_au"], m["outgoing_aphelion_au"]
        ),
        dsm_budget_km_s=None if budget is None else budget - m["dsm_km_s"],
        has_target=t is not None,
        target_is_planet=bool(t is not None and problem.target.is_planet),
        target_name=problem.target.name if t is not None else None,
        max_arrival_vinf_km_s=None if arrival is None else arrival - m["arrival_vinf_km_s"],
        powered_flyby=bool(t is not None and t["flyby"] == "powered"),
        arrival_burn=bool(t is not None and t["arrival_burn"]),
        parking_altitude_km=float(v["launch"]["parking_altitude_km"]),
    )


def check_folder(result_dir) -> None:
    """ProblemError unless ``result_dir`` has best.json and problem.toml."""
    for name in ("best.json", "problem.toml"):
        if not (Path(result_dir) / name).is_file():
            raise ProblemError(
                str(Path(result_dir) / name),
                "",
                NO_VALUE,
                "no such file (give a leverage result folder)",
            )
