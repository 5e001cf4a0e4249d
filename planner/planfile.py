"""Plan files: the drift-plan document built from a ``MonthPlan``, and reading plans back.

The format is described in docs/plan-format.md (``hiplan.plan/1`` for drift
plans, ``hiplan.survey/1`` for survey plans). Building a document is pure; the
one reader here takes a path because every plan consumer needs the same checks
(missing file, bad JSON with its line, wrong schema) and the same one-line errors.
"""
from __future__ import annotations

import json
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np

from .errors import UserError
from .galaxy import RotationModel
from .month import MonthPlan, gap_reasons
from .monthsafety import HazardTask
from .park import _facing, compact_bins
from .report import _round_floats, period_summary
from .timebase import iso_local, iso_utc, mjd_to_datetime_utc
from .tuning import line_setup, shared_setups

DRIFT_SCHEMA = "hiplan.plan/1"
SURVEY_SCHEMA = "hiplan.survey/1"
PLAN_SCHEMAS = (DRIFT_SCHEMA, SURVEY_SCHEMA)
_DRIFT_KEYS = ("site", "period", "settings", "days", "summary")
_SURVEY_KEYS = ("site", "period", "settings", "blocks", "unscheduled")
# Survey block kinds (docs/plan-format.md); only target blocks are observations to log.
SURVEY_BLOCK_KINDS = ("target", "reference", "slew", "stow", "calibration")


def shown_span(start: datetime, end: datetime, outward: bool = True) -> tuple[datetime, datetime]:
    """A plan interval as shown to people: whole minutes, one rule for every output.

    Recordings, survey blocks and Sun hazards (``outward``): the start floored and the end
    ceiled to the minute, so whoever follows the times covers at least the whole interval.
    Windows to act in, such as a re-park (``outward=False``): the start ceiled and the end
    floored, so acting at the times shown stays inside the window. The brief, the calendar,
    the ``hiplan month`` and ``hiplan survey`` tables all use this rule. Aware or naive datetimes; seconds and
    microseconds are dropped (every zone in use has whole-minute UTC offsets).
    """
    def floor(moment: datetime) -> datetime:
        return moment.replace(second=0, microsecond=0)

    def ceil(moment: datetime) -> datetime:
        base = floor(moment)
        return base if base == moment else base + timedelta(minutes=1)

    return (floor(start), ceil(end)) if outward else (ceil(start), floor(end))


# Survey blocks more than this far apart (minutes) start a new observing session (a new night or
# school day; our choice): the brief groups its table by session, the calendar reminds once per
# session.
SESSION_GAP_MIN = 120.0


def survey_sessions(blocks: list[dict]) -> list[list[dict]]:
    """Survey plan blocks (in time order) grouped into observing sessions.

    A gap of more than ``SESSION_GAP_MIN`` between the end of one block and the start of the
    next starts a new session; a stow (the dish parked safe from the Sun, perhaps for hours)
    ends its session when the dish arrives there. A block whose times cannot be read starts
    a session of its own.
    """
    def moment(text):
        try:
            return datetime.fromisoformat(text) if isinstance(text, str) else None
        except ValueError:
            return None

    sessions: list[list[dict]] = []
    for block in blocks:
        gap_min = None
        if sessions:
            last = sessions[-1][-1]
            end = moment(last.get("start_utc" if last.get("kind") == "stow" else "end_utc"))
            start = moment(block.get("start_utc"))
            if end is not None and start is not None:
                gap_min = (start - end).total_seconds() / 60.0
        if gap_min is None or gap_min > SESSION_GAP_MIN:
            sessions.append([block])
        else:
            sessions[-1].append(block)
    return sessions


MAX_PLAN_BYTES = 50_000_000  # a two-year plan is ~2 MB; anything this big is not a plan


def read_plan(path) -> dict:
    """Read and check a plan file; every problem is a one-line UserError naming the file.

    The one reader for every plan consumer (calendar, brief, charts).
    """
    from .inputs import read_input  # regular files only (no device or FIFO), size-limited
    src = str(path)
    data = read_input(path, "plan file", MAX_PLAN_BYTES)
    try:
        doc = json.loads(data.decode("utf-8-sig"))  # a leading BOM is allowed
    except UnicodeDecodeError:
        raise UserError(f"{src}: not UTF-8 text, so not a plan file") from None
    except json.JSONDecodeError as exc:
        raise UserError(f"{src}:{exc.lineno}: not valid JSON ({exc.msg}, column {exc.colno})") from None
    except RecursionError:  # e.g. [[[[...]]]] thousands deep; a plan nests a few levels
        raise UserError(f"{src}: not a plan file (its JSON is nested too deeply)") from None
    check_plan(doc, src)
    return doc


