"""Month plans near the optimum: local search after the greedy, and the whole optimisation.

On the interval model of ``monthmodel``:

* ``improve``: deterministic local search from a plan (the greedy's). Each round
  applies the best change, among (a) give any run of intervals [i, j) any row
  (this moves, splits, merges and shifts parkings) and (b) give two parkings any
  two rows at once (this swaps them, too; all pairs in plans of up to 8
  parkings, near pairs beyond) and (c) put the parkings' rows in another order
  (every order, for 3 to 6 parkings), that obeys every rule and improves the
  objective; it stops when none does, or after ``MAX_ROUNDS`` rounds (a count,
  not a time, so every machine gets the same plan). Candidates are scored for
  every row at once from prefix sums over intervals (``monthmodel.run_contrib``);
  the few passages spanning more than one move slot are left out of that fast
  score and counted exactly before a change is accepted.
* ``optimize``: greedy, then local search, then (when asked) the integer
  program of ``monthmip``; always a proven bound (the integer program's when it
  ran, else its linear relaxation's); the best plan by the objective, re-counted
  exactly, never worse than the greedy's.
"""
from __future__ import annotations

import itertools
import time
from dataclasses import dataclass, replace

import numpy as np

from .monthmip import linear_bound, nodes_for, solve_exact
from .monthmodel import (Prefix, SlotModel, build_model, exact_depth, fast_depth, feasible,
                         parkings_of_rows, rows_of_plan, run_contrib, runs_of, score_of)


# Local-search rounds at most (each applies the best change found); a count, not a time,
# keeps the result the same on every machine. A month needs 5 to 20.
MAX_ROUNDS = 40


def _better(bins, progress, moves, best) -> np.ndarray:
    """Mask of candidate scores (arrays) better than ``best`` in the objective's order."""
    prog = np.round(progress, 6)
    ref = round(best.progress, 6)
    return (bins > best.bins) | ((bins == best.bins) & ((prog > ref)
                                                        | ((prog == ref) & (moves < best.moves))))


def _scores(m: SlotModel, depth: np.ndarray, scratch: bool = False):
    """(bins at target, capped progress) of candidate depths (..., B); ``scratch``: ``depth``
    may be overwritten (it is a wanted-only model's, and the caller's own)."""
    if not scratch or not m.want.all():
        depth = depth[..., m.want]  # a copy
    bins = np.count_nonzero(depth >= m.target - 1e-9, axis=-1)
    np.minimum(depth, m.target, out=depth)
    depth /= m.target
    return bins, depth.sum(axis=-1)


# Reassigning two parkings at once is tried for every pair when a plan has at most this
# many parkings, and for neighbours and next-but-one neighbours beyond (cost grows as the
# square of the rows for each pair).
_ALL_PAIRS_UP_TO = 8
# Every order of the parkings' rows is tried for plans of 3 to this many parkings (720).
_PERMUTE_UP_TO = 6


def _wanted_only(m: SlotModel) -> SlotModel:
    """The model restricted to the wanted bins still short of the target that some setting
    reaches: the only ones whose count or capped progress a plan can change (a bin already at
    target, or one no passage crosses, keeps its depth, adding a constant to both), so every
    comparison the search makes is the same."""
    reach = (m.hold + m.span).sum(axis=(0, 1)) > 0
    for *_, minutes in m.multi:  # rare
        reach |= minutes > 0
    keep = np.flatnonzero(m.want & (m.done < m.target - 1e-9) & reach)
    return replace(m, hold=m.hold[:, :, keep], fresh=m.fresh[:, :, keep],
                   span=m.span[:, :, keep], span_late=m.span_late[:, :, keep],
                   multi=tuple((r, a, c, late, minutes[keep]) for r, a, c, late, minutes in m.multi),
                   want=np.ones(keep.size, bool), done=m.done[keep])


