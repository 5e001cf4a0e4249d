"""Time scales, offline IERS data and local-time display.

Conventions: every instant inside hiplan is UTC. Hot loops carry times as
float64 Modified Julian Dates in UTC (``mjd_utc``, days; float64 resolves
~10 microseconds at current epochs). astropy ``Time`` is used at public
boundaries. Local time exists only for display and for parsing dates a person
types, via ``zoneinfo``.

Offline: astropy is told never to download, the first time hiplan uses it
(``astropy_offline``; importing hiplan does not import astropy, so commands
start fast). Earth-orientation data come from the installed ``astropy-iers-data``
files, read directly (``eop``); past their end UT1-UTC is held at the
last tabulated value and one note is logged (|UT1-UTC| < 0.9 s moves a sky
position by < 14 arcsec, far below any small-dish beam); before their start it
is held at the first value, with one note too. ERFA's "dubious year" warnings
(its leap-second table has no entries before 1960 and cannot know future ones)
are silenced: the last known TAI-UTC is hiplan's documented prediction.

Dates: hiplan computes for 1901-01-01 to 2099-12-31 (``FIRST_DAY``,
``LAST_DAY``), whole years inside the 1900-2100 range of ERFA's Earth
ephemeris (eraEpv00); days and instants outside are refused in one line.

Leap seconds: a UTC day that ends with a leap second has 86,401 s and float
MJD (UTC) runs through it at 1/86,401 day per second, as in ERFA (eraDtf2d,
eraD2dtf) and astropy. Conversions here follow that, so printed times are
right on such days, and ISO 8601 texts with second 60 (``23:59:60Z``) are
accepted on exactly the days that have one. Python ``datetime`` has no second
60: an instant inside a leap second becomes 23:59:59 of that day as a datetime
(ISO texts from ``iso_utc``/``iso_local`` show 60).
"""
from __future__ import annotations

import logging
import math
import re
import warnings
from datetime import date, datetime, timedelta, timezone
from functools import lru_cache
from zoneinfo import ZoneInfo

import erfa
import numpy as np

from .eop import ut1_minus_utc_table
from .errors import UserError

log = logging.getLogger(__name__)

MJD_ZERO_JD = 2400000.5
SECONDS_PER_DAY = 86400.0
UNIX_EPOCH_MJD = 40587.0  # MJD of 1970-01-01 00:00 UTC
TT_MINUS_TAI_S = 32.184  # IAU 1991 definition of TT
_UNIX_EPOCH = datetime(1970, 1, 1, tzinfo=timezone.utc)
_MJD_EPOCH_DAY = date(1858, 11, 17)  # MJD 0

# Supported dates: whole years inside eraEpv00's stated validity, 1900-2100 AD
# (ERFA documentation of epv00), so that local days in any zone and the two days
# of interpolation nodes around a period stay inside it.
FIRST_DAY = date(1901, 1, 1)
LAST_DAY = date(2099, 12, 31)
FIRST_MJD = float((FIRST_DAY - _MJD_EPOCH_DAY).days)
END_MJD = float((LAST_DAY - _MJD_EPOCH_DAY).days + 1)  # 2100-01-01 00:00 UTC
SUPPORTED_TEXT = f"{FIRST_DAY} to {LAST_DAY}, within the 1900-2100 range of its Earth ephemeris"


def configure_offline() -> None:
    """Forbid every astropy download and use the bundled IERS tables only."""
    from astropy.utils import iers
    from astropy.utils.data import conf as data_conf
    data_conf.allow_internet = False
    iers.conf.auto_download = False
    iers.conf.auto_max_age = None
    # We handle the table end ourselves (see dut1_s); astropy must not raise.
    iers.conf.iers_degraded_accuracy = "ignore"
    # ERFA's leap-second table (eraDat) calls years before 1960 or a few years past
    # its release "dubious"; hiplan's fallback is the documented one (module doc),
    # so the warning would only put a raw line on the console.
    warnings.filterwarnings("ignore", message=r".*dubious year", category=erfa.ErfaWarning)


_offline = False


def astropy_offline():
    """The ``astropy.time`` module, astropy set offline first (once per process).

    Every hiplan module that needs astropy gets it through here, so no hiplan
    code path can make astropy download anything.
    """
    global _offline
    if not _offline:
        configure_offline()
        _offline = True
    import astropy.time
    return astropy.time


