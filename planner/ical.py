"""iCalendar export of a plan: the volunteer's tasks as RFC 5545 events.

A drift plan (``hiplan.plan/1``) gives one VEVENT per recording window and one
per re-park task (``park.move`` true, from ``move_start`` to ``move_end``); a
survey plan (``hiplan.survey/1``) gives one VEVENT per ``target`` or
``reference`` block, slews being told in the description of the block they
lead to, and a ``stow`` (the mount parks the dish safe from the Sun) in the
descriptions of the blocks before and after it: the mount does it by itself,
so it is no task of its own. Formats: docs/plan-format.md.

Rules followed (RFC 5545, Desruisseaux 2009; RFC 7986, Daboo 2016):

- Each VEVENT has one UID and one DTSTAMP; VCALENDAR has PRODID and VERSION.
- UIDs are name-based UUIDs (version 5, RFC 4122 section 4.3) over the event's
  identity (site, kind, start to the minute, and the longitude bins or block
  name), so exporting a plan again, or an updated plan, gives the same UID to
  the same task and calendar programs update events instead of duplicating
  them. They carry no host or user data (RFC 7986 section 5.3).
- Times are written in the site's zone (``DTSTART;TZID=...``) with a VTIMEZONE
  built here from ``zoneinfo``. The one exception is a time in the repeated
  hour when clocks go back on its second occurrence: RFC 5545 section 3.3.5
  makes such a local time mean the first occurrence, so it is written in UTC.
- The VTIMEZONE observance onsets are the local time *before* the change
  (interpreted with TZOFFSETFROM), as in the RFC 5545 section 3.6.5 examples.
  ``icalendar``'s own ``Calendar.add_missing_timezones()`` (v7.3) writes the
  spring-forward onset one hour late (the wall clock after the change), so a
  program reading the VTIMEZONE would misplace events in that hour; hence the
  builder here.

Pure: no file access except the thin ``read_plan`` helper.
"""
from __future__ import annotations

import math
import uuid
from dataclasses import dataclass, replace
from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import icalendar

from .errors import UserError
from .inputs import check_plain
from .planfile import PLAN_SCHEMAS, SURVEY_BLOCK_KINDS, shown_span, survey_sessions
from .timebase import LeapSecondError, check_supported, leap_instant_mjd, parse_iso

_KIND_OF_SCHEMA = {"hiplan.plan/1": "drift", "hiplan.survey/1": "survey"}

PRODID = "-//hiplan//hiplan 0.1//EN"
# Our own fixed namespace for event UIDs (a random version-4 UUID drawn once);
# changing it would change every UID ever exported.
UID_NAMESPACE = uuid.UUID("bc7bf818-f5b0-426a-8568-463643dd1c93")

DEFAULT_ALARM_MINUTES = 15  # common practice for a calendar reminder
MAX_ALARM_MINUTES = 7 * 24 * 60  # a week: a longer lead is almost surely a typo

# Protected radio-astronomy band: ITU Radio Regulations No. 5.340, "all
# emissions are prohibited in the band 1400-1427 MHz" (from memory).
SAFETY_TEXT = (
    "Safety: never leave the dish pointing at or near the Sun - a dish focuses sunlight "
    "and heat on the feed and can melt it. No roof or mast work in wind, rain, ice, "
    "darkness or thunder. Receive only, in 1400-1427 MHz (protected radio-astronomy "
    "band); never transmit. Follow local building and electrical codes."
)

# What a drive azimuth is: told once a day in a survey calendar and in its description.
DRIVE_AZIMUTH_TEXT = (
    "Drive azimuth: the angle to set on the mount's azimuth drive (what its encoder reads), "
    "from north through east. A drive whose range spans more than one turn (a cable wrap) can "
    "reach one sky direction at two drive angles; the plan picks the one that keeps the cables "
    "inside their range and gives the sky azimuth in brackets where the two differ. Set the "
    "drive angle: turning the other way round can wind the cables up."
)

EVENT_KINDS = ("sun-hazard", "recording", "repark", "target", "reference", "calibration")
_CATEGORY = {"recording": "HI recording", "repark": "dish re-park", "target": "HI survey",
             "reference": "HI survey", "sun-hazard": "SUN HAZARD", "calibration": "HI calibration"}
# A Sun hazard needs someone at the dish before it starts: its reminder comes at least
# this long ahead, whatever the plan's alarm lead (our choice: time to get there).
HAZARD_ALARM_MINUTES = 60


@dataclass(frozen=True)
class PlanEvent:
    """One calendar task: times are aware UTC datetimes, whole minutes (``planfile.shown_span``)."""

    kind: str  # one of EVENT_KINDS
    start_utc: datetime
    end_utc: datetime
    summary: str
    description: str
    identity: str  # what makes the task the same task in an updated plan
    alarm: bool = True  # survey blocks: only the first of an observing session reminds


# ------------------------------------------------------------------- checking

def check_plan(doc: dict, source: str) -> None:
    """Raise ``UserError("{source}: ...")`` unless ``doc`` is a plan this module reads.

    Checks the schema string, the site object and every field the calendar uses
    (times, angles); optional fields are only checked when present.
    """
    plan_events(doc, source)
    _alarm_lead(doc, None, source)
    _warnings(doc, source)


