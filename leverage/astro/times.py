"""Calendar dates <-> TDB seconds past J2000, through astropy (never in the hot path).

J2000 is 2000-01-01 12:00:00 TDB (JD 2451545.0 TDB). Calendar input is UTC unless
it names another astropy scale; leap seconds and TT-TDB come from astropy/ERFA.
"""

import warnings
from datetime import date, datetime

from astropy.time import Time
from astropy.utils import iers

from leverage.core.constants import DAY_S, J2000_JD  # noqa: F401 (re-exported)

# No network at run time: never try to download IERS tables. UTC<->TDB needs only
# the leap-second table shipped with astropy (no leap second since 2017-01-01; its
# "expired" warning is about the file's declared validity, not its content).
iers.conf.auto_download = False
iers.conf.auto_max_age = None
warnings.filterwarnings("ignore", category=iers.IERSStaleWarning)
# ERFA calls dates past the leap-second table's horizon "dubious"; UTC there simply
# assumes no new leap second, which is all a preliminary design can assume.
warnings.filterwarnings("ignore", message=".*dubious year.*")


def to_time(value, scale: str = "utc") -> Time:
    """An astropy Time from an ISO string, a date/datetime, or a Time (UTC default)."""
    if isinstance(value, Time):
        return value
    if isinstance(value, datetime):
        return Time(value, scale=scale)
    if isinstance(value, date):
        return Time(value.isoformat(), scale=scale)
    return Time(str(value), scale=scale)


def tdb_seconds(value, scale: str = "utc") -> float:
    """TDB seconds past J2000 of a calendar date (UTC by default)."""
    t = to_time(value, scale).tdb
    return ((t.jd1 - J2000_JD) + t.jd2) * DAY_S


def tdb_days(value, scale: str = "utc") -> float:
    """TDB days past J2000 of a calendar date (UTC by default)."""
    return tdb_seconds(value, scale) / DAY_S


def from_tdb_seconds(seconds: float) -> Time:
    """astropy Time (TDB scale) of TDB seconds past J2000."""
    return Time(J2000_JD, seconds / DAY_S, format="jd", scale="tdb")


def utc_iso(seconds: float, precision: int = 0) -> str:
    """UTC calendar string 'YYYY-MM-DD HH:MM:SS' of TDB seconds past J2000."""
    t = from_tdb_seconds(seconds).utc
    t.precision = precision
    return t.iso


def utc_date(seconds: float) -> str:
    """UTC calendar date 'YYYY-MM-DD' of TDB seconds past J2000."""
    return utc_iso(seconds)[:10]


def parse_utc(text: str) -> datetime:
    """A problem-file date ('2031-01-01' or '2031-01-01T12:00:00') as a naive UTC datetime."""
    return datetime.fromisoformat(str(text).strip().replace("Z", "").replace(" ", "T"))
