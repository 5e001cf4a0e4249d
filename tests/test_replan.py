"""Re-planning: plan -> recordings with a gap -> tally -> re-plan that fills the gap; the days
already past kept as they were; month --keep, --from-today and their refusals."""
import json
from datetime import date

import pytest

from loop_trip import round_trip
from planner import replan
from planner.cli import main
from planner.cli import month as month_cli
from planner.errors import UserError
from planner.planfile import read_plan

WANT = "120-140,155-165"
GAP = ("2027-03-03", "2027-03-04")
REPLAN_DAY = "2027-03-09"


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture(scope="module")
def trip(tmp_path_factory, club):
    """A 16-day plan, recordings to day 8 missing the nights of GAP, their tally, the re-plan
    from day 9 (tests/loop_trip.py)."""
    return round_trip(tmp_path_factory.mktemp("trip"), club, 16, WANT, GAP, REPLAN_DAY)


def _bins_at(doc, key, target):
    return {k for k, v in doc["summary"][key].items() if v >= target - 1e-9}


def test_the_replan_fills_the_gap(trip):
    plan, tally, new = trip["plan"], trip["tally"], trip["replan"]
    target = plan["summary"]["target_minutes"]
    assert tally["agreement"]["days_with_missed"] == list(GAP)
    # The wanted bins the plan had at target by day 8 that the recordings left short.
    so_far = {str(b["l_bin"]) for b in tally["per_bin"] if b["planned_min"] >= target}
    now = {str(b) for b in tally["at_target"]["bins"]}
    short = (so_far - now) & set(plan["summary"]["depth_before_min"])
    assert len(short) >= 10, "the gap must leave wanted bins short of the target"
    # The re-plan starts from the tally: its depth before is the logged depth ...
    for b in short:
        recorded = next(x["recorded_min"] for x in tally["per_bin"] if str(x["l_bin"]) == b)
        assert new["summary"]["depth_before_min"][b] == pytest.approx(recorded, abs=1e-3)
    # ... and brings every bin the gap left short to the target.
    assert short <= _bins_at(new, "depth_after_min", target)


def test_the_days_already_past_are_kept_as_they_were(trip):
    plan, new = trip["plan"], trip["replan"]
    kept = [d for d in new["days"] if d.get("kept")]
    assert [d["date"] for d in kept] == [f"2027-03-0{k}" for k in range(1, 9)]
    assert [{k: v for k, v in d.items() if k != "kept"} for d in kept] == plan["days"][:8]
    assert [d["date"] for d in new["days"]] == [d["date"] for d in plan["days"]]
    assert new["period"] == plan["period"]
    assert new["replan"] == {"from_day": REPLAN_DAY, "kept_plan": str(trip["plan_path"]),
                             "kept_days": 8, "kept_moves": replan.kept_moves(plan, date(2027, 3, 9))}
    assert new["settings"]["keep"] == str(trip["plan_path"])
    # The dish starts the re-plan where the kept plan left it: staying is no move.
    first_new = new["days"][8]
    if first_new["park"]["dec_deg"] == plan["days"][7]["park"]["dec_deg"]:
        assert not first_new["park"]["move"]


def test_kept_moves_count_against_the_cap(trip, capsys):
    plan = trip["plan"]
    made = replan.kept_moves(plan, date(2027, 3, 9))
    assert made >= 1
    out = trip["folder"] / "capped.json"
    code, _, err = _run(capsys, "month", "--keep", trip["plan_path"], "--start", REPLAN_DAY,
                        "--want", WANT, "--log", trip["folder"] / "log.csv", "--max-moves", made,
                        "--format", "json", "-o", out)
    assert code == 0, err
    doc = read_plan(out)
    new_days = [d for d in doc["days"] if not d.get("kept")]
    assert not any(d["park"]["move"] for d in new_days)
    assert {d["park"]["dec_deg"] for d in new_days} == {plan["days"][7]["park"]["dec_deg"]}


