"""Operator availability: weekly local-time windows when a volunteer can be at the dish.

A volunteer is needed to re-park the dish or to watch a recording. Their free
time is written as recurring windows of local wall-clock time at the site, one
window per line in a file or several separated by ``;`` on the command line:

``Mon-Fri 19:00-23:30``
    Days then ``HH:MM-HH:MM`` (24-hour clock). Days are ``Mon Tue Wed Thu Fri
    Sat Sun`` (any case), ranges with ``-`` that may wrap (``Fri-Mon``), lists
    with ``,`` (``Mon,Wed-Fri``), or ``daily``. An end before the start means
    the window ends on the next day (``Sat 20:00-02:00``); ``24:00`` is allowed
    as an end. An end equal to the start is refused as a zero-length window
    (a whole day is ``00:00-24:00``).
``RRULE:FREQ=WEEKLY;BYDAY=TU,TH;BYHOUR=20;BYMINUTE=0 for 3h``
    An RFC 5545 (Desruisseaux 2009, section 3.3.10) recurrence rule and a
    duration (``3h``, ``90m``, ``2h30m``). FREQ may be DAILY, WEEKLY, MONTHLY or
    YEARLY; BYxxx parts, INTERVAL, COUNT and UNTIL are passed to
    ``dateutil.rrule.rrulestr``. python-dateutil is not a direct dependency of
    hiplan: it is installed as a dependency of matplotlib.
``#`` starts a comment; blank lines are ignored.

Time rules (all conversions use the site's IANA zone through ``zoneinfo``):

* Window edges are wall-clock times: ``19:00-23:30`` is 19:00-23:30 on the
  clock on both sides of a daylight-saving change, so its UTC times shift.
* A wall time that does not exist (the spring-forward gap) moves to the first
  existing instant after the gap, i.e. the instant of the change.
* A wall time that occurs twice (the autumn fall-back hour) means its first
  occurrence (PEP 495 ``fold=0``, the offset in force before the change).
* An RRULE occurrence starts at the rule's wall time and lasts the duration in
  elapsed time: RFC 5545 section 3.3.6 calls hours and minutes "exact"
  durations. On a change night an RRULE window crossing the change therefore
  ends one hour later or earlier on the clock than the equivalent simple
  window, whose end is a wall time.
* RRULE DTSTART is the local midnight that starts the period's first local day
  (the planner sets it; a rule may not). COUNT and INTERVAL count from there,
  and no occurrence before it exists, so an RRULE window running across that
  midnight into the period is not seen (a simple window is).
* A date-only UNTIL (``UNTIL=20270331``) includes that whole local day; a
  local date-time UNTIL is a wall time; one ending in ``Z`` is a UTC instant.

Intervals are half-open ``[start, end)`` in float MJD (UTC), sorted, with
overlapping or touching windows merged.
"""
from __future__ import annotations

import difflib
import re
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta, timezone, tzinfo
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
from dateutil.rrule import rrulestr  # via matplotlib's dependency on python-dateutil

from .errors import UserError
from .inputs import check_plain, read_input_text
from .timebase import mjd_to_datetime_utc, unix_to_mjd_utc

__all__ = [
    "ALWAYS",
    "Availability",
    "RecurrenceWindow",
    "WeeklyWindow",
    "clip_to_windows",
    "describe_window_texts",
    "inside",
    "never_occurs",
    "parse_windows",
    "read_windows",
    "window_intervals_mjd",
]

_MINUTES_PER_DAY = 1440
_DAY_NAMES = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")  # index = date.weekday()
_DAY_LABELS = ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")
_ALLOWED_FREQ = ("DAILY", "WEEKLY", "MONTHLY", "YEARLY")
_REFUSED_FREQ = ("SECONDLY", "MINUTELY", "HOURLY")
# A volunteer's shift longer than a week is surely a typo ("for 300h" for "for 3h").
_MAX_DURATION_MIN = 7 * _MINUTES_PER_DAY
_EXAMPLE_RRULE = "RRULE:FREQ=WEEKLY;BYDAY=TU;BYHOUR=20 for 3h"


