"""Re-planning the rest of a period: an earlier drift plan's past days kept as they were.

``hiplan month --keep PLAN.json --start DAY`` (or ``--from-today``) plans DAY to the end
of PLAN's period afresh, from the observation logs (what was really recorded, e.g. a
``hiplan tally``), and writes one plan for the whole period:

* the days before DAY are PLAN's days unchanged, each marked ``"kept": true``: the brief,
  the calendar and the charts show the period as it was lived;
* the dish starts DAY where PLAN had it at the end of the day before (unless
  ``--start-dec`` says otherwise), so staying put is not a move;
* PLAN's moves before DAY count against ``--max-moves`` (the cap is for the period);
* ``summary`` describes the re-planned days: ``done_before`` is the depth the logs give
  at DAY, ``done_after`` what the new days add; ``replan`` records DAY, PLAN and what was
  kept.

The re-planned days start at local midnight of DAY; a move on DAY can come right after a
kept move on the day before (``--min-days-between-moves`` is not carried across DAY).
"""
from __future__ import annotations

from datetime import date, timedelta

from .errors import UserError
from .plancheck import check_drift_plan, dish_pointing
from .pointing import Pointing
from .site import Site
from .timebase import local_day_span


def kept_days(plan: dict, day: date) -> list[dict]:
    """The plan's days before ``day``."""
    return [d for d in plan["days"] if date.fromisoformat(d["date"]) < day]


def period(plan: dict, site: Site, day: date, src: str, field: str) -> tuple[float, float, int, str]:
    """(start_mjd, end_mjd, days, label) of the re-planned part: ``day`` to the plan's end."""
    check_drift_plan(plan, site, src)
    first = date.fromisoformat(plan["period"]["first_day_local"])
    last = date.fromisoformat(plan["period"]["last_day_local"])
    if not first <= day <= last:
        raise UserError(f"{field}: {day.isoformat()} is not a day of {src}'s period ({first} to "
                        f"{last}); re-plan a day inside it, or plan a new period without --keep")
    days = (last - day).days + 1
    start_mjd, end_mjd = local_day_span(day, days, site.tz, field)
    return start_mjd, end_mjd, days, day.isoformat()


def kept_setting(plan: dict, site: Site, day: date) -> Pointing | None:
    """Where the plan had the dish at the end of the day before ``day`` (None: unknown)."""
    before = [d for d in kept_days(plan, day) if d.get("park")]
    if not before:
        return None
    return dish_pointing(site, before[-1]["park"])


def kept_moves(plan: dict, day: date) -> int:
    """Moves the plan made before ``day``."""
    return sum(1 for d in kept_days(plan, day) if (d.get("park") or {}).get("move"))


def last_move_day(plan: dict, day: date) -> date | None:
    """The local day of the plan's last move before ``day`` (None: no move before it)."""
    moved = [d["date"] for d in kept_days(plan, day) if (d.get("park") or {}).get("move")]
    return date.fromisoformat(moved[-1]) if moved else None


def move_slots_after_kept(slots, plan: dict, day: date, min_days: int) -> list:
    """``slots`` (of the period from ``day``) without those too soon after the kept plan's
    last move: moves stay ``min_days`` local days apart across the re-plan day too."""
    last = last_move_day(plan, day)
    if last is None or min_days <= 1:
        return list(slots)
    first_allowed = (last - day).days + min_days  # slot day indices count from ``day``
    return [s for s in slots if s.day >= first_allowed]


def merge(plan: dict, new: dict, day: date, src: str) -> dict:
    """One plan for the whole period: ``plan``'s days before ``day``, then ``new``'s."""
    kept = [{**d, "kept": True} for d in kept_days(plan, day)]
    first = date.fromisoformat(plan["period"]["first_day_local"])
    expected = [(first + timedelta(days=k)).isoformat() for k in range((day - first).days)]
    if [d["date"] for d in kept] != expected:
        raise UserError(f"{src}: its days are not one per date from the start of its period")
    merged = dict(new)
    merged["period"] = plan["period"]
    merged["days"] = kept + new["days"]
    merged["replan"] = {"from_day": day.isoformat(), "kept_plan": src, "kept_days": len(kept),
                        "kept_moves": kept_moves(plan, day)}
    return merged
