"""Time scales and offline IERS handling."""
import logging
import re
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


# ---------------------------------------------------------------- leap seconds
# 2015-06-30 and 2016-12-31 end with a leap second (IERS Bulletin C 49 and 52); astropy's
# UTC scale (through ERFA) is the reference. 2027-03-01 is an ordinary day.
LEAP_DAYS = [("2015-06-30", 57203), ("2016-12-31", 57753)]


@pytest.mark.parametrize("day,mjd", LEAP_DAYS + [("2027-03-01", 61465)])
def test_iso_texts_match_astropy(day, mjd):
    seconds = np.array([0.2, 3600.4, 43200.3, 86399.2, 86399.7, 86400.2, 86400.6])
    length = 86401.0 if mjd != 61465 else 86400.0
    seconds = seconds[seconds < length]
    fractions = np.concatenate([seconds / length, np.linspace(0.0, 1.0, 401, endpoint=False)])
    for m in mjd + fractions:
        ref = Time(m, format="mjd", scale="utc", precision=0).isot + "Z"
        assert timebase.iso_utc(m) == ref, (m, ref)
        ref_ms = Time(m, format="mjd", scale="utc", precision=3).isot.replace(".000", "") + "Z"
        assert timebase.iso_utc(m, milliseconds=True) == ref_ms
    inside_leap = mjd + 86400.2 / length
    if length > 86400:
        assert timebase.iso_utc(inside_leap) == f"{day}T23:59:60Z"
        # Lagos: UTC+1 all year, no summer time
        assert timebase.iso_local(inside_leap, ZoneInfo("Africa/Lagos"))[11:] == "00:59:60+01:00"
        # A datetime has no second 60: the instant is 23:59:59 of that day.
        assert timebase.mjd_to_datetime_utc(inside_leap).isoformat() == f"{day}T23:59:59+00:00"


@pytest.mark.parametrize("day,mjd", LEAP_DAYS + [("2027-03-01", 61465)])
def test_datetimes_and_posix_times_match_astropy(day, mjd):
    from datetime import datetime as dt
    moments = [dt.fromisoformat(f"{day}T{t}+00:00") for t in ("00:00:01", "12:00:00", "23:59:59.5")]
    got = [timebase.datetime_to_mjd_utc(m) for m in moments]
    ref = Time(moments, scale="utc").mjd
    # 1e-10 d (9 us): float MJD rounding; the leap-second error fixed here is up to 1.2e-5 d.
    assert np.allclose(got, ref, rtol=0, atol=1e-10)
    for m, moment in zip(got, moments):
        assert timebase.mjd_to_datetime_utc(m, whole_seconds=False) == moment
    unix = np.array([m.timestamp() for m in moments])
    assert np.allclose(timebase.unix_to_mjd_utc(unix), ref, rtol=0, atol=1e-10)
    assert timebase.leap_seconds_at_end(mjd) == (0.0 if mjd == 61465 else 1.0)


def test_second_60_only_in_a_real_leap_second():
    for text, ref in (("2016-12-31T23:59:60Z", "2016-12-31T23:59:60"),
                      ("2016-12-31T23:59:60.5Z", "2016-12-31T23:59:60.5"),
                      ("2015-06-30T23:59:60Z", "2015-06-30T23:59:60"),
                      ("2017-01-01T00:59:60+01:00", "2016-12-31T23:59:60")):
        assert timebase.parse_instant(text, "--time") == pytest.approx(
            Time(ref, scale="utc").mjd, abs=1e-10)  # 9 us: float MJD rounding
    for text, why in (("2016-12-30T23:59:60Z", "2016-12-30 has none"),
                      ("2027-03-01T23:59:60Z", "2027-03-01 has none"),
                      ("2016-12-31T12:00:60Z", "has one only at 23:59:60 UTC"),
                      ("2016-12-31T23:59:60+01:00", "2016-12-31 has one only at 23:59:60 UTC")):
        with pytest.raises(UserError, match=rf"^--time: '{re.escape(text)}' has second 60, which "
                                            rf"exists only as a leap second .*{why}"):
            timebase.parse_instant(text, "--time")
    with pytest.raises(UserError, match="is not an ISO 8601 time"):
        timebase.parse_instant("2016-12-31T23:59:61Z", "--time")


# ---------------------------------------------------------------- supported dates


@pytest.mark.parametrize("text", ["0001-01-01", "1900-12-31", "2100-01-01", "9999-12-31"])
def test_days_outside_the_supported_dates_are_refused(text):
    with pytest.raises(UserError, match=rf"^--start: {text} is outside the dates hiplan supports "
                                        r"\(1901-01-01 to 2099-12-31"):
        timebase.parse_day(text, "--start")


def test_supported_edges_and_period_end():
    assert timebase.parse_day("1901-01-01", "--start") == date(1901, 1, 1)
    assert timebase.parse_day("2099-12-31", "--start") == date(2099, 12, 31)
    london = ZoneInfo("Europe/London")
    timebase.local_day_span(date(2099, 12, 1), 31, london)  # ends with the last supported day
    with pytest.raises(UserError, match=r"^--start/--days: the period would end on 2100-01-01"):
        timebase.local_day_span(date(2099, 12, 1), 32, london)
    with pytest.raises(UserError, match="outside the dates hiplan supports"):
        timebase.parse_instant("9999-12-31T23:59:59Z", "--time")
    with pytest.raises(UserError, match="outside the dates hiplan supports"):
        timebase.parse_instant("0001-01-01T00:30:00+01:00", "--time")  # before year 1 in UTC
