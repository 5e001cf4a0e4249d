"""``survey --calibrate``: standard-region blocks at each session's ends, checked with astropy's
own AltAz frame and Sun (not our fast paths), then through the calendar, the brief and a drive
rehearsal; a session where no calibration fits says so."""
import json
import warnings

import numpy as np
import pytest

from planner.calibration import STANDARD_REGIONS
from planner.calsurvey import DEFAULT_MINUTES, MAX_DROPPED_TARGETS
from planner.cli import main
from planner.cli.survey import CALIBRATE_DEFAULT_MIN
from planner.site import load_site
from planner.sunsafety import slew_sun_sep_deg
from planner.timebase import astropy_offline, parse_instant

GRID = "l=240..340/10,b=-4..4/4"


@pytest.fixture(scope="module")
def plan(tmp_path_factory):
    folder = tmp_path_factory.mktemp("cal")
    path = folder / "survey.json"
    assert main(["survey", "--site", "saltbush-ridge", "--grid", GRID, "--start", "2027-03-01",
                 "--days", "3", "--minutes", "15", "--night-only", "--calibrate",
                 "--format", "json", "-o", str(path)]) == 0
    plain = folder / "plain.json"
    assert main(["survey", "--site", "saltbush-ridge", "--grid", GRID, "--start", "2027-03-01",
                 "--days", "3", "--minutes", "15", "--night-only", "--format", "json",
                 "-o", str(plain)]) == 0
    return {"path": path, "doc": json.loads(path.read_text()), "folder": folder,
            "plain": json.loads(plain.read_text())}


def test_integrations_given_up_are_named(plan):
    """A unit at a session's very edge takes the time of integrations (at most two per end);
    each one the plan without --calibrate had is either still there or named with why."""
    from planner.survey import REASON_CALIBRATION
    names = lambda doc: {b["name"] for b in doc["blocks"] if b["kind"] == "target"}  # noqa: E731
    given_up = names(plan["plain"]) - names(plan["doc"])
    said = {u["name"] for u in plan["doc"]["unscheduled"] if u["reason"].startswith(REASON_CALIBRATION)}
    assert given_up == said
    units = sum(1 for b in plan["doc"]["blocks"] if b["kind"] == "calibration")
    assert 0 < len(given_up) <= MAX_DROPPED_TARGETS * units  # the demo night is full to its edges


def _mjd(text):
    return parse_instant(text, "test")


def _astropy_frame(site, mjd):
    astropy_offline()
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation
    from astropy.time import Time
    loc = EarthLocation.from_geodetic(site.longitude_deg * u.deg, site.latitude_deg * u.deg,
                                      site.height_m * u.m)
    return AltAz(obstime=Time(mjd, format="mjd", scale="utc"), location=loc)


def test_default_minutes_agree():
    assert CALIBRATE_DEFAULT_MIN == DEFAULT_MINUTES