def read_plan(path) -> dict:
    """Read a plan file (``planfile.read_plan``) and check every field the calendar uses."""
    from .planfile import read_plan as read_plan_file
    doc = read_plan_file(path)
    check_plan(doc, str(path))
    return doc


def _schema_kind(doc, source: str) -> str:
    if not isinstance(doc, dict):
        raise UserError(f"{source}: not a hiplan plan (the JSON top level is "
                        f"{_json_type(doc)}, expected an object)")
    expected = " or ".join(PLAN_SCHEMAS)
    if "schema" not in doc:
        raise UserError(f"{source}: no 'schema' field, so not a hiplan plan (expected {expected})")
    schema = doc["schema"]
    if schema not in PLAN_SCHEMAS:
        family = str(schema).split("/")[0]
        hint = (" (written by another hiplan version)"
                if family in {s.split("/")[0] for s in PLAN_SCHEMAS} else "")
        raise UserError(f"{source}: schema '{schema}' is not a plan this version reads"
                        f"{hint}; expected {expected}")
    kind = _KIND_OF_SCHEMA[schema]
    if doc.get("kind", kind) != kind:
        raise UserError(f"{source}: kind '{doc['kind']}' does not match schema '{schema}' "
                        f"(expected '{kind}')")
    return kind


def _json_type(value) -> str:
    names = {list: "a list", str: "a text", bool: "true/false", int: "a number",
             float: "a number", type(None): "null"}
    return names.get(type(value), type(value).__name__)


def _member(obj: dict, key: str, where: str, source: str, kind=dict, required=True):
    """``obj[key]`` checked to be ``kind`` (dict or list); None when optional and absent."""
    value = obj.get(key)
    if value is None:
        if required:
            raise UserError(f"{source}: {_join(where, key)} is missing")
        return None
    if not isinstance(value, kind):
        want = "an object" if kind is dict else "a list"
        raise UserError(f"{source}: {_join(where, key)} must be {want}, found {_json_type(value)}")
    return value


def _number(obj: dict, key: str, where: str, source: str, lo=None, hi=None,
            required=True) -> float | None:
    value = obj.get(key)
    if value is None:
        if required:
            raise UserError(f"{source}: {_join(where, key)} is missing")
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise UserError(f"{source}: {_join(where, key)} must be a number, found {value!r}")
    if (lo is not None and value < lo) or (hi is not None and value > hi):
        raise UserError(f"{source}: {_join(where, key)} = {value} is outside [{lo}, {hi}]")
    return float(value)


def _text(obj: dict, key: str, where: str, source: str, required=True) -> str | None:
    value = obj.get(key)
    if value is None and not required:
        return None
    if not isinstance(value, str) or not value.strip():
        found = "missing" if value is None else f"{value!r}, not a text"
        raise UserError(f"{source}: {_join(where, key)} is {found}")
    # Checked here, not left to icalendar: a CR or LF would end a calendar line and start a
    # forged one, and icalendar's own check is an assert, which python -O removes.
    check_plain(value, source, _join(where, key))
    return value.strip()


def _warnings(doc: dict, source: str) -> list[str]:
    """The plan's warning texts (they head the calendar's description), checked like ``_text``."""
    texts = [w for w in doc.get("warnings") or [] if isinstance(w, str)]
    for i, text in enumerate(texts):
        check_plain(text, source, f"warnings[{i}]")
    return texts


def _instant(obj: dict, key: str, where: str, source: str) -> datetime:
    """Aware UTC datetime, rounded to the second, from an ISO 8601 text with Z or offset."""
    text = _text(obj, key, where, source)
    try:
        moment, leap = parse_iso(text)  # second 60 reads as 59: a datetime has no leap second
    except ValueError:
        raise UserError(f"{source}: {_join(where, key)}: '{text}' is not an ISO 8601 time "
                        "(e.g. 2027-03-01T21:30:00Z)") from None
    if moment.tzinfo is None:
        raise UserError(f"{source}: {_join(where, key)}: '{text}' has no Z or UTC offset")
    try:
        if leap:
            leap_instant_mjd(moment, text)
        moment = moment.astimezone(timezone.utc)
        check_supported(moment.date(), f"{source}: {_join(where, key)}")
    except (LeapSecondError, OverflowError) as exc:
        why = str(exc) if isinstance(exc, LeapSecondError) else "outside the dates hiplan supports"
        raise UserError(f"{source}: {_join(where, key)}: {why}") from None
    return (moment + timedelta(microseconds=500_000)).replace(microsecond=0)


def _span(obj: dict, start_key: str, end_key: str, where: str, source: str, outward: bool = True):
    """Start and end as shown to people: whole minutes by the one rule of every output
    (``planfile.shown_span``: outward for what is recorded, inward for a window to act in)."""
    start = _instant(obj, start_key, where, source)
    end = _instant(obj, end_key, where, source)
    if end <= start:  # RFC 5545 section 3.8.2.2: DTEND later than DTSTART
        raise UserError(f"{source}: {_join(where, end_key)} is not after {start_key}")
    shown = shown_span(start, end, outward)
    return shown if shown[1] > shown[0] else (start, end)  # a window shorter than a minute


def _join(where: str, key: str) -> str:
    return f"{where}.{key}" if where else key


