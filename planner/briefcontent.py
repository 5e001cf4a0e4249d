"""What an operator brief says: its content, built from a drift or survey plan.

The brief is a small tree (``Brief`` -> ``Section`` -> blocks: ``Paragraph``, ``Bullets``,
``Table``, ``Charts``, ``Figure``) made once per plan; ``planner.brief`` lays it out as HTML or
Markdown through the templates in ``planner/templates/``, so the two formats always say the
same. Pure: nothing here touches files or formats markup, and nothing computes astronomy beyond
reading the plan (the one conversion, where the band-centre spike lands, uses
``planner.spectral`` when an older plan lacks it). Strings stay plain text: the templates
escape every one of them.

Extension points (keep additions small and in their own builder functions):

* ``DRIFT_SECTIONS`` / ``SURVEY_SECTIONS``: the section builders of each kind of brief, in page
  order. A builder takes the plan document and returns a ``Section``, or None to leave it out.
* ``SAFETY_NOTES``: functions ``(doc) -> iterable of (lead, text)`` whose items are added to
  the "Safety first" cautions of every brief (after the plan's own ``warnings``).
* A plan's ``warnings`` list (either kind) is shown first, in the safety section.
"""
from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from typing import Callable, ClassVar

from .errors import UserError
from .planfile import (DRIFT_SCHEMA, PLAN_SCHEMAS, SESSION_GAP_MIN, SURVEY_SCHEMA,  # noqa: F401
                       shown_span, survey_sessions)
from .spectral import radio_velocity_kms
from .windows import describe_window_texts


# Charts in the order they appear; other keys follow alphabetically.
CHART_CAPTIONS = {
    "month": "The month at a glance: when each passage happens and which ones to record.",
    "depth": "Integration depth per longitude bin, before and after this plan.",
    "survey": "The schedule: which position the dish points at, when, and its elevation.",
    "sky": "The visiting order on the sky.",
}

SKIP_REASONS = {
    "sun": "too near the Sun",
    "daylight": "in daylight",
    "outside windows": "outside your hours",
    "not wanted": "longitudes not needed",
}

MOUNT_TEXT = {
    "transit": "meridian transit mount (elevation set by hand; the dish stays parked)",
    "fixed": "fixed mount (the dish stays parked)",
    "altaz": "motorised alt-az mount",
}

# Safety cautions, as in the README's Safety section.
SAFETY = (
    ("The Sun.", "A dish pointed at or near the Sun focuses its heat on the feed and LNA: "
     "plastic feeds and covers can melt or catch fire, and a mesh dish can do this too. Never "
     "leave a dish parked where the Sun will cross the beam, and never look along the dish "
     "axis toward the Sun."),
    ("Roofs and masts.", "Working at height needs a second person, fall protection and a stable "
     "ladder or platform. Do not climb in wind, rain, ice or darkness."),
    ("Wind.", "A dish is a sail: stow it (face up or as its maker says) before strong wind; "
     "check the mount's fixings after storms."),
    ("Lightning.", "Ground the mount and feed-line properly and disconnect the receiver when "
     "storms are near. Never work on the antenna during a thunderstorm."),
    ("Mains power.", "Keep mains connections outdoors to weather-rated, residual-current-"
     "protected outlets, installed by a qualified person."),
    ("Receive only.", "1400–1427 MHz is a protected radio-astronomy band: never transmit in it. "
     "This plan is for receive-only observations."),
    ("Local rules win.", "Follow your local building, electrical and radio codes and licensed "
     "practice; where they say something different from this page, they win."),
)

# Practical steps when something goes wrong (common practice for volunteer-run dishes).
_RECEIVER_STEPS = (
    ("The receiver shows nothing (flat or empty spectrum).",
     "Check the LNA has power (bias-tee or supply switched on), the cables and connectors are "
     "tight and dry, the SDR is seen by the computer and is tuned to the day's centre "
     "frequency. Do not open a powered LNA or feed box in the rain."),
    ("Strong interference (spikes, a raised or jumping baseline).",
     "Keep recording unless it swamps the band, and write the local time and the frequency "
     "of the interference in the log. Never transmit anything to find the source."),
    ("The dish is stuck, makes odd noises or looks damaged.",
     "Stop. Do not force it and do not climb up alone. Switch off its power, tell the person "
     "in charge, and skip the plan until someone has checked it."),
    ("Weather warnings: strong wind, thunderstorms, ice.",
     "Stow the dish as its maker says, disconnect the receiver from the feed-line if lightning "
     "is near, and leave. The plan can wait; a missed day is only a gap in the log."),
)
GOES_WRONG_DRIFT = (
    ("You missed a re-park (the dish was not moved in its window).",
     "Skip that day's recordings: the beam points at the wrong declination, so the data would "
     "land on the wrong longitudes. Write the date and \"missed re-park\" in the observation "
     "log; the next plan will fill the gap."),
    ("A recording time has already passed.",
     "Skip it and note it in the log. Do not move the dish to catch up."),
) + _RECEIVER_STEPS
GOES_WRONG_SURVEY = (
    ("You missed a block, or the mount is late.",
     "Do not try to catch up: skip to the next block at its start time and note the missed "
     "one in the observation log."),
) + _RECEIVER_STEPS


# ------------------------------------------------------------------ content model

@dataclass(frozen=True)
class Paragraph:
    kind: ClassVar[str] = "paragraph"
    text: str
    style: str = ""            # "" | "note" | "warn"


