"""A drift plan against what was recorded.

* ``timeline``: the dish setting a drift plan (``hiplan.plan/1``) had at each moment of
  its period: parked at a declination, being moved (between a move's start and end),
  or unknown (before the first move when the plan does not say where the dish was).
  The setting before the first move is the first day's ``park`` when that day has no
  move, else the ``dish`` of a recording made before the move.
* ``compare``: per local day of the plan, the minutes planned (its recordings'
  ``bin_minutes``) and recorded (the counted spectra, each given to the planned
  recording its middle falls in, else to its local day), and the planned intervals
  no counted spectrum covers ("missed"); per bin the same; and the wanted bins at the
  target depth now (the plan's depth before its period plus the tally).

Missed intervals shorter than two spectra (at least ``MIN_MISSED_S``, two minutes;
our choice) are not reported: a spectrum lost here and there, or the dead time between
spectra, is not a gap in the plan.
"""
from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from zoneinfo import ZoneInfo

import numpy as np

from .errors import UserError
from .pointing import Pointing, below_pole_at_dec, from_altaz, on_meridian_at_dec
from .site import Site
from .tally import MOVING, PARKED, UNKNOWN, Setting, Tally
from .timebase import SECONDS_PER_DAY, iso_local, iso_utc, local_midnight_mjd, parse_instant

MIN_MISSED_S = 120.0


@dataclass(frozen=True)
class Timeline:
    """Segments of a plan's period: boundaries (K+1) and each segment's setting (K)."""

    edges_mjd: np.ndarray
    ha_deg: np.ndarray
    dec_deg: np.ndarray
    status: np.ndarray  # tally.PARKED, MOVING or UNKNOWN

    @property
    def start_mjd(self) -> float:
        return float(self.edges_mjd[0])

    @property
    def end_mjd(self) -> float:
        return float(self.edges_mjd[-1])


def check_drift_plan(plan: dict, site: Site, src: str) -> None:
    """UserError unless ``plan`` is a drift plan made for ``site`` (name and position)."""
    if plan.get("kind") != "drift":
        raise UserError(f"{src}: a {plan.get('kind', 'survey')} plan; this needs a drift plan "
                        "from 'hiplan month' (a steerable dish's recordings carry their own "
                        "pointing: tally them without --plan)")
    s = plan.get("site") or {}
    same = (s.get("name") == site.name
            and abs(float(s.get("latitude_deg", 1e9)) - site.latitude_deg) < 1e-6
            and abs(float(s.get("longitude_deg", 1e9)) - site.longitude_deg) < 1e-6)
    if not same:
        raise UserError(f"{src}: the plan was made for site '{s.get('name')}', not '{site.name}'; "
                        "give the plan's site with --site")


def dish_pointing(site: Site, dish: dict) -> Pointing:
    """The ``Pointing`` of a plan's dish setting (``park`` or a recording's ``dish``)."""
    az = float(dish.get("az_deg", 180.0)) % 360.0
    if min(abs(az - 0.0), abs(az - 180.0), abs(az - 360.0)) < 1e-3:
        dec = float(dish["dec_deg"])
        return below_pole_at_dec(site, dec) if dish.get("culmination") == "lower" else \
            on_meridian_at_dec(site, dec)
    return from_altaz(site, float(dish["alt_deg"]), az)


def _instant(text, field: str, src: str) -> float:
    return parse_instant(str(text), f"{src}: {field}")