def _zone(site: dict, source: str) -> ZoneInfo:
    name = _text(site, "timezone", "site", source)
    try:
        return ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError):
        raise UserError(f"{source}: site.timezone '{name}' is not a known IANA time zone "
                        "(e.g. Europe/London)") from None


def _alarm_lead(doc: dict, alarm_minutes, source: str) -> int:
    if alarm_minutes is not None:
        value, name = alarm_minutes, "alarm_minutes"
    else:
        settings = _member(doc, "settings", "", source, required=False) or {}
        value = _number(settings, "alarm_minutes", "settings", source, required=False)
        value, name = (DEFAULT_ALARM_MINUTES if value is None else value), "settings.alarm_minutes"
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise UserError(f"{source}: {name} must be a number of minutes, found {value!r}")
    if not 0 <= value <= MAX_ALARM_MINUTES or value != int(value):
        raise UserError(f"{source}: {name} = {value} is not a whole number of minutes in "
                        f"[0, {MAX_ALARM_MINUTES}]")
    return int(value)


# ------------------------------------------------------------------- events

def plan_events(doc: dict, source: str = "plan") -> list[PlanEvent]:
    """The calendar tasks of a checked plan document, in time order."""
    kind = _schema_kind(doc, source)
    site = _member(doc, "site", "", source)
    _text(site, "name", "site", source)
    _number(site, "latitude_deg", "site", source, -90, 90)
    _number(site, "longitude_deg", "site", source, -180, 360)
    tz = _zone(site, source)
    settings = _member(doc, "settings", "", source, required=False) or {}
    events = (_drift_events(doc, site, settings, tz, source) if kind == "drift"
              else _survey_events(doc, site, tz, source))
    return sorted(events, key=lambda e: (e.start_utc, EVENT_KINDS.index(e.kind)))


def _drift_events(doc, site, settings, tz, source) -> list[PlanEvent]:
    bin_width_deg = _number(settings, "bin_width_deg", "settings", source, 0, 360,
                            required=False) or 1.0
    events = []
    for i, day in enumerate(_member(doc, "days", "", source, kind=list)):
        where = f"days[{i}]"
        if not isinstance(day, dict):
            raise UserError(f"{source}: {where} must be an object, found {_json_type(day)}")
        recordings = _member(day, "recordings", where, source, kind=list, required=False) or []
        park = _member(day, "park", where, source, required=bool(recordings))
        if park is not None:
            park = _park(park, f"{where}.park", source)
        tuning = _member(day, "tuning", where, source, required=False)
        centre_mhz = (None if tuning is None
                      else _number(tuning, "centre_mhz", f"{where}.tuning", source, 0))
        windows = []
        for j, rec in enumerate(recordings):
            rec_where = f"{where}.recordings[{j}]"
            if not isinstance(rec, dict):
                raise UserError(f"{source}: {rec_where} must be an object, found {_json_type(rec)}")
            # A recording before a move that day belongs to the previous setting: a plan
            # records each recording's own dish setting in "dish".
            rec_park = park
            if isinstance(rec.get("dish"), dict):
                rec_park = _park({**rec["dish"], "move": False}, f"{rec_where}.dish", source)
            windows.append(_recording(rec, rec_where, rec_park, tuning, centre_mhz, bin_width_deg,
                                      site, tz, source))
        if park is not None and park["move"]:
            park["retune"] = (tuning or {}).get("retune") is not False
            events.append(_repark(park, windows, centre_mhz, site, tz))
        events.extend(event for event, _ in windows)
        hazards = _member(day, "sun_hazards", where, source, kind=list, required=False) or []
        for j, hazard in enumerate(hazards):
            events.append(_sun_hazard(hazard, f"{where}.sun_hazards[{j}]", site, tz, source))
        calibrations = _member(day, "calibrations", where, source, kind=list, required=False) or []
        for j, cal in enumerate(calibrations):
            if isinstance(cal, dict) and cal.get("task"):
                events.append(_calibration(cal, f"{where}.calibrations[{j}]", park, centre_mhz,
                                           site, tz, source))
    return events


def _calibration(cal, where, park, centre_mhz, site, tz, source) -> PlanEvent:
    """A pass of an IAU standard HI region through the parked beam: record it to check the scale."""
    start, end = _span(cal, "start_utc", "end_utc", where, source)
    name = _text(cal, "region", where, source)
    peak = _number(cal, "expected_peak_k", where, source, 0, 1000)
    closest = _instant(cal, "closest_utc", where, source)
    summary = f"Calibrate: record the {name} pass ({closest.astimezone(tz):%H:%M}), about {peak:.0f} K"
    lines = [
        f"The IAU standard HI region {name} drifts through the beam, "
        f"{_clock_span(start, end, tz)} ({tz.key} time), closest at "
        f"{closest.astimezone(tz):%H:%M}.",
        f"Record it as any recording; the line should peak near {peak:.0f} K in this beam. The "
        "peak in your counts (or dB) above the line-free level gives the counts-to-kelvin scale "
        "and the system temperature.",
    ]
    if park is not None:
        lines.append(f"Dish: leave it parked at {_pointing_text(park)}.")
    lines += _receiver_lines(None, centre_mhz) if centre_mhz is not None else []
    lines += ["", SAFETY_TEXT]
    return PlanEvent("calibration", start, end, summary, "\n".join(lines),
                     _identity(site, "calibration", closest, name))