@dataclass(frozen=True)
class WeeklyWindow:
    """A window on chosen weekdays between two local wall-clock times.

    ``days``: 0 = Monday ... 6 = Sunday, sorted. ``start_min`` (0..1439) and
    ``end_min`` (1..1440) are minutes after local midnight; an end at or before
    the start lies on the next day.
    """

    days: tuple[int, ...]
    start_min: int
    end_min: int
    text: str  # the window as written
    line: int  # 1-based line of the source

    @property
    def next_day_end(self) -> bool:
        """True when the end time is on the day after the start day."""
        return self.end_min <= self.start_min

    def describe(self) -> str:
        """For people, e.g. ``Mon–Fri 19:00–23:30`` or ``Sat 21:00–02:00 (next day)``."""
        suffix = " (next day)" if self.next_day_end else ""
        return (f"{_describe_days(self.days, ', ')} {_clock(self.start_min)}–"
                f"{_clock(self.end_min)}{suffix}")

    def normalised(self) -> str:
        """Machine-readable form that parses back to the same window, e.g. ``Sat,Sun 08:30-12:00``."""
        days = _describe_days(self.days, ",").replace("–", "-")
        return f"{days} {_clock(self.start_min)}-{_clock(self.end_min)}"


@dataclass(frozen=True)
class RecurrenceWindow:
    """An RFC 5545 recurrence rule whose occurrences each last ``duration_min``.

    ``rule`` is the RRULE value without UNTIL, keys and values in upper case;
    ``until`` is the UNTIL value as written (``YYYYMMDD``, ``YYYYMMDDTHHMMSS``
    local wall time, or with ``Z`` for UTC) or None.
    """

    rule: str
    until: str | None
    duration_min: int
    text: str
    line: int

    def describe(self) -> str:
        """For people, in words as far as the rule allows, e.g. ``every Tuesday and Thursday
        14:00 for 2 h 30 min, until Tue 31 Aug 2027 (the whole day)``; a rule with parts
        that have no wording here (BYSETPOS, BYWEEKNO, ...) is shown as written."""
        return _describe_rrule(self.rule, self.until, self.duration_min)

    def normalised(self) -> str:
        """Machine-readable form that parses back to the same window (upper-case rule)."""
        until = f";UNTIL={self.until}" if self.until else ""
        return f"RRULE:{self.rule}{until} for {_describe_duration(self.duration_min)}"


@dataclass(frozen=True)
class Availability:
    """Parsed availability windows; no rules means "any time" (see ``ALWAYS``)."""

    rules: tuple[WeeklyWindow | RecurrenceWindow, ...]
    source: str  # file path, option name, or a note for ALWAYS

    @property
    def is_always(self) -> bool:
        return not self.rules

    def describe(self) -> list[str]:
        """One line for people per window, in the order written."""
        if self.is_always:
            return ["any time (no availability windows given)"]
        return [rule.describe() for rule in self.rules]

    def normalised(self) -> list[str]:
        """One machine-readable line per window (``parse_windows`` reads each back); empty
        for ``ALWAYS``. Plans store this form, so their windows can be read again."""
        return [rule.normalised() for rule in self.rules]


ALWAYS = Availability(rules=(), source="any time")


# ---------------------------------------------------------------- parsing


def parse_windows(text: str, source: str = "--windows") -> Availability:
    """Parse availability windows (syntax in the module docstring).

    ``source`` names where the text came from. A source starting with ``-`` is
    a command-line option and errors read ``"--windows: ..."``; anything else
    is a file and errors read ``"{source}:{line}: ..."``.
    Raises UserError (one line) on the first bad window or when there is none.
    """
    option = source.startswith("-")
    rules: list[WeeklyWindow | RecurrenceWindow] = []
    # Lines end at LF (or CRLF) only; any other line break in a window is a control
    # character, refused: window texts are echoed into plans, briefs and calendars.
    for lineno, raw in enumerate(text.split("\n"), start=1):
        body = raw.removesuffix("\r").split("#", 1)[0].strip()
        if not body:
            continue
        where = source if option else f"{source}:{lineno}"
        check_plain(body, where, "window text")
        for item in _split_items(body):
            rules.append(_parse_item(item, lineno, where))
    if not rules:
        raise UserError(f"{source}: no availability windows given "
                        "(only blank lines or comments); e.g. 'Mon-Fri 19:00-23:30'")
    return Availability(rules=tuple(rules), source=source)