def check_plan(doc, src: str) -> None:
    """UserError unless ``doc`` is a plan of a schema this version reads, with its parts."""
    if not isinstance(doc, dict):
        raise UserError(f"{src}: not a hiplan plan (expected a JSON object)")
    if "schema" not in doc:
        raise UserError(f"{src}: not a hiplan plan (no 'schema' field)")
    schema = doc["schema"]
    if schema not in PLAN_SCHEMAS:
        family = isinstance(schema, str) and schema.split("/")[0] in ("hiplan.plan", "hiplan.survey")
        hint = " (written by another hiplan version)" if family else ""
        raise UserError(f"{src}: schema {schema!r} is not a plan this hiplan reads "
                        f"(expected {DRIFT_SCHEMA!r} or {SURVEY_SCHEMA!r}){hint}")
    keys = _DRIFT_KEYS if schema == DRIFT_SCHEMA else _SURVEY_KEYS
    missing = [k for k in keys if k not in doc]
    if missing:
        raise UserError(f"{src}: plan is missing {', '.join(missing)}")
    if not isinstance(doc["site"], dict):
        raise UserError(f"{src}: field 'site' is not an object")
    listing = "days" if schema == DRIFT_SCHEMA else "blocks"
    if not isinstance(doc[listing], list):
        raise UserError(f"{src}: field '{listing}' is not a list")
    if schema == SURVEY_SCHEMA:
        for i, block in enumerate(doc["blocks"]):
            kind = block.get("kind") if isinstance(block, dict) else None
            if kind not in SURVEY_BLOCK_KINDS:
                raise UserError(f"{src}: blocks[{i}].kind is {kind!r}; expected "
                                f"{', '.join(SURVEY_BLOCK_KINDS[:-1])} or {SURVEY_BLOCK_KINDS[-1]}")