class _RunEnds:
    """A new run's minutes for every row and end at once, from one start (phase (a)).

    A run of row r over [i, j) that starts with a move adds (``run_contrib``)
    H[r, j] - H[r, i] + S[r, j - 1] - S[r, i] - EH[r, i] - [j - i >= 2] ES[r, i]
    with H, S the prefix sums of passages inside and across intervals and EH, ES the
    ones lost to the move: an end part H[r, j] + S[r, j - 1] kept as a (Q + 1, R, B)
    array, so all ends of one start are a slice, less a start part.
    """

    def __init__(self, p: Prefix):
        hold_t = np.moveaxis(p.hold, 1, 0)  # (Q + 1, R, B)
        span_t = np.moveaxis(p.span, 1, 0)
        self.end = hold_t.copy()
        self.end[1:] += span_t[:-1]
        self.start = hold_t + span_t  # (Q + 1, R, B), used at i <= Q - 1
        self.early_hold = np.moveaxis(p.early_hold, 1, 0)  # (Q, R, B)
        self.early_span = np.moveaxis(p.early_span, 1, 0)
        self.unsafe = p.unsafe  # (R, Q + 1) prefix counts
        self._buffer = np.empty_like(self.end[1:])  # reused: no fresh pages each start

    def fresh_run(self, i: int) -> np.ndarray:
        """(J, R, B): rows over [i, j), j = i + 1 .. Q, starting with a move; valid until the
        next call (one buffer serves every start)."""
        cut = self.start[i] + self.early_hold[i] + self.early_span[i]
        out = np.subtract(self.end[i + 1:], cut, out=self._buffer[i:])
        out[0] += self.early_span[i]  # a one-interval run loses no passage across its end
        return out

    def safe_run(self, i: int) -> np.ndarray:
        """(J, R) bool: no interval of [i, j) unsafe for the row (i >= 1)."""
        return (self.unsafe[:, i + 1:] - self.unsafe[:, i:i + 1]).T == 0


def _applied(rows: np.ndarray, assign) -> np.ndarray:
    """A copy of ``rows`` with each (i, j, row) of ``assign`` written to [i, j)."""
    trial = rows.copy()
    for i, j, r in assign:
        trial[i:j] = r
    return trial


def _polish_moves(m: SlotModel, p: Prefix, rows: np.ndarray) -> np.ndarray:
    """Each move shifted to its best slot between its neighbours (fast score), repeated
    until none moves: coordinate ascent over the move slots, the rows' order kept.

    For one move, every slot between its neighbours is scored at once: only the two
    runs it separates change, each a prefix-sum difference (``run_contrib``).
    """
    rows = rows.copy()
    runs = runs_of(rows)  # shifting a move keeps both runs non-empty: the runs stay the runs
    depth = fast_depth(m, p, rows)
    best = score_of(m, depth, rows).key
    changed = True
    while changed:  # a few sweeps
        changed = False
        for k in range(1, len(runs)):
            (left, l0, l1), (right, r0, r1) = runs[k - 1], runs[k]
            if left < 0:  # the first setting after an unknown start: at the first slot
                continue
            base = (depth - run_contrib(p, [left], [l0], [l1], [l0 >= 1])[0]
                    - run_contrib(p, [right], [r0], [r1], [True])[0])
            q = np.arange(l0 + 1, r1)  # the move's slot: left keeps [l0, q), right [q, r1)
            cand = (base[None, :] + run_contrib(p, np.full(q.size, left), np.full(q.size, l0), q,
                                                np.full(q.size, l0 >= 1))
                    + run_contrib(p, np.full(q.size, right), q, np.full(q.size, r1), True))
            bins, progress = _scores(m, cand, scratch=True)
            keys = [(int(b), round(float(g), 6), best[2]) for b, g in zip(bins, progress)]
            pick = max(range(q.size), key=lambda i: (keys[i], -abs(q[i] - r0)))
            if keys[pick] > best:
                at = int(q[pick])
                rows[l0:at], rows[at:r1] = left, right
                runs[k - 1], runs[k] = (left, l0, at), (right, at, r1)
                depth = fast_depth(m, p, rows)
                best, changed = keys[pick], True
    return rows