def read_windows(path_or_text: str) -> Availability:
    """Windows from a file if ``path_or_text`` names an existing file, else from the text.

    The one function here that touches a file: the command-line option takes
    either a file or the windows themselves.
    """
    candidate = path_or_text.strip()
    try:
        path = Path(candidate).expanduser()
        is_file = bool(candidate) and path.is_file()
    except (OSError, ValueError):  # over-long or NUL-containing text is not a path
        is_file = False
    try:
        is_other = bool(candidate) and not is_file and path.exists()  # a folder, device, FIFO
    except (OSError, ValueError):
        is_other = False
    if is_file or is_other:  # UTF-8, a leading BOM allowed, at most 10 MB, regular files only
        content = read_input_text(path, "windows file")
        return parse_windows(content, source=str(candidate))
    # Window text always has a space before its times; a lone dotted word is a path.
    if re.fullmatch(r"[\w./\\~-]+\.\w+", candidate) and ":" not in candidate:
        raise UserError(f"--windows: file '{candidate}' not found")
    return parse_windows(path_or_text, source="--windows")


def _split_items(line: str) -> list[str]:
    """Split a line at ``;``, keeping an RRULE's own ``;``-separated parts together."""
    items: list[str] = []
    for piece in line.split(";"):
        piece = piece.strip()
        if not piece:
            continue
        continues_rule = (
            items
            and items[-1].upper().startswith("RRULE")
            and not re.search(r"\sfor\s", items[-1], re.IGNORECASE)
            and not piece.upper().startswith("RRULE")
            and not re.search(r"\d:\d", piece)  # a simple window has a clock time
        )
        if continues_rule:
            items[-1] += ";" + piece
        else:
            items.append(piece)
    return items


def _parse_item(item: str, line: int, where: str) -> WeeklyWindow | RecurrenceWindow:
    def fail(problem: str) -> UserError:
        return UserError(f"{where}: '{item}': {problem}")

    if re.match(r"RRULE\s*:", item, re.IGNORECASE):
        return _parse_rrule(item, line, fail)
    return _parse_weekly(item, line, fail)


def _parse_weekly(item: str, line: int, fail) -> WeeklyWindow:
    text = item.replace("\u2013", "-").replace("\u2014", "-")  # en/em dashes from describe()
    match = re.match(r"([^\d]*?)\s*(\d.*)$", text)
    if match is None:
        raise fail("missing the time range HH:MM-HH:MM (e.g. 'Mon-Fri 19:00-23:30')")
    days = _parse_days(match.group(1), fail)
    start_min, end_min = _parse_time_range(match.group(2), fail)
    return WeeklyWindow(days=days, start_min=start_min, end_min=end_min, text=item, line=line)


def _parse_days(text: str, fail) -> tuple[int, ...]:
    compact = re.sub(r"\s+", "", text)
    if not compact:
        raise fail("no days given before the times (e.g. 'Mon-Fri 19:00-23:30' or "
                   "'daily 19:00-23:30')")
    chosen: set[int] = set()
    for part in compact.split(","):
        if not part:
            raise fail(f"empty entry in the day list '{compact}'")
        if "-" in part:
            first, _, last = part.partition("-")
            if not first or not last or "-" in last:
                raise fail(f"bad day range '{part}' (write e.g. 'Mon-Fri' or 'Fri-Mon')")
            a, b = _day_index(first, fail), _day_index(last, fail)
            if a is None or b is None:
                raise fail(f"'daily' cannot be part of a range in '{part}'")
            span = (b - a) % 7  # ranges wrap past Sunday: Fri-Mon is Fri Sat Sun Mon
            chosen.update((a + k) % 7 for k in range(span + 1))
        else:
            index = _day_index(part, fail)
            chosen.update(range(7) if index is None else (index,))
    return tuple(sorted(chosen))


