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
