"""Month planner for drift surveys: where to park the dish each day to fill longitude gaps.

The problem: over a period of days, choose the dish's declination so that as
many wanted 1-degree longitude bins as possible reach a target depth
(integration minutes per bin), given what the observation log already holds.
A person must move the dish, so a move can happen only at a *move slot*: the
start of the first operator window of a local day (10:00 local when no windows
are given), at most once per ``min_days_between_moves`` days.

Algorithm: greedy by completion rate, with look-ahead to the end of the
period. The goal counts bins brought to the target depth, so partial progress
spread thinly is worth nothing. At a move slot the planner considers every
reachable declination and every stay length j (1 slot up to the end of the
period): it adds up the minutes per bin that parking there for j slots would
give, counts the wanted bins that would then reach the target, and divides by
the days spent. It commits to the declination and length with the best rate
(bins completed per day), then decides again at the end of that stay. Once
no bin can be finished in the time left, it makes the most capped progress
instead (minutes a bin still needs, summed over bins). Ties go to staying put,
then to the lower declination and the shorter stay, so the output is
deterministic. Evaluating all rows x lengths x bins is one numpy reduction per
decision (about 30 decisions a month).

The per-passage coverage comes from ``coverage.sweep`` (sidereal templates);
a passage counts for a parking interval only if it lies wholly inside it,
after the time the move takes (``repark_minutes``).

Feed safety (``monthsafety.SunGuard``) is a hard constraint, above every rule of the
goal: a setting may be held through a move-slot interval only if the Sun
stays more than ``sun_hazard_deg`` from its beam while it is up
(``sunsafety.sun_approaches``), and a move is allowed only if the path the dish
takes during it stays clear of the Sun too. Where safety and the spacing of
moves disagree, safety wins. What cannot be avoided (the dish already parked
where the Sun will cross before the first move slot) or what the user insists
on (``SunGuard.enforce`` false) becomes a ``HazardTask``: cover the feed or
move the dish before the time given.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timedelta

import numpy as np

from .coverage import Sweep
from .errors import UserError
from .site import Site
from .monthsafety import HazardTask, SunGuard
from .timebase import datetime_to_mjd_utc, mjd_to_datetime_utc

# Without windows the dish is moved at 10:00 local, not at noon: at noon the Sun sits on
# the meridian a transit dish is tipped along. Two hours or more from apparent noon (true
# for 10:00 local in almost every zone) the meridian stays over 20 deg from the Sun.
DEFAULT_MOVE_HOUR_LOCAL = 10.0
# When nothing can be finished any more, a move must gain at least this many bins'
# worth of progress over staying put: a move costs a volunteer's visit.
MOVE_THRESHOLD_BINS = 0.05


@dataclass(frozen=True)
class MoveSlot:
    """A moment a volunteer can move the dish (UTC MJD) and its local day index."""

    day: int
    mjd: float


@dataclass(frozen=True)
class Goal:
    """What the plan aims for: wanted bins, target depth, depth already logged (minutes)."""

    want: np.ndarray  # (B,) bool
    target_minutes: float
    done_minutes: np.ndarray  # (B,)

    def need(self, depth_minutes: np.ndarray) -> np.ndarray:
        return np.where(self.want, np.maximum(self.target_minutes - depth_minutes, 0.0), 0.0)


@dataclass
class Parking:
    """One parking interval: declination row, from (after the move) to the next move."""

    row: int
    move_mjd: float | None  # None: no move (the dish was already there)
    start_mjd: float  # recordings count from here
    end_mjd: float
    occurrences: np.ndarray = field(default_factory=lambda: np.zeros(0, int))


@dataclass(frozen=True)
class MonthPlan:
    """The chosen parkings and the depth they reach."""

    sweep: Sweep
    goal: Goal
    parkings: list[Parking]
    depth_before: np.ndarray  # (B,) minutes
    depth_after: np.ndarray  # (B,) minutes
    hazards: tuple[HazardTask, ...] = ()

    @property
    def done_before(self) -> int:
        return int(np.count_nonzero(self.goal.want & (self.depth_before >= self.goal.target_minutes)))

    @property
    def done_after(self) -> int:
        return int(np.count_nonzero(self.goal.want & (self.depth_after >= self.goal.target_minutes)))


def minutes_for_rms(site: Site, target_rms_k: float, switching_factor: float = 1.0) -> float:
    """Integration minutes per bin that reach ``target_rms_k`` (radiometer equation, Dicke 1946)."""
    if not target_rms_k > 0:
        raise UserError(f"--target-rms: {target_rms_k} must be positive")
    width_hz = site.receiver.channel_width_khz * 1e3
    seconds = (switching_factor * site.receiver.tsys_k / target_rms_k) ** 2 / width_hz
    return seconds / 60.0


def _usable_sorted(sweep: Sweep):
    """Per row: usable occurrences sorted by start: (start, end, bin minutes (O, B), index)."""
    out = []
    for row in sweep.rows:
        occ = row.occurrences
        if occ.bin_seconds is None:
            raise ValueError("sweep must be computed with per_occurrence=True")
        idx = np.flatnonzero(occ.usable)
        idx = idx[np.argsort(occ.start_mjd[idx], kind="stable")]
        out.append((occ.start_mjd[idx], occ.end_mjd[idx], occ.bin_seconds[idx] / 60.0, idx))
    return out


def _gain(table, t0: float, t1: float) -> tuple[np.ndarray, np.ndarray]:
    """Minutes per bin from passages wholly inside [t0, t1), and their indices."""
    start, end, minutes, idx = table
    lo = np.searchsorted(start, t0, side="left")
    hi = np.searchsorted(start, t1, side="left")
    take = np.arange(lo, hi)[end[lo:hi] <= t1]
    return minutes[take].sum(axis=0), idx[take]


def _slot_gains(tables, slots: list[MoveSlot], end_mjd: float, repark_days: float):
    """Minutes per bin each row gains between consecutive slots: (R, K, B) staying, and
    (R, K, B) when the dish is moved at the slot (recording starts after the move)."""
    n_rows, n_slots = len(tables), len(slots)
    n_bins = tables[0][2].shape[1] if tables and tables[0][2].ndim == 2 else 0
    edges = [s.mjd for s in slots] + [end_mjd]
    stay = np.zeros((n_rows, n_slots, n_bins))
    moved = np.zeros((n_rows, n_slots, n_bins))
    for r, table in enumerate(tables):  # rows x slots: a few thousand cheap sums
        for k in range(n_slots):
            stay[r, k] = _gain(table, edges[k], edges[k + 1])[0]
            moved[r, k] = _gain(table, edges[k] + repark_days, edges[k + 1])[0]
    return stay, moved


def plan_month(sweep: Sweep, goal: Goal, slots: list[MoveSlot], start_row: int | None,
               repark_minutes: float = 15.0, min_days_between_moves: int = 1,
               guard: SunGuard | None = None, max_moves: int | None = None) -> MonthPlan:
    """Choose a parking per move slot by completion rate (see module docstring).

    ``start_row``: the sweep row the dish is parked at when the period starts, or None
    (then the first slot must move it, and that counts as a move). ``guard``:
    feed-safety constraints (None: none). ``min_days_between_moves``: local days from
    one move to the next at least. ``max_moves``: moves at most (None: no limit); a
    move the Sun makes necessary is taken even past it (``monthopt`` then repairs).
    """
    tables = _usable_sorted(sweep)
    n_rows = len(sweep.rows)
    repark = repark_minutes / 1440.0
    target = goal.target_minutes
    depth = goal.done_minutes.astype(float).copy()
    depth_before = depth.copy()
    parkings: list[Parking] = []
    current = start_row
    if current is not None:
        first_end = slots[0].mjd if slots else sweep.end_mjd
        parkings.append(Parking(current, None, sweep.start_mjd, first_end))
        depth = depth + _gain(tables[current], sweep.start_mjd, first_end)[0]
    if not slots or n_rows == 0:
        return _finish(sweep, goal, parkings, depth_before, tables, guard, repark)
    stay, moved = _slot_gains(tables, slots, sweep.end_mjd, repark)
    edges = np.array([s.mjd for s in slots] + [sweep.end_mjd])
    unsafe = (np.zeros((n_rows, len(slots)), bool) if guard is None
              else guard.unsafe_slots(edges))
    # Slots a parking starting at slot k must last to keep the next move far enough
    # away in local days (not in slots: days without a window have none).
    days = np.array([s.day for s in slots])
    spacing = np.maximum(np.searchsorted(days, days + min_days_between_moves, side="left")
                         - np.arange(len(slots)), 1)
    moves = 0
    k = 0
    while k < len(slots):  # one decision per commitment, at most one per slot
        n_left = len(slots) - k
        # Cumulative gains if parked at each row from slot k for j = 1..n_left slots.
        first = moved[:, k].copy()
        if current is not None:
            first[current] = stay[current, k]
        cum = first[:, None, :] + np.concatenate(
            [np.zeros((n_rows, 1, first.shape[1])), np.cumsum(stay[:, k + 1:], axis=1)], axis=1)
        # Feasible (row, length): safe for every slot of the stay, and a safe move there.
        safe_run = np.cumprod(~unsafe[:, k:], axis=1).sum(axis=1)
        reachable = (np.ones(n_rows, bool) if guard is None or current is None
                     else guard.moves_safe(edges[k], edges[k] + repark)[current])
        lengths = np.arange(1, n_left + 1)
        feasible = (lengths[None, :] <= safe_run[:, None]) & reachable[:, None]
        if max_moves is not None and moves >= max_moves and current is not None \
                and feasible[current].any():
            feasible[np.arange(n_rows) != current] = False  # no moves left: stay
        if not feasible.any():
            when = mjd_to_datetime_utc(edges[k]).astimezone(sweep.site.tz).strftime("%Y-%m-%d")
            raise UserError(f"no reachable setting is safe from the Sun on {when}: it passes within "
                            f"{guard.limit_deg:g}° of every one (cover the feed or stow the dish; "
                            "--allow-sun-hazard plans anyway, with a warning for every such day)")
        min_j = 1 if current is None else int(spacing[k])
        # A new parking must last at least the move spacing, unless the Sun cuts it short.
        min_len = np.minimum(min_j, np.maximum(safe_run, 1))
        feasible &= lengths[None, :] >= min_len[:, None]
        open_bins = goal.want & (depth < target - 1e-9)
        completes = ((depth[None, None, :] + cum >= target - 1e-9) & open_bins).sum(axis=2)
        span = edges[k + 1:k + 1 + n_left] - edges[k]
        rate = np.where(feasible, completes / span[None, :], -1.0)
        if rate.max() > 0:
            best = np.flatnonzero(rate.max(axis=1) >= rate.max() - 1e-12)
            # Ties: stay put, else the lowest declination (rows are in ascending order).
            row = current if current in best else int(best[0])
            j = int(np.argmax(rate[row] >= rate[row].max() - 1e-12)) + 1
        else:
            # Nothing can be finished any more: make the most capped progress, each row
            # for as long as it may stay.
            need = goal.need(depth)
            longest = np.where(feasible.any(axis=1), n_left - np.argmax(feasible[:, ::-1], axis=1), 0)
            reach = cum[np.arange(n_rows), np.maximum(longest - 1, 0)]
            progress = np.minimum(reach, need).sum(axis=1) / target
            if current is not None:
                progress[current] += MOVE_THRESHOLD_BINS
            progress[longest == 0] = -np.inf
            row = int(np.argmax(progress))
            j = int(longest[row])
        if row != current:
            if parkings:
                parkings[-1].end_mjd = edges[k]
            parkings.append(Parking(row, edges[k], edges[k] + repark, edges[k + j]))
            current = row
            moves += 1
        else:
            parkings[-1].end_mjd = edges[k + j]
        depth = depth + cum[row, j - 1]
        k += j
    return _finish(sweep, goal, parkings, depth_before, tables, guard, repark)


def plan_from_parkings(sweep: Sweep, goal: Goal, parkings: list[Parking], guard: SunGuard | None = None,
                       repark_minutes: float = 15.0) -> MonthPlan:
    """The ``MonthPlan`` of given parkings (e.g. an optimised plan), counted from scratch."""
    return _finish(sweep, goal, parkings, goal.done_minutes.astype(float).copy(),
                   _usable_sorted(sweep), guard, repark_minutes / 1440.0)


def _finish(sweep, goal, parkings, depth_before, tables, guard=None, repark=0.0) -> MonthPlan:
    for p in parkings:
        p.occurrences = _gain(tables[p.row], p.start_mjd, p.end_mjd)[1]
    return MonthPlan(sweep=sweep, goal=goal, parkings=parkings, depth_before=depth_before,
                     depth_after=_depth_of(sweep, goal, parkings, tables),
                     hazards=() if guard is None else guard.hazard_tasks(parkings, repark,
                                                                         sweep.start_mjd))


def _depth_of(sweep: Sweep, goal: Goal, parkings: list[Parking], tables) -> np.ndarray:
    """Depth per bin after the parkings (recomputed from scratch, independent of the loop)."""
    depth = goal.done_minutes.astype(float).copy()
    for p in parkings:
        depth = depth + _gain(tables[p.row], p.start_mjd, p.end_mjd)[0]
    return depth


def evaluate_fixed(sweep: Sweep, goal: Goal, row: int) -> np.ndarray:
    """Depth per bin if the dish stays at ``row`` for the whole period (a baseline)."""
    tables = _usable_sorted(sweep)
    return goal.done_minutes + _gain(tables[row], sweep.start_mjd, sweep.end_mjd)[0]


def evaluate_schedule(sweep: Sweep, goal: Goal, slots: list[MoveSlot], rows_per_slot: list[int],
                      repark_minutes: float = 15.0) -> np.ndarray:
    """Depth per bin for a given declination per slot (baselines such as round-robin)."""
    tables = _usable_sorted(sweep)
    parkings, current = [], None
    for k, (slot, row) in enumerate(zip(slots, rows_per_slot)):
        until = slots[k + 1].mjd if k + 1 < len(slots) else sweep.end_mjd
        if row != current:
            parkings.append(Parking(row, slot.mjd, slot.mjd + repark_minutes / 1440.0, until))
            current = row
        else:
            parkings[-1].end_mjd = until
    return _depth_of(sweep, goal, parkings, tables)


def done_count(goal: Goal, depth: np.ndarray) -> int:
    """Wanted bins at or beyond the target depth."""
    return int(np.count_nonzero(goal.want & (depth >= goal.target_minutes - 1e-9)))


def gap_reasons(sweep: Sweep, goal: Goal, depth_after: np.ndarray,
                windows_limit_recording: bool) -> dict[int, str]:
    """Why each wanted bin short of the target stays open."""
    any_time = np.zeros_like(depth_after)
    usable_any = np.zeros_like(depth_after)
    sun_free = np.zeros_like(depth_after)
    for row in sweep.rows:
        occ = row.occurrences
        any_time += row.bin_total_s
        usable_any += row.bin_usable_s
        if occ.bin_seconds is not None and occ.start_mjd.size:
            sun_ok = occ.sun_sep_min_deg >= sweep.site.rules.sun_min_sep_deg
            sun_free += occ.bin_seconds[sun_ok].sum(axis=0)
    reasons = {}
    short = np.flatnonzero(goal.want & (depth_after < goal.target_minutes - 1e-9))
    for b in short:
        if any_time[b] <= 0:
            reasons[int(b)] = "never reachable from this site"
        elif sun_free[b] <= 0:
            reasons[int(b)] = "only near the Sun this period"
        elif usable_any[b] <= 0:
            reasons[int(b)] = ("outside every window" if windows_limit_recording
                               else "only in daylight")
        else:
            reasons[int(b)] = "not enough time this period"
    return reasons


def move_slots(start_mjd: float, days: int, tz, window_intervals=None,
               move_hour_local: float = DEFAULT_MOVE_HOUR_LOCAL) -> list[MoveSlot]:
    """One move slot per local day: the first window that starts that day, or ``move_hour_local``.

    A window running on past midnight belongs to the day it started (Saturday 21:00-02:00
    gives Saturday's slot, and Sunday's is Sunday's own first window); only on the first
    day of the period may a window already under way at midnight give a slot, at
    midnight, when none starts that day. Days without a window have no slot.
    ``start_mjd`` is local midnight of the first day.
    """
    first = mjd_to_datetime_utc(start_mjd).astimezone(tz).date()
    slots = []
    for d in range(days):  # one per day
        day = first + timedelta(days=d)
        midnight = datetime_to_mjd_utc(datetime(day.year, day.month, day.day, tzinfo=tz))
        next_midnight = datetime_to_mjd_utc(datetime.combine(day + timedelta(days=1),
                                                             datetime.min.time(), tzinfo=tz))
        if window_intervals is None:
            hour, minute = int(move_hour_local), int(round((move_hour_local % 1) * 60))
            slots.append(MoveSlot(d, datetime_to_mjd_utc(
                datetime(day.year, day.month, day.day, hour, minute, tzinfo=tz))))
            continue
        w = np.asarray(window_intervals).reshape(-1, 2)
        starts_today = w[(w[:, 0] >= midnight) & (w[:, 0] < next_midnight)]
        running = w[(w[:, 0] < midnight) & (w[:, 1] > midnight)]
        if starts_today.size:
            slots.append(MoveSlot(d, float(starts_today[0, 0])))
        elif d == 0 and running.size:
            slots.append(MoveSlot(d, float(midnight)))
    return slots