def _day_index(name: str, fail) -> int | None:
    """0..6 for a day name, None for ``daily``."""
    key = name.lower()
    if key == "daily":
        return None
    if key in _DAY_NAMES:
        return _DAY_NAMES.index(key)
    close = difflib.get_close_matches(key, [*_DAY_NAMES, "daily"], n=1, cutoff=0.5)
    hint = ""
    if close:
        hint = " (did you mean 'daily'?)" if close[0] == "daily" else \
            f" (did you mean '{_DAY_LABELS[_DAY_NAMES.index(close[0])]}'?)"
    raise fail(f"unknown day '{name}'{hint}; days are Mon Tue Wed Thu Fri Sat Sun or daily")


def _parse_time_range(text: str, fail) -> tuple[int, int]:
    compact = re.sub(r"\s+", "", text)
    parts = compact.split("-")
    if len(parts) != 2:
        raise fail(f"bad time range '{compact}' (expected HH:MM-HH:MM, e.g. 19:00-23:30)")
    start_min = _parse_clock(parts[0], is_end=False, fail=fail)
    end_min = _parse_clock(parts[1], is_end=True, fail=fail)
    if start_min == end_min:
        raise fail("zero-length window (start equals end; a whole day is 00:00-24:00)")
    return start_min, end_min


def _parse_clock(text: str, is_end: bool, fail) -> int:
    match = re.fullmatch(r"(\d{1,2}):(\d{2})", text)
    if match is None:
        raise fail(f"bad time '{text}' (expected HH:MM on the 24-hour clock)")
    hours, minutes = int(match.group(1)), int(match.group(2))
    if minutes >= 60:
        raise fail(f"bad time '{text}': minutes must be below 60")
    if hours > 24 or (hours == 24 and minutes > 0):
        raise fail(f"bad time '{text}': hours must be at most 24 (24:00 is the latest)")
    if hours == 24 and not is_end:
        raise fail(f"bad time '{text}': 24:00 is allowed only as an end time")
    return hours * 60 + minutes


def _parse_duration(text: str, fail) -> int:
    match = re.fullmatch(r"(?:(\d+)h)?(?:(\d+)m)?", text.strip().lower())
    if match is None or not text.strip():
        raise fail(f"bad duration '{text}' (write e.g. 3h, 90m or 2h30m)")
    minutes = int(match.group(1) or 0) * 60 + int(match.group(2) or 0)
    if minutes == 0:
        raise fail(f"zero-length window (duration '{text}')")
    if minutes > _MAX_DURATION_MIN:
        raise fail(f"bad duration '{text}': longer than a week")
    return minutes


def _parse_rrule(item: str, line: int, fail) -> RecurrenceWindow:
    match = re.fullmatch(r"RRULE\s*:\s*(.*?)\s+for\s+(.+?)\s*", item,
                         re.IGNORECASE | re.DOTALL)
    if match is None:
        raise fail(f"an RRULE needs a duration after it, e.g. '{_EXAMPLE_RRULE}'")
    body, duration_text = match.group(1).strip().rstrip(";"), match.group(2)
    duration_min = _parse_duration(duration_text, fail)

    def bad(reason: str) -> UserError:
        return fail(f"unparsable RRULE ({reason})")

    parts: dict[str, str] = {}
    for part in body.split(";"):
        key, eq, value = (s.strip() for s in part.partition("="))
        if not eq or not key or not value:
            raise bad(f"'{part.strip()}' is not NAME=VALUE")
        key, value = key.upper(), value.upper()
        if key in parts:
            raise bad(f"{key} given twice")
        parts[key] = value
    freq = parts.get("FREQ")
    if freq is None:
        raise bad("FREQ is missing")
    if freq in _REFUSED_FREQ:
        raise fail(f"unsupported FREQ={freq} (use DAILY, WEEKLY, MONTHLY or YEARLY)")
    if freq not in _ALLOWED_FREQ:
        raise bad(f"unknown FREQ '{freq}'")
    if "DTSTART" in parts:
        raise bad("DTSTART is set by the planner to the period's first local midnight")
    if "COUNT" in parts and "UNTIL" in parts:
        raise bad("COUNT and UNTIL cannot both be given (RFC 5545 section 3.3.10)")
    for key in ("INTERVAL", "COUNT"):
        if key in parts and not (parts[key].isdigit() and int(parts[key]) >= 1):
            raise bad(f"{key} must be a positive whole number, got '{parts[key]}'")
    until = parts.pop("UNTIL", None)
    if until is not None:
        try:
            _until_value(until)
        except ValueError:
            raise bad(f"UNTIL '{until}' is not YYYYMMDD, YYYYMMDDTHHMMSS or "
                      "YYYYMMDDTHHMMSSZ") from None
    rule = ";".join(f"{k}={v}" for k, v in parts.items())
    try:
        rrulestr(rule, dtstart=datetime(2000, 1, 3))
    except (ValueError, TypeError, KeyError, IndexError) as exc:
        raise bad(str(exc).strip() or type(exc).__name__) from None
    return RecurrenceWindow(rule=rule, until=until, duration_min=duration_min,
                            text=item, line=line)