# ERFA's "dubious year" warnings are ours to handle from the start (module doc).
warnings.filterwarnings("ignore", message=r".*dubious year", category=erfa.ErfaWarning)

_warned_past_table = False
_warned_before_table = False


_eop_cache: tuple[np.ndarray, np.ndarray] | None = None


def _eop_arrays() -> tuple[np.ndarray, np.ndarray]:
    """(MJD, UT1-UTC seconds) from the bundled table, read once per process."""
    global _eop_cache
    if _eop_cache is None:
        _eop_cache = ut1_minus_utc_table()
    return _eop_cache


_ut1_tai_cache: tuple[np.ndarray, np.ndarray] | None = None


def _ut1_minus_tai() -> tuple[np.ndarray, np.ndarray]:
    """UT1-TAI (s) at the table's days (smooth across leap seconds, so it interpolates),
    and per table interval whether TAI-UTC changes in it (a leap second)."""
    global _ut1_tai_cache
    if _ut1_tai_cache is None:
        mjd, dut = _eop_arrays()
        tai_utc = tt_minus_utc_s(mjd) - TT_MINUS_TAI_S
        _ut1_tai_cache = (dut - tai_utc, np.diff(tai_utc) != 0.0)
    return _ut1_tai_cache


def iers_table_end_mjd() -> float:
    """Last MJD (UTC) covered by the bundled Earth-orientation table."""
    return float(_eop_arrays()[0][-1])


def dut1_s(mjd_utc: np.ndarray) -> np.ndarray:
    """UT1-UTC in seconds, interpolated from the bundled IERS table.

    Outside the table the nearest end value is held; one note is logged for
    each end.
    """
    global _warned_past_table, _warned_before_table
    mjd_tab, dut_tab = _eop_arrays()
    mjd = np.asarray(mjd_utc, dtype=float)
    if not _warned_before_table and mjd.size and np.nanmin(mjd) < mjd_tab[0]:
        _warned_before_table = True
        log.info("Times before %s are before the bundled IERS table; UT1-UTC held at %.3f s "
                 "(planning accuracy unaffected).", _day_text(mjd_tab[0]), dut_tab[0])
    if not _warned_past_table and mjd.size and np.nanmax(mjd) > mjd_tab[-1]:
        _warned_past_table = True
        log.info(
            "Times after %s are past the bundled IERS table; UT1-UTC held at %.3f s "
            "(planning accuracy unaffected).",
            _day_text(mjd_tab[-1]),
            dut_tab[-1],
        )
    # UT1-UTC jumps by 1 s at a leap second; UT1-TAI does not. Between table days
    # with a leap second in between, UT1-TAI is interpolated (as astropy does) and
    # TAI-UTC of the instant added back; elsewhere UT1-UTC itself interpolates.
    out = np.interp(mjd, mjd_tab, dut_tab)
    ut1_tai, leaps = _ut1_minus_tai()
    j = np.clip(np.searchsorted(mjd_tab, mjd, side="right") - 1, 0, mjd_tab.size - 2)
    near_leap = leaps[j] & (mjd > mjd_tab[0]) & (mjd < mjd_tab[-1])
    if np.any(near_leap):
        t = mjd[near_leap]
        out = np.array(out, dtype=float)
        out[near_leap] = np.interp(t, mjd_tab, ut1_tai) + tt_minus_utc_s(t) - TT_MINUS_TAI_S
    return out


def _day_text(mjd_utc: float) -> str:
    return (_MJD_EPOCH_DAY + timedelta(days=math.floor(mjd_utc))).isoformat()


# From 1972 TAI-UTC is a whole number of seconds that changes only at 0h UTC, so one
# ERFA look-up per day serves every instant of that day (a large saving for long
# arrays); before, it drifted within the day and every instant is looked up.
_WHOLE_SECONDS_FROM_MJD = 41317.0  # 1972-01-01


def _dat(mjd: np.ndarray) -> np.ndarray:
    iy, im, iday, frac = erfa.jd2cal(MJD_ZERO_JD, mjd)
    with warnings.catch_warnings():
        # ERFA flags years past its leap-second table as "dubious"; the last
        # known count is the best prediction and 1 s is 15 arcsec of sky.
        warnings.simplefilter("ignore", erfa.ErfaWarning)
        return erfa.dat(iy, im, iday, frac)