@dataclass(frozen=True)
class Bullets:
    kind: ClassVar[str] = "bullets"
    items: tuple[tuple[str, str], ...]   # (bold lead, text)


@dataclass(frozen=True)
class Row:
    cells: tuple[tuple[str, ...], ...]   # each cell is a list of lines
    style: str = ""            # "" | "move" | "idle" | "warn" | "group" (one cell: a heading)


@dataclass(frozen=True)
class Table:
    kind: ClassVar[str] = "table"
    header: tuple[str, ...]
    rows: tuple[Row, ...]
    table_id: str = ""
    col_classes: tuple[str, ...] = ()    # HTML class per column ("" for none)


@dataclass(frozen=True)
class Charts:
    """The plan's charts (those no ``Figure`` block shows), in ``CHART_CAPTIONS`` order."""
    kind: ClassVar[str] = "charts"


@dataclass(frozen=True)
class Figure:
    """One named image (a key of the charts given to the renderer) with its caption; left out
    when the renderer has no image of that name."""
    kind: ClassVar[str] = "figure"
    key: str
    caption: str


@dataclass(frozen=True)
class Section:
    section_id: str
    title: str
    blocks: tuple
    new_page: bool = False     # printed pages: start this section on a new sheet
    style: str = ""            # "" | "safety"


@dataclass(frozen=True)
class Brief:
    title: str
    subtitle: str
    summary: str
    sections: tuple[Section, ...]
    footer: str


# ------------------------------------------------------------------ formatting helpers

def _text(value) -> str:
    """A plan string as one line of text (None as a dash)."""
    if value is None:
        return "—"
    return " ".join(str(value).split())


def _float(value) -> float | None:
    if value is None or isinstance(value, bool):
        return None
    try:
        out = float(value)
    except (TypeError, ValueError):
        return None
    return out if math.isfinite(out) else None


def _num(value, fmt: str = ".1f", unit: str = "") -> str:
    """A number with a format and unit; a non-number is shown as given, None as a dash."""
    x = _float(value)
    if x is None:
        return _text(value)
    text = format(x, fmt).replace("-", "−")
    return f"{text}{unit}"


def _deg(value, decimals: int = 1) -> str:
    return _num(value, f".{decimals}f", "°")


def _sdeg(value, decimals: int = 1) -> str:
    return _num(value, f"+.{decimals}f", "°")


def _parse_time(text) -> datetime | None:
    if not isinstance(text, str):
        return None
    try:
        return datetime.fromisoformat(text)
    except ValueError:
        return None


def _at(moment: datetime, day: date | None) -> str:
    """HH:MM of a (rounded) local time, marked when it falls on another date than ``day``."""
    out = moment.strftime("%H:%M")
    if day is not None and moment.date() != day:
        delta = (moment.date() - day).days
        out += " (next day)" if delta == 1 else f" ({moment:%a} {moment.day} {moment:%b})"
    return out


def _shown(start, end, outward: bool = True) -> tuple[datetime | None, datetime | None]:
    """Local start and end of an interval rounded as every output rounds it (``shown_span``)."""
    a, b = _parse_time(start), _parse_time(end)
    if a is None or b is None:
        return a, b
    return shown_span(a, b, outward)


def _window(start, end, day: date | None, outward: bool = True) -> str:
    """A local time window (``shown_span``): outward covers the interval, inward stays inside."""
    a, b = _shown(start, end, outward)
    return (f"{_at(a, day) if a is not None else _text(start)}–"
            f"{_at(b, day) if b is not None else _text(end)}")


def _day(value) -> date | None:
    if isinstance(value, date):
        return value
    try:
        return date.fromisoformat(str(value))
    except ValueError:
        return None


def _day_label(value, year: bool = True) -> str:
    d = _day(value)
    if d is None:
        return _text(value)
    return f"{d:%a} {d.day} {d:%b}" + (f" {d.year}" if year else "")


def _minutes_between(start, end) -> float | None:
    a, b = _parse_time(start), _parse_time(end)
    if a is None or b is None:
        return None
    return (b - a).total_seconds() / 60.0


def _bin_ranges(bins, width) -> str:
    """Bin starts as compact ranges, e.g. [55, 56, 57, 60] with width 1 -> "55–57°, 60°"."""
    values = sorted(x for x in (_float(b) for b in bins or ()) if x is not None)
    step = _float(width) or 1.0
    if not values:
        return "—"
    runs = [[values[0], values[0]]]
    for x in values[1:]:
        if abs(x - runs[-1][1] - step) < 1e-6 * step:
            runs[-1][1] = x
        else:
            runs.append([x, x])
    return ", ".join(f"{a:g}°" if a == b else f"{a:g}–{b:g}°" for a, b in runs)


def _want_text(want) -> str:
    parts = []
    for item in want or ():
        if isinstance(item, (list, tuple)) and len(item) == 2:
            parts.append(f"{_num(item[0], 'g')}–{_num(item[1], 'g')}°")
        else:
            parts.append(_text(item))
    return ", ".join(parts) if parts else "all longitudes"


def _limited(labels: list[str], most: int = 6) -> str:
    if len(labels) <= most:
        return ", ".join(labels)
    return ", ".join(labels[:most]) + f" and {len(labels) - most} more"


