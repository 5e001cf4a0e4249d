"""Using hiplan as a library: rank parking declinations and plan a month of drift scans.

Scenario (invented): the Hollowmere club wants galactic longitudes 30-90 and 120-200 at
60 minutes per 1-degree bin, has its winter log (observation-log.csv) and a volunteer
rota (windows.txt), and plans March 2027.

Run from the repository root:  .venv/bin/python examples/plan_month.py
"""
import sys
from datetime import date
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from planner.coverage import sweep  # noqa: E402
from planner.month import Goal, done_count, evaluate_fixed, move_slots, plan_month  # noqa: E402
from planner.monthsafety import sun_guard  # noqa: E402
from planner.sunsafety import sun_approaches  # noqa: E402
from planner.obslog import coverage_minutes, read_log  # noqa: E402
from planner.park import advise, candidate_pointings, parse_want  # noqa: E402
from planner.site import load_site  # noqa: E402
from planner.timebase import iso_local, local_day_span  # noqa: E402
from planner.windows import read_windows, window_intervals_mjd  # noqa: E402

site = load_site("hollowmere")
start, end = local_day_span(date(2027, 3, 1), 31, site.tz)
want = parse_want("30-90,120-200")
done = coverage_minutes(read_log(HERE / "observation-log.csv"))
windows = window_intervals_mjd(read_windows(str(HERE / "windows.txt")), start, end, site.tz)

# One sweep serves both questions: where to park, and how to spend the month.
pointings = candidate_pointings(site)
coverage = sweep(site, pointings, start, end, per_occurrence=True)
# Feed safety first: settings the Sun crosses are ranked last and never planned.
approaches = sun_approaches(site, pointings, start, end)
print("Best fixed declinations for the month:")
for a in advise(coverage, want, done, approaches=approaches)[:3]:
    print("  " + a.reason)

goal = Goal(want=want, target_minutes=60.0, done_minutes=done)
plan = plan_month(coverage, goal, move_slots(start, 31, site.tz, windows), start_row=None,
                  guard=sun_guard(coverage))
unsafe = set(approaches.row[approaches.hazard].tolist())
best_fixed = max(done_count(goal, evaluate_fixed(coverage, goal, r))
                 for r in range(len(coverage.rows)) if r not in unsafe)
print(f"Month plan: {plan.done_after} wanted bins reach 60 min (best fixed declination: {best_fixed})")
for p in plan.parkings:
    point = coverage.rows[p.row].pointing
    when = iso_local(p.move_mjd, site.tz)[:16] if p.move_mjd is not None else "start"
    side = "" if point.culmination == "upper" else " (below the pole)"
    print(f"  {when}: park at declination {point.dec_deg:+.1f}{side}, {len(p.occurrences)} recordings")