def improve(m: SlotModel, rows: np.ndarray, max_rounds: int = MAX_ROUNDS) -> np.ndarray:
    """Deterministic local search from a feasible plan (module docstring); never worse.

    Moves: (a) any run of intervals [i, j) to any row; (b) two parkings to any two rows
    at once (this includes swapping them). Each round applies the best candidate, by
    its exact re-count, that obeys every rule.
    """
    m = _wanted_only(m)  # the objective reads wanted bins only: 2-3 times less to add up
    p = Prefix(m)
    ends = _RunEnds(p)
    rows = rows.copy()
    best = score_of(m, exact_depth(m, p, rows), rows)
    n_q, n_rows = m.n_int, m.n_rows
    all_rows = np.arange(n_rows)
    for _ in range(max_rounds):
        depth = fast_depth(m, p, rows)
        runs = runs_of(rows)
        run_at = np.repeat(np.arange(len(runs)), [j - i for _, i, j in runs])
        run_row, run_start, run_end = (np.array(x) for x in zip(*runs))
        contrib = run_contrib(p, run_row, run_start, run_end, run_start >= 1)  # (runs, B)
        moves_now = score_of(m, depth, rows).moves
        # The run holding j, cut to start at j with a move there, for every j at once;
        # and the run holding i - 1, cut to end at i.
        at = np.arange(n_q)
        right_part = run_contrib(p, run_row[run_at], at, run_end[run_at], True)  # (Q, B)
        left_start = run_start[run_at]
        left_part_at = run_contrib(p, run_row[run_at][:-1], left_start[:-1], at[1:],
                                   left_start[:-1] >= 1)  # (Q - 1, B): index i - 1
        candidates = []  # (key, assignments ((i, j, row), ...)) of improving candidates
        # (a) every run of intervals [i, j) to every row: for each i, all j and rows at
        # once, (j, row, bin) arrays. The runs around [i, j) are recomposed: the run
        # before i keeps [its start, i) (or absorbs the new run if it has its row), the
        # run holding j restarts at j with a move (or absorbs it likewise). A new run of
        # any other row r adds ends[j, r] - starts_at(i)[r] (``_RunEnds``), slices and no
        # gathers; the two rows that merge with a neighbour are re-counted apart.
        cum_contrib = np.concatenate([np.zeros((1, depth.size)), np.cumsum(contrib, axis=0)])
        j_all = np.arange(2, n_q + 1)
        has_right = j_all < n_q
        right_run = np.where(has_right, run_at[np.minimum(j_all, n_q - 1)], len(runs) - 1)
        c_of = np.where(has_right, [runs[k][0] for k in right_run], -2)
        rc_end_of = np.where(has_right, [runs[k][2] for k in right_run], n_q)
        right_parts = np.concatenate([right_part[2:], np.zeros((1, depth.size))])  # (J, B)
        for i in range(1, n_q):
            left = run_at[i - 1]
            a, la, _ = runs[left]
            left_part = left_part_at[i - 1]
            js = slice(i - 1, None)  # j = i + 1 .. n_q
            j, last, c, rc_end = j_all[js], right_run[js], c_of[js], rc_end_of[js]
            old = cum_contrib[last + 1] - cum_contrib[left]  # (J, B)
            inner_moves = last - left  # every run after the left one starts with a move
            kept = depth - old  # (J, B): the plan without the runs left..last
            around = kept + left_part + right_parts[js]  # right parts are 0 past the end
            cand = ends.fresh_run(i)  # (J, R, B) new run [i, j) of each row, with a move
            cand += around[:, None, :]
            if a >= 0:  # the new run has the left run's row: it extends that run
                mid_end = np.where(c == a, rc_end, j)
                cand[:, a] = (kept + run_contrib(p, a, la, mid_end, la >= 1)
                              + np.where(((c != a) & has_right[js])[:, None], right_parts[js], 0.0))
            merge = (c >= 0) & (c != a)  # the new run has the right run's row: it absorbs it
            if merge.any():
                jm = np.flatnonzero(merge)
                cand[jm, c[jm]] = (kept[jm] + left_part
                                   + run_contrib(p, c[jm], i, rc_end[jm], True))
            bins, progress = _scores(m, cand, scratch=True)
            same_a = all_rows == a  # (R,)
            same_c = all_rows[None, :] == c[:, None]  # (J, R)
            moves = (moves_now - inner_moves[:, None] + (~same_a)[None, :]
                     + ((~same_c) & has_right[js, None]))
            # Rules checked here for all at once (the rest by ``feasible`` on acceptance):
            # no unsafe interval in the new run, the move cap.
            ok = ends.safe_run(i)  # (J, R)
            if m.max_moves is not None:
                ok &= moves <= m.max_moves
            for jj, r in zip(*np.nonzero(ok & _better(bins, progress, moves, best))):
                candidates.append(((int(bins[jj, r]), round(float(progress[jj, r]), 6),
                                    -int(moves[jj, r])), ((i, int(j[jj]), int(r)),)))
        # (b) two parkings at once; merges with neighbours are ignored in this fast score.
        parks = [k for k in range(len(runs)) if runs[k][1] >= 1]
        own = {k: run_contrib(p, all_rows, runs[k][1], runs[k][2], True) for k in parks}
        for x, k in enumerate(parks):
            for k2 in parks[x + 1:]:
                if len(parks) > _ALL_PAIRS_UP_TO and k2 - k > 2:
                    continue
                base = depth - contrib[k] - contrib[k2]
                bins, progress = _scores(m, base[None, None, :] + own[k][:, None, :]
                                         + own[k2][None, :, :], scratch=True)
                good = _better(bins, progress, np.full(bins.shape, moves_now), best)
                good[runs[k][0], runs[k2][0]] = False
                for r1, r2 in zip(*np.nonzero(good)):
                    candidates.append(((int(bins[r1, r2]), round(float(progress[r1, r2]), 6),
                                        -moves_now),
                                       ((runs[k][1], runs[k][2], int(r1)),
                                        (runs[k2][1], runs[k2][2], int(r2)))))
        # (c) the parkings' rows in another order, each order with its move days polished
        # (every order, for up to 6 parkings): a different order usually wants the moves
        # a day or two earlier or later. Tried only when (a) and (b) find nothing.
        if 2 < len(parks) <= _PERMUTE_UP_TO and not any(
                feasible(m, _applied(rows, assign)) for _, assign in candidates):
            for order in itertools.permutations(range(len(parks))):
                if list(order) == sorted(order):
                    continue
                trial = rows.copy()
                for k, src in zip(parks, order):
                    trial[runs[k][1]:runs[k][2]] = runs[parks[src]][0]
                trial = _polish_moves(m, p, trial)
                score = score_of(m, fast_depth(m, p, trial), trial)
                if score.key > best.key:
                    candidates.append((score.key, tuple((i, j, r) for r, i, j in runs_of(trial))))
        accepted = False
        for key, assign in sorted(candidates, key=lambda c: (c[0], [(-i, -j, -r) for i, j, r in c[1]]),
                                  reverse=True):
            trial = _applied(rows, assign)
            if not feasible(m, trial):
                continue
            score = score_of(m, exact_depth(m, p, trial), trial)
            if score.key > best.key:
                rows, best, accepted = trial, score, True
                break
        if not accepted:
            break
    return rows