def _offsets(doc: dict) -> list[str]:
    """The distinct UTC offsets of the plan's local times, in order of appearance."""
    seen: list[str] = []

    def visit(node):
        if isinstance(node, dict):
            for key, value in node.items():
                if key.endswith("_local") and isinstance(value, str):
                    moment = _parse_time(value)
                    if moment is not None and moment.utcoffset() is not None:
                        label = moment.strftime("%z")
                        label = f"UTC{label[:3]}:{label[3:]}"
                        if label not in seen:
                            seen.append(label)
                else:
                    visit(value)
        elif isinstance(node, list):
            for value in node:
                visit(value)

    visit(doc)
    return seen


# ------------------------------------------------------------------ shared sections

def _clock_note(doc: dict) -> str:
    """Which clock the tables use, warning when the UTC offset changes within the plan."""
    offsets = _offsets(doc)
    zone = _text((doc.get("site") or {}).get("timezone"))
    if len(offsets) > 1:
        return (f"Times are local clock time at the site ({zone}, {' then '.join(offsets)}: "
                "the clocks change during this period).")
    return f"Times are local clock time at the site ({zone}{', ' + offsets[0] if offsets else ''})."


def _period_text(doc: dict, n_days: int | None) -> str:
    period = doc.get("period") or {}
    first = _parse_time(period.get("start_local"))
    end = _parse_time(period.get("end_local"))
    if first is None or end is None:
        return "period not given"
    # The period ends at local midnight after its last day.
    last = (end - timedelta(microseconds=1)).date()
    count = n_days if n_days is not None else (last - first.date()).days + 1
    plural = "day" if count == 1 else "days"
    if last == first.date():
        return f"{_day_label(first.date())} (1 day)"
    return f"{_day_label(first.date())} to {_day_label(last)} ({count} {plural})"


def _site_section(doc: dict) -> Section:
    site = doc.get("site") or {}
    settings = doc.get("settings") or {}
    mount = site.get("mount")
    mount_text = MOUNT_TEXT.get(mount, _text(mount)) if isinstance(mount, str) else _text(mount)
    lat, lon = _float(site.get("latitude_deg")), _float(site.get("longitude_deg"))
    where = (f"{abs(lat):.2f}° {'N' if lat >= 0 else 'S'}, {abs(lon):.2f}° {'E' if lon >= 0 else 'W'}"
             if lat is not None and lon is not None else "—")
    sun_rule = settings.get("sun_min_sep_deg", site.get("sun_min_sep_deg"))
    items = [
        ("Site:", f"{_text(site.get('name'))}, {where}, {_num(site.get('height_m'), '.0f', ' m')} "
                  f"above sea level; local time zone {_text(site.get('timezone'))}."),
        ("Mount:", f"{mount_text}."),
        ("Dish:", f"{_num(site.get('diameter_m'), 'g', ' m')} diameter, beamwidth "
                  f"{_deg(site.get('beamwidth_deg'), 2)} (half power)."),
        ("Elevation limits:", f"{_deg(site.get('elevation_min_deg'))} to "
                              f"{_deg(site.get('elevation_max_deg'))}; never set the dish outside them."),
        ("Latitude strip:", "the galactic plane strip |b| ≤ "
                            f"{_deg(site.get('b_max_deg', site.get('band_deg')))}."),  # band_deg: older plans
        ("Sun rule:", f"no recording with the beam closer than {_deg(sun_rule, 0)} to the Sun; "
                      "such passages are left out of this plan."),
    ]
    hazard_rule = settings.get("sun_hazard_deg", site.get("sun_hazard_deg"))
    if hazard_rule is not None:
        items.append(("Feed safety:", f"the plan never parks or moves the dish where the Sun comes "
                                      f"within {_deg(hazard_rule, 0)} of where it points"
                      + (", unless a SUN HAZARD task below says otherwise." if doc.get("warnings")
                         else ".")))
    return Section("site", "Site and dish", (Bullets(tuple(items)),))


def _drift_settings(doc: dict) -> Section:
    settings = doc.get("settings") or {}
    windows = settings.get("windows") or []
    rms = _float(settings.get("target_rms_k"))
    reparks = settings.get("max_reparks_per_day")
    depth = f"{_num(settings.get('target_minutes'), 'g')} min of integration per bin"
    if rms is not None:
        depth += f" (for a noise of {rms:g} K)"
    items = [
        ("Wanted longitudes:", f"{_want_text(settings.get('want'))}, in "
                               f"{_num(settings.get('bin_width_deg'), 'g')}° bins; target {depth}."),
        ("Your hours:", "; ".join(describe_window_texts(windows)) + "." if windows else "any time."),
        ("Night only:", f"yes: record only with the Sun down ({_text(settings.get('night') or 'horizon')})."
         if settings.get("night_only") else "no: daytime recordings are fine at this frequency."),
        ("Moving the dish:", f"at most {_num(reparks, 'g')} time{'' if _float(reparks) == 1 else 's'} "
                             f"a day, {_num(settings.get('repark_minutes'), 'g')} min allowed each time."),
    ]
    return Section("settings", "Plan settings", (Bullets(tuple(items)),))


def _safety_section(warnings: tuple = ()) -> Section:
    """The cautions, after any warning the plan carries (a Sun hazard the user insisted on)."""
    return Section("safety", "Safety first", warnings + (Bullets(SAFETY),), style="safety")


def _goes_wrong_section(steps) -> Section:
    return Section("goes-wrong", "If something goes wrong", (Bullets(steps),))


