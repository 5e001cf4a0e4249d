"""The loop with the dish on paper, for the re-plan and brief tests: a plan; recordings that
follow it in one-minute spectra up to the re-plan day but miss the nights of ``gap``; their
tally against the plan (JSON and log rows); the re-plan from ``replan_day``."""
import json
from datetime import date

from planner.cli import main
from planner.planfile import read_plan
from planner.recordings import planned_spectra, recordings_csv
from planner.timebase import local_midnight_mjd


def round_trip(folder, site, days: int, want: str, gap: tuple, replan_day: str) -> dict:
    plan_path = folder / "plan.json"
    assert main(["month", "--start", "2027-03-01", "--days", str(days), "--want", want,
                 "--format", "json", "-o", str(plan_path)]) == 0
    plan = read_plan(plan_path)
    start = planned_spectra(plan, 60.0, gap)
    start = start[start + 60.0 / 86400 <= local_midnight_mjd(date.fromisoformat(replan_day), site.tz)]
    (folder / "rec.csv").write_text(recordings_csv(start, 60.0))
    assert main(["tally", str(folder / "rec.csv"), "--plan", str(plan_path), "--format", "json",
                 "-o", str(folder / "tally.json"), "--log-out", str(folder / "log.csv")]) == 0
    assert main(["month", "--keep", str(plan_path), "--start", replan_day, "--want", want,
                 "--log", str(folder / "log.csv"), "--format", "json",
                 "-o", str(folder / "replan.json")]) == 0
    return {"plan": plan, "plan_path": plan_path, "folder": folder,
            "tally_path": folder / "tally.json",
            "tally": json.loads((folder / "tally.json").read_text()),
            "replan": read_plan(folder / "replan.json")}