def drift_plan_document(plan: MonthPlan, settings: dict, model: RotationModel,
                        windows_limit_recording: bool) -> dict:
    """The ``hiplan.plan/1`` document for a month plan (see docs/plan-format.md)."""
    sweep, goal = plan.sweep, plan.goal
    site, tz = sweep.site, sweep.site.tz
    bw = sweep.bin_width_deg
    first_day = mjd_to_datetime_utc(sweep.start_mjd).astimezone(tz).date()
    n_days = (mjd_to_datetime_utc(sweep.end_mjd).astimezone(tz).date() - first_day).days
    days = [{"date": (first_day + timedelta(days=d)).isoformat(), "park": None, "recordings": [],
             "skipped": [], "tuning": None, "sun_hazards": []} for d in range(n_days)]

    def day_of(mjd: float) -> int:
        return (mjd_to_datetime_utc(mjd).astimezone(tz).date() - first_day).days

    # Running depth in time order, to say which recording brings a bin to the target.
    depth = goal.done_minutes.astype(float).copy()
    events = []
    for k, parking in enumerate(plan.parkings):
        occ = sweep.rows[parking.row].occurrences
        for i in parking.occurrences:
            events.append((occ.start_mjd[i], k, int(i)))
    events.sort()
    recordings_by_day: dict[int, list] = {}
    for _start, k, i in events:  # one per recording (tens to hundreds)
        parking = plan.parkings[k]
        occ = sweep.rows[parking.row].occurrences
        minutes = occ.bin_seconds[i] / 60.0
        bins = np.flatnonzero(minutes > 0)
        if bins.size == 0:  # wholly outside the recording windows: listed as skipped
            continue
        before = depth.copy()
        depth = depth + minutes
        new = np.flatnonzero(goal.want & (before < goal.target_minutes) & (depth >= goal.target_minutes))
        rec = {
            "start_utc": iso_utc(occ.start_mjd[i]), "end_utc": iso_utc(occ.end_mjd[i]),
            "start_local": iso_local(occ.start_mjd[i], tz), "end_local": iso_local(occ.end_mjd[i], tz),
            "l_start_deg": float(occ.l_start_deg[i]), "l_end_deg": float(occ.l_end_deg[i]),
            "l_bins": [_tidy(b * bw) for b in bins], "bin_minutes": [float(m) for m in minutes[bins]],
            "new_bins": [_tidy(b * bw) for b in new],
            "sun_sep_min_deg": float(occ.sun_sep_min_deg[i]), "night": bool(occ.sun_alt_max_deg[i] < 0),
            "lsr_corr_min_kms": float(occ.lsr_min_kms[i]), "lsr_corr_max_kms": float(occ.lsr_max_kms[i]),
            "dish": _dish(sweep.rows[parking.row].pointing),
        }
        d = day_of(occ.start_mjd[i])
        if 0 <= d < n_days:
            recordings_by_day.setdefault(d, []).append((rec, bins, occ.lsr_min_kms[i], occ.lsr_max_kms[i]))

    # Parking per day, moves, and the passages of the parked declination that are skipped.
    for parking in plan.parkings:
        row = sweep.rows[parking.row]
        park = _dish(row.pointing)
        first = day_of(parking.move_mjd) if parking.move_mjd is not None else 0
        last = min(day_of(parking.end_mjd - 1e-6), n_days - 1)
        for d in range(max(first, 0), last + 1):
            moving = parking.move_mjd is not None and d == first
            days[d]["park"] = {**park, "move": moving,
                               "move_start_utc": iso_utc(parking.move_mjd) if moving else None,
                               "move_end_utc": iso_utc(parking.start_mjd) if moving else None,
                               "move_start_local": iso_local(parking.move_mjd, tz) if moving else None,
                               "move_end_local": iso_local(parking.start_mjd, tz) if moving else None}
        occ = row.occurrences
        taken = set(int(i) for i in parking.occurrences)
        inside = (occ.start_mjd >= parking.start_mjd) & (occ.end_mjd <= parking.end_mjd)
        for i in np.flatnonzero(inside):
            if int(i) in taken and occ.bin_seconds[i].sum() > 0:
                continue
            if occ.sun_sep_min_deg[i] < site.rules.sun_min_sep_deg:
                reason = "sun"
            elif not occ.usable[i]:
                reason = "daylight"
            else:
                reason = "outside windows"
            d = day_of(occ.start_mjd[i])
            if 0 <= d < n_days:
                days[d]["skipped"].append({
                    "start_utc": iso_utc(occ.start_mjd[i]), "end_utc": iso_utc(occ.end_mjd[i]),
                    "start_local": iso_local(occ.start_mjd[i], tz),
                    "end_local": iso_local(occ.end_mjd[i], tz),
                    "l_bins": [_tidy(b * bw) for b in np.flatnonzero(occ.bin_seconds[i] > 0)]
                    or [_tidy(np.floor(occ.l_start_deg[i] / bw) * bw)],
                    "reason": reason})

    own_setups: list = [None] * n_days
    for d, items in recordings_by_day.items():
        days[d]["recordings"] = [rec for rec, *_ in items]
        bins = sorted({int(b) for _, bs, *_ in items for b in bs})
        own_setups[d] = line_setup(bins, bw, sweep.b_max_deg, min(x[2] for x in items),
                                   max(x[3] for x in items), site.receiver, model)
    # One receiver setting for as many consecutive days as it serves (no daily retuning for
    # a drift of a kHz or two); "retune" marks the days the operator must change it.
    previous_centre = None
    for d, setup in enumerate(shared_setups(own_setups)):
        if setup is None:
            continue
        a = setup.advice
        days[d]["tuning"] = {
            "centre_mhz": a.centre_mhz, "line_low_mhz": a.line_low_mhz, "line_high_mhz": a.line_high_mhz,
            "fits": a.fits, "margin_mhz": a.margin_mhz, "spike_clear": a.spike_clear,
            "channel_width_kms": a.channel_width_kms, "v_lsr_min_kms": setup.v_lsr_min_kms,
            "v_lsr_max_kms": setup.v_lsr_max_kms, "lsr_corr_min_kms": setup.lsr_corr_min_kms,
            "lsr_corr_max_kms": setup.lsr_corr_max_kms,
            # Compared as the plan writes them (4 decimals, 0.1 kHz).
            "retune": previous_centre is None or round(a.centre_mhz, 4) != round(previous_centre, 4)}
        previous_centre = a.centre_mhz
    for day in days:
        day["skipped"].sort(key=lambda s: s["start_utc"])
    for task in plan.hazards:
        d = min(max(day_of(task.enter_mjd), 0), n_days - 1)
        days[d]["sun_hazards"].append(hazard_record(task, sweep.rows[task.row].pointing, tz))
    warnings = hazard_warnings(plan.hazards, settings.get("allow_sun_hazard", False), tz)

    wanted = np.flatnonzero(goal.want)
    reasons = gap_reasons(sweep, goal, plan.depth_after, windows_limit_recording)
    gaps = []
    for reason in sorted(set(reasons.values())):
        bins = [b for b, r in reasons.items() if r == reason]
        gaps.append({"l_range": compact_bins(bins, bw), "bins": [_tidy(b * bw) for b in bins],
                     "reason": reason})
    doc = {
        "schema": DRIFT_SCHEMA, "kind": "drift", "site": site.summary(),
        "period": period_summary(sweep.start_mjd, sweep.end_mjd, tz),
        "settings": settings,
        "warnings": warnings,
        "days": days,
        "summary": {
            "wanted_bins": int(wanted.size), "done_before": plan.done_before,
            "done_after": plan.done_after, "target_minutes": goal.target_minutes,
            "moves": sum(1 for p in plan.parkings if p.move_mjd is not None),
            "sun_hazards": len(plan.hazards),
            "depth_before_min": {str(_tidy(b * bw)): float(plan.depth_before[b]) for b in wanted},
            "depth_after_min": {str(_tidy(b * bw)): float(plan.depth_after[b]) for b in wanted},
            "gaps": gaps,
        },
    }
    return _round_floats(doc, 4)