def _spike_kms(tuning: dict) -> tuple[float | None, float | None]:
    lo, hi = _float(tuning.get("spike_v_lsr_min_kms")), _float(tuning.get("spike_v_lsr_max_kms"))
    if lo is not None and hi is not None:
        return lo, hi
    centre = _float(tuning.get("centre_mhz"))
    c_lo, c_hi = _float(tuning.get("lsr_corr_min_kms")), _float(tuning.get("lsr_corr_max_kms"))
    if centre is None or c_lo is None or c_hi is None:
        return None, None
    # The spike sits at the centre frequency: topocentric radio velocity + LSR correction.
    v_topo_kms = float(radio_velocity_kms(centre))
    return v_topo_kms + c_lo, v_topo_kms + c_hi


def _setting_changes(tunings: list[tuple[str, dict]], most: int = 12) -> list[tuple[str, float]]:
    """(label, centre MHz) where a plan marks a retune (``tuning.retune``); empty when the plan
    does not mark them, or when there are more than ``most`` (then the table says it all)."""
    if not any(isinstance(t.get("retune"), bool) for _, t in tunings):
        return []
    out = [(label, _float(t.get("centre_mhz"))) for label, t in tunings if t.get("retune")]
    return [(label, c) for label, c in out if c is not None] if len(out) <= most else []


def _tuning_section(tunings: list[tuple[str, dict]], where: str) -> Section:
    """Receiver settings over all days (drift) or blocks (survey); ``where`` names the table."""
    if not tunings:
        return Section("tuning", "Receiver tuning", (Paragraph("Nothing to record: no tuning needed."),),
                       new_page=True)
    first = tunings[0][1]
    centres = sorted({round(c, 6) for c in (_float(t.get("centre_mhz")) for _, t in tunings)
                      if c is not None})
    changes = _setting_changes(tunings)
    if len(centres) == 1:
        centre_text = f"{centres[0]:.3f} MHz, the same for the whole plan."
    elif changes:
        centre_text = (f"{len(changes)} settings, each kept until the next: "
                       + "; ".join(f"{c:.3f} MHz from {label}" for label, c in changes)
                       + f". Retune on those days only (marked RETUNE in {where}).")
    elif centres:
        centre_text = (f"changes between {centres[0]:.3f} and {centres[-1]:.3f} MHz: set it as "
                       f"given in {where} before each recording.")
    else:
        centre_text = "not given."
    kms = _float(first.get("channel_width_kms"))
    khz = _float(first.get("channel_width_khz"))
    channel = (f"{khz:.3f} kHz = " if khz is not None else "") + (
        f"{kms:.3f} km/s" if kms is not None else "—")
    corr_lo = [x for x in (_float(t.get("lsr_corr_min_kms")) for _, t in tunings) if x is not None]
    corr_hi = [x for x in (_float(t.get("lsr_corr_max_kms")) for _, t in tunings) if x is not None]
    v_lo = [x for x in (_float(t.get("v_lsr_min_kms")) for _, t in tunings) if x is not None]
    v_hi = [x for x in (_float(t.get("v_lsr_max_kms")) for _, t in tunings) if x is not None]
    items = [("Centre frequency:", centre_text), ("Channel width:", f"{channel}.")]
    if corr_lo and corr_hi:
        items.append(("LSR correction:", f"{_num(min(corr_lo), '+.1f')} to {_num(max(corr_hi), '+.1f')} km/s "
                                         "during the recordings (added to a topocentric velocity to "
                                         "give the LSR velocity)."))
    if v_lo and v_hi:
        items.append(("Hydrogen expected:", f"LSR velocities {_num(min(v_lo), '+.1f')} to "
                                            f"{_num(max(v_hi), '+.1f')} km/s."))
    short = [(label, t) for label, t in tunings if t.get("fits") is False]
    margins = [x for x in (_float(t.get("margin_mhz")) for _, t in tunings) if x is not None]
    if not short:
        spare = f" (at least {min(margins):.3f} MHz to spare)" if margins else ""
        items.append(("Does the line fit the band?", f"Yes, every time{spare}."))
    else:
        worst = [x for x in (_float(t.get("margin_mhz")) for _, t in short) if x is not None]
        by = f" by up to {-min(worst):.3f} MHz" if worst else ""
        items.append(("Does the line fit the band?",
                      f"No on {_limited([label for label, _ in short])}: short{by}. The wings of the "
                      "line fall outside the usable band; use a wider bandwidth if the receiver "
                      "allows it."))
    inside = [(label, t) for label, t in tunings if t.get("spike_clear") is False]
    if not inside:
        items.append(("Centre spike:", "the receiver's spike at the centre frequency falls outside "
                                       "the hydrogen line every time."))
    else:
        lows, highs = zip(*(_spike_kms(t) for _, t in inside))
        lows = [x for x in lows if x is not None]
        highs = [x for x in highs if x is not None]
        at = (f" at LSR velocities {_num(min(lows), '+.1f')} to {_num(max(highs), '+.1f')} km/s"
              if lows and highs else "")
        items.append(("Centre spike:", f"falls inside the line{at} on "
                                       f"{_limited([label for label, _ in inside])}: "
                                       "blank or interpolate those channels when reducing."))
    return Section("tuning", "Receiver tuning", (Bullets(tuple(items)),), new_page=True)


# ------------------------------------------------------------------ drift plan

