"""The brief's loop with the dish: the drive caution, a re-planned plan's past days, and
"What was recorded" from a tally (``brief --tally``), with its refusals."""
import json
from datetime import datetime

import pytest

from loop_trip import round_trip
from planner.briefcontent import build_brief
from planner.briefloop import TALLY_SCHEMA
from planner.cli import main

WANT = "120-140"
GAP = ("2027-03-03",)
REPLAN_DAY = "2027-03-05"


@pytest.fixture(scope="module")
def trip(tmp_path_factory, club):
    """An 8-day plan, recordings to day 4 missing the night of GAP, their tally against the
    plan, and the re-plan from day 5 (tests/loop_trip.py)."""
    return round_trip(tmp_path_factory.mktemp("loop"), club, 8, WANT, GAP, REPLAN_DAY)


def _section(brief, section_id):
    found = [s for s in brief.sections if s.section_id == section_id]
    return found[0] if found else None


def _texts(section) -> str:
    out = []
    for block in section.blocks:
        if block.kind == "paragraph":
            out.append(block.text)
        elif block.kind == "bullets":
            out.extend(f"{lead} {text}" for lead, text in block.items)
        elif block.kind == "table":
            out.extend(" | ".join(" ".join(c) for c in row.cells) for row in block.rows)
    return "\n".join(out)


def test_drive_caution_on_survey_and_motorised_plans_only(trip):
    drift = trip["plan"]
    assert drift["site"]["mount"] == "transit"
    safety = _texts(_section(build_brief(drift), "safety"))
    assert "Moving the dish." not in safety
    motorised = {**drift, "site": {**drift["site"], "mount": "altaz", "sun_hazard_deg": 12.5}}
    safety = _texts(_section(build_brief(motorised), "safety"))
    assert "Moving the dish." in safety and "within 12.5° of the Sun" in safety
    assert "a person must be able to stop the dish at any time" in safety


def test_replanned_plan_marks_its_past_days(trip):
    brief = build_brief(trip["replan"])
    note = _texts(_section(brief, "replan"))
    kept = [d for d in trip["replan"]["days"] if d.get("kept")]
    assert len(kept) == 4 and trip["replan"]["replan"]["kept_days"] == 4
    moves = trip["replan"]["replan"]["kept_moves"]
    assert f"{len(kept)} days, {moves} re-park{'' if moves == 1 else 's'})" in note
    assert "Re-planned on Fri 5 Mar 2027" in note
    table = [b for b in _section(brief, "days").blocks if b.kind == "table"][0]
    past = [row for row in table.rows if row.cells[0][0].endswith("(past)")]
    assert len(past) == 4 and all(row.style == "idle" for row in past)
    assert _section(build_brief(trip["plan"]), "replan") is None


def test_recorded_section_from_the_tally(trip):
    tally = trip["tally"]
    brief = build_brief({**trip["plan"], "recorded": tally})
    section = _section(brief, "recorded")
    text = _texts(section)
    agree, at = tally["agreement"], tally["at_target"]
    assert f"{agree['recorded_min']:.0f} of {agree['planned_min']:.0f} planned minutes" in text
    assert f"{at['now']} of {at['wanted_bins']} wanted bins now" in text
    table = [b for b in section.blocks if b.kind == "table"][0]
    assert len(table.rows) == len(tally["per_day"]) == 4
    # The gap night: nothing recorded, its whole planned time missed, shown in local time from
    # the plan's own recording times (rounded outward to the minute, the brief's rule).
    gap_row = [r for r in table.rows if r.cells[0][0] == "Wed 3 Mar"][0]
    assert gap_row.style == "warn" and gap_row.cells[2] == ("0",)
    planned = [rec for d in trip["plan"]["days"] if d["date"] == GAP[0] for rec in d["recordings"]]
    first = datetime.fromisoformat(planned[0]["start_local"])
    assert gap_row.cells[3][0].startswith(f"{first:%H:%M}–")
    others = [r for r in table.rows if r is not gap_row]
    assert all(r.cells[3] == ("—",) for r in others)


def test_brief_command_with_tally_html_and_markdown(trip, tmp_path, capsys):
    md = tmp_path / "brief.md"
    assert main(["brief", str(trip["plan_path"]), "--tally", str(trip["tally_path"]),
                 "-o", str(md)]) == 0
    text = md.read_text()
    assert "## What was recorded" in text and "(tally" not in text
    assert (tmp_path / "brief-recorded.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    html = tmp_path / "brief.html"
    assert main(["brief", str(trip["plan_path"]), "--tally", str(trip["tally_path"]),
                 "-o", str(html)]) == 0
    assert "What was recorded" in html.read_text()


def _write(path, doc):
    path.write_text(json.dumps(doc))
    return path


@pytest.mark.parametrize("change, message", [
    (lambda t: {**t, "schema": "hiplan.plan/1"}, "not a tally file"),
    (lambda t: {k: v for k, v in t.items() if k != "per_day"}, "made without --plan"),
    (lambda t: {**t, "site": {**t["site"], "name": "Elsewhere"}}, "a tally for site 'Elsewhere'"),
    (lambda t: {**t, "plan": {**t["plan"], "first_day": "2027-02-01"}}, "covers 2027-03-01 to 2027-03-08"),
])
def test_brief_tally_refusals(trip, tmp_path, capsys, change, message):
    bad = _write(tmp_path / "t.json", change(trip["tally"]))
    out = tmp_path / "b.md"
    assert main(["brief", str(trip["plan_path"]), "--tally", str(bad), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1 and str(bad) in err
    assert not out.exists()


def test_brief_tally_not_json_and_never_replaced(trip, tmp_path, capsys):
    bad = tmp_path / "t.json"
    bad.write_text("{\n  nope")
    assert main(["brief", str(trip["plan_path"]), "--tally", str(bad), "-o", "-"]) == 2
    assert f"{bad}:2: not valid JSON" in capsys.readouterr().err
    copy = _write(tmp_path / "tally.json", trip["tally"])
    before = copy.read_bytes()
    assert main(["brief", str(trip["plan_path"]), "--tally", str(copy), "-o", str(copy), "--force"]) == 2
    assert "never replaces an input" in capsys.readouterr().err and copy.read_bytes() == before
    assert trip["tally"]["schema"] == TALLY_SCHEMA
