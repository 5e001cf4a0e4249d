"""Time scales and offline IERS handling."""
import logging
from datetime import date
from zoneinfo import ZoneInfo

import numpy as np
import pytest
from astropy.time import Time
from astropy.utils import iers
from astropy.utils.data import conf as data_conf

from planner import timebase
from planner.errors import UserError


def test_astropy_is_configured_offline():
    assert data_conf.allow_internet is False
    assert iers.conf.auto_download is False
    assert iers.conf.auto_max_age is None


def test_dut1_matches_astropy_inside_table(rng):
    mjd = rng.uniform(58849, 61500, 50)
    t = Time(mjd, format="mjd", scale="utc")
    ref = (t.ut1.mjd - t.utc.mjd) * 86400
    # 1 ms: both interpolate the same table linearly; the residual is float rounding of MJD.
    assert np.max(np.abs(timebase.dut1_s(mjd) - ref)) < 1e-3


def test_past_table_end_holds_last_value_and_logs_once(caplog):
    end = timebase.iers_table_end_mjd()
    timebase._warned_past_table = False
    with caplog.at_level(logging.INFO, logger="planner.timebase"):
        far = timebase.dut1_s(np.array([end + 400.0, end + 800.0]))
        timebase.dut1_s(np.array([end + 900.0]))
    assert far[0] == far[1] == timebase.dut1_s(np.array([end]))[0]
    assert abs(far[0]) < 0.9  # UT1-UTC is kept within 0.9 s by definition of UTC
    notes = [r for r in caplog.records if "past the bundled IERS table" in r.getMessage()]
    assert len(notes) == 1


def test_tt_minus_utc():
    # 37 leap seconds since 2017-01-01 (IERS Bulletin C) + 32.184 s = 69.184 s.
    assert timebase.tt_minus_utc_s(np.array([61465.0]))[0] == pytest.approx(69.184)


def test_local_day_span_across_dst():
    london = ZoneInfo("Europe/London")
    start, end = timebase.local_day_span(date(2027, 3, 28), 1, london)
    assert (end - start) * 24 == pytest.approx(23.0)  # clocks go forward: a 23-hour day
    start, end = timebase.local_day_span(date(2027, 10, 31), 1, london)
    assert (end - start) * 24 == pytest.approx(25.0)
    adelaide = ZoneInfo("Australia/Adelaide")
    start, _ = timebase.local_day_span(date(2027, 1, 10), 1, adelaide)
    # Adelaide summer time is UTC+10:30, so local midnight is 13:30 UTC the day before.
    assert timebase.iso_utc(start) == "2027-01-09T13:30:00Z"


def test_iso_formats():
    assert timebase.iso_utc(61465.5) == "2027-03-01T12:00:00Z"
    assert timebase.iso_local(61465.5, ZoneInfo("Australia/Adelaide")) == "2027-03-01T22:30:00+10:30"
    assert timebase.parse_instant("2027-03-01T12:00:00Z", "--time") == pytest.approx(61465.5)
    assert timebase.parse_instant("2027-03-01T13:00:00+01:00", "--time") == pytest.approx(61465.5)


@pytest.mark.parametrize("text", ["2027-13-01", "01/03/2027", "", "tomorrow"])
def test_bad_dates(text):
    with pytest.raises(UserError, match=r"--start: .* is not a date of the form YYYY-MM-DD"):
        timebase.parse_day(text, "--start")