def _sun_hazard(hazard, where, site, tz, source) -> PlanEvent:
    """A time the Sun comes too near the feed as planned: the operator must act before it."""
    if not isinstance(hazard, dict):
        raise UserError(f"{source}: {where} must be an object, found {_json_type(hazard)}")
    start, end = _span(hazard, "from_utc", "to_utc", where, source)
    action = _text(hazard, "action", where, source)
    sep = _number(hazard, "sep_deg", where, source, 0, 180)
    summary = f"SUN HAZARD: cover the feed or move the dish before {start.astimezone(tz):%H:%M}"
    lines = [
        f"The Sun comes within the feed-safety limit of the dish ({sep:.1f}° at closest), "
        f"{_clock_span(start, end, tz)} ({tz.key} time).",
        action,
        "A dish focuses sunlight on its feed: plastic covers and the LNA can melt or burn. "
        "Never look along the dish axis toward the Sun.",
        "", SAFETY_TEXT,
    ]
    return PlanEvent("sun-hazard", start, end, summary, "\n".join(lines),
                     _identity(site, "sun-hazard", start, ""))


def _park(park: dict, where: str, source: str) -> dict:
    move = park.get("move", False)
    if not isinstance(move, bool):
        raise UserError(f"{source}: {where}.move must be true or false, found {move!r}")
    out = {
        "alt_deg": _number(park, "alt_deg", where, source, -90, 90),
        "az_deg": _number(park, "az_deg", where, source, -360, 360),
        "dec_deg": _number(park, "dec_deg", where, source, -90, 90, required=False),
        "facing": park.get("facing") if park.get("facing") in ("north", "south") else None,
        "below_pole": park.get("culmination") == "lower",
        "move": move,
    }
    if move:
        out["start"], out["end"] = _span(park, "move_start_utc", "move_end_utc", where, source,
                                         outward=False)
    return out


def _recording(rec, where, park, tuning, centre_mhz, bin_width_deg, site, tz,
               source) -> tuple[PlanEvent, str]:
    """The recording's event and its short longitude range ('54–57°')."""
    start, end = _span(rec, "start_utc", "end_utc", where, source)
    l_start = _number(rec, "l_start_deg", where, source, -360, 360)
    l_end = _number(rec, "l_end_deg", where, source, -360, 360)
    bins = rec.get("l_bins") or []
    if not isinstance(bins, list) or not all(_is_number(b) for b in bins):
        raise UserError(f"{source}: {where}.l_bins must be a list of numbers")
    new_bins = rec.get("new_bins") or []
    if not isinstance(new_bins, list) or not all(_is_number(b) for b in new_bins):
        raise UserError(f"{source}: {where}.new_bins must be a list of numbers")
    l_text = _l_range(l_start, l_end)
    summary = f"HI recording l {l_text} (dish {_dish_short(park)})"
    lines = [
        f"HI drift recording, {_clock_span(start, end, tz)} "
        f"({_minutes(start, end)} min, {tz.key} time).",
        f"Dish: leave it parked at {_pointing_text(park)}; do not move it while recording.",
    ]
    lines += _receiver_lines(tuning, centre_mhz)
    sky = f"Sky: galactic longitude l {l_start:.1f}° → {l_end:.1f}° drifts through the beam"
    if bins:
        sky += f" ({bin_width_deg:g}° bins {_bins_text(bins, bin_width_deg)})"
    sky += "."
    if new_bins:
        sky += (f" Bins {_bins_text(new_bins, bin_width_deg)} reach the target depth with "
                "this recording.")
    lines.append(sky)
    lines += _lsr_lines(rec, where, source)
    lines += _sun_moon_lines(rec, where, source)
    lines += ["", SAFETY_TEXT]
    # Bins, not the exact longitudes, so a recomputed plan keeps the UID.
    ident_bins = (f"{bins[0]:g}..{bins[-1]:g}" if bins else f"{l_start:.0f}..{l_end:.0f}")
    event = PlanEvent("recording", start, end, summary, "\n".join(lines),
                      _identity(site, "recording", start, ident_bins))
    return event, l_text


def _repark(park, windows, centre_mhz, site, tz) -> PlanEvent:
    start, end = park["start"], park["end"]
    if park["facing"]:
        summary = f"Move dish to elevation {park['alt_deg']:.1f}° facing {park['facing']}"
    else:
        summary = (f"Move dish to elevation {park['alt_deg']:.1f}°, "
                   f"azimuth {park['az_deg'] % 360:.1f}°")
    lines = [
        f"Re-park the dish between {_clock_span(start, end, tz, sep=' and ')} "
        f"({tz.key} time).",
        f"Set it to {_pointing_text(park)}, then leave it parked there until the next "
        "re-park task.",
    ]
    if centre_mhz is not None:
        lines.append(f"Receiver: set the centre frequency to {centre_mhz:.3f} MHz for today's "
                     "recordings." if park.get("retune", True) else
                     f"Receiver: leave the centre frequency at {centre_mhz:.3f} MHz.")
    if windows:
        lines.append("Today's recordings from this pointing: "
                     + "; ".join(f"{_clock_span(w.start_utc, w.end_utc, tz)} (l {l_text})"
                                 for w, l_text in windows) + ".")
    lines += ["", SAFETY_TEXT]
    return PlanEvent("repark", start, end, summary, "\n".join(lines),
                     _identity(site, "repark", start, ""))


