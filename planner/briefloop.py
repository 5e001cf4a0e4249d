"""What a brief says about the loop with the dish: driving it, re-planning, what was recorded.

Builds on ``planner.briefcontent`` through its extension points: a "Moving the dish" caution
for plans a motorised dish may run under ``hiplan drive`` (``SAFETY_NOTES``), a note on a plan
re-planned from recordings, and a "What was recorded" section from a tally document the brief
command attaches as ``doc["recorded"]`` (``hiplan.tally/1`` made with the same plan). Pure:
reads the documents only; all times shown are the site's local times the documents carry.
"""
from __future__ import annotations

from .briefcontent import (DRIFT_SECTIONS, SAFETY_NOTES, SURVEY_SECTIONS, Bullets, Figure,
                           Paragraph, Row, Section, Table, _at, _day, _day_label, _float, _num, _shown, _text)
from .planfile import SURVEY_SCHEMA

TALLY_SCHEMA = "hiplan.tally/1"
RECORDED_FIGURE = "recorded"   # chart key of the tally chart the brief command may draw

_DRIVE_TEXT = (
    "When this plan is run by hiplan drive, a person must be able to stop the dish at any time "
    "(at the controller's stop button or its power switch) and should stay within reach while "
    "it moves; keep people, hands, hair and cables clear of the mount. hiplan drive is not a "
    "safety system. It refuses to start if the first slew would pass within {hazard}° of the "
    "Sun, checks every later move and every wait against the Sun again, and stops without "
    "moving the dish again if anyone else moves it. Ctrl-C stops the dish and parks it; a "
    "second Ctrl-C stops it where it is.")


def drive_caution(doc: dict) -> list[tuple[str, str]]:
    """The "Moving the dish" caution: survey plans and plans for a motorised (alt-az) mount."""
    site = doc.get("site") or {}
    if doc.get("schema") != SURVEY_SCHEMA and site.get("mount") != "altaz":
        return []
    hazard = _num(site.get("sun_hazard_deg", 10), "g")
    return [("Moving the dish.", _DRIVE_TEXT.format(hazard=hazard))]


def _count(value, noun: str) -> str:
    return f"{_num(value, 'g')} {noun}{'' if _float(value) == 1 else 's'}"


def replan_section(doc: dict) -> Section | None:
    """A note on a plan re-planned from the recordings (``doc["replan"]``), else None."""
    replan = doc.get("replan")
    if not isinstance(replan, dict):
        return None
    text = (f"Re-planned on {_day_label(replan.get('from_day'))} from the recordings: the days "
            f"before it are kept as they were planned then (marked \"past\" in the day table, "
            f"{_count(replan.get('kept_days'), 'day')}, {_count(replan.get('kept_moves'), 're-park')}) "
            f"and the plan starts again from the dish setting they left.")
    return Section("replan", "Re-planned", (Paragraph(text, "note"),))


def _missed_text(day: dict) -> str:
    d = _day(day.get("date"))
    parts = []
    for gap in day.get("missed") or ():
        if not isinstance(gap, dict):
            continue
        start, end = _shown(gap.get("start_local"), gap.get("end_local"))
        if start is None or end is None:
            continue
        parts.append(f"{_at(start, d)}–{_at(end, d)} ({_num(gap.get('minutes'), '.0f')} min)")
    return "; ".join(parts) or "—"


def recorded_section(doc: dict) -> Section | None:
    """"What was recorded": planned against recorded minutes per day, the missed intervals and
    the bins at target, from ``doc["recorded"]`` (a tally made with this plan), else None."""
    tally = doc.get("recorded")
    if not isinstance(tally, dict):
        return None
    at = tally.get("at_target") or {}
    agree = tally.get("agreement") or {}
    through = _day_label((tally.get("plan") or {}).get("through"))
    lines = [
        ("Bins at target:", f"{_num(at.get('now'), 'g')} of {_num(at.get('wanted_bins'), 'g')} "
                            f"wanted bins now; the plan foresaw {_num(at.get('planned_so_far'), 'g')} "
                            f"by {through} and {_num(at.get('planned_by_end'), 'g')} by its end."),
        ("Minutes:", f"{_num(agree.get('recorded_min'), '.0f')} of "
                     f"{_num(agree.get('planned_min'), '.0f')} planned minutes recorded, "
                     f"{_num(agree.get('missed_min'), '.0f')} missed."),
    ]
    if _float(agree.get("max_day_difference_min")) is not None:
        lines.append(("Check:", f"on the {_num(agree.get('days_complete'), 'g')} days recorded in "
                                f"full, recorded and planned minutes agree within "
                                f"{_num(agree.get('max_day_difference_min'), '.1f')} min."))
    rows = []
    for day in tally.get("per_day") or ():
        if not isinstance(day, dict):
            continue
        missed = bool(day.get("missed"))
        rows.append(Row(((_day_label(day.get("date"), year=False),),
                         (_num(day.get("planned_min"), ".0f"),),
                         (_num(day.get("recorded_min"), ".0f"),),
                         (_missed_text(day),)), "warn" if missed else ""))
    blocks = [Bullets(tuple(lines))]
    if rows:
        blocks.append(Table(("Date", "Planned min", "Recorded min", "Missed (local time)"),
                            tuple(rows)))
    blocks.append(Figure(RECORDED_FIGURE, "Planned against recorded minutes, per day and per "
                                          "longitude bin; triangles mark days with missed time."))
    blocks.append(Paragraph("From the recordings tallied with hiplan tally; a missed interval is "
                            "planned recording time with no spectrum counted.", "note"))
    return Section("recorded", "What was recorded", tuple(blocks))


SAFETY_NOTES.append(drive_caution)
for _sections in (DRIFT_SECTIONS, SURVEY_SECTIONS):
    _sections.insert(2, replan_section)          # after the site, before the settings
    _sections.insert(_sections.index(replan_section) + 1, recorded_section)
