"""Reliability: extreme sites, time zones, fuzzed input never crashing, inputs untouched."""
import json
import math
import os
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from planner.cli import main
from planner.errors import UserError
from planner.obslog import parse_log_text
from planner.park import parse_want
from planner.site import bundled_sites_dir, site_from_dict
from planner.windows import parse_windows


def _site_file(tmp_path, name, lat, lon, tz, mount="transit", el_min=10.0):
    raw = tomllib.loads((bundled_sites_dir() / "hollowmere.toml").read_text())
    raw["site"].update(name=name, latitude_deg=lat, longitude_deg=lon, timezone=tz)
    raw["dish"].update(mount=mount, elevation_min_deg=el_min, horizon=[])
    raw.pop("pointing", None)
    site_from_dict(raw, name)  # must be valid
    lines = []
    for table, values in raw.items():
        lines.append(f"[{table}]")
        for k, v in values.items():
            lines.append(f"{k} = {json.dumps(v)}")
    path = tmp_path / f"{name}.toml"
    path.write_text("\n".join(lines) + "\n")
    return str(path)


def _no_nan(obj):
    if isinstance(obj, float):
        assert math.isfinite(obj), obj
    elif isinstance(obj, dict):
        for v in obj.values():
            _no_nan(v)
    elif isinstance(obj, list):
        for v in obj:
            _no_nan(v)


@pytest.mark.parametrize("lat,lon,tz", [(89.0, 10.0, "Arctic/Longyearbyen"), (-89.0, 0.0, "Antarctica/Troll"),
                                        (0.0, -78.5, "America/Guayaquil"), (78.0, 15.6, "Arctic/Longyearbyen"),
                                        (-35.0, 179.9, "Pacific/Auckland"), (-14.3, -179.9, "Pacific/Pago_Pago")])
def test_extreme_sites_park_and_month(tmp_path, capsys, lat, lon, tz):
    site = _site_file(tmp_path, "edge", lat, lon, tz)
    code = main(["park", "--site", site, "--start", "2027-12-30", "--days", "4", "--format", "json"])
    out, err = capsys.readouterr()
    assert code == 0, err
    doc = json.loads(out)
    _no_nan(doc)
    assert doc["declinations"]
    code = main(["month", "--site", site, "--start", "2027-12-30", "--days", "4", "--format", "json"])
    out, err = capsys.readouterr()
    if code == 0:
        _no_nan(json.loads(out))
    else:  # only acceptable failure: a clear "nothing to plan" line
        assert "nothing to plan" in err and err.count("\n") == 1


def test_plane_never_in_reach_is_explained(tmp_path, capsys):
    # At the north pole with a 70 deg elevation limit only dec > 70 is reachable, and the
    # plane never gets above |dec| 62.9 + 3: every declination says so, the month refuses.
    site = _site_file(tmp_path, "pole", 89.9, 0.0, "UTC", el_min=70.0)
    assert main(["park", "--site", site, "--start", "2027-03-01", "--days", "2"]) == 0
    out = capsys.readouterr().out
    assert "never comes within" in out
    assert main(["month", "--site", site, "--start", "2027-03-01", "--days", "2"]) == 2
    assert "nothing to plan because no passage is usable" in capsys.readouterr().err


@pytest.mark.parametrize("site_name,start", [("hollowmere", "2027-03-26"), ("hollowmere", "2027-10-29"),
                                             ("saltbush-ridge", "2027-04-02"), ("saltbush-ridge", "2027-10-01"),
                                             ("hollowmere", "2026-12-30")])