def timeline(plan: dict, site: Site, src: str) -> Timeline:
    """The plan's setting at each moment (module doc)."""
    period = plan["period"]
    start = _instant(period["start_utc"], "period.start_utc", src)
    end = _instant(period["end_utc"], "period.end_utc", src)
    moves = []
    for day in plan["days"]:  # a month of days
        park = day.get("park")
        if park and park.get("move"):
            moves.append((_instant(park["move_start_utc"], f"{day['date']} move_start_utc", src),
                          _instant(park["move_end_utc"], f"{day['date']} move_end_utc", src),
                          dish_pointing(site, park)))
    first_move = moves[0][0] if moves else end
    initial = None
    first = plan["days"][0] if plan["days"] else None
    if first and first.get("park") and not first["park"].get("move"):
        initial = dish_pointing(site, first["park"])
    else:
        for day in plan["days"]:
            for rec in day["recordings"]:
                if rec.get("dish") and _instant(rec["start_utc"], "start_utc", src) < first_move:
                    initial = dish_pointing(site, rec["dish"])
                    break
            if initial is not None:
                break
    edges, settings = [start], []
    current = initial
    for move_start, move_end, pointing in moves:  # a few moves
        settings += [current, "moving"]
        edges += [move_start, move_end]
        current = pointing
    settings.append(current)
    edges.append(end)
    status = np.array([MOVING if s == "moving" else UNKNOWN if s is None else PARKED
                       for s in settings], dtype=np.int8)
    return Timeline(
        edges_mjd=np.array(edges),
        ha_deg=np.array([s.ha_deg if isinstance(s, Pointing) else 0.0 for s in settings]),
        dec_deg=np.array([s.dec_deg if isinstance(s, Pointing) else 0.0 for s in settings]),
        status=status)


def outside(tl: Timeline, mjd: np.ndarray) -> np.ndarray:
    """True where a time lies outside the plan's period."""
    return (mjd < tl.start_mjd) | (mjd >= tl.end_mjd)


def setting_at(tl: Timeline, mjd: np.ndarray) -> Setting:
    """The plan's setting at each time (times inside the period)."""
    k = np.clip(np.searchsorted(tl.edges_mjd, mjd, side="right") - 1, 0, tl.status.size - 1)
    return Setting(tl.ha_deg[k], tl.dec_deg[k], tl.status[k])


# ------------------------------------------------------------------ comparison

def _union(start: np.ndarray, end: np.ndarray, bridge_d: float) -> tuple[np.ndarray, np.ndarray]:
    """Sorted disjoint intervals covering [start, end) pieces; gaps under ``bridge_d`` closed."""
    if start.size == 0:
        return start, end
    order = np.argsort(start, kind="stable")
    s, e = start[order], end[order]
    reach = np.maximum.accumulate(e)
    new = np.concatenate([[True], s[1:] - reach[:-1] > bridge_d])
    last = np.concatenate([np.flatnonzero(new)[1:] - 1, [s.size - 1]])
    return s[new], reach[last]


def _missed(s: float, e: float, u_start: np.ndarray, u_end: np.ndarray, floor_d: float):
    """Pieces of [s, e) outside the union, each at least ``floor_d`` long."""
    pieces = []
    cursor = s
    lo = np.searchsorted(u_end, s, side="right")
    hi = np.searchsorted(u_start, e, side="left")
    for j in range(lo, hi):  # the stretches of recording inside one planned passage: a few
        if u_start[j] > cursor:
            pieces.append((cursor, float(u_start[j])))
        cursor = max(cursor, float(u_end[j]))
    if cursor < e:
        pieces.append((cursor, e))
    return [(a, b) for a, b in pieces if b - a >= floor_d]


