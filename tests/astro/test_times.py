"""Tests of leverage.times (calendar dates <-> TDB seconds past J2000).

Outside sources:
- Definition of J2000: 2000-01-01 12:00:00 TT = 11:58:55.816 UTC (TT - UTC = 32 leap
  seconds + 32.184 s = 64.184 s then); TDB - TT stays within ~1.7 ms (periodic), so
  the UTC instant is 0 s TDB to ~1 ms (standard definition, e.g. astropy's time
  documentation / USNO).
- IERS Bulletin C: a leap second at the end of 2016-12-31, after which TAI - UTC =
  37 s, so TT - UTC = 69.184 s.
- Python's datetime (proleptic Gregorian calendar, no leap seconds) for the number
  of calendar days between two dates.
"""

from datetime import date, datetime

import pytest
from astropy.time import Time

from leverage.astro import times

TDB_TT_MAX_S = 0.002  # |TDB - TT| < 1.7 ms (common practice), rounded up


def test_j2000_epoch_in_utc():
    assert times.tdb_seconds("2000-01-01T11:58:55.816") == pytest.approx(0.0, abs=1e-3)
    assert times.tdb_days("2000-01-01T12:00:00", scale="tdb") == 0.0
    assert times.tdb_seconds("2000-01-01T12:00:00", scale="tt") == pytest.approx(
        0.0, abs=TDB_TT_MAX_S
    )


@pytest.mark.parametrize(
    "when", ["2017-06-01T00:00:00", "2024-02-29T18:30:00", "2035-12-31T23:00:00"]
)
def test_tt_minus_utc_after_2016_leap_second(when):
    # IERS Bulletin C: TT - UTC = 37 + 32.184 = 69.184 s after 2017-01-01 (no leap
    # second announced since).
    calendar_s = (datetime.fromisoformat(when) - datetime(2000, 1, 1, 12)).total_seconds()
    assert times.tdb_seconds(when) - calendar_s == pytest.approx(69.184, abs=TDB_TT_MAX_S)


def test_leap_second_at_end_of_2016():
    # 2016-12-31 23:59:60 exists (IERS Bulletin C 52): two SI seconds between
    # 23:59:59 and 00:00:00.
    gap = times.tdb_seconds("2017-01-01T00:00:00") - times.tdb_seconds("2016-12-31T23:59:59")
    assert gap == pytest.approx(2.0, abs=1e-6)
    gap = times.tdb_seconds("2016-12-31T00:00:00") - times.tdb_seconds("2016-12-30T23:59:59")
    assert gap == pytest.approx(1.0, abs=1e-6)


@pytest.mark.parametrize("seconds", [-3.2e8, -1.0, 0.0, 1.0, 5.4321e8, 1.5e9])
def test_round_trip(seconds):
    # TDB seconds -> astropy Time -> TDB seconds.
    assert times.tdb_seconds(times.from_tdb_seconds(seconds)) == pytest.approx(seconds, abs=1e-6)
    # TDB seconds -> UTC string (ms) -> TDB seconds.
    iso = times.utc_iso(seconds, precision=3)
    assert times.tdb_seconds(iso) == pytest.approx(seconds, abs=1e-3)


def test_input_types_agree():
    s_str = times.tdb_seconds("2026-03-04")
    assert times.tdb_seconds(date(2026, 3, 4)) == s_str
    assert times.tdb_seconds(datetime(2026, 3, 4)) == s_str
    assert times.tdb_seconds(Time("2026-03-04", scale="utc")) == s_str
    assert times.tdb_days("2026-03-04") == pytest.approx(s_str / 86400.0, rel=1e-15)


def test_utc_date_and_iso():
    s = times.tdb_seconds("2031-07-15T06:07:08")
    assert times.utc_date(s) == "2031-07-15"
    assert times.utc_iso(s) == "2031-07-15 06:07:08"