def test_local_times_agree_across_dst_and_year_end(tmp_path, capsys, site_name, start):
    """Table, JSON and .ics give the same local times across clock changes and new year."""
    from icalendar import Calendar
    from datetime import datetime
    plan, ics = tmp_path / "p.json", tmp_path / "p.ics"
    argv = ["month", "--site", site_name, "--start", start, "--days", "5", "--output", str(plan),
            "--ics", str(ics)]
    if site_name == "saltbush-ridge":
        argv += ["--start-dec", "-40"]
    assert main(argv) == 0
    table = capsys.readouterr().out
    doc = json.loads(plan.read_text())
    events = {}
    for ev in Calendar.from_ical(ics.read_bytes()).walk("VEVENT"):
        events[ev.decoded("dtstart").astimezone(ev.decoded("dtstart").tzinfo)] = ev
    # Every output rounds a recording outward to the minute (planfile.shown_span): the start
    # is floored.
    starts = [datetime.fromisoformat(r["start_local"]).replace(second=0, microsecond=0)
              for d in doc["days"] for r in d["recordings"]]
    assert starts
    offsets = {s.utcoffset() for s in starts}
    for s in starts:
        assert s in events  # same instant
        assert events[s].decoded("dtstart").strftime("%H:%M") == s.strftime("%H:%M")  # same wall time
        assert s.strftime("%H:%M") in table
    if start in ("2027-03-26", "2027-10-29", "2027-04-02", "2027-10-01"):
        assert len(offsets) == 2  # the clock change is inside the period


# ---------------------------------------------------------------- fuzzing

@settings(max_examples=200, deadline=None)
@given(st.text(max_size=40))
def test_want_never_crashes(text):
    try:
        parse_want(text)
    except UserError as exc:
        assert "\n" not in str(exc)


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=60))
def test_windows_never_crash(text):
    try:
        parse_windows(text)
    except UserError as exc:
        assert "\n" not in str(exc)


@settings(max_examples=150, deadline=None)
@given(st.lists(st.text(alphabet="0123456789-:TZ.,abcdefgoodbar ", max_size=30), min_size=1, max_size=6))
def test_log_rows_never_crash(rows):
    text = "start_utc,l_from_deg,l_to_deg,minutes,quality\n" + "\n".join(rows)
    try:
        parse_log_text(text, "log.csv")
    except UserError as exc:
        assert str(exc).startswith("log.csv:") and "\n" not in str(exc)


_values = st.one_of(st.none(), st.booleans(), st.integers(-10**6, 10**6), st.floats(allow_nan=True),
                    st.text(max_size=10), st.lists(st.integers(), max_size=3))


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(table=st.sampled_from(["site", "dish", "receiver", "rules", "pointing"]),
       key=st.sampled_from(["name", "latitude_deg", "longitude_deg", "height_m", "timezone", "diameter_m",
                            "mount", "horizon", "bandwidth_mhz", "channels", "tsys_k", "b_max_deg",
                            "alt_deg", "dec_deg", "bogus"]),
       value=_values)
def test_site_fields_never_crash(table, key, value):
    raw = tomllib.loads((bundled_sites_dir() / "hollowmere.toml").read_text())
    raw.setdefault(table, {})[key] = value
    try:
        site_from_dict(raw, "fuzz.toml")
    except UserError as exc:
        assert str(exc).startswith("fuzz.toml: ") and "\n" not in str(exc)


def test_inputs_are_never_modified(tmp_path, capsys):
    import shutil
    files = {}
    for src in ("examples/observation-log.csv", "examples/windows.txt", "sites/hollowmere.toml"):
        dst = tmp_path / src.split("/")[-1]
        shutil.copy(src, dst)
        files[dst] = (dst.read_bytes(), dst.stat().st_mtime_ns)
    assert main(["month", "--site", str(tmp_path / "hollowmere.toml"), "--start", "2027-03-01",
                 "--days", "3", "--log", str(tmp_path / "observation-log.csv"),
                 "--windows", str(tmp_path / "windows.txt"), "--output", str(tmp_path / "plan.json")]) == 0
    capsys.readouterr()
    for path, before in files.items():
        assert (path.read_bytes(), path.stat().st_mtime_ns) == before