def _dish(p) -> dict:
    """The dish setting of a parked pointing, as plans record it."""
    return {"dec_deg": p.dec_deg, "alt_deg": p.alt_deg, "az_deg": p.az_deg, "facing": _facing(p),
            "culmination": p.culmination}


def _hhmm(mjd: float, tz) -> str:
    return mjd_to_datetime_utc(mjd).astimezone(tz).strftime("%H:%M")


def hazard_record(task: HazardTask, pointing, tz) -> dict:
    """One Sun hazard of a drift plan as the plan records it, with the operator's action."""
    if task.kind == "move":
        action = (f"The move at {_hhmm(task.enter_mjd, tz)} sweeps the beam {task.sep_deg:.1f}° "
                  "from the Sun: cover the feed before moving the dish, or move it at another time.")
    else:
        # The enter time is floored to the minute: act before the Sun gets that close.
        enter = mjd_to_datetime_utc(task.enter_mjd).astimezone(tz).replace(second=0, microsecond=0)
        action = (f"The Sun passes {task.sep_deg:.1f}° from the beam at {_hhmm(task.closest_mjd, tz)}: "
                  f"cover the feed or move the dish off this setting before {enter:%H:%M} "
                  f"(the Sun is too close until {_hhmm(task.exit_mjd, tz)}).")
    return {"kind": task.kind, "closest_utc": iso_utc(task.closest_mjd),
            "closest_local": iso_local(task.closest_mjd, tz), "sep_deg": task.sep_deg,
            "from_utc": iso_utc(task.enter_mjd), "to_utc": iso_utc(task.exit_mjd),
            "from_local": iso_local(task.enter_mjd, tz), "to_local": iso_local(task.exit_mjd, tz),
            "dish": _dish(pointing), "action": action}


def hazard_warnings(hazards, insisted: bool, tz) -> list[str]:
    """Plan-level warnings about the Sun and the feed (empty when the plan is safe)."""
    if not hazards:
        return []
    dates = sorted({mjd_to_datetime_utc(t.enter_mjd).astimezone(tz).date().isoformat() for t in hazards})
    why = ("because --allow-sun-hazard was given" if insisted else
           "because the dish is already parked there before the first move slot")
    return [f"SUN HAZARD: this plan brings the Sun within the feed-safety limit of the dish on "
            f"{len(dates)} day{'s' if len(dates) != 1 else ''} ({', '.join(dates[:8])}"
            f"{', …' if len(dates) > 8 else ''}) {why}; each such day has a task: cover the feed or "
            "move the dish before the time given."]


def _tidy(value):
    value = float(value)
    return int(value) if value.is_integer() else value


def plan_log_rows(doc: dict, quality: str = "good", note: str = "from plan") -> list[dict]:
    """Observation-log rows (``obslog`` columns) for what a plan records.

    Drift plans: one row per recording and longitude bin (``l_from_deg`` =
    ``l_to_deg`` = the bin start), crediting that bin's minutes, so a log read back
    gives exactly the depth the plan promises. Survey plans: one row per target block
    (references, slews and Sun-safe stows are not observations of the survey).
    Mark rows ``bad`` (or delete them) for recordings that did not happen.
    """
    rows = []
    if doc["kind"] == "drift":
        for day in doc["days"]:
            for rec in day["recordings"]:
                dec = (rec.get("dish") or day.get("park") or {}).get("dec_deg")
                for b, minutes in zip(rec["l_bins"], rec["bin_minutes"]):
                    if minutes <= 0:
                        continue
                    rows.append({"start_utc": rec["start_utc"], "end_utc": rec["end_utc"],
                                 "dec_deg": dec, "l_from_deg": b, "l_to_deg": b,
                                 "minutes": min(float(minutes), 1440.0), "quality": quality,
                                 "note": note})
    else:
        for block in doc["blocks"]:
            if block["kind"] != "target":
                continue
            l_deg = float(block["l_deg"]) % 360.0
            rows.append({"start_utc": block["start_utc"], "end_utc": block["end_utc"],
                         "dec_deg": block["dec_deg"], "l_from_deg": l_deg, "l_to_deg": l_deg,
                         "minutes": float(block["minutes"]), "quality": quality,
                         "note": f"{note}: {block['name']}"})
    return rows
