"""The hiplan command line: formats, schemas, one-line errors, file safety."""
import csv
import io
import json
import subprocess
import sys

import pytest

from planner.cli import main

PERIOD = ["--start", "2027-03-01", "--days", "2"]


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_crossings_json_schema(capsys):
    code, out, _ = run(capsys, "crossings", "--site", "hollowmere", "--dec", "20", *PERIOD,
                       "--format", "json")
    assert code == 0
    doc = json.loads(out)
    assert doc["schema"] == "hiplan.crossings/1"
    for key in ("name", "latitude_deg", "longitude_deg", "height_m", "timezone",
                "elevation_min_deg", "sun_min_sep_deg"):
        assert key in doc["site"]
    for key in ("alt_deg", "az_deg", "dec_deg", "beamwidth_deg", "b_max_deg", "dec_frame"):
        assert key in doc["pointing"]
    assert len(doc["passages"]) == 4
    for p in doc["passages"]:
        for key in ("start_utc", "end_utc", "peak_utc", "start_local", "end_local", "l_start_deg",
                    "l_peak_deg", "l_end_deg", "b_min_abs_deg", "l_bins", "duration_min",
                    "sun_sep_min_deg", "sun_ok", "clipped", "lsr_corr_min_kms", "lsr_corr_max_kms"):
            assert key in p
        assert p["start_utc"].endswith("Z") and p["start_local"].endswith("+00:00")
        assert all(isinstance(b, int) for b in p["l_bins"])
        assert p["lsr_corr_min_kms"] <= p["lsr_corr_max_kms"]


