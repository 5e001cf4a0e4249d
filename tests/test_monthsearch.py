"""Month plans near the optimum: the interval model, local search, the integer program, bounds.

The interval model is checked against ``month``'s own accounting (every plan re-counted with
``month._depth_of``), the integer program against brute force over every plan of a small
problem, and the local search against the greedy (never worse) and itself (deterministic).
"""
import itertools
from datetime import date

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from planner.cli import main
from planner.coverage import sweep
from planner.month import Goal, _depth_of, _usable_sorted, move_slots, plan_month
from planner.monthmip import linear_bound, solve_exact
from planner.monthmodel import (Prefix, build_model, exact_depth, feasible, parkings_of_rows,
                                rows_of_plan, run_contrib, score_of)
from planner.monthsafety import sun_guard
from planner.monthsearch import _RunEnds, best_plan, improve
from planner.obslog import coverage_minutes, read_log
from planner.park import candidate_pointings, parse_want
from planner.planfile import read_plan
from planner.timebase import local_day_span
from planner.windows import read_windows, window_intervals_mjd


@pytest.fixture(scope="module")
def march(club):
    """The demo scenario (invented): March 2027, wants 30-90 and 120-200, winter log, rota."""
    start, end = local_day_span(date(2027, 3, 1), 31, club.tz)
    windows = window_intervals_mjd(read_windows("examples/windows.txt"), start, end, club.tz)
    result = sweep(club, candidate_pointings(club), start, end, per_occurrence=True)
    goal = Goal(parse_want("30-90,120-200"), 60.0,
                coverage_minutes(read_log("examples/observation-log.csv")))
    return result, goal, move_slots(start, 31, club.tz, windows), sun_guard(result)


def _month_recount(result, goal, model, rows):
    """Depth by month's own accounting (independent of the interval model)."""
    return _depth_of(result, goal, parkings_of_rows(model, rows), _usable_sorted(result))


def test_interval_model_matches_month_accounting(march):
    result, goal, slots, guard = march
    greedy = plan_month(result, goal, slots, 5, guard=guard)
    model = build_model(result, goal, slots, 5, 15.0, 1, None, guard)
    p = Prefix(model)
    rows = rows_of_plan(model, greedy.parkings)
    # 1e-9 min: the same minutes summed in another order.
    assert np.abs(exact_depth(model, p, rows) - greedy.depth_after).max() < 1e-9
    rng = np.random.default_rng(7)
    for _ in range(20):  # random plans, Sun rules ignored: only the accounting is checked
        trial = rows.copy()
        for _ in range(3):
            i = int(rng.integers(1, trial.size))
            j = int(rng.integers(i + 1, trial.size + 1))
            trial[i:j] = int(rng.integers(0, model.n_rows))
        assert np.abs(exact_depth(model, p, trial) - _month_recount(result, goal, model, trial)).max() < 1e-9


def test_run_ends_match_run_contrib(march):
    """The search's sliced new-run minutes are ``run_contrib``'s for every row, start and end,
    and its Sun test is ``feasible``'s interval rule (1e-9 min: sums in another order)."""
    result, goal, slots, guard = march
    model = build_model(result, goal, slots, 5, 15.0, 1, None, guard)
    p = Prefix(model)
    ends = _RunEnds(p)
    rows = np.arange(model.n_rows)
    assert model.unsafe.any()  # the check below has something to find
    for i in range(1, model.n_int):
        j = np.arange(i + 1, model.n_int + 1)
        want = run_contrib(p, rows[None, :], i, j[:, None], True)
        assert np.abs(ends.fresh_run(i) - want).max() < 1e-9
        unsafe = np.array([[model.unsafe[r, i:jj].any() for r in rows] for jj in j])
        assert np.array_equal(ends.safe_run(i), ~unsafe)


def _small_problem(club):
    """Three days, six rows that reach wanted bins, no windows: 6^3 plans to try by hand."""
    start, end = local_day_span(date(2027, 6, 10), 3, club.tz)
    pointings = [q for q in candidate_pointings(club, 5.0) if q.culmination == "upper"]
    result = sweep(club, pointings, start, end, per_occurrence=True)
    useful = [r for r, row in enumerate(result.rows) if row.bin_usable_s[30:70].sum() > 0][:6]
    result = sweep(club, [pointings[r] for r in useful], start, end, per_occurrence=True)
    goal = Goal(parse_want("30-70"), 25.0, np.zeros(360))
    return result, goal, move_slots(start, 3, club.tz), sun_guard(result)


