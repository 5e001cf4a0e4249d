"""Benchmark: month planning, greedy + local search vs the HiGHS integer program.

Scenarios (invented, as in the README): the demo month (Hollowmere, March 2027, wants
30-90 and 120-200, winter log, volunteer rota) with at most 4 moves, and with moves
3 days apart and at most 3; Saltbush Ridge, May 2027, 250-350 at 60 min, at most 4
moves. Ours: greedy + local search (``monthsearch.optimize`` without the solver), CPU
seconds of the optimisation alone. Baseline: the integer program (``monthmip``)
started from the greedy plan, given ``SOLVER_SECONDS``. Agreement: the bins each
reaches and the solver's proven bound. ``run()`` reports the first scenario; run this
file alone for all three.

Run from the repository root: ``.venv/bin/python benchmarks/bench_month.py``.
"""
from __future__ import annotations

import sys
import time
from datetime import date
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import numpy as np  # noqa: E402

from planner.cli.common import current_setting  # noqa: E402
from planner.coverage import sweep  # noqa: E402
from planner.month import Goal, move_slots, plan_month  # noqa: E402
from planner.monthmip import solve_exact  # noqa: E402
from planner.monthmodel import Prefix, build_model, exact_depth, rows_of_plan, score_of  # noqa: E402
from planner.monthsafety import sun_guard  # noqa: E402
from planner.monthsearch import optimize  # noqa: E402
from planner.obslog import coverage_minutes, read_log  # noqa: E402
from planner.park import candidate_pointings, parse_want  # noqa: E402
from planner.site import load_site  # noqa: E402
from planner.timebase import local_day_span  # noqa: E402
from planner.windows import read_windows, window_intervals_mjd  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
SOLVER_SECONDS = 60.0
SCENARIOS = (
    ("demo, March 2027, at most 4 moves", "hollowmere", date(2027, 3, 1), "30-90,120-200", True, 1, 4),
    ("demo, moves 3 days apart, at most 3", "hollowmere", date(2027, 3, 1), "30-90,120-200", True, 3, 3),
    ("saltbush-ridge, May 2027, at most 4 moves", "saltbush-ridge", date(2027, 5, 1), "250-350", False,
     1, 4),
)


def _problem(site_name, first, want, demo, min_days, max_moves):
    site = load_site(site_name)
    days = 31
    start, end = local_day_span(first, days, site.tz)
    current = current_setting(site)
    pointings = candidate_pointings(site, extra=(current,))
    result = sweep(site, pointings, start, end, per_occurrence=True)
    done = (coverage_minutes(read_log(ROOT / "examples" / "observation-log.csv")) if demo
            else np.zeros(360))
    windows = (window_intervals_mjd(read_windows(str(ROOT / "examples" / "windows.txt")), start, end,
                                    site.tz) if demo else None)
    goal = Goal(parse_want(want), 60.0, done)
    slots = move_slots(start, days, site.tz, windows)
    guard = sun_guard(result)
    start_row = next(i for i, r in enumerate(result.rows)
                     if abs(r.pointing.dec_deg - current.dec_deg) < 1e-6
                     and abs(r.pointing.ha_deg - current.ha_deg) < 1e-6)
    greedy = plan_month(result, goal, slots, start_row, 15.0, min_days, guard, max_moves)
    model = build_model(result, goal, slots, start_row, 15.0, min_days, max_moves, guard)
    return model, rows_of_plan(model, greedy.parkings)


def measure(scenario) -> dict:
    name, *args = scenario
    model, greedy_rows = _problem(*args)
    p = Prefix(model)
    started = time.process_time()
    rows, report = optimize(model, greedy_rows)
    ours_s = time.process_time() - started
    started = time.perf_counter()
    exact = solve_exact(model, greedy_rows, SOLVER_SECONDS)
    base_s = time.perf_counter() - started
    theirs = score_of(model, exact_depth(model, p, exact.rows), exact.rows)
    return {
        "case": f"Month plan, {name}",
        "ours_s": ours_s, "baseline_s": base_s, "ratio": base_s / ours_s,
        "agreement": (f"bins: greedy {report.greedy_bins}, ours {report.bins} ({report.moves} moves), "
                      f"integer program {theirs.bins} in {base_s:.0f} s; proven bound "
                      f"{exact.bound_bins}{' (optimal)' if exact.optimal else ''}"),
    }


def run() -> dict:
    return measure(SCENARIOS[0])


if __name__ == "__main__":
    for scenario in SCENARIOS:  # three scenarios, a minute each for the solver
        r = measure(scenario)
        print(f"{r['case']}\n  ours {r['ours_s']:.2f} s CPU, integer program {r['baseline_s']:.0f} s, "
              f"ratio {r['ratio']:.0f}x; {r['agreement']}")