# ------------------------------------------------------------------ the whole optimisation


@dataclass(frozen=True)
class OptimizeReport:
    """How a month plan was found and how good it is."""

    greedy_bins: int
    bins: int
    moves: int
    upper_bound: int  # no plan under the same rules brings more wanted bins to target
    bound_source: str  # "linear relaxation" | "integer program" | "integer program (optimal)"
    method: str
    seconds: float

    def record(self) -> dict:
        """For the plan document (no run time: a plan file is the same on every run)."""
        return {"method": self.method, "greedy_bins": self.greedy_bins, "bins": self.bins,
                "moves": self.moves, "upper_bound": self.upper_bound,
                "bound_source": self.bound_source}


def optimize(m: SlotModel, greedy_rows: np.ndarray, exact_seconds: float | None = None,
             max_rounds: int = MAX_ROUNDS) -> tuple[np.ndarray, OptimizeReport]:
    """Best plan from the greedy's: local search, then the integer program if asked.

    The result is never worse than the greedy's plan (the objective, re-counted
    exactly); the bound is the integer program's when it ran, else the linear
    relaxation's, and never below the plan found.
    """
    started = time.perf_counter()
    p = Prefix(m)

    def judged(rows):
        return score_of(m, exact_depth(m, p, rows), rows)

    best_rows = greedy_rows
    greedy = judged(greedy_rows)
    best = greedy
    method = "greedy"
    if feasible(m, greedy_rows):
        improved = improve(m, greedy_rows, max_rounds)
        if judged(improved).key > best.key:
            best_rows, best = improved, judged(improved)
        method = "greedy + local search"
    if exact_seconds:
        # Budget in nodes (the same plan on every machine); time only as a safety net.
        exact = solve_exact(m, best_rows, 3.0 * exact_seconds + 60.0,
                            nodes=nodes_for(exact_seconds))
        if feasible(m, exact.rows) and judged(exact.rows).key > best.key:
            best_rows, best = exact.rows, judged(exact.rows)
        method += " + integer program"
        bound = exact.bound_bins
        source = "integer program (optimal)" if exact.optimal else "integer program"
        if exact.timed_out:
            method += " (stopped by its time limit: a rerun may differ)"
    else:
        bound, source = linear_bound(m), "linear relaxation"
    report = OptimizeReport(greedy_bins=greedy.bins, bins=best.bins, moves=best.moves,
                            upper_bound=max(bound, best.bins), bound_source=source,
                            method=method, seconds=time.perf_counter() - started)
    return best_rows, report