@pytest.mark.parametrize("max_moves,min_days", [(None, 1), (1, 1), (2, 2)])
def test_integer_program_matches_brute_force(club, max_moves, min_days):
    result, goal, slots, guard = _small_problem(club)
    model = build_model(result, goal, slots, 0, 15.0, min_days, max_moves, guard)
    p = Prefix(model)
    best_key = None
    for combo in itertools.product(range(model.n_rows), repeat=model.n_int - 1):
        rows = np.array((0,) + combo)
        if not feasible(model, rows):
            continue
        depth = _month_recount(result, goal, model, rows)  # month's accounting, not the model's
        key = score_of(model, depth, rows).key
        best_key = key if best_key is None or key > best_key else best_key
    start = rows_of_plan(model, plan_month(result, goal, slots, 0, guard=guard,
                                           min_days_between_moves=min_days,
                                           max_moves=max_moves).parkings)
    exact = solve_exact(model, start, seconds=120.0)
    found = score_of(model, _month_recount(result, goal, model, exact.rows), exact.rows)
    assert exact.optimal and feasible(model, exact.rows)
    assert found.key[:2] == best_key[:2]  # bins and progress; fewer moves is a tie-break
    assert exact.bound_bins >= found.bins == best_key[0]
    assert linear_bound(model) >= best_key[0]
    # The planner with the exact mode reaches the optimum too.
    plan, report = best_plan(result, goal, slots, 0, 15.0, min_days, guard, max_moves,
                             exact_seconds=120.0)
    assert report.bins == best_key[0] and report.bound_source == "integer program (optimal)"
    assert plan.done_after == best_key[0]


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                                  HealthCheck.too_slow])
@given(max_moves=st.sampled_from([None, 0, 1, 2, 3, 5]), min_days=st.integers(1, 4),
       target=st.sampled_from([20.0, 45.0, 60.0, 120.0]), lo=st.integers(0, 300),
       width=st.integers(10, 120), start_row=st.integers(0, 60))
def test_local_search_never_worse_than_greedy(march, max_moves, min_days, target, lo, width,
                                              start_row):
    result, goal0, slots, guard = march
    want = np.zeros(360, bool)
    want[(np.arange(width) + lo) % 360] = True
    goal = Goal(want, target, goal0.done_minutes)
    start_row = min(start_row, len(result.rows) - 1)
    greedy = plan_month(result, goal, slots, start_row, 15.0, min_days, guard, max_moves)
    model = build_model(result, goal, slots, start_row, 15.0, min_days, max_moves, guard)
    p = Prefix(model)
    rows0 = rows_of_plan(model, greedy.parkings)
    before = score_of(model, exact_depth(model, p, rows0), rows0)
    rows = improve(model, rows0, max_rounds=6)
    after = score_of(model, _month_recount(result, goal, model, rows), rows)
    assert after.key >= before.key
    if feasible(model, rows0):
        assert feasible(model, rows)


def test_local_search_is_deterministic(march):
    result, goal, slots, guard = march
    a = best_plan(result, goal, slots, 5, guard=guard, max_moves=4)[0]
    b = best_plan(result, goal, slots, 5, guard=guard, max_moves=4)[0]
    assert [(q.row, q.move_mjd, q.end_mjd) for q in a.parkings] == \
           [(q.row, q.move_mjd, q.end_mjd) for q in b.parkings]


def _month_json(tmp_path, capsys, *argv):
    out = tmp_path / "plan.json"
    assert main(["month", *argv, "--format", "json", "-o", str(out)]) == 0
    capsys.readouterr()
    return read_plan(out)


DEMO = ("--site", "hollowmere", "--month", "2027-03", "--want", "30-90,120-200",
        "--log", "examples/observation-log.csv", "--windows", "examples/windows.txt")


