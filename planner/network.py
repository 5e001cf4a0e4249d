"""Several stations, one plane: month plans chosen together so the network fills the most bins.

Each station has its own month problem (``monthmodel.SlotModel``: its site's passages, move
slots, Sun rules and move cap); all share one goal: wanted longitude bins and a target depth,
the depth of a bin being the logs' minutes plus every station's. A plan is one row per
interval per station (``monthmodel``).

* ``alone``: the baseline, what happens without coordination: each station plans the whole
  want by itself (greedy + local search, ``monthsearch``), counting only the logs.
* ``coordinate``: block-coordinate local search. In turn, each station's plan is improved
  (``monthsearch.improve``) against a goal whose logged minutes include the other stations'
  current contributions, so every accepted change improves the network's objective (bins at
  target, then capped progress) with the others fixed; cycles repeat until no station
  changes. It starts from the stations planned one after another (``one_after_another``),
  each counting those before it; the result is kept only if it beats the baseline, so it is
  never worse.
  ``exact_seconds`` adds the integer program (``monthsearch.optimize``) for each station in a
  last pass, the others fixed.
* ``upper_bound``: no joint plan brings more wanted bins to target. In each interval a station
  holds one setting, so it adds at most the most any one Sun-safe setting gives each bin there;
  summed over intervals and stations (passages over more than one slot edge added in full) on
  top of the logs, a bin that cannot reach the target that way cannot reach it at all.

Minutes per bin, (B,) arrays over all 1-degree (bin-width) bins.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np

from .monthmodel import Prefix, Score, SlotModel, exact_depth, moves_of, score_of
from .monthsearch import improve, optimize

MAX_CYCLES = 8  # coordination passes over the stations at most (a count: same plan everywhere)
# Local-search rounds per station per pass: each pass starts from a good plan and the next
# pass goes on from there, so few rounds are needed (a count, as monthsearch.MAX_ROUNDS).
NETWORK_ROUNDS = 10


def contribution(m: SlotModel, rows: np.ndarray, p: Prefix | None = None) -> np.ndarray:
    """Minutes per bin a station's plan adds (its exact accounting, the logs left out).
    ``p``: the model's prefix sums when the caller keeps them (they ignore ``done``)."""
    return exact_depth(m, p or Prefix(m), rows) - m.done


def prefixes(models: list[SlotModel]) -> list[Prefix]:
    """Each station's prefix sums, built once for the many re-counts of a joint search."""
    return [Prefix(m) for m in models]


def network_depth(models: list[SlotModel], rows: list[np.ndarray],
                  ps: list[Prefix] | None = None) -> np.ndarray:
    """Depth per bin of the network: the logs plus every station's minutes."""
    ps = ps or prefixes(models)
    return models[0].done + sum(contribution(m, r, p) for m, r, p in zip(models, rows, ps))


def network_score(models: list[SlotModel], rows: list[np.ndarray],
                  ps: list[Prefix] | None = None) -> Score:
    """The network's objective, a month plan's ``Score`` on the network's depth: wanted bins
    at target, capped progress, and the moves of all stations together."""
    one = score_of(models[0], network_depth(models, rows, ps), rows[0])
    return Score(one.bins, one.progress, sum(int(moves_of(r).size) for r in rows))


def _with_others(m: SlotModel, others_min: np.ndarray) -> SlotModel:
    return replace(m, done=m.done + others_min)


def _cycle(models: list[SlotModel], rows: list[np.ndarray], max_rounds: int,
           ps: list[Prefix]) -> list[np.ndarray]:
    """Improve each station in turn against the others' minutes until none changes."""
    rows = [r.copy() for r in rows]
    contrib = [contribution(m, r, p) for m, r, p in zip(models, rows, ps)]
    # Stations whose last search changed nothing, no station having changed since: a search
    # is deterministic, so theirs would change nothing again and is skipped.
    settled: set[int] = set()
    for _ in range(MAX_CYCLES):
        changed = False
        for s, m in enumerate(models):  # stations
            if s in settled:
                continue
            others = sum((c for t, c in enumerate(contrib) if t != s), np.zeros_like(m.done))
            new = improve(_with_others(m, others), rows[s], max_rounds)
            if np.array_equal(new, rows[s]):
                settled.add(s)
            else:
                rows[s], contrib[s], changed = new, contribution(m, new, ps[s]), True
                settled.clear()
        if not changed:
            break
    return rows


def coordinate(models: list[SlotModel], alone_rows: list[np.ndarray],
               sequential_rows: list[np.ndarray] | None = None,
               exact_seconds: float | None = None,
               max_rounds: int = NETWORK_ROUNDS,
               ps: list[Prefix] | None = None) -> list[np.ndarray]:
    """The joint plan (module docstring): never worse than ``alone_rows`` by the network's
    objective. ``sequential_rows``: a second start (stations planned one after another);
    ``ps``: the stations' ``prefixes`` when the caller has them."""
    ps = ps or prefixes(models)
    starts = [sequential_rows] if sequential_rows is not None else [alone_rows]
    best, best_score = alone_rows, network_score(models, alone_rows, ps)
    for start in starts:
        rows = _cycle(models, start, max_rounds, ps)
        score = network_score(models, rows, ps)
        if score.key > best_score.key:
            best, best_score = rows, score
    if exact_seconds:
        best = [r.copy() for r in best]
        share = exact_seconds / len(models)
        for s, m in enumerate(models):  # one exact pass, the others fixed
            others = sum((contribution(models[t], best[t], ps[t]) for t in range(len(models))
                          if t != s), np.zeros_like(m.done))
            rows, _ = optimize(_with_others(m, others), best[s], share, max_rounds)
            trial = best[:s] + [rows] + best[s + 1:]
            if network_score(models, trial, ps).key > network_score(models, best, ps).key:
                best = trial
    return best


def one_after_another(models: list[SlotModel], greedy_rows, max_rounds: int = NETWORK_ROUNDS):
    """Each station's plan in turn, improved with the minutes of those before it counted as
    done (``greedy_rows``: a station's greedy plan given the same; a callable (s, done_min))."""
    rows, before = [], np.zeros_like(models[0].done)
    for s, m in enumerate(models):  # stations
        counted = _with_others(m, before)
        r = improve(counted, greedy_rows(s, counted.done), max_rounds)
        rows.append(r)
        before = before + contribution(m, r)
    return rows


def upper_bound(models: list[SlotModel], achieved: int) -> int:
    """Wanted bins no joint plan can exceed (module docstring); never below ``achieved``."""
    m0 = models[0]
    most = m0.done.copy()
    for m in models:
        per_interval = np.where(m.unsafe[:, :, None], 0.0, m.hold + m.span)  # (R, Q, B)
        most += per_interval.max(axis=0).sum(axis=0)
        for _, _, _, _, minutes in m.multi:  # rare: counted in full
            most += minutes
    bins = int(np.count_nonzero(most[m0.want] >= m0.target - 1e-9))
    return max(bins, achieved)


def bins_at_target(m: SlotModel, depth: np.ndarray) -> np.ndarray:
    """Indices of the wanted bins at the target depth."""
    return np.flatnonzero(m.want & (depth >= m.target - 1e-9))