def _until_value(text: str) -> tuple[datetime, str]:
    """(datetime, kind) for an UNTIL value; kind is 'date', 'local' or 'utc'."""
    match = re.fullmatch(r"(\d{8})(?:T(\d{6})(Z?))?", text)
    if match is None:
        raise ValueError(text)
    day = datetime.strptime(match.group(1), "%Y%m%d")
    if match.group(2) is None:
        return day, "date"
    moment = datetime.strptime(match.group(1) + match.group(2), "%Y%m%d%H%M%S")
    return moment, ("utc" if match.group(3) else "local")


# ---------------------------------------------------------------- description


def _clock(minutes: int) -> str:
    return f"{minutes // 60:02d}:{minutes % 60:02d}"


def _describe_duration(minutes: int) -> str:
    hours, rest = divmod(minutes, 60)
    if hours and rest:
        return f"{hours}h{rest:02d}m"
    return f"{hours}h" if hours else f"{rest}m"


def _describe_days(days: tuple[int, ...], sep: str = ",") -> str:
    """Runs of three or more consecutive days (wrapping past Sunday) become ranges."""
    if len(days) == 7:
        return "daily"
    present = set(days)
    # Start at a day whose previous day is absent so a wrapping run stays whole.
    first = next(d for d in range(7) if d in present and (d - 1) % 7 not in present)
    runs: list[list[int]] = []
    for k in range(7):
        d = (first + k) % 7
        if d not in present:
            continue
        if runs and (runs[-1][-1] + 1) % 7 == d:
            runs[-1].append(d)
        else:
            runs.append([d])
    runs.sort(key=lambda run: run[0] if run[0] <= run[-1] else run[0] - 7)
    labels = []
    for run in runs:
        if len(run) >= 3:
            labels.append(f"{_DAY_LABELS[run[0]]}–{_DAY_LABELS[run[-1]]}")
        else:
            labels.extend(_DAY_LABELS[d] for d in run)
    return sep.join(labels)


_DAY_WORDS = {"MO": "Monday", "TU": "Tuesday", "WE": "Wednesday", "TH": "Thursday",
              "FR": "Friday", "SA": "Saturday", "SU": "Sunday"}
_MONTH_WORDS = ("January", "February", "March", "April", "May", "June", "July", "August",
                "September", "October", "November", "December")
_ORDINALS = {1: "first", 2: "second", 3: "third", 4: "fourth", 5: "fifth", -1: "last",
             -2: "second to last"}
_FREQ_UNITS = {"DAILY": "day", "WEEKLY": "week", "MONTHLY": "month", "YEARLY": "year"}


def _and(words: list[str]) -> str:
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def _ordinal(n: int) -> str:
    if n in _ORDINALS:
        return _ORDINALS[n]
    if n < 0:
        return f"{_ordinal(-n)} to last"
    return f"{n}th"


def _duration_words(minutes: int) -> str:
    hours, rest = divmod(minutes, 60)
    return " ".join(part for part in (f"{hours} h" if hours else "", f"{rest} min" if rest else "")
                    if part)


def _until_words(until: str) -> str:
    value, kind = _until_value(until)
    if kind == "date":
        return f"until {value:%a} {value.day} {value:%b %Y} (the whole day)"
    zone = " UTC" if kind == "utc" else ""
    return f"until {value:%a} {value.day} {value:%b %Y %H:%M}{zone}"