@pytest.mark.parametrize("argv,message", [
    (["park", "--step", "0.001", "--start", "2027-03-01", "--days", "3"],
     "--step: 0.001° gives about 153,006 declinations, more than the 3,000"),
    (["month", "--step", "0.01", "--start", "2027-03-01", "--days", "5"], "--step: 0.01°"),
    (["lsr", "--dec", "20", "--step", "0.001", "--start", "2027-03-01", "--days", "2"],
     "--step/--days: 2,880,001 samples, more than the 1,000,000"),
])
def test_work_is_estimated_and_refused_before_computing(capsys, argv, message):
    """Runaway steps are refused at once with one line (they used to grow past 15 GB)."""
    import time
    started = time.perf_counter()
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert message in err and err.count("\n") == 1
    assert time.perf_counter() - started < 5.0  # refused before any sweep starts


def test_sweep_work_limits_name_the_options(club):
    from planner.coverage import MAX_OCCURRENCES, check_work
    check_work(70, 365, 360)  # the default scale passes
    with pytest.raises(UserError, match=r"--step/--days: 3000 declinations over 730 days"):
        check_work(3000, 730, 360)
    with pytest.raises(UserError, match="passage-bins"):
        check_work(1000, 92, 360, per_occurrence=True)
    assert MAX_OCCURRENCES >= 70 * 4 * 732  # a two-year park at the default step fits


# ------------------------------------------------------------------ hostile input: one line

PERIOD_ARGS = ["--start", "2027-03-01", "--days", "2"]


def _one_line_error(capsys, argv) -> str:
    import time
    started = time.perf_counter()
    code = main(argv)
    out, err = capsys.readouterr()
    assert code == 2, (argv, err)
    assert err.count("\n") == 1 and err.startswith("hiplan: error: ") and "Traceback" not in err
    assert out == ""
    # Refused at once, before any sweep (it used to hang on /dev/zero); generous for a busy machine.
    assert time.perf_counter() - started < 20.0
    return err


@pytest.mark.parametrize("argv,message", [
    (["crossings", "--start", "0001-01-01", "--days", "1"], "--start: 0001-01-01 is outside the dates"),
    (["crossings", "--start", "9999-12-31", "--days", "1"], "--start: 9999-12-31 is outside the dates"),
    (["park", "--start", "9999-12-31"], "--start: 9999-12-31 is outside"),
    (["month", "--start", "0001-01-01"], "--start: 0001-01-01 is outside"),
    (["month", "--month", "9999-12"], "--month: 9999-12-01 is outside"),
    (["tune", "--dec", "20", "--start", "9999-12-31"], "--start: 9999-12-31 is outside"),
    (["lsr", "--dec", "20", "--start", "0001-01-01"], "--start: 0001-01-01 is outside"),
    (["survey", "--site", "saltbush-ridge", "--grid", "l=0,b=0", "--start", "9999-12-31"],
     "--start: 9999-12-31 is outside"),
    (["lsr", "--dec", "20", "--time", "9999-12-31T23:59:59Z"],
     "--time: '9999-12-31T23:59:59Z' is outside the dates hiplan supports (1901-01-01 to 2099-12-31"),
    (["crossings", "--start", "2099-12-30", "--days", "7"],
     "--start/--days: the period would end on 2100-01-05, after the dates hiplan supports"),
    (["lsr", "--dec", "20", "--time", "2027-06-30T23:59:60Z"], "has second 60"),
])
def test_dates_outside_the_supported_range(capsys, argv, message):
    assert message in _one_line_error(capsys, argv)