def _survey_events(doc, site, tz, source) -> list[PlanEvent]:
    """One event per target or reference block. Only the first event of an observing session
    (``planfile.survey_sessions``) has a reminder and a line about the session; the safety text
    and the drive-azimuth note come with the first event of each session and of each local day
    (a session running past midnight tells them again after it)."""
    blocks = _member(doc, "blocks", "", source, kind=list)
    events = []
    slews: list[tuple[datetime, datetime]] = []
    stowed: str | None = None  # the stow the dish comes from, for the next block's description
    session_of: dict[int, int] = {}  # id(block) -> session number
    for i, block in enumerate(blocks):
        where = f"blocks[{i}]"
        if not isinstance(block, dict):
            raise UserError(f"{source}: {where} must be an object, found {_json_type(block)}")
        kind = block.get("kind")
        if kind not in SURVEY_BLOCK_KINDS:
            raise UserError(f"{source}: {where}.kind is {kind!r}; expected "
                            f"{', '.join(SURVEY_BLOCK_KINDS[:-1])} or {SURVEY_BLOCK_KINDS[-1]}")
        if kind == "stow":
            stowed = _stow_text(block, slews, tz, where, source)
            if events:  # told after the block before it; no task: the mount does it
                last = events[-1]
                events[-1] = replace(last, description=f"{last.description}\nAfterwards: {stowed}")
            slews = []
            continue
        start, end = _span(block, "start_utc", "end_utc", where, source)
        if kind == "slew":
            slews.append((start, end))
            continue
        events.append(_block(block, kind, start, end, slews, site, tz, where, source, stowed))
        session_of[len(events) - 1] = id(block)
        slews, stowed = [], None
    number = {id(b): n for n, session in enumerate(survey_sessions(blocks)) for b in session}
    out, seen_sessions, seen_days = [], set(), set()
    for k, event in enumerate(events):
        session = number[session_of[k]]
        first_of_session = session not in seen_sessions
        seen_sessions.add(session)
        day = event.start_utc.astimezone(tz).date()
        lines = [event.description]
        if first_of_session:
            mine = [e for j, e in enumerate(events) if number[session_of[j]] == session]
            lines.insert(0, f"Session start: {len(mine)} block{'s' if len(mine) != 1 else ''}, "
                            f"{_clock_span(mine[0].start_utc, mine[-1].end_utc, tz)} "
                            f"({tz.key} time). This is the session's only reminder.")
        if first_of_session or day not in seen_days:
            seen_days.add(day)
            lines += ["", DRIVE_AZIMUTH_TEXT, "", SAFETY_TEXT]
        out.append(replace(event, description="\n".join(lines), alarm=first_of_session))
    return out


def _stow_text(block, slews, tz, where, source) -> str:
    """'the mount stows the dish (safe from the Sun) at elevation 34.9°, drive azimuth 180.0°, ...'"""
    start = _instant(block, "start_utc", where, source)
    end = _instant(block, "end_utc", where, source)
    if end < start:
        raise UserError(f"{source}: {_join(where, 'end_utc')} is before start_utc")
    start, end = shown_span(start, end)
    alt = _number(block, "alt_start_deg", where, source, -90, 90)
    drive = _number(block, "drive_az_start_deg", where, source, -720, 720)
    moved = f" (moving {_clock_span(slews[0][0], start, tz)})" if slews else ""
    return (f"the mount stows the dish (safe from the Sun) at elevation {alt:.1f}°, drive "
            f"azimuth {drive:.1f}°{moved}, and leaves it there until "
            f"{end.astimezone(tz):%a %d %b %H:%M} ({tz.key} time).")