def compare(plan: dict, site: Site, t: Tally, src: str) -> dict:
    """``per_day``, ``per_bin``, ``at_target`` and ``agreement`` (module doc)."""
    tz = ZoneInfo(plan["site"].get("timezone", site.timezone))
    bw = float(plan["settings"].get("bin_width_deg", t.rules.bin_width_deg))
    n_bins = int(round(360.0 / bw))
    dates = [date.fromisoformat(day["date"]) for day in plan["days"]]
    day_edges = np.array([local_midnight_mjd(d, tz) for d in dates]
                         + [_instant(plan["period"]["end_utc"], "period.end_utc", src)])
    recs = []
    for d, day in enumerate(plan["days"]):  # the plan's recordings: tens to hundreds
        for rec in day["recordings"]:
            bins = [int(round(float(b) / bw)) % n_bins for b in rec["l_bins"]]
            recs.append((_instant(rec["start_utc"], "start_utc", src),
                         _instant(rec["end_utc"], "end_utc", src), d, bins,
                         [float(m) for m in rec["bin_minutes"]]))
    recs.sort()
    rec_start = np.array([r[0] for r in recs])
    rec_end = np.array([r[1] for r in recs])
    rec_day = np.array([r[2] for r in recs], dtype=np.int64)

    counted = t.counted
    minutes = t.exposure_s / 60.0
    mid = t.mid_mjd
    local_day = np.clip(np.searchsorted(day_edges, mid, side="right") - 1, 0, len(dates) - 1)
    day_of = local_day
    if recs:
        k = np.searchsorted(rec_start, mid, side="right") - 1
        kc = np.clip(k, 0, len(recs) - 1)
        day_of = np.where((k >= 0) & (mid <= rec_end[kc]), rec_day[kc], local_day)
    through = int(day_of.max())  # the last day with any spectrum
    recorded_day = np.bincount(day_of[counted], weights=minutes[counted], minlength=len(dates))

    exposure_med_s = float(np.median(t.exposure_s[counted])) if counted.any() else 0.0
    floor_d = max(MIN_MISSED_S, 2.0 * exposure_med_s) / SECONDS_PER_DAY
    u_start, u_end = _union(t.start_mjd[counted],
                            t.start_mjd[counted] + t.exposure_s[counted] / SECONDS_PER_DAY, floor_d)
    planned_day = np.zeros(len(dates))
    planned_bin = np.zeros(n_bins)
    missed_by_day: dict[int, list] = {}
    for s, e, d, bins, mins in recs:
        if d > through:
            continue
        planned_day[d] += sum(mins)
        np.add.at(planned_bin, bins, mins)
        for a, b in _missed(s, e, u_start, u_end, floor_d):
            missed_by_day.setdefault(d, []).append({
                "start_utc": iso_utc(a), "end_utc": iso_utc(b), "start_local": iso_local(a, tz),
                "end_local": iso_local(b, tz), "minutes": round((b - a) * 1440.0, 2)})
    per_day = [{"date": dates[d].isoformat(), "planned_min": round(float(planned_day[d]), 3),
                "recorded_min": round(float(recorded_day[d]), 3),
                "missed": missed_by_day.get(d, [])} for d in range(through + 1)]
    recorded_bin = t.bin_minutes
    per_bin = [{"l_bin": _tidy(b * bw), "planned_min": round(float(planned_bin[b]), 3),
                "recorded_min": round(float(recorded_bin[b]), 3)}
               for b in np.flatnonzero((planned_bin > 0) | (recorded_bin > 0))]
    complete = [r for r in per_day if r["planned_min"] > 0 and not r["missed"]]
    return {
        "plan": {"file": src, "first_day": dates[0].isoformat() if dates else None,
                 "last_day": dates[-1].isoformat() if dates else None,
                 "through": dates[through].isoformat() if dates else None},
        "per_day": per_day,
        "per_bin": per_bin,
        "at_target": _at_target(plan, recorded_bin, planned_bin, bw),
        "agreement": {
            "planned_min": round(float(planned_day[:through + 1].sum()), 3),
            "recorded_min": round(float(recorded_day[:through + 1].sum()), 3),
            "missed_min": round(sum(m["minutes"] for r in per_day for m in r["missed"]), 3),
            "days_planned": sum(1 for r in per_day if r["planned_min"] > 0),
            "days_complete": len(complete),
            "days_with_missed": [r["date"] for r in per_day if r["missed"]],
            "max_day_difference_min": (round(max(abs(r["recorded_min"] - r["planned_min"])
                                                 for r in complete), 3) if complete else None),
        },
    }


def _at_target(plan: dict, recorded_bin: np.ndarray, planned_bin: np.ndarray, bw: float) -> dict:
    summary = plan.get("summary") or {}
    target = float(summary.get("target_minutes", plan["settings"].get("target_minutes", 60.0)))
    before = summary.get("depth_before_min") or {}
    idx = {key: int(round(float(key) / bw)) % recorded_bin.size for key in before}
    now = {key: float(before[key]) + float(recorded_bin[b]) for key, b in idx.items()}
    so_far = {key: float(before[key]) + float(planned_bin[b]) for key, b in idx.items()}
    reached = sorted((float(k) for k, v in now.items() if v >= target - 1e-9))
    return {
        "target_minutes": target, "wanted_bins": len(before),
        "before": sum(1 for v in before.values() if float(v) >= target - 1e-9),
        "now": len(reached),
        "planned_so_far": sum(1 for v in so_far.values() if v >= target - 1e-9),
        "planned_by_end": summary.get("done_after"),
        "bins": [_tidy(v) for v in reached],
    }


def _tidy(value):
    value = float(value)
    return int(value) if value.is_integer() else value
