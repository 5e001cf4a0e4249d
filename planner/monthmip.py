"""Month plans, exactly: the interval model as a mixed-integer program for HiGHS.

``solve_exact`` builds the program (documented on the function), starts it from a
known plan and solves it with HiGHS (``highspy``, MIT licence) under a time
limit, one thread and a fixed seed; it returns the best plan found and the
solver's proven bound. ``linear_bound`` solves the same program with every
variable continuous: a valid, cheaper and looser bound.
"""
from __future__ import annotations

import os
import sys
import time
from dataclasses import dataclass

import numpy as np

from .monthmodel import SlotModel

# Weights of the secondary goals in the integer program's objective: capped progress
# (at most 0.5 in all, so it never outweighs one bin) and moves (below any progress
# that matters, 1e-3 of the progress weight per move).
_PROGRESS_SHARE = 0.5
_MOVE_SHARE = 1e-3



@dataclass(frozen=True)
class ExactResult:
    """What the solver found: the best plan, its proven bound, and whether it is optimal."""

    rows: np.ndarray
    bound_bins: int  # no plan under the same rules brings more wanted bins to target
    optimal: bool
    seconds: float
    nodes: int = 0
    timed_out: bool = False  # stopped by the time limit: a rerun may differ


def _new_solver():
    """A HiGHS instance that prints nothing: the library writes a banner to the process's
    standard output (file descriptor 1) when the first one is made, so that descriptor
    points at the null device meanwhile."""
    import highspy
    sys.stdout.flush()
    saved = os.dup(1)
    try:
        with open(os.devnull, "wb") as null:
            os.dup2(null.fileno(), 1)
            solver = highspy.Highs()
    finally:
        os.dup2(saved, 1)
        os.close(saved)
    solver.setOptionValue("output_flag", False)
    return solver


def _open_bins(m: SlotModel) -> np.ndarray:
    return np.flatnonzero(m.want & (m.done < m.target - 1e-9))


# The exact mode's budget is counted in branch-and-bound nodes, not seconds, so the same
# problem gives the same plan on every machine: about this many nodes a second after the
# root, measured on the 2-core development machine (demo month, one thread). A time limit
# of three times the budget plus a minute remains as a safety net only.
NODES_PER_SECOND = 6.0


def nodes_for(seconds: float) -> int:
    """The node budget standing for ``seconds`` of search (``NODES_PER_SECOND``)."""
    return max(1, int(np.ceil(seconds * NODES_PER_SECOND)))