def _block(block, kind, start, end, slews, site, tz, where, source,
           stowed: str | None = None) -> PlanEvent:
    name = _text(block, "name", where, source)
    alt0 = _number(block, "alt_start_deg", where, source, -90, 90)
    az0 = _number(block, "az_start_deg", where, source, -360, 720) % 360
    alt1 = _number(block, "alt_end_deg", where, source, -90, 90, required=False)
    az1 = _number(block, "az_end_deg", where, source, -360, 720, required=False)
    drive0 = _number(block, "drive_az_start_deg", where, source, -720, 720, required=False)
    drive1 = _number(block, "drive_az_end_deg", where, source, -720, 720, required=False)
    what = {"target": "", "calibration": "standard region "}.get(kind, "reference ")
    summary = (f"Point dish at {what}{name} (az {az0:.0f}°, el {alt0:.0f}°)" if drive0 is None
               else f"Point dish at {what}{name} (drive az {drive0:.0f}°, el {alt0:.0f}°)")
    role = {"target": "target", "calibration": "IAU standard HI region, for calibration"}.get(
        kind, "reference position")
    lines = [f"Observe {name} ({role}), {_clock_span(start, end, tz)} "
             f"({_minutes(start, end)} min, {tz.key} time)."]
    if stowed:
        lines.append(f"Before this: {stowed}")
    for s0, s1 in slews:
        lines.append(f"First the dish slews into position, {_clock_span(s0, s1, tz)} "
                     f"({_minutes(s0, s1)} min).")
    if drive0 is None:  # a plan without drive angles: sky azimuths only
        point = f"Point the dish at azimuth {az0:.1f}°, elevation {alt0:.1f}°"
        if alt1 is not None and az1 is not None:
            point += (f"; the mount tracks to azimuth {az1 % 360:.1f}°, elevation {alt1:.1f}° "
                      "by the end")
        lines.append(point + " (azimuth from north through east).")
    else:
        point = f"Set the drive to azimuth {_drive_text(drive0, az0)}, elevation {alt0:.1f}°"
        if alt1 is not None and drive1 is not None:
            end_sky = az1 % 360 if az1 is not None else drive1 % 360
            point += (f"; the mount tracks to drive azimuth {_drive_text(drive1, end_sky)}, "
                      f"elevation {alt1:.1f}° by the end")
        lines.append(point + ".")
    l_deg = _number(block, "l_deg", where, source, -360, 360, required=False)
    b_deg = _number(block, "b_deg", where, source, -90, 90, required=False)
    ra_deg = _number(block, "ra_deg", where, source, -360, 360, required=False)
    dec_deg = _number(block, "dec_deg", where, source, -90, 90, required=False)
    pos = []
    if l_deg is not None and b_deg is not None:
        pos.append(f"l {l_deg:.1f}°, b {b_deg:+.1f}°")
    if ra_deg is not None and dec_deg is not None:
        pos.append(f"RA {ra_deg:.2f}°, Dec {dec_deg:+.2f}° (ICRS)")
    if pos:
        lines.append("Position: " + "; ".join(pos) + ".")
    action = _text(block, "action", where, source, required=False) if kind == "calibration" else None
    if action:
        lines.append(action)
    tuning = _member(block, "tuning", where, source, required=False)
    centre_mhz = None if tuning is None else _number(tuning, "centre_mhz", f"{where}.tuning",
                                                     source, 0)
    lines += _receiver_lines(tuning, centre_mhz)
    lines += _lsr_lines(block, where, source)
    lines += _sun_moon_lines(block, where, source)
    return PlanEvent(kind, start, end, summary, "\n".join(lines),
                     _identity(site, kind, start, name))


def _drive_text(drive_deg: float, sky_deg: float) -> str:
    """'-10.0° (sky 350.0°)': the drive (cable-wrap) azimuth, with the sky azimuth where they differ."""
    if abs(drive_deg - sky_deg % 360) < 0.05:
        return f"{drive_deg:.1f}°"
    return f"{drive_deg:.1f}° (sky {sky_deg % 360:.1f}°)"


def _identity(site: dict, kind: str, start_utc: datetime, extra: str) -> str:
    # To the minute: a recomputed plan moves times by fractions of a second.
    return f"{site['name'].strip()}|{kind}|{start_utc:%Y-%m-%dT%H:%MZ}|{extra}"


def _is_number(value) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


# ------------------------------------------------------------------- wording

def _l_range(l_start_deg: float, l_end_deg: float) -> str:
    a, b = round(l_start_deg) % 360, round(l_end_deg) % 360
    return f"{a}°" if a == b else f"{a}–{b}°"


def _dish_short(park: dict | None) -> str:
    if park is None:
        return "parked"
    if park["facing"]:
        return f"{park['alt_deg']:.1f}° {park['facing'][0].upper()}"
    return f"el {park['alt_deg']:.1f}°, az {park['az_deg'] % 360:.0f}°"


def _pointing_text(park: dict) -> str:
    text = f"elevation {park['alt_deg']:.1f}°, azimuth {park['az_deg'] % 360:.1f}°"
    extras = []
    if park["facing"]:
        extras.append(f"facing {park['facing']}")
    if park["dec_deg"] is not None:
        extras.append(f"declination {park['dec_deg']:+.1f}°")
    if park.get("below_pole"):
        extras.append("below the pole")
    return text + (f" ({', '.join(extras)})" if extras else "")


def _receiver_lines(tuning: dict | None, centre_mhz: float | None) -> list[str]:
    if centre_mhz is None:
        return []
    line = (f"Receiver: RETUNE today to centre frequency {centre_mhz:.3f} MHz (kept until the "
            f"next retune)" if (tuning or {}).get("retune") is True
            else f"Receiver: centre frequency {centre_mhz:.3f} MHz")
    low, high = (tuning or {}).get("line_low_mhz"), (tuning or {}).get("line_high_mhz")
    if _is_number(low) and _is_number(high):
        line += f"; the HI line is expected between {low:.3f} and {high:.3f} MHz"
    line += "."
    if (tuning or {}).get("fits") is False:
        line += " The expected line is wider than the usable band on this setting."
    return [line]


def _lsr_lines(obj: dict, where: str, source: str) -> list[str]:
    lo = _number(obj, "lsr_corr_min_kms", where, source, required=False)
    hi = _number(obj, "lsr_corr_max_kms", where, source, required=False)
    if lo is None or hi is None:
        return []
    return [f"Doppler: LSR correction {lo:+.1f} to {hi:+.1f} km/s during this time "
            "(added to a topocentric velocity it gives the LSR velocity)."]