def tt_minus_utc_s(mjd_utc: np.ndarray) -> np.ndarray:
    """TT-UTC in seconds (leap seconds from ERFA's table + 32.184 s)."""
    mjd = np.asarray(mjd_utc, dtype=float)
    flat = mjd.ravel()
    if flat.size < 64:
        return _dat(mjd) + TT_MINUS_TAI_S
    out = np.empty(flat.size)
    modern = flat >= _WHOLE_SECONDS_FROM_MJD
    days, back = np.unique(np.floor(flat[modern]), return_inverse=True)
    out[modern] = _dat(days)[back]
    out[~modern] = _dat(flat[~modern])
    return (out + TT_MINUS_TAI_S).reshape(mjd.shape)


def to_mjd_utc(times) -> np.ndarray:
    """Float MJD (UTC) array from an astropy Time of any scale."""
    astropy_offline()  # a conversion from UT1 may need the Earth-orientation table
    return np.atleast_1d(np.asarray(times.utc.mjd, dtype=float))


def from_mjd_utc(mjd_utc):
    """astropy Time (UTC) from float MJD."""
    return astropy_offline().Time(np.asarray(mjd_utc, dtype=float), format="mjd", scale="utc")


def leap_seconds(day_mjd) -> np.ndarray:
    """Seconds each UTC day (MJD of its 0h) has beyond 86,400: 1 where it ends with a leap second.

    ERFA's rule (eraDtf2d, eraD2dtf): the jump in TAI-UTC between 0h of this day
    and 0h of the next, less the drift of TAI-UTC over the day (which existed
    only before 1972). Rounded to 0.1 microsecond so that days without a jump
    give exactly 0.
    """
    day = np.floor(np.asarray(day_mjd, dtype=float))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", erfa.ErfaWarning)  # "dubious year": see module doc
        iy, im, iday, _ = erfa.jd2cal(MJD_ZERO_JD, day)
        dat0 = erfa.dat(iy, im, iday, 0.0)
        dat12 = erfa.dat(iy, im, iday, 0.5)
        iy, im, iday, _ = erfa.jd2cal(MJD_ZERO_JD, day + 1.0)
        dat24 = erfa.dat(iy, im, iday, 0.0)
    return np.round(dat24 - (2.0 * dat12 - dat0), 7)


@lru_cache(maxsize=8192)
def leap_seconds_at_end(day_mjd: int) -> float:
    """``leap_seconds`` of one day, cached (scalar conversions run per printed time)."""
    return float(leap_seconds(float(day_mjd)))


def _ticks(mjd_utc: float, per_second: int) -> tuple[int, int, float]:
    """(UTC day as MJD, whole ticks of 1/per_second s since its 0h, leap s of the day).

    Ticks run to 86,400 * per_second (a leap second adds per_second more); a
    value that rounds to the day's end is carried to the next day.
    """
    mjd = float(mjd_utc)
    day = math.floor(mjd)
    leap = leap_seconds_at_end(day)
    length = SECONDS_PER_DAY + leap
    ticks = round((mjd - day) * length * per_second)
    if ticks >= round(length * per_second):
        return day + 1, 0, leap_seconds_at_end(day + 1)
    return day, ticks, leap