def _drift_day_row(day: dict, bin_width) -> Row:
    d = _day(day.get("date"))
    park = day.get("park") or {}
    facing = park.get("facing")
    setting = [f"elevation {_deg(park.get('alt_deg'))}",
               f"facing {_text(facing)}" if facing else f"azimuth {_deg(park.get('az_deg'))}",
               f"dec {_sdeg(park.get('dec_deg'))}"]
    if park.get("culmination") == "lower":
        setting.append("(below the pole)")
    moving = bool(park.get("move"))
    move = ((f"MOVE {_window(park.get('move_start_local'), park.get('move_end_local'), d, False)}",)
            if moving else ("stays",))
    recordings = []
    for rec in day.get("recordings") or ():
        line = (f"{_window(rec.get('start_local'), rec.get('end_local'), d, True)}, "
                f"l {_deg(rec.get('l_start_deg'))}→{_deg(rec.get('l_end_deg'))}, "
                f"Sun {_deg(rec.get('sun_sep_min_deg'), 0)}")
        if rec.get("new_bins"):
            line += f", completes {_bin_ranges(rec.get('new_bins'), bin_width)}"
        dish = rec.get("dish") or {}
        if moving and dish and dish.get("dec_deg") != park.get("dec_deg"):
            # Recorded before the move, with the previous setting.
            line += f" (before the move: dish still at elevation {_deg(dish.get('alt_deg'))})"
        recordings.append(line)
    hazards = [f"SUN HAZARD: {_text(h.get('action'))}" for h in day.get("sun_hazards") or ()
               if isinstance(h, dict)]
    recordings = hazards + recordings + _calibration_lines(day, d)
    tuning = day.get("tuning") or {}
    receiver = [f"{_num(tuning.get('centre_mhz'), '.3f')} MHz"] if tuning else ["—"]
    if tuning.get("retune") is True:
        receiver[0] = f"RETUNE to {receiver[0]}"
    if tuning and tuning.get("fits") is False:
        receiver.append("line does not fit")
    reasons = Counter(_text(s.get("reason")) for s in day.get("skipped") or ())
    skipped = tuple(f"{n} {SKIP_REASONS.get(r, r)}" for r, n in sorted(reasons.items())) or ("—",)
    style = "warn" if hazards else ("move" if moving else ("" if recordings else "idle"))
    label = _day_label(day.get("date"), year=False)
    if day.get("kept") is True:  # a re-planned plan's days before the re-plan: already past
        label, style = f"{label} (past)", "idle"
    return Row((
        (label,),
        tuple(setting),
        move,
        tuple(recordings) or ("nothing to record",),
        tuple(receiver),
        skipped,
        ("☐",),
    ), style)


def _calibration_lines(day: dict, d: date | None) -> list[str]:
    """The day's calibration tasks (passes of a standard HI region the plan marks ``task``)."""
    out = []
    park = day.get("park") or {}
    move = _parse_time(park.get("move_start_utc")) if park.get("move") else None
    for cal in day.get("calibrations") or ():
        if not isinstance(cal, dict) or not cal.get("task"):
            continue
        closest, _ = _shown(cal.get("closest_local"), cal.get("closest_local"))
        at = _at(closest, d) if closest is not None else _text(cal.get("closest_local"))
        line = (f"CALIBRATE: record the {_text(cal.get('region'))} pass at {at}; it should "
                f"peak near {_num(cal.get('expected_peak_k'), '.0f')} K")
        when = _parse_time(cal.get("closest_utc"))
        if move is not None and when is not None and when < move:
            line += " (before the move)"
        out.append(line)
    return out


def _drift_day_section(doc: dict) -> Section:
    days = doc.get("days") or []
    bin_width = (doc.get("settings") or {}).get("bin_width_deg", 1.0)
    header = ("Date", "Dish setting", "Move the dish", "Record (local time, longitude, Sun distance)",
              "Receiver centre", "Passages skipped", "Done")
    table = Table(header, tuple(_drift_day_row(day, bin_width) for day in days), "day-table",
                  ("when", "nb", "move nb", "nb lead", "nb", "", "done"))
    clock = _clock_note(doc)
    blocks = [
        Paragraph(f"{clock} Start each recording at or before its first time and stop at or after "
                  "its second (start times are rounded down and end times up to the minute, as in "
                  "the calendar). On a MOVE day, set the dish inside the given window; recordings "
                  "marked \"before the move\" are made with the previous setting. Otherwise leave "
                  "the dish where it is. Set the receiver centre on RETUNE days, before the day's "
                  "first recording, and leave it there until the next RETUNE.", "note"),
        table,
    ]
    reasons = Counter(_text(s.get("reason")) for day in days for s in day.get("skipped") or ())
    if reasons:
        total = sum(reasons.values())
        parts = ", ".join(f"{n} {SKIP_REASONS.get(r, r)}" for r, n in sorted(reasons.items()))
        blocks.append(Paragraph(f"Passages not to record: {total} ({parts}). The dish still "
                                "crosses the plane then; there is nothing to do."))
    return Section("days", "Day by day", tuple(blocks), new_page=True)


