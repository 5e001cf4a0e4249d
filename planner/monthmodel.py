"""The month problem on move-slot intervals: the model, plans as rows, and scoring.

The accounting is ``month.plan_month``'s (``month.depth_of`` re-counts every plan
built from these rows). The period is cut into intervals q = 0..Q-1 by the move
slots: q = 0 runs from the period start to the first slot, q = k + 1 from slot k
to the next (the last one to the period end). A plan holds one sweep row (a
parked setting) per interval, ``rows[q]``; ``rows[0]`` is the dish's start
setting (-1 when unknown: nothing is recorded before the first move). A run of
equal rows is one parking; a run that starts at q >= 1 starts with a move (from
an unknown start setting, the first setting counts as a move: someone must set
the dish). A passage of row r counts for its bins when the plan holds r from the
interval holding the passage's start to the one holding its end, and, if the run
begins with a move in the passage's first interval, the passage starts after the
move (``repark``).

Objective, in this order: wanted bins brought to the target depth, then capped
progress (minutes toward the target, summed over wanted bins), then fewer moves.
Rules: feed safety (``monthsafety.SunGuard``: no row through an interval the Sun
makes unsafe, no move along a path near the Sun), at most ``max_moves`` moves,
moves at least ``min_days_between_moves`` local days apart.

Minutes per bin; (R, Q, B) arrays are rows x intervals x longitude bins.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .monthsafety import SunGuard


@dataclass(frozen=True)
class SlotModel:
    """The month problem on intervals (see the module docstring). Minutes, (R, Q, B) arrays."""

    edges: np.ndarray  # (Q + 1,) interval edges, MJD UTC
    day: np.ndarray  # (Q,) local day index of the move slot opening each interval (q >= 1)
    start_row: int  # -1: unknown
    hold: np.ndarray  # (R, Q, B) passages inside interval q, the row held into it
    fresh: np.ndarray  # (R, Q, B) the same when the row was moved to at q (late ones only)
    span: np.ndarray  # (R, Q, B) passages from interval q into q + 1 (row held through)
    span_late: np.ndarray  # (R, Q, B) of those, the ones starting after a move at q
    multi: tuple  # (row, a, c, late, minutes (B,)) passages over more than one slot edge
    unsafe: np.ndarray  # (R, Q) the Sun forbids row r in interval q
    want: np.ndarray  # (B,) bool
    target: float
    done: np.ndarray  # (B,) minutes already logged
    repark_days: float
    min_days: int
    max_moves: int | None
    guard: SunGuard | None

    @property
    def n_rows(self) -> int:
        return self.hold.shape[0]

    @property
    def n_int(self) -> int:
        return self.hold.shape[1]

    def moves_safe(self, q: int) -> np.ndarray:
        """(R, R) allowed moves at the slot opening interval q (q >= 1)."""
        if self.guard is None:
            return np.ones((self.n_rows, self.n_rows), dtype=bool)
        t0 = float(self.edges[q])
        return self.guard.moves_safe(t0, t0 + self.repark_days)


def build_model(sweep, goal, slots, start_row: int | None, repark_minutes: float,
                min_days_between_moves: int, max_moves: int | None,
                guard: SunGuard | None) -> SlotModel:
    """The interval model of a month problem (``month.plan_month``'s inputs)."""
    from .month import _usable_sorted  # the same usable passages the greedy uses
    tables = _usable_sorted(sweep)
    edges = np.array([sweep.start_mjd] + [s.mjd for s in slots] + [sweep.end_mjd])
    n_q, n_rows = edges.size - 1, len(tables)
    n_bins = goal.want.size
    repark = repark_minutes / 1440.0
    shape = (n_rows, n_q, n_bins)
    hold, fresh, span, span_late = (np.zeros(shape) for _ in range(4))
    multi = []
    for r, (start, end, minutes, _) in enumerate(tables):  # one table per row
        inside = (start >= edges[0]) & (end <= edges[-1])
        start, end, minutes = start[inside], end[inside], minutes[inside]
        a = np.searchsorted(edges, start, side="right") - 1
        c = np.searchsorted(edges, end, side="left") - 1
        late = (a == 0) | (start >= edges[a] + repark)
        one = a == c
        np.add.at(hold[r], a[one], minutes[one])
        np.add.at(fresh[r], a[one & late], minutes[one & late])
        two = c == a + 1
        np.add.at(span[r], a[two], minutes[two])
        np.add.at(span_late[r], a[two & late], minutes[two & late])
        for i in np.flatnonzero(c > a + 1):  # rare: a passage over two slot edges
            multi.append((r, int(a[i]), int(c[i]), bool(late[i]), minutes[i]))
    unsafe = np.zeros((n_rows, n_q), dtype=bool)
    if guard is not None:
        unsafe = guard.unsafe_slots(edges)
    day = np.array([-10**6] + [s.day for s in slots])
    return SlotModel(edges=edges, day=day, start_row=-1 if start_row is None else int(start_row),
                     hold=hold, fresh=fresh, span=span, span_late=span_late, multi=tuple(multi),
                     unsafe=unsafe, want=goal.want.astype(bool), target=float(goal.target_minutes),
                     done=goal.done_minutes.astype(float), repark_days=repark,
                     min_days=int(min_days_between_moves), max_moves=max_moves, guard=guard)


# ------------------------------------------------------------------ evaluation


@dataclass(frozen=True)
class Score:
    """What the plan achieves, ordered: bins at target, then capped progress, then fewer moves."""

    bins: int
    progress: float  # sum over wanted bins of min(depth, target) / target
    moves: int

    @property
    def key(self) -> tuple:
        return (self.bins, round(self.progress, 6), -self.moves)


def runs_of(rows: np.ndarray) -> list[tuple[int, int, int]]:
    """(row, first interval, end interval exclusive) of each run of equal rows."""
    cut = np.flatnonzero(np.diff(rows)) + 1
    starts = np.concatenate([[0], cut])
    ends = np.concatenate([cut, [rows.size]])
    return [(int(rows[i]), int(i), int(j)) for i, j in zip(starts, ends)]


def moves_of(rows: np.ndarray) -> np.ndarray:
    """Intervals opened by a move: where the row changes (from an unknown start setting,
    -1, the first setting is a move too: someone must set the dish)."""
    change = np.flatnonzero(np.diff(rows)) + 1
    return change


class Prefix:
    """Prefix sums over intervals, so any run's minutes per bin cost O(B)."""

    def __init__(self, m: SlotModel):
        zero = np.zeros((m.n_rows, 1, m.hold.shape[2]))
        self.hold = np.concatenate([zero, np.cumsum(m.hold, axis=1)], axis=1)
        self.span = np.concatenate([zero, np.cumsum(m.span, axis=1)], axis=1)
        self.early_hold = m.hold - m.fresh  # lost when the run starts with a move here
        self.early_span = m.span - m.span_late
        self.unsafe = np.concatenate([np.zeros((m.n_rows, 1), int),
                                      np.cumsum(m.unsafe, axis=1)], axis=1)


def run_contrib(p: Prefix, r, i, j, fresh) -> np.ndarray:
    """Minutes per bin from runs of rows ``r`` over intervals [i, j) (arrays broadcast, (..., B)).

    Passages inside the run's intervals and across its inner slot edges; a run that
    starts with a move (``fresh``) loses the ones that begin before the move ends.
    """
    r, i, j, fresh = np.broadcast_arrays(np.asarray(r), np.asarray(i), np.asarray(j),
                                         np.asarray(fresh, dtype=bool))
    valid = r >= 0
    rr = np.where(valid, r, 0)
    inner = np.maximum(j - 1, i)
    out = (p.hold[rr, j] - p.hold[rr, i] + p.span[rr, inner] - p.span[rr, i]
           - fresh[..., None] * (p.early_hold[rr, np.minimum(i, p.early_hold.shape[1] - 1)]
                                 + ((j - i) >= 2)[..., None]
                                 * p.early_span[rr, np.minimum(i, p.early_span.shape[1] - 1)]))
    return np.where(valid[..., None], out, 0.0)


def fast_depth(m: SlotModel, p: Prefix, rows: np.ndarray) -> np.ndarray:
    """Depth per bin of a plan from the prefix sums (passages over two slot edges left out)."""
    runs = runs_of(rows)
    r = np.array([x[0] for x in runs])
    i = np.array([x[1] for x in runs])
    j = np.array([x[2] for x in runs])
    return m.done + run_contrib(p, r, i, j, i >= 1).sum(axis=0)


def exact_depth(m: SlotModel, p: Prefix, rows: np.ndarray) -> np.ndarray:
    """Depth per bin of a plan, every passage counted (the module docstring's rule)."""
    depth = fast_depth(m, p, rows)
    for r, a, c, late, minutes in m.multi:  # rare
        i = a
        while i > 0 and rows[i - 1] == r:
            i -= 1
        if np.all(rows[a:c + 1] == r) and (late or i < a or i == 0):
            depth = depth + minutes
    return depth


def score_of(m: SlotModel, depth: np.ndarray, rows: np.ndarray) -> Score:
    want = m.want
    capped = np.minimum(depth[want], m.target) / m.target
    return Score(int(np.count_nonzero(depth[want] >= m.target - 1e-9)), float(capped.sum()),
                 int(moves_of(rows).size))


def feasible(m: SlotModel, rows: np.ndarray) -> bool:
    """Every rule: Sun-safe intervals and moves, move count and spacing."""
    q = np.arange(1, rows.size)
    if np.any(m.unsafe[rows[1:], q]):
        return False
    moves = moves_of(rows)
    for k in moves:  # a handful of moves
        a = rows[k - 1]
        if a >= 0 and not m.moves_safe(int(k))[a, rows[k]]:
            return False
    if m.max_moves is not None and moves.size > m.max_moves:
        return False
    days = m.day[moves]
    return not np.any(np.diff(days) < m.min_days)



# ------------------------------------------------------------------ plans <-> rows


def rows_of_plan(m: SlotModel, parkings) -> np.ndarray:
    """The row held in each interval by a list of ``month.Parking`` (the greedy's output)."""
    rows = np.full(m.n_int, m.start_row)
    starts = m.edges[:-1]
    for p in parkings:  # a handful
        begin = p.move_mjd if p.move_mjd is not None else m.edges[0]
        held = (starts >= begin - 1e-9) & (starts < p.end_mjd - 1e-9)
        rows[held] = p.row
    return rows


def parkings_of_rows(m: SlotModel, rows: np.ndarray):
    """``month.Parking`` list for a row per interval (occurrences filled by the caller)."""
    from .month import Parking
    out = []
    for r, i, j in runs_of(rows):
        if r < 0:
            continue
        if i == 0:
            out.append(Parking(r, None, float(m.edges[0]), float(m.edges[j])))
        else:
            move = float(m.edges[i])
            out.append(Parking(r, move, move + m.repark_days, float(m.edges[j])))
    return out