def _sun_moon_lines(obj: dict, where: str, source: str) -> list[str]:
    parts = []
    sun = _number(obj, "sun_sep_min_deg", where, source, 0, 180, required=False)
    moon = _number(obj, "moon_sep_min_deg", where, source, 0, 180, required=False)
    if sun is not None:
        parts.append(f"Sun at least {sun:.0f}° from the beam")
    if moon is not None:
        parts.append(f"Moon at least {moon:.0f}°")
    night = obj.get("night")
    if isinstance(night, bool):
        parts.append("at night" if night else "in daylight")
    return ["; ".join(parts) + "."] if parts else []


def _bins_text(bins: list, width_deg: float) -> str:
    """Bin starts as runs: [53, 54, 55, 58] -> '53–55, 58' (runs may wrap through 360)."""
    runs: list[list[float]] = []
    for b in bins:
        if runs and math.isclose((b - runs[-1][-1]) % 360.0, width_deg, abs_tol=1e-6):
            runs[-1].append(b)
        else:
            runs.append([b])
    return ", ".join(f"{r[0]:g}" if len(r) == 1 else f"{r[0]:g}–{r[-1]:g}" for r in runs)


def _minutes(start: datetime, end: datetime) -> int:
    return round((end - start).total_seconds() / 60)


def _clock_span(start_utc: datetime, end_utc: datetime, tz: ZoneInfo, sep: str = "–") -> str:
    """'02:20–03:15 BST'; zone names at both ends across a clock change, and
    weekday and date when the span runs past midnight."""
    a, b = start_utc.astimezone(tz), end_utc.astimezone(tz)
    form = "%a %d %b %H:%M" if a.date() != b.date() else "%H:%M"
    if a.tzname() != b.tzname():
        joiner = " – " if sep == "–" else sep
        return f"{a:{form}} {a.tzname()}{joiner}{b:{form}} {b.tzname()}"
    return f"{a:{form}}{sep}{b:{form}} {b.tzname()}"


# ------------------------------------------------------------------- calendar

def plan_calendar(doc: dict, alarm_minutes: int | None = None,
                  stamp_utc: datetime | None = None) -> icalendar.Calendar:
    """An RFC 5545 calendar of a plan's tasks.

    ``alarm_minutes``: reminder lead before each event start (default the
    plan's ``settings.alarm_minutes``, else 15). ``stamp_utc``: DTSTAMP of every
    event (default now). Raises UserError for a plan that fails ``check_plan``.
    """
    events = plan_events(doc, "plan")
    lead_min = _alarm_lead(doc, alarm_minutes, "plan")
    site = doc["site"]
    tz = ZoneInfo(site["timezone"].strip())
    stamp = _stamp(stamp_utc)
    name = site["name"].strip()
    cal = icalendar.Calendar()
    cal.add("prodid", PRODID)
    cal.add("version", "2.0")
    cal.add("calscale", "GREGORIAN")
    # TEXT values (RFC 5545 section 3.3.11: commas and semicolons escaped). icalendar
    # escapes SUMMARY, DESCRIPTION and LOCATION itself but writes NAME and X-WR-CALNAME,
    # which it does not know, as given: vText makes it escape them too.
    cal.add("x-wr-calname", icalendar.vText(f"HI plan - {name}"))
    cal.add("name", icalendar.vText(f"HI plan - {name}"))  # RFC 7986 section 5.1
    warnings = _warnings(doc, "plan")
    notes = [f"hiplan {doc.get('kind', '')} plan for {name}; times in {tz.key}, starts rounded "
             "down and ends up to the minute. A task keeps its UID when the plan is exported again."]
    if doc.get("kind") == "survey":
        settings = doc.get("settings") if isinstance(doc.get("settings"), dict) else {}
        lo, hi = settings.get("azimuth_min_deg"), settings.get("azimuth_max_deg")
        if _is_number(lo) and _is_number(hi):
            notes.append(f"This mount's azimuth drive runs from {lo:g}° to {hi:g}°.")
        notes += [DRIVE_AZIMUTH_TEXT, "One reminder per observing session, before its first block."]
    cal.add("description", " ".join(warnings + notes))
    first, last = _coverage(doc, events)
    cal.add_component(vtimezone(tz, first, last))
    for ev in events:
        cal.add_component(_vevent(ev, site, tz, stamp, lead_min))
    missing = cal.get_missing_tzids()
    if missing:  # a TZID without its VTIMEZONE makes the file invalid: a bug here
        raise RuntimeError(f"no VTIMEZONE written for {sorted(missing)}")
    return cal


def calendar_bytes(cal: icalendar.Calendar) -> bytes:
    """The calendar as RFC 5545 octets (UTF-8, CRLF line ends, folded at 75 octets)."""
    return cal.to_ical()


def event_uid(identity: str) -> str:
    """Stable UID: UUID version 5 (SHA-1, RFC 4122 section 4.3) of ``identity``."""
    return str(uuid.uuid5(UID_NAMESPACE, identity))


def _stamp(stamp_utc: datetime | None) -> datetime:
    if stamp_utc is None:
        stamp_utc = datetime.now(timezone.utc)
    if stamp_utc.tzinfo is None:
        raise ValueError("stamp_utc must be an aware datetime")
    return stamp_utc.astimezone(timezone.utc).replace(microsecond=0)