def _drift_coverage(doc: dict) -> Section:
    summary = doc.get("summary") or {}
    settings = doc.get("settings") or {}
    wanted = summary.get("wanted_bins")
    items = [
        ("Wanted:", f"{_num(wanted, 'g')} bins of {_num(settings.get('bin_width_deg'), 'g')}° "
                    f"({_want_text(settings.get('want'))}), each to "
                    f"{_num(settings.get('target_minutes'), 'g')} min."),
        ("Before this period:", f"{_num(summary.get('done_before'), 'g')} of {_num(wanted, 'g')} "
                                "at target depth."),
        ("After it, if the plan is followed:", f"{_num(summary.get('done_after'), 'g')} of "
                                               f"{_num(wanted, 'g')} at target depth."),
    ]
    if summary.get("upper_bound") is not None:
        items.append(("Best possible:", f"no plan under the same rules brings more than "
                                        f"{_num(summary.get('upper_bound'), 'g')} to target depth "
                                        "(a proven bound)."))
    blocks: list = [Bullets(tuple(items))]
    trade = summary.get("tradeoff") or []
    if trade:
        blocks.append(Paragraph("How often to move the dish: bins at target depth if the dish is "
                                "moved at most this many times (each with its own best plan)."))
        blocks.append(Table(("Moves at most", "Bins at target", "Moves used", "Bound"), tuple(
            Row((("any" if t.get("max_moves") is None else _num(t.get("max_moves"), "g"),),
                 (_num(t.get("bins"), "g"),), (_num(t.get("moves"), "g"),),
                 (_num(t.get("upper_bound"), "g"),))) for t in trade if isinstance(t, dict)),
            "tradeoff-table"))
    gaps = summary.get("gaps") or []
    after = summary.get("depth_after_min") or {}
    if gaps:
        rows = []
        for gap in gaps:
            bins = gap.get("bins") or []
            depths = [x for x in (_float(after.get(str(b))) for b in bins) if x is not None]
            if not depths:
                depths = [x for x in (_float(after.get(f"{_float(b):g}")) for b in bins
                                      if _float(b) is not None) if x is not None]
            reached = (f"{min(depths):.0f}–{max(depths):.0f}" if depths and min(depths) != max(depths)
                       else f"{depths[0]:.0f}" if depths else "—")
            rows.append(Row(((f"{_text(gap.get('l_range'))}°",), (str(len(bins)),), (reached,),
                             (_text(gap.get("reason")),))))
        blocks.append(Paragraph("Still short of the target after this plan:"))
        blocks.append(Table(("Longitudes", "Bins", "Depth reached (min)", "Why"), tuple(rows),
                            "gap-table"))
    else:
        blocks.append(Paragraph("No gaps: every wanted bin reaches its target depth."))
    return Section("coverage", "Coverage", tuple(blocks))


def _drift_tunings(doc: dict) -> list[tuple[str, dict]]:
    return [(_day_label(day.get("date"), year=False), day["tuning"]) for day in doc.get("days") or []
            if isinstance(day.get("tuning"), dict)]


def _drift_brief(doc: dict) -> Brief:
    site = doc.get("site") or {}
    days = doc.get("days") or []
    n_moves = sum(1 for day in days if (day.get("park") or {}).get("move"))
    recs = [r for day in days for r in day.get("recordings") or ()]
    minutes = sum(m for m in (_minutes_between(r.get("start_utc"), r.get("end_utc")) for r in recs)
                  if m is not None)
    period = _period_text(doc, len(days) or None)
    summary = (f"{len(recs)} recording{'s' if len(recs) != 1 else ''} ({minutes:.0f} min in all) "
               f"on {sum(1 for day in days if day.get('recordings'))} of {len(days)} days; "
               f"the dish is moved {n_moves} time{'s' if n_moves != 1 else ''}.")
    return Brief(f"Operator brief: {_text(site.get('name'))}",
                 f"Drift scans with a parked dish, {period}", summary,
                 _sections(DRIFT_SECTIONS, doc), f"Made by hiplan from a {DRIFT_SCHEMA} plan.")


# ------------------------------------------------------------------ survey plan

def _sessions(blocks: list[dict]) -> list[list[dict]]:
    """Blocks grouped into observing sessions (``planfile.survey_sessions``, a gap over
    SESSION_GAP_MIN starts a new one), the same grouping the calendar's reminders use."""
    return survey_sessions(blocks)


def _survey_rows(session: list[dict], number: int) -> list[Row]:
    end_key = "start_local" if session[-1].get("kind") == "stow" else "end_local"
    first, last = _shown(session[0].get("start_local"), session[-1].get(end_key))
    day = first.date() if first else None
    if first and last:
        heading = f"Session {number}: {_day_label(first.date())}, {first:%H:%M} to {_at(last, day)}"
    else:
        heading = f"Session {number}"
    slews = [b for b in session if b.get("kind") == "slew"]
    if slews:
        slew_min = sum(m for m in (_minutes_between(b.get("start_utc"), b.get("end_utc"))
                                   for b in slews) if m is not None)
        heading += f" ({len(slews)} slew{'s' if len(slews) != 1 else ''}, {slew_min:.1f} min, not listed)"
    rows = [Row(((heading,),), "group")]
    for block in session:
        kind = block.get("kind")
        if kind == "slew":
            continue
        minutes = _minutes_between(block.get("start_utc"), block.get("end_utc"))
        if kind == "stow":
            rows.append(_survey_stow_row(block, minutes, day))
            continue
        tuning = block.get("tuning") or {}
        target = (f"{_text(block.get('name'))}",
                  f"l {_deg(block.get('l_deg'))}, b {_sdeg(block.get('b_deg'))}")
        azel = _azimuth_lines(block) + (
            f"el {_deg(block.get('alt_start_deg'))}→{_deg(block.get('alt_end_deg'))}",)
        receiver = [f"{_num(tuning.get('centre_mhz'), '.3f')} MHz"] if tuning else ["—"]
        if tuning and tuning.get("fits") is False:
            receiver.append("line does not fit")
        rows.append(Row((
            (_window(block.get("start_local"), block.get("end_local"), day),),
            (_text(kind),),
            target,
            azel,
            (_num(minutes, ".1f"),),
            (_deg(block.get("sun_sep_min_deg"), 0),),
            tuple(receiver),
            ("☐",),
        )))
    return rows


