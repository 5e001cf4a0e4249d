"""Reliability: extreme sites, time zones, fuzzed input never crashing, inputs untouched."""
import json
import math
import tomllib

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
    starts = [datetime.fromisoformat(r["start_local"]) for d in doc["days"] for r in d["recordings"]]
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