def _vevent(ev: PlanEvent, site: dict, tz: ZoneInfo, stamp: datetime, lead_min: int):
    vevent = icalendar.Event()
    vevent.add("uid", event_uid(ev.identity))
    vevent.add("dtstamp", stamp)
    vevent.add("dtstart", _wall_or_utc(ev.start_utc, tz))
    vevent.add("dtend", _wall_or_utc(ev.end_utc, tz))
    vevent.add("summary", ev.summary)
    vevent.add("description", ev.description)
    vevent.add("location", site["name"].strip())
    # RFC 5545 section 3.8.1.6: six decimals (about 0.1 m) are plenty.
    vevent.add("geo", (round(float(site["latitude_deg"]), 6),
                       round(float(site["longitude_deg"]), 6)))
    vevent.add("categories", ["hiplan", _CATEGORY[ev.kind]])
    if not ev.alarm:
        return vevent
    if ev.kind == "sun-hazard":
        lead_min = max(lead_min, HAZARD_ALARM_MINUTES)
    alarm = icalendar.Alarm()
    alarm.add("action", "DISPLAY")
    alarm.add("trigger", timedelta(minutes=-lead_min))
    when = f"in {lead_min} min" if lead_min else "now"
    alarm.add("description", f"{ev.summary} - starts {when}")
    vevent.add_component(alarm)
    return vevent


def _wall_or_utc(moment_utc: datetime, tz: ZoneInfo) -> datetime:
    """Local aware time, or UTC when the local wall clock is the second of two
    (RFC 5545 section 3.3.5: a repeated local time means its first occurrence)."""
    local = moment_utc.astimezone(tz)
    if local.fold and local.replace(fold=0).utcoffset() != local.utcoffset():
        return moment_utc
    return local


def _coverage(doc: dict, events: list[PlanEvent]) -> tuple[datetime, datetime]:
    """UTC span the VTIMEZONE must describe: the events and the plan period."""
    moments = [e.start_utc for e in events] + [e.end_utc for e in events]
    period = doc.get("period")
    if isinstance(period, dict):
        for key in ("start_utc", "end_utc"):
            try:
                moments.append(_instant(period, key, "period", "plan"))
            except UserError:
                pass  # the period is informative here; the events decide
    if not moments:
        now = datetime.now(timezone.utc)
        return now, now
    return min(moments), max(moments)


def vtimezone(tz: ZoneInfo, first_utc: datetime, last_utc: datetime) -> icalendar.Timezone:
    """VTIMEZONE for ``tz`` over the whole local years holding [first_utc, last_utc].

    One observance sub-component per offset change, DTSTART being the onset as
    a local time in the offset before the change (TZOFFSETFROM), as in the
    RFC 5545 section 3.6.5 examples (a 02:00 EST onset for US daylight time).
    """
    start = datetime(first_utc.astimezone(tz).year, 1, 1, tzinfo=tz).astimezone(timezone.utc)
    end = datetime(last_utc.astimezone(tz).year + 1, 1, 1, tzinfo=tz).astimezone(timezone.utc)
    comp = icalendar.Timezone()
    comp.add("tzid", tz.key)
    opening = start.astimezone(tz)
    comp.add_component(_observance(opening.replace(tzinfo=None), opening, opening.utcoffset()))
    for onset_utc, offset_from in _transitions(tz, start, end):
        after = onset_utc.astimezone(tz)
        wall = (onset_utc + offset_from).replace(tzinfo=None)
        comp.add_component(_observance(wall, after, offset_from))
    return comp


def _observance(onset_wall: datetime, after: datetime, offset_from: timedelta):
    dst = after.dst()
    daylight = dst is not None and dst > timedelta(0)
    sub = icalendar.TimezoneDaylight() if daylight else icalendar.TimezoneStandard()
    sub.add("dtstart", onset_wall)
    sub.add("tzoffsetfrom", offset_from)
    sub.add("tzoffsetto", after.utcoffset())
    sub.add("tzname", after.tzname() or _offset_name(after.utcoffset()))
    return sub


def _offset_name(offset: timedelta) -> str:
    minutes = round(offset.total_seconds() / 60)
    sign = "+" if minutes >= 0 else "-"
    return f"UTC{sign}{abs(minutes) // 60:02d}{abs(minutes) % 60:02d}"


def _transitions(tz: ZoneInfo, start_utc: datetime, end_utc: datetime):
    """(first instant of the new offset, offset before) for each change in [start, end).

    ``zoneinfo`` has no public transition list, so the offset is sampled daily
    (no zone changes offset twice within a day) and each change is bisected to
    the second (tz database transitions fall on whole seconds).
    """
    day = timedelta(days=1)
    out = []
    t = start_utc
    before = t.astimezone(tz).utcoffset()
    while t < end_utc:
        nxt = min(t + day, end_utc)
        after = nxt.astimezone(tz).utcoffset()
        if after != before:
            lo, hi = t, nxt
            while hi - lo > timedelta(seconds=1):
                mid = lo + (hi - lo) / 2
                mid = mid.replace(microsecond=0)
                if mid.astimezone(tz).utcoffset() == before:
                    lo = mid
                else:
                    hi = mid
            out.append((hi, before))
            before = after
        t = nxt
    return out