def _describe_rrule(rule: str, until: str | None, duration_min: int) -> str:
    """An RRULE window in words, or the rule as written when it has parts with no wording here.

    DTSTART is the first local midnight of the period (module docstring), so a rule
    without BYHOUR/BYMINUTE starts at 00:00 and one without a day part repeats on the
    weekday or day of the month the period starts.
    """
    parts = dict(part.split("=", 1) for part in rule.split(";"))
    tail = ""
    freq = parts.pop("FREQ")
    interval = int(parts.pop("INTERVAL", "1"))
    count = parts.pop("COUNT", None)
    unit = _FREQ_UNITS[freq]
    every = f"every {unit}" if interval == 1 else (
        f"every other {unit}" if interval == 2 else f"every {interval} {unit}s")
    byday = parts.pop("BYDAY", None)
    plain, nth = [], []
    for token in (byday.split(",") if byday else []):
        match = re.fullmatch(r"([+-]?\d*)([A-Z]{2})", token)
        if match is None or match.group(2) not in _DAY_WORDS:
            parts["BYDAY"] = byday  # not worded: shown as written
            plain, nth = [], []
            break
        if match.group(1):
            nth.append(f"{_ordinal(int(match.group(1)))} {_DAY_WORDS[match.group(2)]}")
        else:
            plain.append(_DAY_WORDS[match.group(2)])
    months = parts.pop("BYMONTH", None)
    month_words = ([_MONTH_WORDS[int(m) - 1] for m in months.split(",")]
                   if months and all(m.isdigit() and 1 <= int(m) <= 12 for m in months.split(","))
                   else None)
    if months and month_words is None:
        parts["BYMONTH"] = months
    monthdays = parts.pop("BYMONTHDAY", None)
    if monthdays and not re.fullmatch(r"-?\d+(,-?\d+)*", monthdays):
        parts["BYMONTHDAY"], monthdays = monthdays, None

    if plain and not nth and (freq in ("DAILY", "WEEKLY") or interval == 1):
        lead = (f"every {_and(plain)}" if interval == 1
                else f"{every} on {_and(plain)}")
    elif nth or plain:
        lead = f"the {_and(nth + plain)} of {every}" if nth else f"every {_and(plain)} of {every}"
    elif monthdays:
        days = _and([_ordinal(int(d)) if int(d) < 0 else str(int(d)) for d in monthdays.split(",")])
        noun = "day" if "," not in monthdays else "days"
        if freq == "YEARLY" and month_words:
            lead = f"{every} on {days} {_and(month_words)}"
            month_words = None
        else:
            lead = f"on {noun} {days} of {every}" if freq == "MONTHLY" else f"{every} on {noun} {days} of the month"
    elif freq == "WEEKLY":
        lead, tail = every, ", on the weekday the plan period starts"
    elif freq == "MONTHLY":
        lead, tail = every, ", on the day of the month the plan period starts"
    elif freq == "YEARLY" and not month_words:
        lead, tail = every, ", on the date the plan period starts"
    else:
        lead = every
    if month_words:
        lead += f" in {_and(month_words)}"

    hours = parts.pop("BYHOUR", "0")
    minutes = parts.pop("BYMINUTE", "0")
    if re.fullmatch(r"\d+(,\d+)*", hours) and re.fullmatch(r"\d+(,\d+)*", minutes):
        times = _and([f"{int(h):02d}:{int(m):02d}" for h in hours.split(",")
                      for m in minutes.split(",")])
    else:
        parts.update({"BYHOUR": hours, "BYMINUTE": minutes})
        times = ""
    if parts:  # BYSETPOS, BYWEEKNO, ...: words for the rest would mislead
        text = f"by the rule {rule} for {_duration_words(duration_min)}"
    else:
        text = f"{lead} {times} for {_duration_words(duration_min)}{tail}".replace("  ", " ")
        if count:
            text += f", {count} time{'s' if count != '1' else ''} from the start of the plan period"
    if until:
        text += f", {_until_words(until)}"
    return text


