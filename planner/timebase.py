"""Time scales, offline IERS data and local-time display.

Conventions: every instant inside hiplan is UTC. Hot loops carry times as
float64 Modified Julian Dates in UTC (``mjd_utc``, days; float64 resolves
~10 microseconds at current epochs). astropy ``Time`` is used at public
boundaries. Local time exists only for display and for parsing dates a person
types, via ``zoneinfo``.

Offline: astropy is told never to download. Earth-orientation data come from
the bundled ``astropy-iers-data`` tables; past their end UT1-UTC is held at the
last tabulated value and one note is logged (|UT1-UTC| < 0.9 s moves a sky
position by < 14 arcsec, far below any small-dish beam).
"""
from __future__ import annotations

import logging
import warnings
from datetime import date, datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import erfa
import numpy as np
from astropy.time import Time
from astropy.utils import iers
from astropy.utils.data import conf as data_conf

from .errors import UserError

log = logging.getLogger(__name__)

MJD_ZERO_JD = 2400000.5
SECONDS_PER_DAY = 86400.0
UNIX_EPOCH_MJD = 40587.0  # MJD of 1970-01-01 00:00 UTC


def configure_offline() -> None:
    """Forbid every astropy download and use the bundled IERS tables only."""
    data_conf.allow_internet = False
    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    # We handle the table end ourselves (see dut1_s); astropy must not raise.
    iers.conf.iers_degraded_accuracy = "ignore"


configure_offline()

_warned_past_table = False


_eop_cache: tuple[np.ndarray, np.ndarray] | None = None


def _eop_arrays() -> tuple[np.ndarray, np.ndarray]:
    """(MJD, UT1-UTC seconds) from the bundled table, read once per process."""
    global _eop_cache
    if _eop_cache is None:
        table = iers.earth_orientation_table.get()
        mjd = np.asarray(table["MJD"].value, dtype=float)
        dut = np.asarray(table["UT1_UTC"].to_value("s"), dtype=float)
        keep = np.isfinite(dut)
        _eop_cache = (mjd[keep], dut[keep])
    return _eop_cache


def iers_table_end_mjd() -> float:
    """Last MJD (UTC) covered by the bundled Earth-orientation table."""
    return float(_eop_arrays()[0][-1])


def dut1_s(mjd_utc: np.ndarray) -> np.ndarray:
    """UT1-UTC in seconds, interpolated from the bundled IERS table.

    Outside the table the nearest end value is held; one note is logged.
    """
    global _warned_past_table
    mjd_tab, dut_tab = _eop_arrays()
    mjd = np.asarray(mjd_utc, dtype=float)
    if not _warned_past_table and mjd.size and np.nanmax(mjd) > mjd_tab[-1]:
        _warned_past_table = True
        log.info(
            "Times after %s are past the bundled IERS table; UT1-UTC held at %.3f s "
            "(planning accuracy unaffected).",
            Time(mjd_tab[-1], format="mjd").iso[:10],
            dut_tab[-1],
        )
    # A leap second makes UT1-UTC jump by 1 s and linear interpolation smears
    # that jump over one day: harmless here (no leap second since 2017, and
    # 1 s of UT1 is 15 arcsec of sky).
    return np.interp(mjd, mjd_tab, dut_tab)


def tt_minus_utc_s(mjd_utc: np.ndarray) -> np.ndarray:
    """TT-UTC in seconds (leap seconds from ERFA's table + 32.184 s)."""
    mjd = np.asarray(mjd_utc, dtype=float)
    iy, im, iday, frac = erfa.jd2cal(MJD_ZERO_JD, mjd)
    with warnings.catch_warnings():
        # ERFA flags years past its leap-second table as "dubious"; the last
        # known count is the best prediction and 1 s is 15 arcsec of sky.
        warnings.simplefilter("ignore", erfa.ErfaWarning)
        return erfa.dat(iy, im, iday, frac) + 32.184


def to_mjd_utc(times: Time) -> np.ndarray:
    """Float MJD (UTC) array from an astropy Time of any scale."""
    return np.atleast_1d(np.asarray(times.utc.mjd, dtype=float))


def from_mjd_utc(mjd_utc) -> Time:
    """astropy Time (UTC) from float MJD."""
    return Time(np.asarray(mjd_utc, dtype=float), format="mjd", scale="utc")


def mjd_to_datetime_utc(mjd_utc: float) -> datetime:
    """Aware UTC datetime, rounded to the nearest second."""
    seconds = round((float(mjd_utc) - UNIX_EPOCH_MJD) * SECONDS_PER_DAY)
    return datetime.fromtimestamp(seconds, tz=timezone.utc)


def datetime_to_mjd_utc(moment: datetime) -> float:
    """Float MJD (UTC) of an aware datetime."""
    if moment.tzinfo is None:
        raise ValueError("naive datetime: a time zone is required")
    return moment.timestamp() / SECONDS_PER_DAY + UNIX_EPOCH_MJD


def iso_utc(mjd_utc: float) -> str:
    """ISO 8601 UTC string to the second, with a trailing ``Z``."""
    return mjd_to_datetime_utc(mjd_utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def iso_local(mjd_utc: float, tz: ZoneInfo) -> str:
    """ISO 8601 local time to the second, with its UTC offset (e.g. +01:00)."""
    return mjd_to_datetime_utc(mjd_utc).astimezone(tz).isoformat(timespec="seconds")


def parse_day(text: str, field: str) -> date:
    """A calendar day from ``YYYY-MM-DD``; ``field`` names the option in errors."""
    try:
        return date.fromisoformat(text.strip())
    except (ValueError, AttributeError):
        raise UserError(f"{field}: '{text}' is not a date of the form YYYY-MM-DD") from None


def local_midnight_mjd(day: date, tz: ZoneInfo) -> float:
    """MJD (UTC) of 00:00 local time on ``day`` in zone ``tz``."""
    return datetime_to_mjd_utc(datetime(day.year, day.month, day.day, tzinfo=tz))


def local_day_span(start: date, days: int, tz: ZoneInfo) -> tuple[float, float]:
    """[start, end) in MJD UTC for ``days`` whole local days from ``start``.

    Local midnights are used, so a span across a DST change is 23 or 25 h long
    on that day, as the operator's clock sees it.
    """
    end_day = start + timedelta(days=days)
    return local_midnight_mjd(start, tz), local_midnight_mjd(end_day, tz)


def parse_instant(text: str, field: str) -> float:
    """MJD (UTC) from an ISO 8601 time; no offset means UTC."""
    try:
        moment = datetime.fromisoformat(text.strip().replace("Z", "+00:00"))
    except (ValueError, AttributeError):
        raise UserError(
            f"{field}: '{text}' is not an ISO 8601 time (e.g. 2027-03-01T21:30:00Z)"
        ) from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=timezone.utc)
    return datetime_to_mjd_utc(moment)