def best_plan(sweep, goal, slots, start_row: int | None, repark_minutes: float = 15.0,
              min_days_between_moves: int = 1, guard=None, max_moves: int | None = None,
              exact_seconds: float | None = None, max_rounds: int = MAX_ROUNDS,
              model: SlotModel | None = None):
    """(``month.MonthPlan``, ``OptimizeReport``): the greedy, improved (``optimize``).
    ``model``: the problem's ``build_model``, when the caller has it already."""
    from .month import plan_from_parkings, plan_month
    greedy = plan_month(sweep, goal, slots, start_row, repark_minutes, min_days_between_moves,
                        guard, max_moves)
    if model is None:
        model = build_model(sweep, goal, slots, start_row, repark_minutes,
                            min_days_between_moves, max_moves, guard)
    rows, report = optimize(model, rows_of_plan(model, greedy.parkings), exact_seconds, max_rounds)
    return plan_from_parkings(sweep, goal, parkings_of_rows(model, rows), guard,
                              repark_minutes), report


# Move caps of the trade-off table: how often someone must climb to the jack.
TRADEOFF_CAPS = (0, 1, 2, 4, 8, None)


def tradeoff(sweep, goal, slots, start_row: int | None, repark_minutes: float = 15.0,
             min_days_between_moves: int = 1, guard=None, moves_before: int = 0) -> list[dict]:
    """Wanted bins at target for each move cap in ``TRADEOFF_CAPS`` (None: no cap), with the
    moves used and the linear bound, each from the same greedy + local search.

    ``moves_before``: moves already made (a re-plan's kept days). Caps then count them, as
    ``--max-moves`` does, and caps they already exceed are left out; ``moves`` stays the moves
    of the plan itself, as the plan summary's ``moves``.
    """
    out = []
    for cap in TRADEOFF_CAPS:  # six short optimisations
        if cap is not None and cap < moves_before:
            continue
        left = None if cap is None else cap - moves_before
        plan, report = best_plan(sweep, goal, slots, start_row, repark_minutes,
                                 min_days_between_moves, guard, left)
        out.append({"max_moves": cap, "bins": report.bins, "moves": report.moves,
                    "upper_bound": report.upper_bound})
    return out