def describe_window_texts(texts) -> list[str]:
    """Window lines as stored in a plan (``Availability.normalised`` or as written), in words
    for people: each is parsed and described; a line that does not parse (a plan written by
    another version) is shown as written, its spaces collapsed."""
    out = []
    for text in texts or ():
        text = " ".join(str(text).split())
        try:
            out.extend(parse_windows(text, source="plan").describe())
        except UserError:
            out.append(text)
    return out


# ---------------------------------------------------------------- evaluation


def _utc_offset_s(unix_s: int, tz: tzinfo) -> float:
    return datetime.fromtimestamp(unix_s, tz).utcoffset().total_seconds()


def _wall_to_unix_s(wall: datetime, tz: tzinfo) -> int:
    """Unix seconds (UTC) of a naive local wall time under the gap/fold rules above.

    zoneinfo reads a gap time with ``fold=0`` using the offset before the change
    (PEP 495), which lands after the change; a round trip that does not give
    the wall time back reveals the gap. The change instant then lies between the
    two readings (``fold=0`` and ``fold=1``) and is found by bisection on whole
    seconds (tz database changes fall on whole seconds).
    """
    first = round(wall.replace(tzinfo=tz, fold=0).timestamp())
    if datetime.fromtimestamp(first, tz).replace(tzinfo=None) == wall:
        return first  # exists; fold=0 is the first of two readings in a fall-back hour
    other = round(wall.replace(tzinfo=tz, fold=1).timestamp())
    lo, hi = min(first, other), max(first, other)
    offset_after = _utc_offset_s(hi, tz)
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if _utc_offset_s(mid, tz) == offset_after:
            hi = mid
        else:
            lo = mid
    return hi


def _as_zone(tz: tzinfo | str) -> tzinfo:
    if isinstance(tz, str):
        return ZoneInfo(tz)
    return tz


def _local_wall(mjd_utc: float, tz: tzinfo) -> datetime:
    """Naive local wall time of an MJD (UTC), to the microsecond."""
    return mjd_to_datetime_utc(mjd_utc, whole_seconds=False).astimezone(tz).replace(tzinfo=None)


def _weekly_edges_s(rule: WeeklyWindow, first_day: date, last_day: date,
                    tz: tzinfo, cache: dict) -> list[tuple[int, int]]:
    edges = []
    end_shift = _MINUTES_PER_DAY if rule.next_day_end else 0
    day = first_day
    while day <= last_day:
        if day.weekday() in rule.days:
            midnight = datetime.combine(day, time())
            walls = (midnight + timedelta(minutes=rule.start_min),
                     midnight + timedelta(minutes=rule.end_min + end_shift))
            start_s, end_s = (_cached_unix_s(w, tz, cache) for w in walls)
            edges.append((start_s, end_s))
        day += timedelta(days=1)
    return edges


def _cached_unix_s(wall: datetime, tz: tzinfo, cache: dict) -> int:
    # Adjacent windows share edges (Mon ...-24:00, Tue 00:00-...); one conversion each.
    if wall not in cache:
        cache[wall] = _wall_to_unix_s(wall, tz)
    return cache[wall]


def _rrule_edges_s(rule: RecurrenceWindow, anchor: datetime, stop: datetime,
                   tz: tzinfo) -> list[tuple[int, int]]:
    recurrence = rrulestr(rule.rule, dtstart=anchor)
    if rule.until is not None:
        value, kind = _until_value(rule.until)
        if kind == "date":
            value = value + timedelta(days=1, seconds=-1)  # through the whole local day
        elif kind == "utc":
            value = value.replace(tzinfo=timezone.utc).astimezone(tz).replace(tzinfo=None)
        recurrence = recurrence.replace(until=value)
    # A rule that can never match (e.g. 30 February) makes dateutil search to
    # year 9999 (a few seconds) before giving up; the result is then empty.
    edges = []
    for occurrence in recurrence:  # DTSTART is the anchor, so all are >= it
        if occurrence > stop:
            break
        start_s = _wall_to_unix_s(occurrence, tz)
        edges.append((start_s, start_s + 60 * rule.duration_min))
    return edges


