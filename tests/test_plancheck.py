"""A drift plan against recordings: the setting at each moment, per day and per bin, missed
intervals, bins at target; the tally command with --plan."""
import json
from datetime import date

import numpy as np
import pytest

from planner import plancheck
from planner.cli import main
from planner.errors import UserError
from planner.planfile import read_plan
from planner.recordings import planned_spectra, read_recordings, recordings_csv
from planner.tally import MOVING, PARKED, UNKNOWN, Rules, tally
from planner.timebase import local_midnight_mjd, parse_instant

WANT = "120-140,155-165"


@pytest.fixture(scope="module")
def plan_path(tmp_path_factory):
    """16 days from 2027-03-01 (no windows: moves at 10:00 local), the dish first at the
    site's Dec +20: a move to Dec +60.2 on the first day, later another."""
    path = tmp_path_factory.mktemp("plan") / "plan.json"
    assert main(["month", "--start", "2027-03-01", "--days", "16", "--want", WANT,
                 "--format", "json", "-o", str(path)]) == 0
    return path


def _mjd(text):
    return parse_instant(text, "test")


def test_timeline_follows_the_plan(club, plan_path, capsys):
    capsys.readouterr()
    plan = read_plan(plan_path)
    tl = plancheck.timeline(plan, club, str(plan_path))
    first = plan["days"][0]
    move_start, move_end = _mjd(first["park"]["move_start_utc"]), _mjd(first["park"]["move_end_utc"])
    before = [r for r in first["recordings"] if _mjd(r["start_utc"]) < move_start]
    assert before, "the scenario has a recording before the first move"
    times = np.array([_mjd(before[0]["start_utc"]), move_start + 1e-4, move_end + 1e-4])
    setting = plancheck.setting_at(tl, times)
    assert list(setting.status) == [PARKED, MOVING, PARKED]
    # Before the move: the dish of that recording (the site's [pointing], Dec +20).
    assert setting.dec_deg[0] == pytest.approx(before[0]["dish"]["dec_deg"])
    assert setting.dec_deg[2] == pytest.approx(first["park"]["dec_deg"])
    later = [d for d in plan["days"] if d["park"]["move"]][1]
    t = _mjd(later["park"]["move_end_utc"]) + 0.1
    assert plancheck.setting_at(tl, np.array([t])).dec_deg[0] == pytest.approx(later["park"]["dec_deg"])
    assert list(plancheck.outside(tl, np.array([tl.start_mjd - 1e-6, tl.end_mjd]))) == [True, True]


def test_unknown_setting_before_a_first_move_without_recordings(club, plan_path):
    plan = json.loads(plan_path.read_text())
    first = plan["days"][0]
    first["recordings"] = [r for r in first["recordings"]
                           if r["start_utc"] > first["park"]["move_start_utc"]]
    tl = plancheck.timeline(plan, club, "p")
    assert tl.status[0] == UNKNOWN


def test_compare_per_day_missed_intervals_and_bins(club, plan_path):
    plan = read_plan(plan_path)
    gap = ("2027-03-03", "2027-03-04")
    start = planned_spectra(plan, 60.0, gap)
    start = start[start < local_midnight_mjd(date(2027, 3, 9), club.tz)]  # recorded to day 8
    path = plan_path.parent / "rec.csv"
    path.write_text(recordings_csv(start, 60.0))
    spectra = read_recordings([path])
    tl = plancheck.timeline(plan, club, str(plan_path))
    mid = start + 30.0 / 86400
    result = tally(club, spectra, Rules.of_site(club), setting=plancheck.setting_at(tl, mid))
    out = plancheck.compare(plan, club, result, str(plan_path))
    assert out["plan"]["through"] == "2027-03-08"
    assert [d["date"] for d in out["per_day"]] == [f"2027-03-0{k}" for k in range(1, 9)]
    for day, planned in zip(out["per_day"], plan["days"]):
        if day["date"] in gap:
            # Every planned recording of the day is missed whole (to the second shown).
            assert day["recorded_min"] == 0
            assert [(m["start_utc"], m["end_utc"]) for m in day["missed"]] == \
                [(r["start_utc"], r["end_utc"]) for r in planned["recordings"]]
            assert sum(m["minutes"] for m in day["missed"]) == pytest.approx(
                sum((_mjd(r["end_utc"]) - _mjd(r["start_utc"])) * 1440 for r in planned["recordings"]),
                abs=0.05)
        else:
            assert day["missed"] == []
            # One-minute spectra from each recording's start: the last one overhangs the
            # strip exit by under a minute, so recorded and planned differ by < 1 min each.
            assert abs(day["recorded_min"] - day["planned_min"]) < len(planned["recordings"])
    ag = out["agreement"]
    assert ag["days_with_missed"] == list(gap) and ag["days_complete"] == 6
    assert ag["max_day_difference_min"] < 2.0
    per_bin = {b["l_bin"]: b for b in out["per_bin"]}
    # Each bin's value is rounded to 0.001 min: over ~45 bins at most 0.03 min.
    assert sum(b["planned_min"] for b in per_bin.values()) == pytest.approx(ag["planned_min"], abs=0.03)
    at = out["at_target"]
    assert at["now"] < at["planned_so_far"]  # the gap leaves bins short of the target
    assert at["wanted_bins"] == 30 and at["planned_by_end"] == plan["summary"]["done_after"]


def test_wrong_plans_are_refused(club, school, plan_path):
    plan = read_plan(plan_path)
    with pytest.raises(UserError, match="made for site 'Hollowmere"):
        plancheck.check_drift_plan(plan, school, "p.json")
    with pytest.raises(UserError, match="a survey plan; this needs a drift plan"):
        plancheck.check_drift_plan({**plan, "kind": "survey"}, club, "p.json")


def test_tally_command_with_plan_chart_and_outside_period(tmp_path, capsys, plan_path):
    plan = read_plan(plan_path)
    start = planned_spectra(plan, 120.0)[:400]
    rec = tmp_path / "rec.csv"
    rec.write_text(recordings_csv(start, 120.0))
    out = tmp_path / "t.json"
    code = main(["tally", str(rec), "--plan", str(plan_path), "--format", "json", "-o", str(out),
                 "--chart", str(tmp_path / "t.svg")])
    _, err = capsys.readouterr()
    assert code == 0, err
    doc = json.loads(out.read_text())
    assert {"per_day", "per_bin", "at_target", "agreement"} <= set(doc)
    assert doc["settings"]["plan"] == str(plan_path)
    assert doc["spectra"]["pointing_from"]["setting"] == 400
    assert (tmp_path / "t.svg").read_text().count("day-planned") >= 1
    assert main(["tally", str(rec), "--plan", str(plan_path)]) == 0
    table, _ = capsys.readouterr()
    assert "against the recordings" in table and "Wanted bins at 60 min" in table
    late = tmp_path / "late.csv"
    late.write_text(recordings_csv(np.array([_mjd("2027-03-20T00:00:00Z")]), 60.0))
    code = main(["tally", str(rec), str(late), "--plan", str(plan_path), "--log-out",
                 str(tmp_path / "log.csv")])
    _, err = capsys.readouterr()
    assert code == 2 and f"{late}:3: the spectrum at 2027-03-20T00:00:30Z is outside the period" in err
    assert not (tmp_path / "log.csv").exists()