@pytest.mark.parametrize("extra,at_least", [
    (("--max-moves", "4"), 42),
    (("--min-days-between-moves", "3", "--max-moves", "3"), 41),
])
def test_demo_targets(tmp_path, capsys, extra, at_least):
    """The demo month with a move cap: at least the bins an earlier exact search found
    possible with that many moves, and never more moves than allowed; a proven bound."""
    doc = _month_json(tmp_path, capsys, *DEMO, *extra)
    s = doc["summary"]
    cap = int(extra[-1])
    assert s["done_after"] >= at_least and s["moves"] <= cap
    assert s["upper_bound"] >= s["done_after"] and s["optimizer"]["greedy_bins"] <= s["done_after"]
    moves = [d["date"] for d in doc["days"] if d["park"] and d["park"]["move"]]
    if "--min-days-between-moves" in extra:
        gaps = [(date.fromisoformat(b) - date.fromisoformat(a)).days for a, b in zip(moves, moves[1:])]
        assert all(g >= 3 for g in gaps), gaps  # local days, not move slots


def test_saltbush_may_reaches_the_proven_optimum(tmp_path, capsys):
    """Saltbush Ridge, May 2027, 250-350 at 60 min, 4 moves: the integer program proves 80
    optimal (an offline run of over 300 s); the default local search must find 80 too."""
    doc = _month_json(tmp_path, capsys, "--site", "saltbush-ridge", "--month", "2027-05",
                      "--want", "250-350", "--target-minutes", "60", "--max-moves", "4")
    s = doc["summary"]
    assert s["done_after"] >= 80 and s["moves"] <= 4 and s["upper_bound"] >= 80


def test_tradeoff_table(tmp_path, capsys):
    doc = _month_json(tmp_path, capsys, "--site", "hollowmere", "--start", "2027-03-01", "--days", "10",
                      "--want", "120-140", "--tradeoff")
    trade = doc["summary"]["tradeoff"]
    assert [t["max_moves"] for t in trade] == [0, 1, 2, 4, 8, None]
    for t in trade:
        assert t["upper_bound"] >= t["bins"] and (t["max_moves"] is None or t["moves"] <= t["max_moves"])
    bins = [t["bins"] for t in trade]
    assert bins[-1] >= max(bins[:-1]) - 1  # more moves allowed is (near) never worse
    from planner.brief import brief_markdown
    assert "Moves at most" in brief_markdown(doc)


def test_window_past_midnight_gives_its_own_day_the_slot(club):
    """Saturday 21:00-02:00 and Sunday 09:00-12:00: Sunday's slot is 09:00, not 00:00."""
    tz = club.tz
    start, end = local_day_span(date(2027, 3, 6), 2, tz)  # Saturday and Sunday
    windows = window_intervals_mjd(read_windows("Sat 21:00-02:00; Sun 09:00-12:00"), start, end, tz)
    slots = move_slots(start, 2, tz, windows)
    from planner.timebase import mjd_to_datetime_utc
    local = [mjd_to_datetime_utc(s.mjd).astimezone(tz).strftime("%a %H:%M") for s in slots]
    assert local == ["Sat 21:00", "Sun 09:00"]


def test_start_given_as_altaz_is_kept(school):
    """An alt-az dish whose [pointing] is alt/az starts there: no forced first move."""
    from planner.cli.common import current_setting
    start, end = local_day_span(date(2027, 5, 1), 5, school.tz)
    current = current_setting(school)
    result = sweep(school, candidate_pointings(school, extra=(current,)), start, end,
                   per_occurrence=True)
    row = next(i for i, r in enumerate(result.rows)
               if abs(r.pointing.alt_deg - 60) < 1e-6 and abs(r.pointing.az_deg - 200) < 1e-6)
    goal = Goal(parse_want("120-125"), 60.0, np.zeros(360))  # dec +60: never above its horizon
    plan, report = best_plan(result, goal, move_slots(start, 5, school.tz), row,
                             guard=sun_guard(result))
    assert report.moves == 0 and plan.parkings[0].row == row


def test_optimize_option_proves_a_small_plan_and_repeats(tmp_path, capsys):
    """--optimize on a week: the integer program proves the plan optimal; its budget is
    counted in solver nodes, so a second run gives the same plan."""
    argv = ("--site", "saltbush-ridge", "--start", "2027-05-01", "--days", "8", "--want", "250-350",
            "--target-minutes", "60", "--max-moves", "2", "--optimize", "5")
    a = _month_json(tmp_path, capsys, *argv)
    opt = a["summary"]["optimizer"]
    assert opt["bound_source"] == "integer program (optimal)"
    assert a["summary"]["upper_bound"] == a["summary"]["done_after"] == opt["bins"]
    (tmp_path / "again").mkdir()
    b = _month_json(tmp_path / "again", capsys, *argv)
    assert [d["park"] for d in a["days"]] == [d["park"] for d in b["days"]]
