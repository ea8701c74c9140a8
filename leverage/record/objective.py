"""Objectives as people read them: in their own unit and with their natural sign.

The search minimises; a gain or a mass is minimised as its negative, and a delivered
mass as a fraction of the launcher's largest mass. ``shown_objectives(params)`` says,
per objective, what it is, its unit and the factor that turns the minimised value
into it (``natural = factor * minimised``): 814.5 kg delivered, not -0.543; a gain
of 3.006 km/s, not -3.006. A weighted sum keeps its minimised value (lower is better).
The minimised value itself is only written to the CSV columns named for it
(``convergence.csv`` best_objective, ``front.csv`` objective_*), and the record holds
both (``objective`` and ``objective_shown``).
"""

from dataclasses import asdict, dataclass

from leverage.core import layout as L


@dataclass(frozen=True)
class Shown:
    name: str  # what the objective is, for people
    unit: str
    factor: float  # natural value = factor * minimised value
    maximised: bool  # True: higher is better in the natural value

    def value(self, minimised: float) -> float:
        return self.factor * minimised

    def text(self, minimised: float, digits: int = 6) -> str:
        """e.g. "delivered mass 814.5 kg"."""
        unit = f" {self.unit}" if self.unit else ""
        return f"{self.name} {self.value(minimised):.{digits}g}{unit}"

    def label(self) -> str:
        """An axis label, e.g. "delivered mass (kg, higher is better)"."""
        better = "higher is better" if self.maximised else "lower is better"
        return f"{self.name} ({self.unit}, {better})" if self.unit else f"{self.name} ({better})"


FRONT = {
    L.OBJ_TOTAL_DV: Shown("total DV", "km/s", 1.0, False),
    L.OBJ_GAIN: Shown("v-infinity gain", "km/s", -1.0, True),
    L.OBJ_INCLINATION: Shown("outgoing inclination", "deg", -1.0, True),
    L.OBJ_ARRIVAL_VINF: Shown("arrival v-infinity", "km/s", 1.0, False),
    L.OBJ_MASS: Shown("delivered mass", "kg", -1000.0, True),  # minimised in -tonnes
}
WEIGHTED = Shown("weighted objective", "", 1.0, False)


def shown_objectives(p) -> list[Shown]:
    """How each objective of the compiled parameters ``p`` reads (see module doc)."""
    n = int(p[L.P_N_OBJ])
    if n > 1:
        return [FRONT[int(p[L.P_OBJ_CODES + k])] for k in range(n)]
    w_dsm, w_gain, w_inc = p[L.P_W_DSM], p[L.P_W_GAIN], p[L.P_W_INC]
    w_arr, w_mass = p[L.P_W_ARRIVAL], p[L.P_W_MASS]
    others = w_inc == 0.0 and w_arr <= 0.0
    if w_mass > 0.0 and w_dsm == 0.0 and w_gain == 0.0 and others:
        return [Shown("delivered mass", "kg", -1.0 / w_mass, True)]
    if w_dsm == 1.0 and w_gain == 0.0 and w_mass <= 0.0 and others:
        return [Shown("total DSM", "km/s", 1.0, False)]
    if w_dsm == 0.0 and w_gain == 1.0 and w_mass <= 0.0 and others:
        return [Shown("v-infinity gain", "km/s", -1.0, True)]
    return [WEIGHTED]


def as_records(shown: list[Shown]) -> list[dict]:
    return [asdict(s) for s in shown]


def from_record(record: dict) -> list[Shown]:
    """The objectives of a result record as people read them (a record written before
    ``objective_shown`` existed: the minimised values, unnamed)."""
    saved = record.get("objective_shown")
    if isinstance(saved, list) and saved:
        try:
            return [
                Shown(str(s["name"]), str(s["unit"]), float(s["factor"]), bool(s["maximised"]))
                for s in saved
            ]
        except (KeyError, TypeError, ValueError):
            pass
    return [Shown("objective", "", 1.0, False) for _ in record.get("objective") or [0.0]]