def _azimuth_lines(block: dict, track: bool = True) -> tuple[str, ...]:
    """The drive azimuth to set (start→end of the block), with the sky azimuth beside it where
    the cable wrap makes them differ; older plans without drive angles show the sky azimuth."""
    keys = (("drive_az_start_deg", "drive_az_end_deg"), ("az_start_deg", "az_end_deg"))
    (d0, d1), (s0, s1) = ((_float(block.get(a)), _float(block.get(b))) for a, b in keys)
    if not track:
        d1, s1 = d0, s0

    def span(a, b) -> str:
        return _deg(a) if b is None or abs(a - b) < 0.05 else f"{_deg(a)}→{_deg(b)}"

    if d0 is None:
        return (f"sky az {span(s0, s1)}",) if s0 is not None else ("az —",)
    differs = s0 is not None and (abs(d0 - s0) >= 0.05 or (d1 is not None and s1 is not None
                                                           and abs(d1 - s1) >= 0.05))
    return (f"drive az {span(d0, d1)}" + (f" (sky {span(s0, s1)})" if differs else ""),)


def _survey_stow_row(block: dict, minutes, day) -> Row:
    """A stow: the dish parked where the Sun cannot come near the feed, until the next slew."""
    what = (f"stow the dish (safe from the Sun) at elevation {_deg(block.get('alt_start_deg'))}, "
            f"drive azimuth {_deg(block.get('drive_az_start_deg'))}")
    return Row((
        (_window(block.get("start_local"), block.get("end_local"), day),),
        ("stow",),
        (what,),
        _azimuth_lines(block, track=False) + (f"el {_deg(block.get('alt_start_deg'))}",),
        (_num(minutes, ".1f"),),
        (_deg(block.get("sun_sep_min_deg"), 0),),
        ("—",),
        ("☐",),
    ), "move")


def _cable_wrap_note(doc: dict) -> str:
    """Once per brief: what the drive azimuth is and why it can differ from the sky azimuth."""
    settings = doc.get("settings") or {}
    lo, hi = _float(settings.get("azimuth_min_deg")), _float(settings.get("azimuth_max_deg"))
    known = lo is not None and hi is not None
    if known and hi - lo <= 360.0:
        wrap = f"This mount's azimuth drive runs from {_deg(lo, 0)} to {_deg(hi, 0)}."
    else:
        where = f"from {_deg(lo, 0)} to {_deg(hi, 0)}, more than one turn" if known else \
            "past 0° or 360°"
        wrap = (f"This mount's azimuth drive runs {where} (the cable wrap), so one direction on "
                "the sky can have two drive angles: the plan picks the one that keeps the cables "
                "inside their range along the whole schedule, and gives the sky azimuth in "
                "brackets where the two differ. Set the drive angle, not the sky azimuth: turning "
                "the other way round can wind the cables up.")
    return ("Drive azimuth: the angle to set on the mount's azimuth drive (what its encoder "
            f"reads), from north through east. {wrap}")


def _survey_block_section(doc: dict) -> Section:
    blocks = doc.get("blocks") or []
    header = ("Time (local)", "Kind", "Target", "Drive az / El", "Minutes", "Sun distance",
              "Receiver centre", "Done")
    rows: list[Row] = []
    for n, session in enumerate(_sessions(blocks), start=1):
        rows.extend(_survey_rows(session, n))
    clock = _clock_note(doc)
    parts = [Paragraph(f"{clock} Start times are rounded down and end times up to the minute "
                       "(as in the calendar), so each block is covered whole. The mount moves "
                       "between blocks (slews); these are counted in each session's heading. Where "
                       "the Sun would come near the resting dish, the plan stows it first (safe from "
                       "the Sun) and it stays there until the next slew.", "note"),
             Paragraph(_cable_wrap_note(doc), "note")]
    parts.append(Table(header, tuple(rows), "day-table", ("when", "", "nb", "nb", "", "", "nb", "done"))
                 if blocks
                 else Paragraph("No blocks are scheduled in this period."))
    return Section("days", "Night by night", tuple(parts), new_page=True)


def _survey_coverage(doc: dict) -> Section:
    blocks = doc.get("blocks") or []
    per_target: dict[str, float] = {}
    for block in blocks:
        if block.get("kind") == "target":
            minutes = _minutes_between(block.get("start_utc"), block.get("end_utc")) or 0.0
            name = _text(block.get("name"))
            per_target[name] = per_target.get(name, 0.0) + minutes
    parts: list = []
    if per_target:
        parts.append(Bullets(tuple((f"{name}:", f"{m:.1f} min") for name, m in per_target.items())))
    unscheduled = doc.get("unscheduled") or []
    if unscheduled:
        parts.append(Paragraph("Not scheduled in this period:"))
        parts.append(Table(("Target", "Why"), tuple(Row(((_text(u.get("name")),),
                                                         (_text(u.get("reason")),)))
                                                     for u in unscheduled), "unscheduled-table"))
    else:
        parts.append(Paragraph("Every requested target is scheduled."))
    return Section("coverage", "Coverage: time on each target", tuple(parts))