def test_tradeoff_counts_the_kept_moves(trip, capsys):
    """The moves-versus-bins table of a re-plan: caps count the kept days' moves (caps they
    already exceed are left out), and each row is the plan --max-moves would give."""
    made = replan.kept_moves(trip["plan"], date(2027, 3, 9))
    out = trip["folder"] / "trade.json"
    code, _, err = _run(capsys, "month", "--keep", trip["plan_path"], "--start", REPLAN_DAY,
                        "--want", WANT, "--log", trip["folder"] / "log.csv", "--tradeoff",
                        "--format", "json", "-o", out)
    assert code == 0, err
    table = read_plan(out)["summary"]["tradeoff"]
    caps = [row["max_moves"] for row in table]
    assert all(cap is None or cap >= made for cap in caps) and None in caps
    # caps count the kept moves (as --max-moves does); moves are the re-plan's own (as summary)
    assert all(row["max_moves"] is None or row["moves"] + made <= row["max_moves"] for row in table)
    capped = trip["folder"] / "capped-again.json"
    cap = min(c for c in caps if c is not None)
    code, _, err = _run(capsys, "month", "--keep", trip["plan_path"], "--start", REPLAN_DAY,
                        "--want", WANT, "--log", trip["folder"] / "log.csv", "--max-moves", cap,
                        "--format", "json", "-o", capped)
    assert code == 0, err
    summary = read_plan(capped)["summary"]
    row = table[caps.index(cap)]
    assert row["bins"] == summary["done_after"] and row["moves"] == summary["moves"]


def test_move_spacing_holds_across_the_replan_day(trip, capsys):
    """--min-days-between-moves counts from the kept plan's last move too."""
    last = replan.last_move_day(trip["plan"], date(2027, 3, 9))
    assert last is not None
    gap = (date(2027, 3, 9) - last).days + 3  # the first new move may come 3 days in, no sooner
    out = trip["folder"] / "spaced.json"
    code, _, err = _run(capsys, "month", "--keep", trip["plan_path"], "--start", REPLAN_DAY,
                        "--want", WANT, "--log", trip["folder"] / "log.csv",
                        "--min-days-between-moves", gap, "--format", "json", "-o", out)
    assert code == 0, err
    moves = [date.fromisoformat(d["date"]) for d in read_plan(out)["days"]
             if not d.get("kept") and d["park"]["move"]]
    assert all((day - last).days >= gap for day in moves)
    assert replan.last_move_day(trip["plan"], date(2027, 3, 1)) is None


def test_kept_setting_is_the_last_days_park(club, trip):
    plan = trip["plan"]
    setting = replan.kept_setting(plan, club, date(2027, 3, 9))
    assert setting.dec_deg == pytest.approx(plan["days"][7]["park"]["dec_deg"])
    assert replan.kept_setting(plan, club, date(2027, 3, 1)) is None


def test_from_today(monkeypatch, trip, capsys):
    monkeypatch.setattr(month_cli, "today_at", lambda site: date(2027, 3, 9))
    out = trip["folder"] / "today.json"
    code, _, err = _run(capsys, "month", "--keep", trip["plan_path"], "--from-today", "--want", WANT,
                        "--log", trip["folder"] / "log.csv", "--format", "json", "-o", out)
    assert code == 0, err
    assert read_plan(out)["days"] == trip["replan"]["days"]
    # Without a kept plan: today to the end of this calendar month (or of --month).
    code, _, err = _run(capsys, "month", "--from-today", "--want", WANT, "--format", "json",
                        "-o", trip["folder"] / "rest.json")
    assert code == 0, err
    period = read_plan(trip["folder"] / "rest.json")["period"]
    assert (period["first_day_local"], period["last_day_local"]) == ("2027-03-09", "2027-03-31")
    code, _, err = _run(capsys, "month", "--from-today", "--month", "2027-04")
    assert code == 2 and "--from-today: today (2027-03-09) is not in --month 2027-04" in err


@pytest.mark.parametrize("extra, message", [
    ((), "--keep needs the first day to plan anew: --start DAY or --from-today"),
    (("--month", "2027-03", "--start", REPLAN_DAY), "--keep: the period is the kept plan's"),
    (("--start", "2027-04-02"), "--start: 2027-04-02 is not a day of"),
    (("--start", REPLAN_DAY, "--from-today"), "give --start or --from-today, not both"),
    (("--start", REPLAN_DAY, "--site", "saltbush-ridge"), "the plan was made for site 'Hollowmere"),
])
def test_keep_refusals(trip, capsys, extra, message):
    code, _, err = _run(capsys, "month", "--keep", trip["plan_path"], *extra)
    assert code == 2 and message in err


def test_the_kept_plan_is_never_replaced(trip, capsys):
    code, _, err = _run(capsys, "month", "--keep", trip["plan_path"], "--start", REPLAN_DAY,
                        "-o", trip["plan_path"], "--force")
    assert code == 2 and "would replace the plan file this command reads" in err


def test_merge_checks_the_days(trip):
    plan = json.loads(json.dumps(trip["plan"]))
    del plan["days"][0]
    with pytest.raises(UserError, match="its days are not one per date"):
        replan.merge(plan, trip["replan"], date(2027, 3, 9), "p.json")