@pytest.mark.parametrize("argv,message", [
    (["crossings", "--site", "/dev/zero", *PERIOD_ARGS], "/dev/zero: cannot read site file: it is a device"),
    (["park", "--log", "/dev/zero", *PERIOD_ARGS], "/dev/zero:1: cannot read observation log: it is a device"),
    (["month", "--windows", "/dev/zero", *PERIOD_ARGS], "/dev/zero: cannot read windows file: it is a device"),
    (["calendar", "/dev/zero", "-o", "{tmp}/x.ics"], "/dev/zero: cannot read plan file: it is a device"),
    (["brief", "/dev/zero", "-o", "{tmp}/x.html"], "/dev/zero: cannot read plan file"),
    (["plan-log", "/dev/zero"], "/dev/zero: cannot read plan file"),
    (["tune", "--plan", "/dev/zero"], "/dev/zero: cannot read plan file"),
    (["survey", "--site", "saltbush-ridge", "--targets", "{tmp}/pipe.csv", *PERIOD_ARGS],
     "pipe.csv: cannot read target file: it is a pipe (FIFO)"),
    (["crossings", "--site", "{tmp}/pipe.toml", *PERIOD_ARGS], "cannot read site file: it is a pipe"),
    (["calendar", "{tmp}/deep.json", "-o", "{tmp}/x.ics"], "deep.json: not a plan file (its JSON is nested too deeply)"),
    (["brief", "{tmp}/deep.json", "-o", "{tmp}/x.html"], "deep.json: not a plan file (its JSON is nested"),
    (["plan-log", "{tmp}/deep.json"], "deep.json: not a plan file (its JSON is nested"),
    (["tune", "--plan", "{tmp}/deep.json"], "deep.json: not a plan file (its JSON is nested"),
])
def test_devices_pipes_and_deep_files_are_one_line_errors(tmp_path, capsys, argv, message):
    """Devices and FIFOs are refused unread (reading /dev/zero used to hang for ever), and a
    plan nested 100,000 deep is refused instead of overflowing the recursion limit."""
    os.mkfifo(tmp_path / "pipe.csv")
    os.mkfifo(tmp_path / "pipe.toml")
    (tmp_path / "deep.json").write_text("[" * 100_000 + "]" * 100_000)
    argv = [a.replace("{tmp}", str(tmp_path)) for a in argv]
    assert message.replace("{tmp}", str(tmp_path)) in _one_line_error(capsys, argv)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["deep.json", "pipe.csv", "pipe.toml"]


def test_write_failures_are_one_line(tmp_path, capsys, request):
    if Path("/proc").is_dir():  # a folder nobody can create files in, even root
        err = _one_line_error(capsys, ["crossings", *PERIOD_ARGS, "-o", "/proc/x.json"])
        assert "/proc/x.json: cannot write the file" in err
    request.getfixturevalue("full_disk")
    out = tmp_path / "pass.csv"
    err = _one_line_error(capsys, ["crossings", *PERIOD_ARGS, "--format", "csv", "-o", str(out)])
    assert f"{out}: cannot write the file: the disk is full" in err
    assert list(tmp_path.iterdir()) == []  # no partial file, no temporary file


def test_no_raw_warnings_for_dates_outside_the_tables():
    """Before the Earth-orientation table (1973) and past it (2027), and at the very end of the
    supported dates at a far-west site: nothing but hiplan's own lines reaches stderr."""
    import subprocess
    import sys
    import tempfile
    with tempfile.TemporaryDirectory() as folder:
        west = _site_file(Path(folder), "west", 0.0, -178.0, "Etc/GMT+12")
        for argv in (["crossings", "--start", "2090-01-01", "--days", "1"],
                     ["crossings", "--start", "1960-01-01", "--days", "1"],
                     ["lsr", "--site", west, "--dec", "20", "--time", "2099-12-31T23:59:59Z"],
                     ["-v", "crossings", "--site", west, "--dec", "20", "--start", "2099-12-29",
                      "--days", "3"]):
            proc = subprocess.run([sys.executable, "-m", "planner.cli", *argv], capture_output=True,
                                  text=True, timeout=300, env={**os.environ, "PYTHONWARNINGS": "default"})
            assert proc.returncode == 0, proc.stderr
            assert "Warning" not in proc.stderr, proc.stderr
            assert all(line.startswith("hiplan: note: ") for line in proc.stderr.splitlines())