def _survey_settings(doc: dict) -> Section:
    settings = doc.get("settings") or {}
    windows = settings.get("windows") or []
    items = [
        ("Your hours:", "; ".join(describe_window_texts(windows)) + "." if windows else "any time."),
        ("Night only:", (f"yes ({_text(settings.get('night') or 'horizon')})."
                         if settings.get("night_only") else "no.")),
        ("Moon rule:", f"at least {_deg(settings.get('moon_min_sep_deg'), 0)} from the Moon."),
    ]
    return Section("settings", "Plan settings", (Bullets(tuple(items)),))


def _survey_brief(doc: dict) -> Brief:
    site = doc.get("site") or {}
    blocks = doc.get("blocks") or []
    kinds = Counter(b.get("kind") for b in blocks)
    on_target = sum(m for m in (_minutes_between(b.get("start_utc"), b.get("end_utc"))
                                for b in blocks if b.get("kind") == "target") if m is not None)
    summary = (f"{kinds.get('target', 0)} target blocks ({on_target:.0f} min on targets), "
               f"{kinds.get('reference', 0)} reference blocks and {kinds.get('slew', 0)} slews "
               f"in {len(_sessions(blocks))} sessions.")
    if kinds.get("stow"):
        summary += (f" The dish is stowed safe from the Sun {kinds['stow']} "
                    f"time{'s' if kinds['stow'] != 1 else ''}.")
    return Brief(f"Operator brief: {_text(site.get('name'))}",
                 f"Pointed survey with a steerable dish, {_period_text(doc, None)}", summary,
                 _sections(SURVEY_SECTIONS, doc), f"Made by hiplan from a {SURVEY_SCHEMA} plan.")


def _survey_tunings(doc: dict) -> list[tuple[str, dict]]:
    return [(f"{_text(b.get('name'))} at {_window(b.get('start_local'), b.get('end_local'), None)}",
             b["tuning"]) for b in doc.get("blocks") or [] if isinstance(b.get("tuning"), dict)]


# ------------------------------------------------------------------ sections of each brief

SectionBuilder = Callable[[dict], "Section | None"]

# Extra safety cautions for a plan: functions (doc) -> iterable of (bold lead, text), shown in
# "Safety first" after the plan's warnings and before the standing cautions.
SAFETY_NOTES: list[Callable[[dict], "list[tuple[str, str]]"]] = []


def _plan_safety(doc: dict) -> Section:
    warnings = tuple(Paragraph(_text(w), "warn") for w in doc.get("warnings") or ())
    notes = tuple(item for note in SAFETY_NOTES for item in note(doc) or ())
    return _safety_section(warnings + ((Bullets(notes),) if notes else ()))


def _charts_section(doc: dict) -> Section:
    return Section("charts", "Charts", (Charts(),), new_page=True)


# The sections of each kind of brief, in page order: add a builder here to add a section.
DRIFT_SECTIONS: list[SectionBuilder] = [
    _plan_safety,
    _site_section,
    _drift_settings,
    _drift_day_section,
    _charts_section,
    lambda doc: _tuning_section(_drift_tunings(doc), "the day table"),
    _drift_coverage,
    lambda doc: _goes_wrong_section(GOES_WRONG_DRIFT),
]
SURVEY_SECTIONS: list[SectionBuilder] = [
    _plan_safety,
    _site_section,
    _survey_settings,
    _survey_block_section,
    _charts_section,
    lambda doc: _tuning_section(_survey_tunings(doc), "the block table"),
    _survey_coverage,
    lambda doc: _goes_wrong_section(GOES_WRONG_SURVEY),
]


def _expected_section(doc: dict) -> Section | None:
    """"What the receiver should show" (``planner.briefline``, which builds on this module)."""
    from .briefline import expected_section
    return expected_section(doc)


DRIFT_SECTIONS.insert(6, _expected_section)   # after the receiver tuning
SURVEY_SECTIONS.insert(6, _expected_section)


def _sections(builders, doc: dict) -> tuple[Section, ...]:
    return tuple(section for section in (build(doc) for build in builders) if section is not None)


def build_brief(doc: dict) -> Brief:
    """The brief's content for a plan document (drift or survey)."""
    schema = doc.get("schema") if isinstance(doc, dict) else None
    if schema == DRIFT_SCHEMA:
        return _drift_brief(doc)
    if schema == SURVEY_SCHEMA:
        return _survey_brief(doc)
    raise UserError(f"plan schema {schema!r} is not one of {', '.join(PLAN_SCHEMAS)}")


def chart_order(keys) -> list[str]:
    """Chart names in the order the brief shows them (``CHART_CAPTIONS`` first)."""
    known = [k for k in CHART_CAPTIONS if k in keys]
    return known + sorted(k for k in keys if k not in CHART_CAPTIONS)


def chart_caption(key: str) -> str:
    return CHART_CAPTIONS.get(key, f"{key.capitalize()} chart.")


from . import briefloop, briefnetwork  # noqa: E402,F401  (register their sections above)
