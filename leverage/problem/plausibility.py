"""Plausibility: values a problem file may hold but that look like a slip of units.

These are warnings, not refusals: the file is valid, but a value is far outside what
the key's unit makes sensible and matches a common slip:

- a speed in km/s above ``MAX_SPEED_KM_S`` (no launcher or flyby gives 50 km/s of
  v-infinity; Earth's orbital speed is about 30 km/s): typed in m/s;
- a launch energy above ``MAX_C3_KM2_S2`` (= 50 km/s squared): typed in m^2/s^2;
- a duration in days whose longest value is at most ``MAX_YEARS_AS_DAYS`` (a loop or
  leg of ten days cannot leave the body and come back, nor reach a target): typed in
  years;
- an angle in degrees that is not a whole number, lies within 2 pi and is within
  ``RADIAN_TOLERANCE`` of a multiple of pi/12 (3.14, 1.5708, 0.5236, 6.28): typed in
  radians.

``warnings(values)`` returns one ``Slip`` per suspicious key; the library keeps them
on the ``Problem`` (``Problem.warnings``) and only ``leverage.cli`` prints them. A
refusal of the same key (``load``) carries the slip's hint too, since a slip often
breaks a limit of sense first (a loop of 2 days cannot leave the sphere of influence).
"""

import math
from dataclasses import dataclass

from leverage.problem.schema import KEYS

MAX_SPEED_KM_S = 50.0
MAX_C3_KM2_S2 = MAX_SPEED_KM_S**2
MAX_YEARS_AS_DAYS = 10.0
DAYS_PER_YEAR = 365.25
RADIAN_TOLERANCE = 0.005
_DAY_KEYS = {("loop", "duration_days"), ("target", "leg_duration_days")}


@dataclass(frozen=True)
class Slip:
    """One suspicious value: the key ("[section] name"), its value and the likely slip."""

    key: str
    value: object
    hint: str

    def __str__(self) -> str:
        return f"{self.key} = {_shown(self.value)}: {self.hint}"


def _shown(value) -> str:
    if isinstance(value, list):
        return "[" + ", ".join(_shown(v) for v in value) + "]"
    return f"{value:g}" if isinstance(value, float) else repr(value)


def _numbers(value) -> list[float]:
    if isinstance(value, bool):
        return []
    if isinstance(value, (int, float)):
        return [float(value)]
    if isinstance(value, list):
        return [float(v) for v in value if isinstance(v, (int, float)) and not isinstance(v, bool)]
    return []


def _looks_like_radians(v: float) -> bool:
    a = abs(v)
    if a == 0.0 or a > 2.0 * math.pi + RADIAN_TOLERANCE or float(a).is_integer():
        return False
    step = math.pi / 12.0
    return abs(a - round(a / step) * step) <= RADIAN_TOLERANCE and round(a / step) >= 1


def _slip(key, value) -> str | None:
    """The likely slip behind ``value`` of schema ``key``, or None."""
    numbers = _numbers(value)
    if not numbers or key.kind not in ("number", "range", "numbers"):
        return None
    name = key.name
    if name.endswith("_km_s") and max(numbers) > MAX_SPEED_KM_S:
        big = max(numbers)
        return f"over {MAX_SPEED_KM_S:g} km/s; typed in m/s? {big:g} m/s is {big / 1000:g} km/s"
    if name.endswith("_km2_s2") and max(numbers) > MAX_C3_KM2_S2:
        big = max(numbers)
        return (
            f"over {MAX_C3_KM2_S2:g} km^2/s^2; typed in m^2/s^2? {big:g} m^2/s^2 is "
            f"{big / 1e6:g} km^2/s^2"
        )
    if (key.section, name) in _DAY_KEYS and max(numbers) <= MAX_YEARS_AS_DAYS:
        days = ", ".join(f"{v * DAYS_PER_YEAR:.0f}" for v in numbers)
        return (
            f"at most {MAX_YEARS_AS_DAYS:g} days; typed in years? {_shown(value)} years "
            f"is [{days}] days"
        )
    if name.endswith("_deg") and any(_looks_like_radians(v) for v in numbers):
        rad = next(v for v in numbers if _looks_like_radians(v))
        return (
            f"{rad:g} looks like radians, the key is in degrees; {rad:g} rad is "
            f"{math.degrees(rad):.4g} deg"
        )
    return None


def warnings(values: dict) -> list[Slip]:
    """One ``Slip`` per key of the validated ``values`` whose value looks like a slip of
    units, in schema order."""
    out = []
    for key in KEYS:
        section = values.get(key.section)
        if not section or key.name not in section:
            continue
        hint = _slip(key, section[key.name])
        if hint:
            out.append(Slip(key.path, section[key.name], hint))
    return out