def mjd_to_datetime_utc(mjd_utc: float, whole_seconds: bool = True) -> datetime:
    """Aware UTC datetime, rounded to the nearest second (else to the microsecond).

    Correct on days with a leap second; an instant inside the leap second, which
    a datetime cannot hold, gives 23:59:59 of that day.
    """
    mjd = float(mjd_utc)
    if leap_seconds_at_end(math.floor(mjd)) == 0.0:  # every day since 2017
        if whole_seconds:
            return _UNIX_EPOCH + timedelta(seconds=round((mjd - UNIX_EPOCH_MJD) * SECONDS_PER_DAY))
        return _UNIX_EPOCH + timedelta(days=mjd - UNIX_EPOCH_MJD)
    per_second = 1 if whole_seconds else 1_000_000
    day, ticks, _ = _ticks(mjd, per_second)
    ticks = min(ticks, round(SECONDS_PER_DAY * per_second) - 1)  # no second 60 in a datetime
    midnight = datetime.combine(_MJD_EPOCH_DAY + timedelta(days=day), datetime.min.time(),
                                tzinfo=timezone.utc)
    return midnight + timedelta(microseconds=ticks * (1_000_000 // per_second))


def datetime_to_mjd_utc(moment: datetime) -> float:
    """Float MJD (UTC) of an aware datetime (days with a leap second have 86,401 s)."""
    if moment.tzinfo is None:
        raise ValueError("naive datetime: a time zone is required")
    utc = moment.astimezone(timezone.utc)
    day = (utc.date() - _MJD_EPOCH_DAY).days
    leap = leap_seconds_at_end(day)
    if leap == 0.0:
        return moment.timestamp() / SECONDS_PER_DAY + UNIX_EPOCH_MJD
    seconds = utc.hour * 3600 + utc.minute * 60 + utc.second + utc.microsecond / 1e6
    return day + seconds / (SECONDS_PER_DAY + leap)


def unix_to_mjd_utc(unix_s) -> np.ndarray:
    """Float MJD (UTC) of POSIX times (seconds since 1970, 86,400 to every day).

    POSIX time has no leap second, so on a day with one each second of the day
    maps to the same UTC second as its clock reading.
    """
    seconds = np.asarray(unix_s, dtype=float)
    day_unix = np.floor(seconds / SECONDS_PER_DAY)
    days, where = np.unique(day_unix, return_inverse=True)
    leap = leap_seconds(days + UNIX_EPOCH_MJD)[where].reshape(seconds.shape)
    plain = seconds / SECONDS_PER_DAY + UNIX_EPOCH_MJD
    return np.where(leap == 0.0, plain, day_unix + UNIX_EPOCH_MJD
                    + (seconds - day_unix * SECONDS_PER_DAY) / (SECONDS_PER_DAY + leap))


def iso_utc(mjd_utc: float, milliseconds: bool = False) -> str:
    """ISO 8601 UTC text to the second, with a trailing ``Z`` (second 60 in a leap second).

    ``milliseconds``: to the millisecond, the fraction written only when not whole.
    """
    per_second = 1000 if milliseconds else 1
    mjd = float(mjd_utc)
    if leap_seconds_at_end(math.floor(mjd)) == 0.0:
        ticks = round((mjd - UNIX_EPOCH_MJD) * SECONDS_PER_DAY * per_second)
        if per_second == 1:
            return (_UNIX_EPOCH + timedelta(seconds=ticks)).strftime("%Y-%m-%dT%H:%M:%SZ")
        moment = _UNIX_EPOCH + timedelta(microseconds=ticks * (1_000_000 // per_second))
        return _iso_text(moment, 0, ticks % per_second, per_second)
    day, ticks, _ = _ticks(mjd, per_second)
    whole, part = divmod(ticks, per_second)
    extra = max(0, whole - 86399)  # 1 inside a leap second: 23:59:59 + 1 = 23:59:60
    midnight = datetime.combine(_MJD_EPOCH_DAY + timedelta(days=day), datetime.min.time(),
                                tzinfo=timezone.utc)
    return _iso_text(midnight + timedelta(seconds=whole - extra), extra, part, per_second)


def _iso_text(moment: datetime, extra_s: int, part: int, per_second: int) -> str:
    second = moment.second + extra_s
    text = moment.strftime("%Y-%m-%dT%H:%M:") + f"{second:02d}"
    if part:
        text += f".{part:03d}"
    return text + "Z"


def iso_local(mjd_utc: float, tz: ZoneInfo) -> str:
    """ISO 8601 local time to the second, with its UTC offset (e.g. +01:00).

    Inside a leap second the seconds read 60, as in ``iso_utc``.
    """
    text = mjd_to_datetime_utc(mjd_utc).astimezone(tz).isoformat(timespec="seconds")
    if leap_seconds_at_end(math.floor(float(mjd_utc))) and iso_utc(mjd_utc)[17:19] == "60":
        text = text[:17] + "60" + text[19:]
    return text


def check_supported(day: date, field: str) -> date:
    """``day``, or a UserError naming ``field`` when it is outside FIRST_DAY..LAST_DAY."""
    if not FIRST_DAY <= day <= LAST_DAY:
        raise UserError(f"{field}: {day.isoformat()} is outside the dates hiplan supports "
                        f"({SUPPORTED_TEXT})")
    return day


def parse_day(text: str, field: str) -> date:
    """A calendar day from ``YYYY-MM-DD`` within the supported dates; ``field`` names the
    option in errors."""
    try:
        day = date.fromisoformat(text.strip())
    except (ValueError, AttributeError):
        raise UserError(f"{field}: '{text}' is not a date of the form YYYY-MM-DD") from None
    return check_supported(day, field)


def local_midnight_mjd(day: date, tz: ZoneInfo) -> float:
    """MJD (UTC) of 00:00 local time on ``day`` in zone ``tz``."""
    return datetime_to_mjd_utc(datetime(day.year, day.month, day.day, tzinfo=tz))


def local_day_span(start: date, days: int, tz: ZoneInfo,
                   field: str = "--start/--days") -> tuple[float, float]:
    """[start, end) in MJD UTC for ``days`` whole local days from ``start``.

    Local midnights are used, so a span across a DST change is 23 or 25 h long
    on that day, as the operator's clock sees it. Every day must be supported
    (``check_supported``); ``field`` names the options in that error.
    """
    check_supported(start, field)
    if (LAST_DAY - start).days < days - 1:
        last = start + timedelta(days=days - 1) if days - 1 <= (date.max - start).days else None
        shown = last.isoformat() if last else "past year 9999"
        raise UserError(f"{field}: the period would end on {shown}, after the dates hiplan "
                        f"supports ({SUPPORTED_TEXT})")
    end_day = start + timedelta(days=days)
    return local_midnight_mjd(start, tz), local_midnight_mjd(end_day, tz)


class LeapSecondError(ValueError):
    """An ISO 8601 time with second 60 where UTC has no leap second."""


# An ISO 8601 time whose seconds read 60: (up to the minute)(fraction)(offset).
_SECOND_60 = re.compile(r"(\d{4}-?\d{2}-?\d{2}[T ]\d{2}:?\d{2}:?)60([.,]\d+)?"
                        r"([Zz]|[+-]\d{2}(?::?\d{2})?)?")


def parse_iso(text: str) -> tuple[datetime, bool]:
    """``datetime.fromisoformat`` that also reads a trailing ``Z`` and second 60.

    Returns (moment, leap). For second 60 the moment is second 59 of the same
    minute and ``leap`` is True: ``leap_instant_mjd`` checks and places it. A
    moment without an offset stays naive. Raises ValueError for any other text.
    """
    body = text.strip()
    match = _SECOND_60.fullmatch(body)
    if match:
        body = match.group(1) + "59" + (match.group(2) or "") + (match.group(3) or "")
    if body.endswith(("Z", "z")):
        body = body[:-1] + "+00:00"
    return datetime.fromisoformat(body), match is not None


def leap_instant_mjd(moment: datetime, text: str) -> float:
    """MJD (UTC) of second 60 for a ``parse_iso`` result with ``leap`` True.

    ``moment`` (aware) is second 59 of that minute; it must be 23:59:59 UTC on a
    day that ends with a leap second, else LeapSecondError in plain words.
    """
    utc = moment.astimezone(timezone.utc)
    day = (utc.date() - _MJD_EPOCH_DAY).days
    leap = leap_seconds_at_end(day)
    if (utc.hour, utc.minute, utc.second) != (23, 59, 59) or leap < 1.0:
        raise LeapSecondError(
            f"'{text}' has second 60, which exists only as a leap second at 23:59:60 UTC at the "
            f"end of a day that has one (e.g. 2016-12-31); {utc.date().isoformat()} "
            + ("has none" if leap < 1.0 else "has one only at 23:59:60 UTC"))
    return day + (SECONDS_PER_DAY + utc.microsecond / 1e6) / (SECONDS_PER_DAY + leap)


def check_instant(mjd_utc: float, field: str, text: str) -> float:
    """``mjd_utc``, or a UserError naming ``field`` when it is outside the supported dates."""
    if not FIRST_MJD <= mjd_utc < END_MJD:
        raise UserError(f"{field}: '{text}' is outside the dates hiplan supports "
                        f"({SUPPORTED_TEXT})")
    return mjd_utc


def parse_instant(text: str, field: str) -> float:
    """MJD (UTC) from an ISO 8601 time; no offset means UTC; second 60 only in a leap second."""
    try:
        moment, leap = parse_iso(text)
    except (ValueError, AttributeError, TypeError):
        raise UserError(
            f"{field}: '{text}' is not an ISO 8601 time (e.g. 2027-03-01T21:30:00Z)"
        ) from None
    if moment.tzinfo is None:
        moment = moment.replace(tzinfo=timezone.utc)
    try:
        mjd = leap_instant_mjd(moment, text) if leap else datetime_to_mjd_utc(moment)
    except LeapSecondError as exc:
        raise UserError(f"{field}: {exc}") from None
    except OverflowError:  # an offset pushing year 1 or 9999 out of range
        mjd = -math.inf
    return check_instant(mjd, field, text)