def _merge(edges_s: np.ndarray) -> np.ndarray:
    """Sort (K, 2) intervals and merge overlapping or touching ones."""
    if edges_s.shape[0] == 0:
        return edges_s.reshape(0, 2)
    order = np.lexsort((edges_s[:, 1], edges_s[:, 0]))
    starts, ends = edges_s[order, 0], edges_s[order, 1]
    reach = np.maximum.accumulate(ends)
    opens = np.ones(starts.size, dtype=bool)
    opens[1:] = starts[1:] > reach[:-1]
    first = np.flatnonzero(opens)
    return np.column_stack([starts[first], np.maximum.reduceat(ends, first)])


def window_intervals_mjd(avail: Availability, start_mjd: float, end_mjd: float,
                         tz: tzinfo | str) -> np.ndarray:
    """Availability as (K, 2) float MJD (UTC) ``[start, end)`` intervals within a period.

    Sorted; overlapping or touching windows merged; clipped to
    ``[start_mjd, end_mjd]``. ``tz`` is the site's zone (ZoneInfo or IANA name).
    ``ALWAYS`` gives the whole period. Edges are computed on whole UTC seconds,
    so touching windows merge exactly.
    """
    start_mjd, end_mjd = float(start_mjd), float(end_mjd)
    if not end_mjd > start_mjd:
        return np.empty((0, 2))
    if avail.is_always:
        return np.array([[start_mjd, end_mjd]])
    zone = _as_zone(tz)
    start_wall, end_wall = _local_wall(start_mjd, zone), _local_wall(end_mjd, zone)
    # Simple windows last at most 24 h, so one day earlier catches any that run into the period.
    first_day = start_wall.date() - timedelta(days=1)
    last_day = end_wall.date()
    anchor = datetime.combine(start_wall.date(), time())
    # A wall-time margin of a day covers occurrences that a fall-back hour reorders.
    stop = end_wall + timedelta(days=1)
    cache: dict = {}
    edges: list[tuple[int, int]] = []
    for rule in avail.rules:
        if isinstance(rule, WeeklyWindow):
            edges.extend(_weekly_edges_s(rule, first_day, last_day, zone, cache))
        else:
            edges.extend(_rrule_edges_s(rule, anchor, stop, zone))
    edges_s = np.array(edges, dtype=np.int64).reshape(-1, 2)
    edges_s = edges_s[edges_s[:, 1] > edges_s[:, 0]]  # a window wholly inside a gap vanishes
    merged_mjd = unix_to_mjd_utc(_merge(edges_s)).reshape(-1, 2)
    return clip_to_windows(start_mjd, end_mjd, merged_mjd)


def inside(mjd_utc, intervals) -> np.ndarray:
    """Boolean mask: which times fall in any ``[start, end)`` interval.

    ``intervals``: (K, 2) MJD, sorted and disjoint (as from
    ``window_intervals_mjd``). Vectorized with ``searchsorted``; the output has
    the shape of ``mjd_utc``.
    """
    times = np.asarray(mjd_utc, dtype=float)
    spans = np.asarray(intervals, dtype=float).reshape(-1, 2)
    if spans.shape[0] == 0:
        return np.zeros(times.shape, dtype=bool)
    index = np.searchsorted(spans[:, 0], times, side="right") - 1
    return (index >= 0) & (times < spans[np.maximum(index, 0), 1])


def clip_to_windows(start_mjd: float, end_mjd: float, intervals) -> np.ndarray:
    """The parts of ``[start_mjd, end_mjd]`` inside the intervals, as (K, 2) MJD.

    ``intervals`` sorted and disjoint; empty pieces are dropped.
    """
    spans = np.asarray(intervals, dtype=float).reshape(-1, 2)
    lo = np.maximum(spans[:, 0], float(start_mjd))
    hi = np.minimum(spans[:, 1], float(end_mjd))
    keep = hi > lo
    return np.column_stack([lo[keep], hi[keep]])


def never_occurs(avail: Availability, start_mjd: float, end_mjd: float,
                 tz: tzinfo | str) -> bool:
    """True when no window falls in the period (e.g. an RRULE whose UNTIL is before it).

    Lets a planner say "nothing to plan because the windows never occur".
    """
    return window_intervals_mjd(avail, start_mjd, end_mjd, tz).shape[0] == 0