def test_crossings_csv_matches_json(capsys):
    _, out_json, _ = run(capsys, "crossings", "--dec", "20", *PERIOD, "--format", "json")
    _, out_csv, _ = run(capsys, "crossings", "--dec", "20", *PERIOD, "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(out_csv)))
    passages = json.loads(out_json)["passages"]
    assert len(rows) == len(passages)
    for row, p in zip(rows, passages):
        assert row["start_utc"] == p["start_utc"]
        assert row["l_bins"] == ";".join(str(b) for b in p["l_bins"])


def test_crossings_table_and_pointing_forms(capsys):
    code, out, _ = run(capsys, "crossings", "--site", "saltbush-ridge", "--alt", "60", "--az", "200",
                       *PERIOD)
    assert code == 0 and "Saltbush Ridge" in out and "passages" in out
    code, out, _ = run(capsys, "crossings", "--elevation", "40", *PERIOD)
    assert code == 0 and "elevation 40.00" in out


def test_crossings_report_sun_approaches(capsys):
    """June, dec +20 on the meridian: the Sun (dec +23.0..+23.1) passes ~3 deg from the beam
    at apparent noon (13:07 BST) every day: listed in JSON and flagged in the table."""
    june = ("--start", "2027-06-10", "--days", "3")
    code, out, _ = run(capsys, "crossings", "--site", "hollowmere", "--dec", "20", *june,
                       "--format", "json")
    doc = json.loads(out)
    assert code == 0 and doc["sun_hazard_deg"] == 10.0 and doc["pointing"]["culmination"] == "upper"
    assert len(doc["sun_approaches"]) == 3
    for a in doc["sun_approaches"]:
        assert a["hazard"] and 2.9 < a["sep_deg"] < 3.3 and a["closest_local"][11:16] in ("13:07", "13:08")
        assert a["within_from_utc"] < a["closest_utc"] < a["within_to_utc"]
    code, out, _ = run(capsys, "crossings", "--site", "hollowmere", "--dec", "20", *june)
    assert "SUN HAZARD" in out and "cover the feed" in out
    # Below the pole in March the Sun stays far away, and says so.
    code, out, _ = run(capsys, "crossings", "--site", "hollowmere", "--elevation", "23.6",
                       "--facing", "north", *PERIOD)
    assert code == 0 and "never comes within 10° of the beam" in out


def test_no_passage_is_explained(capsys):
    code, out, _ = run(capsys, "crossings", "--dec", "75", *PERIOD)
    assert code == 0 and "never comes within 3° of the galactic plane" in out


def test_lsr_json(capsys):
    code, out, _ = run(capsys, "lsr", "--l", "30", "--b", "0", "--time", "2027-03-01T12:00:00Z",
                       "--format", "json")
    doc = json.loads(out)
    assert code == 0 and "site" in doc
    (s,) = doc["samples"]
    for key in ("time_utc", "ra_deg", "dec_deg", "l_deg", "b_deg", "lsr_corr_kms", "bary_corr_kms"):
        assert key in s
    assert abs(s["l_deg"] - 30) < 1e-3 and abs(s["lsr_corr_kms"]) < 50.3


def test_tune_json(capsys):
    code, out, _ = run(capsys, "tune", "--dec", "20", "--start", "2027-03-01", "--days", "5",
                       "--format", "json", "--target-rms", "0.1")
    doc = json.loads(out)
    assert code == 0
    t = doc["tuning"]
    assert t["line_low_mhz"] < t["line_high_mhz"] and t["fits"] in (True, False)
    assert doc["sensitivity"]["bins"] and doc["l_bins"]


def test_tune_one_passage_says_which(capsys):
    """--passage N names the passage: the same one ``hiplan crossings`` lists N-th."""
    where = ["--site", "hollowmere", "--dec", "20", "--start", "2027-03-01", "--days", "2"]
    code, out, _ = run(capsys, "crossings", *where, "--format", "json")
    second = json.loads(out)["passages"][1]
    code, out, _ = run(capsys, "tune", *where, "--passage", "2", "--format", "json")
    assert code == 0
    passage = json.loads(out)["passage"]
    assert (passage["number"], passage["of"]) == (2, 4)
    for key in ("start_utc", "end_utc", "start_local", "end_local", "l_start_deg", "l_end_deg"):
        assert passage[key] == second[key], key
    code, out, _ = run(capsys, "tune", *where, "--passage", "2")
    # 2027-03-01T19:26:10 to 19:55:16 GMT, shown outward to the minute: 19:26-19:56.
    assert second["start_local"].startswith("2027-03-01T19:26:10")
    assert (f"Passage 2 of 4 only: Mon 1 Mar 2027 19:26–19:56 local (UTC+00:00), "
            f"l {second['l_start_deg']:.1f}° → {second['l_end_deg']:.1f}°") in out
    # Without --passage the document names none.
    code, out, _ = run(capsys, "tune", *where, "--format", "json")
    assert "passage" not in json.loads(out)


BAD = [
    (["crossings", "--days", "0"], "--days: 0 is outside [1, 731]"),
    (["crossings", "--days", "3650"], "--days: 3650 is outside [1, 731]"),
    (["crossings", "--start", "2027-02-30"], "--start: '2027-02-30' is not a date"),
    (["crossings", "--b-max", "0"], "--b-max: 0.0 is outside (0, 90)"),
    (["crossings", "--b-max", "95"], "--b-max: 95.0 is outside (0, 90)"),
    (["crossings", "--dec", "abc"], "--dec: 'abc' is not a number"),
    (["crossings", "--dec", "20", "--elevation", "30"], "give one pointing, not --dec and --elevation"),
    (["crossings", "--alt", "30"], "--alt and --az must be given together"),
    (["crossings", "--dec", "-60"], "pointing not reachable"),
    (["crossings", "--site", "nowhere"], "no site file or site named 'nowhere'"),
    (["crossings", "--bogus"], "unrecognized arguments: --bogus"),
    (["lsr", "--l", "30"], "--l and --b must be given together"),
    (["lsr", "--ra", "10"], "--ra needs --dec"),
    (["lsr", "--time", "yesterday"], "--time: 'yesterday' is not an ISO 8601 time"),
    # No zone: local or UTC? Refused, as the observation log refuses it.
    (["lsr", "--l", "30", "--b", "0", "--time", "2027-03-01T21:00:00"],
     "--time: '2027-03-01T21:00:00' has no UTC offset; add Z for UTC"),
    (["tune", "--rotation", "iau1958"], "rotation model 'iau1958' is unknown"),
    (["tune", "--dec", "75", "--days", "2"], "nothing to tune for"),
    (["lsr", "--lsr-def", "fast"], "invalid choice: 'fast'"),
    (["park", "--step", "0"], "--step: 0.0 is outside (0, 30]"),
    (["park", "--step", "-2"], "--step: -2.0 is outside (0, 30]"),
    (["park", "--want", "90-30-10"], "--want: '90-30-10' is not a longitude range"),
    (["park", "--windows", "Mon-Fri 19:00-25:00"], "--windows"),
    (["park", "--log", "no-such-log.csv"], "no-such-log.csv"),
    (["month", "--windows", "Funday 19:00-20:00"], "Funday"),
    (["calendar", "no-such-plan.json"], "no-such-plan.json: plan file not found"),
    (["brief", "no-such-plan.json"], "no-such-plan.json: plan file not found"),
    (["survey", "--grid", "l=20..240/5,b=-4..4/4", "--days", "1"], "altaz"),
    (["survey", "--site", "saltbush-ridge", "--grid", "l=20..240/0", "--days", "1"], "--grid"),
]


@pytest.mark.parametrize("argv,message", BAD)
def test_bad_input_one_line_exit_2(capsys, argv, message):
    code, out, err = run(capsys, *argv)
    assert code == 2
    assert message in err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert out == ""


def test_output_file_written_atomically_and_not_clobbered(tmp_path, capsys):
    target = tmp_path / "pass.json"
    assert run(capsys, "crossings", "--dec", "20", *PERIOD, "--format", "json", "-o", str(target))[0] == 0
    first = target.read_bytes()
    assert json.loads(first)["passages"]
    code, _, err = run(capsys, "crossings", "--dec", "30", *PERIOD, "--format", "json", "-o", str(target))
    assert code == 2 and "already exists (use --force" in err and target.read_bytes() == first
    assert run(capsys, "crossings", "--dec", "30", *PERIOD, "--format", "json", "-o", str(target),
               "--force")[0] == 0
    assert target.read_bytes() != first
    assert [p.name for p in tmp_path.iterdir()] == ["pass.json"]  # no temp files left


def test_error_leaves_no_output_file(tmp_path, capsys):
    target = tmp_path / "out.json"
    code, _, _ = run(capsys, "crossings", "--dec", "-60", *PERIOD, "--format", "json", "-o", str(target))
    assert code == 2 and not target.exists()
    code, _, err = run(capsys, "crossings", "--dec", "20", *PERIOD, "-o", str(tmp_path / "no" / "x.txt"))
    assert code == 2 and "does not exist" in err


def test_console_script_entry_point_subprocess():
    # Runs the real process: no traceback, exit status 2 for a user error.
    proc = subprocess.run([sys.executable, "-m", "planner.cli", "crossings", "--days", "-1"],
                          capture_output=True, text=True)
    assert proc.returncode == 2 and "Traceback" not in proc.stderr


def test_demo_writes_files(tmp_path, capsys):
    code, out, _ = run(capsys, "demo", "--output-dir", str(tmp_path / "demo"))
    assert code == 0
    files = sorted(p.name for p in (tmp_path / "demo").iterdir())
    for name in ("park-hollowmere.txt", "atlas-hollowmere.png", "plan-hollowmere.json",
                 "plan-hollowmere.ics", "month-hollowmere.png", "brief-hollowmere.html",
                 "brief-hollowmere.md", "tune-hollowmere.txt", "crossings-hollowmere.csv"):
        assert name in files
    assert "wanted 1° bins" in out
    assert all((tmp_path / "demo" / f).stat().st_size > 100 for f in files)
    code, _, err = run(capsys, "demo", "--output-dir", str(tmp_path / "demo"))
    assert code == 2 and "already exists" in err


@pytest.mark.parametrize("script", ["examples/api_example.py", "examples/plan_month.py"])
def test_example_scripts_run(script):
    proc = subprocess.run([sys.executable, script], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip()


def test_every_option_has_help_naming_its_choices():
    """Every option of every command explains itself; options with fixed choices list them,
    and the calendar reminder option has one name everywhere (--alarm)."""
    from planner.cli import build_parser
    parser = build_parser()
    commands = next(a for a in parser._actions if a.__class__.__name__ == "_SubParsersAction")
    for name, sub in commands.choices.items():
        for action in sub._actions:
            if action.dest == "help":
                continue
            assert action.help, (name, action.option_strings)
            for choice in action.choices or ():
                assert str(choice) in action.help, (name, action.option_strings, choice)
            assert "--alarm-minutes" not in action.option_strings
    for name in ("month", "survey", "calendar"):
        assert any("--alarm" in a.option_strings for a in commands.choices[name]._actions), name


def test_one_period_convention_across_commands(capsys):
    """The same 31 days read the same everywhere: first and last local day, both inclusive
    (March 2027 at Hollowmere crosses the clock change, so the end is 23:00 UTC)."""
    shown = []
    for argv in (["park", "--start", "2027-03-01", "--days", "31", "--top", "1"],
                 ["month", "--month", "2027-03"],
                 ["tune", "--dec", "20", "--start", "2027-03-01", "--days", "31"]):
        code, out, _ = run(capsys, *argv)
        assert code == 0
        shown.append("2027-03-01 – 2027-03-31" in out and "2027-04-01" not in out)
    assert all(shown)
    code, out, _ = run(capsys, "park", "--start", "2027-03-01", "--days", "31", "--format", "json")
    period = json.loads(out)["period"]
    assert (period["first_day_local"], period["last_day_local"]) == ("2027-03-01", "2027-03-31")


# ------------------------------------------------------------------ files: inputs, '-', all or none

ROOT = __import__("pathlib").Path(__file__).resolve().parent.parent


@pytest.fixture(scope="module")
def small_plan(tmp_path_factory):
    """A three-day drift plan written by hiplan month (read by calendar, brief, plan-log, tune)."""
    path = tmp_path_factory.mktemp("plan") / "plan.json"
    assert main(["month", "--start", "2027-03-01", "--days", "3", "--format", "json",
                 "-o", str(path)]) == 0
    return path


def _inputs(tmp_path, plan):
    """Copies of every kind of input in tmp_path; the site file also through a hard link."""
    import os
    import shutil
    files = {"site": tmp_path / "club.toml", "log": tmp_path / "log.csv",
             "windows": tmp_path / "rota.txt", "targets": tmp_path / "targets.csv",
             "plan": tmp_path / "plan.json"}
    shutil.copy(ROOT / "sites" / "hollowmere.toml", files["site"])
    shutil.copy(ROOT / "examples" / "observation-log.csv", files["log"])
    shutil.copy(ROOT / "examples" / "windows.txt", files["windows"])
    shutil.copy(ROOT / "examples" / "targets.csv", files["targets"])
    shutil.copy(plan, files["plan"])
    os.link(files["site"], tmp_path / "same-site.toml")
    os.link(files["plan"], tmp_path / "same-plan.json")
    (tmp_path / "log-link.csv").symlink_to(files["log"])
    return files


INPUT_CASES = [  # (argv with {name} for the inputs, the output that is an input, what)
    (["crossings", "--site", "{site}", *PERIOD, "-o", "{site}"], "site file"),
    (["crossings", "--site", "{site}", *PERIOD, "-o", "{dir}/same-site.toml"], "site file"),
    (["park", "--log", "{log}", *PERIOD, "-o", "{dir}/log-link.csv"], "observation log"),
    (["park", *PERIOD, "--plot", "{dir}/a.png", "--log", "{dir}/a-sky.png"], None),
    (["month", *PERIOD, "--windows", "{windows}", "--ics", "{windows}"], "windows file"),
    (["month", "--site", "{site}", *PERIOD, "--chart", "{dir}/c.png", "-o", "{dir}/same-site.toml"],
     "site file"),
    (["survey", "--site", "saltbush-ridge", "--targets", "{targets}", "--days", "1", "-o", "{targets}"],
     "target file"),
    (["calendar", "{plan}", "-o", "{plan}"], "plan file"),
    (["calendar", "{plan}", "-o", "{dir}/same-plan.json"], "plan file"),
    (["brief", "{plan}", "-o", "{dir}/same-plan.json"], "plan file"),
    (["brief", "{plan}", "-o", "{plan}"], "plan file"),
    (["plan-log", "{plan}", "-o", "{plan}"], "plan file"),
    (["tune", "--plan", "{plan}", "-o", "{plan}"], "plan file"),
    (["lsr", "--site", "{site}", "--dec", "20", "-o", "{site}"], "site file"),
]


@pytest.mark.parametrize("argv,what", INPUT_CASES)
def test_force_never_replaces_an_input(tmp_path, capsys, small_plan, argv, what):
    """Every command refuses, before any work, to write over one of its own inputs, also
    through a hard or symbolic link, whatever --force says."""
    files = _inputs(tmp_path, small_plan)
    if what is None:  # a second output (the sky chart) named as an input: make it exist
        (tmp_path / "a-sky.png").write_text("start_utc,l_from_deg,l_to_deg,minutes,quality\n")
    before = {p: p.read_bytes() for p in tmp_path.iterdir()}
    names = {**{k: str(v) for k, v in files.items()}, "dir": str(tmp_path)}
    code, out, err = run(capsys, *[a.format(**names) for a in argv], "--force")
    assert code == 2 and err.count("\n") == 1
    assert f"would replace the {what or 'observation log'}" in err
    assert {p: p.read_bytes() for p in tmp_path.iterdir()} == before


def test_sites_listing_never_replaces_a_site_file(tmp_path, capsys, monkeypatch):
    (tmp_path / "sites").mkdir()
    club = tmp_path / "sites" / "club.toml"
    club.write_bytes((ROOT / "sites" / "hollowmere.toml").read_bytes())
    monkeypatch.chdir(tmp_path)
    code, _, err = run(capsys, "sites", "-o", "sites/club.toml", "--force")
    assert code == 2 and "replace the site file" in err
    assert club.read_bytes() == (ROOT / "sites" / "hollowmere.toml").read_bytes()


@pytest.mark.parametrize("argv,starts", [
    (["crossings", "--dec", "20", *PERIOD, "--format", "csv"], "start_utc,end_utc"),
    (["crossings", "--dec", "20", *PERIOD], "Hollowmere"),
    (["lsr", "--dec", "20", "--time", "2027-03-01T12:00:00Z", "--format", "json"], "{"),
    (["park", *PERIOD, "--format", "csv"], "rank,"),
    (["tune", "--dec", "20", *PERIOD, "--format", "json"], "{"),
    (["survey", "--site", "saltbush-ridge", "--grid", "l=240..250/10,b=0", "--start", "2027-03-01",
      "--days", "1", "--format", "json"], "{"),
    (["sites", "--format", "json"], "{"),
    (["month", *PERIOD], "{"),  # the plan instead of the table
    (["calendar", "{plan}"], "BEGIN:VCALENDAR"),
    (["plan-log", "{plan}"], "# hiplan observation log"),
    (["brief", "{plan}"], "<!DOCTYPE html>"),
])
def test_dash_means_standard_output(tmp_path, capsys, monkeypatch, small_plan, argv, starts):
    monkeypatch.chdir(tmp_path)
    code, out, err = run(capsys, *[a.format(plan=small_plan) for a in argv], "-o", "-")
    assert code == 0, err
    assert out.startswith(starts)
    assert list(tmp_path.iterdir()) == []  # no file called '-'
    if starts == "{":
        json.loads(out)


def test_month_calendar_to_standard_output_and_refusals(tmp_path, capsys):
    code, out, err = run(capsys, "month", *PERIOD, "--ics", "-")
    assert code == 0 and out.startswith("BEGIN:VCALENDAR") and out.rstrip().endswith("END:VCALENDAR")
    code, _, err = run(capsys, "month", *PERIOD, "--chart", "-")
    assert code == 2 and "--chart: give a file name, not '-'" in err
    code, _, err = run(capsys, "month", *PERIOD, "-o", "-", "--ics", "-")
    assert code == 2 and err.count("\n") == 1


def _full_disk_for(monkeypatch, *names):
    """Writing the files with these names fails as on a full disk."""
    import errno
    from planner import outputs
    real_stage = outputs._stage

    def stage(path, data):
        if path.name in names:
            raise OSError(errno.ENOSPC, "No space left on device")
        return real_stage(path, data)

    monkeypatch.setattr(outputs, "_stage", stage)


def test_month_leaves_nothing_when_a_later_output_fails(tmp_path, capsys, monkeypatch):
    """The plan file used to be written before the calendar and the charts were built: a
    failure in either left it behind. Now every output is built first and written together."""
    import planner.ical
    from planner.errors import UserError

    def broken(*args, **kwargs):
        raise UserError("plan: site.name contains a control character")

    outputs = ["-o", str(tmp_path / "p.json"), "--ics", str(tmp_path / "p.ics"),
               "--chart", str(tmp_path / "c.png")]
    monkeypatch.setattr(planner.ical, "calendar_bytes", broken)
    code, _, err = run(capsys, "month", *PERIOD, *outputs)
    assert code == 2 and "control character" in err
    assert list(tmp_path.iterdir()) == []
    monkeypatch.undo()
    _full_disk_for(monkeypatch, "p.json")  # the charts are staged first and go through
    code, _, err = run(capsys, "month", *PERIOD, *outputs)
    assert code == 2 and "the disk is full" in err
    assert list(tmp_path.iterdir()) == []
    monkeypatch.undo()
    assert run(capsys, "month", *PERIOD, *outputs)[0] == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c-depth.png", "c.png", "p.ics", "p.json"]


def test_park_plots_and_markdown_brief_are_all_or_none(tmp_path, capsys, monkeypatch, small_plan):
    _full_disk_for(monkeypatch, "park.txt", "b.md")  # staged after the charts
    code, _, err = run(capsys, "park", *PERIOD, "--plot", str(tmp_path / "a.png"),
                       "-o", str(tmp_path / "park.txt"))
    assert code == 2 and "park.txt: cannot write the file: the disk is full" in err
    code, _, err = run(capsys, "brief", str(small_plan), "-o", str(tmp_path / "b.md"))
    assert code == 2 and "b.md: cannot write the file: the disk is full" in err
    assert list(tmp_path.iterdir()) == []


def test_csv_text_cells_cannot_run_as_formulas(tmp_path, capsys):
    """A target named like a formula is written with a leading apostrophe in the survey CSV;
    negative numbers (LSR corrections) stay numbers."""
    targets = tmp_path / "t.csv"
    targets.write_text('name,l,b\n"=HYPERLINK(""http://x"")",250,0\n@SUM(A1),260,0\n')
    code, out, err = run(capsys, "survey", "--site", "saltbush-ridge", "--targets", str(targets),
                         "--start", "2027-03-01", "--days", "1", "--format", "csv")
    assert code == 0, err
    names = {row["name"] for row in csv.DictReader(io.StringIO(out))}
    assert {"'=HYPERLINK(\"http://x\")", "'@SUM(A1)"} <= names
    assert not any(n.startswith(("=", "@", "+")) for n in names if n)
    code, out, _ = run(capsys, "lsr", "--l", "30", "--b", "0", "--start", "2027-09-01", "--days", "1",
                       "--format", "csv")
    rows = list(csv.DictReader(io.StringIO(out)))
    assert any(float(r["lsr_corr_kms"]) < 0 for r in rows)  # plain numbers, no apostrophe


def test_inputs_with_a_byte_order_mark(tmp_path, capsys, small_plan):
    """Some editors start UTF-8 files with a BOM: every input file accepts one."""
    def bom(src, name):
        path = tmp_path / name
        path.write_bytes(b"\xef\xbb\xbf" + src.read_bytes())
        return str(path)

    site = bom(ROOT / "sites" / "hollowmere.toml", "club.toml")
    rota = bom(ROOT / "examples" / "windows.txt", "rota.txt")
    log = bom(ROOT / "examples" / "observation-log.csv", "log.csv")
    assert run(capsys, "park", "--site", site, *PERIOD, "--windows", rota, "--log", log)[0] == 0
    plan = bom(small_plan, "plan.json")
    assert run(capsys, "calendar", plan, "-o", str(tmp_path / "p.ics"))[0] == 0
    targets = bom(ROOT / "examples" / "targets.csv", "targets.csv")
    assert run(capsys, "survey", "--site", "saltbush-ridge", "--targets", targets,
               "--start", "2027-03-01", "--days", "1")[0] == 0


def test_parser_constants_agree_with_the_planner():
    """Repeated in cli.common so the parser loads no computation; they must not drift."""
    from planner.cli import common
    from planner.ical import MAX_ALARM_MINUTES
    from planner.park import DEFAULT_TARGET_MINUTES
    assert common.DEFAULT_TARGET_MINUTES == DEFAULT_TARGET_MINUTES
    assert common.MAX_ALARM_MINUTES == MAX_ALARM_MINUTES