def test_calibration_blocks_on_their_regions_and_clear_of_the_sun(plan):
    import astropy.units as u
    from astropy.coordinates import SkyCoord, get_sun
    site = load_site("saltbush-ridge")
    doc = plan["doc"]
    blocks = doc["blocks"]
    cals = [b for b in blocks if b["kind"] == "calibration"]
    # Every session end: a start and an end unit in each of the plan's sessions
    assert len(cals) == doc["summary"]["calibrations"] >= 2 and not doc["summary"]["calibration_missing"]
    regions = {r.name: r for r in STANDARD_REGIONS}
    hazard, data_rule = doc["settings"]["sun_hazard_deg"], doc["settings"]["sun_min_sep_deg"]
    for b in cals:
        region = regions[b["name"]]
        t = np.linspace(_mjd(b["start_utc"]), _mjd(b["end_utc"]), 6)
        frame = _astropy_frame(site, t)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sky = SkyCoord(l=region.l_deg * u.deg, b=region.b_deg * u.deg, frame="galactic")
            altaz = sky.transform_to(frame)
            sun = get_sun(frame.obstime).transform_to(frame)
        # The block points where astropy puts the region (start and end), well inside half a
        # beam (2.5 deg for this 2 m dish); 0.05 deg: our rounding (0.01) plus the fast path.
        assert b["alt_start_deg"] == pytest.approx(altaz.alt.deg[0], abs=0.05)
        assert b["alt_end_deg"] == pytest.approx(altaz.alt.deg[-1], abs=0.05)
        d_az = (b["az_start_deg"] - altaz.az.deg[0] + 180) % 360 - 180
        assert abs(d_az * np.cos(np.radians(altaz.alt.deg[0]))) < 0.05
        assert np.all(altaz.alt.deg >= site.dish.elevation_min_deg)
        assert altaz.separation(sun).deg.min() >= max(hazard, data_rule)
        assert np.all(sun.alt.deg < doc["settings"]["night_sun_alt_deg"])  # --night-only
        assert b["expected_peak_k"] > 0 and f"{b['expected_peak_k']:.0f} K" in b["action"]
        assert b["tuning"]["centre_mhz"] > 1419.0
    # Every slew of the plan (the units' own included) stays clear of astropy's Sun, taken at
    # the slew's start and end (the path sampled as the mount moves, both axes at their rates).
    slews = [b for b in blocks if b["kind"] == "slew"]
    t0 = np.array([_mjd(b["start_utc"]) for b in slews])
    t1 = np.array([_mjd(b["end_utc"]) for b in slews])
    for when in (t0, t1):
        frame = _astropy_frame(site, when)
        sun = get_sun(frame.obstime).transform_to(frame)
        sep = slew_sun_sep_deg([b["drive_az_start_deg"] for b in slews],
                               [b["alt_start_deg"] for b in slews],
                               [b["drive_az_end_deg"] for b in slews],
                               [b["alt_end_deg"] for b in slews], site.dish.slew_az_deg_s,
                               site.dish.slew_el_deg_s, sun.alt.deg, sun.az.deg)
        assert sep.min() >= hazard
    # In time order, no overlaps; a slew ends where the next block starts.
    starts = np.array([_mjd(b["start_utc"]) for b in blocks])
    ends = np.array([_mjd(b["end_utc"]) for b in blocks])
    assert np.all(starts[1:] >= ends[:-1] - 0.001 / 86400)  # 1 ms: times are written to the ms
    for a, b in zip(blocks, blocks[1:]):
        if a["kind"] == "slew" and b["kind"] != "slew":
            assert a["drive_az_end_deg"] == pytest.approx(b["drive_az_start_deg"], abs=0.02)


def test_calendar_brief_and_rehearsal_carry_the_calibrations(plan, tmp_path, capsys):
    import icalendar
    doc = plan["doc"]
    cals = [b for b in doc["blocks"] if b["kind"] == "calibration"]
    ics = tmp_path / "p.ics"
    assert main(["calendar", str(plan["path"]), "-o", str(ics)]) == 0
    cal = icalendar.Calendar.from_ical(ics.read_bytes())
    events = [e for e in cal.walk("VEVENT")]
    named = [e for e in events if "standard region" in str(e.get("SUMMARY"))]
    targets = sum(1 for b in doc["blocks"] if b["kind"] == "target")
    assert len(named) == len(cals) and len(events) == targets + len(cals)
    md = tmp_path / "p.md"
    assert main(["brief", str(plan["path"]), "-o", str(md)]) == 0
    text = md.read_text()
    for b in cals:
        assert f"| calibration | {b['name']}; l {b['l_deg']:.1f}°" in text
    journal = tmp_path / "j.jsonl"
    assert main(["drive", str(plan["path"]), "--dry-run", "--clock", "simulated:2027-02-28T13:00:00Z",
                 "--journal", str(journal)]) == 0
    capsys.readouterr()
    starts = [json.loads(line) for line in journal.read_text().splitlines()
              if '"record_start"' in line]
    assert sum(1 for e in starts if e.get("kind") == "calibration") == len(cals)


def test_calibration_that_cannot_fit_is_reported(tmp_path, capsys):
    """A 60-minute calibration does not fit a 40-minute window: both ends say so, and no
    target gives up its time for nothing."""
    out = tmp_path / "s.json"
    args = ["survey", "--site", "saltbush-ridge", "--grid", "l=280..290/10,b=0", "--start",
            "2027-03-01", "--days", "1", "--minutes", "10", "--windows", "Mon 22:00-22:40",
            "--format", "json", "-o", str(out)]
    assert main(args) == 0
    plain = json.loads(out.read_text())
    assert main([*args, "--calibrate", "60", "--force"]) == 0
    err = capsys.readouterr().err
    doc = json.loads(out.read_text())
    assert doc["summary"]["calibrations"] == 0
    assert len(doc["summary"]["calibration_missing"]) == 2
    assert "no standard region could be observed before it" in err
    assert "no standard region could be observed after it" in err
    assert doc["blocks"] == plain["blocks"]