def solve_exact(m: SlotModel, start_rows: np.ndarray, seconds: float,
                threads: int = 1, options: dict | None = None, relax: bool = False,
                nodes: int | None = None, sun_moves: bool = True) -> ExactResult:
    """Solve the month problem as a mixed-integer program with HiGHS (module docstring).

    Variables: x[r, q] the row held in interval q (q >= 1; interval 0 is the start
    setting); h[r, q] = 1 when r is held through the slot opening q (no move there):
    h <= x[r, q], h <= x[r, q-1]; passages across a slot edge, z <= x on both sides
    (and <= h on the first side when they start before a move could end); m[q] the
    move at q, m >= x[r, q] - x[r, q-1]. Depth of bin b = logged + sum of minutes
    times these. w[b] = 1 only if depth >= target; p[b] <= min(depth, target).
    Sun: x[r, q] = 0 where unsafe, and x[a, q-1] + sum of x[b, q] over the moves a -> b
    the Sun forbids <= 1. Rules: sum m <= max_moves; moves in any window of
    ``min_days`` days <= 1 (``sun_moves`` false: the forbidden moves left out, a
    relaxation). Maximise sum w + progress share + move share (weights above). One thread and a fixed seed; with ``nodes`` the search stops after that
    many nodes (the same result on every machine) and ``seconds`` is only a safety
    net; without, it stops at ``seconds``.
    """
    import highspy
    started = time.perf_counter()
    n_rows, n_q = m.n_rows, m.n_int
    open_bins = _open_bins(m)
    cols_lo, cols_hi, cost, integer = [], [], [], []
    rows_lo, rows_hi = [], []
    entries: list[tuple[int, int, float]] = []  # (row, column, value)

    def var(lo, hi, c=0.0, is_int=True) -> int:
        cols_lo.append(lo), cols_hi.append(hi), cost.append(c), integer.append(is_int)
        return len(cols_lo) - 1

    def con(lo, hi, terms) -> None:
        k = len(rows_lo)
        rows_lo.append(lo), rows_hi.append(hi)
        entries.extend((k, j, v) for j, v in terms)

    start = m.start_row
    x = np.full((n_rows, n_q), -1)
    for q in range(1, n_q):
        for r in np.flatnonzero(~m.unsafe[:, q]):
            x[r, q] = var(0, 1)
        con(1, 1, [(x[r, q], 1.0) for r in range(n_rows) if x[r, q] >= 0])

    def x_terms(r, q, coef):
        """coef * x[r, q]: a constant for interval 0."""
        if q == 0:
            return [], coef * (r == start)
        return ([(x[r, q], coef)] if x[r, q] >= 0 else []), 0.0

    # Depth terms per bin: (column, minutes) lists and constants.
    depth_terms = {int(b): [] for b in open_bins}
    depth_const = m.done.copy()

    def add_minutes(col, minutes):
        for b in open_bins[minutes[open_bins] > 0]:
            depth_terms[int(b)].append((col, float(minutes[b])))

    h = np.full((n_rows, n_q), -1)
    moves = [None] * n_q
    for q in range(n_q):
        for r in range(n_rows):
            held_prev = (r == start) if q == 1 else None
            if q == 0:
                if r == start:  # the start setting before the first slot: fixed
                    depth_const += m.hold[r, 0]
                continue
            if x[r, q] < 0:
                continue
            add_minutes(x[r, q], m.fresh[r, q])
            extra = m.hold[r, q] - m.fresh[r, q]
            if q == 1 and not held_prev:
                continue
            if q >= 2 and x[r, q - 1] < 0:
                continue
            h[r, q] = var(0, 1, is_int=False)
            con(-np.inf, 0, [(h[r, q], 1.0), (x[r, q], -1.0)])
            if q >= 2:
                con(-np.inf, 0, [(h[r, q], 1.0), (x[r, q - 1], -1.0)])
            add_minutes(h[r, q], extra)
        if q >= 1:
            fixed_move = start < 0 and q == 1
            moves[q] = var(1 if fixed_move else 0, 1)
            for r in range(n_rows):
                cur, _ = x_terms(r, q, 1.0)
                prev, prev_c = x_terms(r, q - 1, -1.0)
                if cur or prev_c == 0.0 and prev:
                    con(-np.inf, -prev_c, [(moves[q], -1.0)] + cur + prev)
    # Passages across one slot edge (interval q into q + 1).
    for r in range(n_rows):
        for q in range(n_q - 1):
            if not (m.span[r, q].any()):
                continue
            nxt, _ = x_terms(r, q + 1, 1.0)
            if not nxt:
                continue
            late, early = m.span_late[r, q], m.span[r, q] - m.span_late[r, q]
            if q == 0:
                if r != start:
                    continue
                z = var(0, 1, is_int=False)
                con(-np.inf, 0, [(z, 1.0)] + [(c, -v) for c, v in nxt])
                add_minutes(z, m.span[r, q])
                continue
            if x[r, q] < 0:
                continue
            if late.any():
                z = var(0, 1, is_int=False)
                con(-np.inf, 0, [(z, 1.0), (x[r, q], -1.0)])
                con(-np.inf, 0, [(z, 1.0)] + [(c, -v) for c, v in nxt])
                add_minutes(z, late)
            if early.any() and h[r, q] >= 0:
                z = var(0, 1, is_int=False)
                con(-np.inf, 0, [(z, 1.0), (h[r, q], -1.0)])
                con(-np.inf, 0, [(z, 1.0)] + [(c, -v) for c, v in nxt])
                add_minutes(z, early)
    for r, a, c, late, minutes in m.multi:  # rare passages over two slot edges
        held = [x_terms(r, q, 1.0) for q in range(a, c + 1)]
        if any(not t and const == 0.0 for t, const in held):
            continue
        first = h[r, a] if (not late and a >= 1) else None
        if not late and a >= 1 and first < 0:
            continue
        z = var(0, 1, is_int=False)
        for t, _ in held:
            if t:
                con(-np.inf, 0, [(z, 1.0)] + [(col, -v) for col, v in t])
        if first is not None:
            con(-np.inf, 0, [(z, 1.0), (first, -1.0)])
        add_minutes(z, minutes)
    # Sun: forbidden moves.
    for q in range(1 if sun_moves else n_q, n_q):
        safe = m.moves_safe(q)
        for a in range(n_rows):
            bad = [x[b, q] for b in np.flatnonzero(~safe[a]) if b != a and x[b, q] >= 0]
            if not bad:
                continue
            if q == 1:
                if a == start:
                    con(-np.inf, 0, [(col, 1.0) for col in bad])
            elif x[a, q - 1] >= 0:
                con(-np.inf, 1, [(x[a, q - 1], 1.0)] + [(col, 1.0) for col in bad])
    # Move rules.
    move_cols = [moves[q] for q in range(1, n_q)]
    if m.max_moves is not None:
        con(-np.inf, m.max_moves, [(c, 1.0) for c in move_cols])
    if m.min_days > 1:
        for q in range(1, n_q):
            close = [moves[k] for k in range(q, n_q) if m.day[k] - m.day[q] < m.min_days]
            if len(close) > 1:
                con(-np.inf, 1, [(c, 1.0) for c in close])
    # Goal: bins at target, capped progress, fewer moves.
    w_share = _PROGRESS_SHARE / max(len(open_bins), 1)
    move_weight = -_MOVE_SHARE * w_share
    for c in move_cols:
        cost[c] = move_weight
    w_cols, p_cols = {}, {}
    for b in open_bins:
        b = int(b)
        w_cols[b] = var(0, 1, 1.0)
        p_cols[b] = var(0, m.target, w_share / m.target, is_int=False)
        terms = [(c, -v) for c, v in depth_terms[b]]
        con(-np.inf, depth_const[b], [(w_cols[b], m.target)] + terms)
        con(-np.inf, depth_const[b], [(p_cols[b], 1.0)] + terms)

    e = np.array(entries, dtype=float).reshape(-1, 3)
    e = e[np.lexsort((e[:, 0], e[:, 1]))]
    kinds = [highspy.HighsVarType.kInteger if i and not relax else highspy.HighsVarType.kContinuous
             for i in integer]

    def make_lp(col_lo, col_hi):
        lp = highspy.HighsLp()
        lp.num_col_, lp.num_row_ = len(cost), len(rows_lo)
        lp.sense_ = highspy.ObjSense.kMaximize
        lp.col_cost_ = np.array(cost, dtype=float)
        lp.col_lower_, lp.col_upper_ = np.asarray(col_lo, float), np.asarray(col_hi, float)
        lp.row_lower_ = np.array(rows_lo, dtype=float)
        lp.row_upper_ = np.array(rows_hi, dtype=float)
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = np.searchsorted(e[:, 1], np.arange(len(cost) + 1)).astype(np.int32)
        lp.a_matrix_.index_ = e[:, 0].astype(np.int32)
        lp.a_matrix_.value_ = e[:, 2]
        lp.integrality_ = kinds
        return lp

    solver = _new_solver()
    solver.setOptionValue("threads", int(threads))
    solver.setOptionValue("random_seed", 0)
    if nodes is not None:
        solver.setOptionValue("mip_max_nodes", int(nodes))
    for key, value in (options or {}).items():
        solver.setOptionValue(key, value)
    # A complete start: fix x to the known plan, let the solver fill the other columns
    # (a quick solve), then free x again and start from that solution.
    x_cols = x[x >= 0]
    start_x = np.zeros(len(cost))
    for q in range(1, n_q):
        if x[start_rows[q], q] >= 0:
            start_x[x[start_rows[q], q]] = 1.0
    fixed_lo, fixed_hi = np.array(cols_lo, float), np.array(cols_hi, float)
    fixed_lo[x_cols] = fixed_hi[x_cols] = start_x[x_cols]
    solver.setOptionValue("time_limit", float(max(seconds, 0.1)))
    solver.passModel(make_lp(fixed_lo, fixed_hi))
    solver.run()
    warm = solver.getSolution()
    solver.clearModel()
    solver.passModel(make_lp(cols_lo, cols_hi))
    remaining = max(seconds - (time.perf_counter() - started), 0.1)
    solver.setOptionValue("time_limit", float(remaining))
    if len(warm.col_value) == len(cost):
        solver.setSolution(warm)
    solver.run()
    info = solver.getInfo()
    values = np.array(solver.getSolution().col_value)
    rows = start_rows.copy()
    if values.size == len(cost):
        for q in range(1, n_q):
            cols = x[:, q]
            have = np.flatnonzero(cols >= 0)
            rows[q] = have[np.argmax(values[cols[have]])]
    # The objective is bins + at most 0.5 of progress - move share; its bound caps the bins.
    worst_move = _MOVE_SHARE * w_share * len(move_cols)
    dual = info.objective_function_value if relax else info.mip_dual_bound
    bound = int(np.floor(dual + worst_move + 1e-6))
    node_count = int(info.mip_node_count)
    status = solver.getModelStatus()
    optimal = status == highspy.HighsModelStatus.kOptimal
    timed_out = status == highspy.HighsModelStatus.kTimeLimit
    return ExactResult(rows=rows, bound_bins=bound, optimal=optimal,
                       seconds=time.perf_counter() - started, nodes=node_count,
                       timed_out=timed_out)


def linear_bound(m: SlotModel) -> int:
    """Wanted bins no plan can exceed: the linear relaxation of ``solve_exact``'s program.

    The Sun's forbidden moves are left out: a bound with a rule fewer is still a bound, and
    it needs no move matrix (the Sun along every path at every slot, most of the cost). On
    the demo months and a 20-station benchmark it came out the same with them.
    """
    start = np.full(m.n_int, max(m.start_row, 0))
    return solve_exact(m, start, seconds=600.0, relax=True, sun_moves=False).bound_bins


