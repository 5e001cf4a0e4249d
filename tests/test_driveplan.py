"""Plans as drive steps: tracks against astropy, departures, drift plans, park, Sun-safe moves."""
import dataclasses
import json

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import AltAz, EarthLocation, Galactic, SkyCoord, get_sun
from astropy.time import Time

from drive_plans import MORNING, NIGHT, block, drift_doc, mjd, survey_doc
from planner.cli import main
from planner.driveplan import (TRACK_STEP_BEAMS, check_park, move_clear_deg, park_position,
                               plan_steps, rest_clear_deg, rest_danger_mjd, safe_route,
                               sun_altaz_deg)
from planner.errors import UserError
from planner.sunsafety import sun_safe_stow


def _location(site):
    return EarthLocation.from_geodetic(site.longitude_deg * u.deg, site.latitude_deg * u.deg,
                                       site.height_m * u.m)


def _altaz(site, mjd_utc):
    # No pressure: geometric positions, as hiplan uses throughout.
    return AltAz(obstime=Time(mjd_utc, format="mjd", scale="utc"), location=_location(site))


@pytest.fixture(scope="module")
def demo_plan(tmp_path_factory, school):
    """The demo survey (one night of it) from the command line."""
    path = tmp_path_factory.mktemp("plan") / "survey.json"
    assert main(["survey", "--site", "saltbush-ridge", "--grid", "l=240..340/10,b=-4..4/4",
                 "--start", "2027-03-01", "--days", "1", "--minutes", "15", "--night-only",
                 "--format", "json", "-o", str(path)]) == 0
    return json.loads(path.read_text())


def test_survey_steps_follow_the_plan(school, demo_plan):
    steps = plan_steps(demo_plan, school, "survey.json")
    blocks = demo_plan["blocks"]
    assert [s.number for s in steps] == [i for i, b in enumerate(blocks) if b["kind"] != "slew"]
    for s in steps:  # one per block
        b = blocks[s.number]
        assert s.kind == b["kind"] == "target" and s.name == b["name"]
        # Departure: when the plan's slew to it leaves.
        prev = blocks[s.number - 1]
        if prev["kind"] == "slew":
            assert s.depart_mjd == mjd(prev["start_utc"])
        # Start and end: the plan's drive positions. The plan rounds to 0.01 deg and
        # interpolates the end between one-minute samples (a few thousandths of a degree).
        assert (s.az_deg, s.el_deg) == pytest.approx(
            (b["drive_az_start_deg"], b["alt_start_deg"]), abs=0.02)
        assert s.track.at(s.end_mjd) == pytest.approx(
            (b["drive_az_end_deg"], b["alt_end_deg"]), abs=0.02)
        assert s.freq_mhz == b["tuning"]["centre_mhz"]


def test_track_against_astropy(school, demo_plan):
    """The commanded track against astropy's full ICRS -> AltAz transform.

    Tolerance 0.02 deg: the fast engine agrees with astropy within 0.01 deg (skytrack), and
    linear interpolation between 10-second samples adds < 1e-5 deg (the sky's path curves
    by far less than that in 10 s).
    """
    step = plan_steps(demo_plan, school, "survey.json")[3]
    times = np.linspace(step.start_mjd, step.end_mjd, 7)
    sky = SkyCoord(step.ra_deg * u.deg, step.dec_deg * u.deg, frame="icrs")
    ref = sky.transform_to(_altaz(school, times))
    for t, alt, az in zip(times, ref.alt.deg, ref.az.deg):
        drive_az, el = step.track.at(t)
        assert el == pytest.approx(alt, abs=0.02)
        assert ((drive_az - az + 180) % 360 - 180) == pytest.approx(0, abs=0.02)


def test_track_commands_a_tenth_of_a_beam_apart(school, demo_plan):
    step = plan_steps(demo_plan, school, "survey.json")[0]
    beam = school.dish.beamwidth_deg * TRACK_STEP_BEAMS  # 0.75 deg for Saltbush's 7.5 deg
    times = np.concatenate([[step.start_mjd], step.track.command_times(beam)])
    pos = np.array([step.track.at(t) for t in times])
    # Path length is never shorter than the chord: each move is at most a tenth of a beam
    # (on the sky: the azimuth step shrinks with cos(elevation)).
    d_sky = np.hypot(np.diff(pos[:, 0]) * np.cos(np.radians(pos[1:, 1])), np.diff(pos[:, 1]))
    assert d_sky.max() <= beam + 1e-3 and d_sky.min() > 0.9 * beam  # 1e-3: flat-sky chord


def test_wrong_site_or_edited_plan_is_refused(club, school, demo_plan):
    with pytest.raises(UserError, match="the plan is for 'Saltbush Ridge"):
        plan_steps(demo_plan, club, "survey.json")
    edited = json.loads(json.dumps(demo_plan))
    first = next(b for b in edited["blocks"] if b["kind"] == "target")
    first["alt_start_deg"] += 1.0
    with pytest.raises(UserError, match=r"blocks\[\d+\] \(G\d+[+-]\d+\): this site puts it 1.00°"):
        plan_steps(edited, school, "survey.json")
    beyond = survey_doc(school, [block(school, "WRAP", 20.0, 30.0, mjd(NIGHT),
                                       drive_az_deg=380.0)])
    with pytest.raises(UserError, match="outside this dish's range -170..350"):
        plan_steps(beyond, school, "plan.json")


def test_drift_plan_moves_and_recordings(club):
    """A drift plan's re-park and recording; the beam's l, b at mid-recording against astropy
    (0.02 deg: the fast engine's 0.01 deg and rounding)."""
    dish = {"dec_deg": 20.0, "alt_deg": 56.58, "az_deg": 180.0, "facing": "south"}
    doc = drift_doc(club, dish, "2027-03-01T10:00:00Z",
                    ("2027-03-01T20:00:00Z", "2027-03-01T20:40:00Z"), (53.9, 57.2))
    move, rec = plan_steps(doc, club, "plan.json")
    assert (move.kind, move.az_deg, move.el_deg, move.start_mjd) == (
        "move", 180.0, 56.58, mjd("2027-03-01T10:00:00Z"))
    assert (rec.kind, rec.track, rec.l_from_deg, rec.l_to_deg, rec.freq_mhz) == (
        "drift", None, 53.9, 57.2, 1420.586)
    mid = mjd("2027-03-01T20:20:00Z")
    beam = SkyCoord(alt=56.58 * u.deg, az=180.0 * u.deg, frame=_altaz(club, mid))
    gal = beam.transform_to(Galactic())
    assert rec.l_deg == pytest.approx(gal.l.deg, abs=0.02)
    assert rec.b_deg == pytest.approx(gal.b.deg, abs=0.02)


def test_park_position_default_and_configured(school):
    stow = sun_safe_stow(school)
    assert park_position(school) == (180.0, pytest.approx(stow.alt_deg))
    site = dataclasses.replace(school, dish=dataclasses.replace(
        school.dish, park_alt_deg=70.0, park_az_deg=-100.0))
    assert park_position(site) == (-100.0, 70.0)
    check_park(school, park_position(school), mjd(NIGHT), mjd(NIGHT) + 3)  # never near the Sun


def test_rest_danger_against_astropy(school):
    """The first minute the Sun, by astropy, is within the rest clearance of a fixed position.

    The position: where the Sun will be an hour after MORNING; hiplan's first sample inside
    the clearance must be inside it by astropy too (within the fast Sun's 0.01 deg), and the
    sample before it outside."""
    t = mjd(MORNING)
    alt, az = (float(v[0]) for v in sun_altaz_deg(school, t + 1 / 24))
    danger = rest_danger_mjd(school, az, alt, t, t + 2 / 24)
    assert t < danger < t + 1 / 24
    sun = get_sun(Time([danger - 1 / 1440, danger], format="mjd", scale="utc"))
    here = SkyCoord(alt=alt * u.deg, az=az * u.deg, frame=_altaz(school, danger))
    sep = sun.transform_to(_altaz(school, danger)).separation(here).deg
    clear = rest_clear_deg(school)
    assert sep[1] < clear + 0.01 and sep[0] > clear - 0.3  # 0.3: the Sun moves 0.25 deg/min
    assert rest_danger_mjd(school, az, alt, t + 3 / 24, t + 5 / 24) is None  # it has gone by


def test_safe_route_direct_detour_or_none(school):
    t = mjd(MORNING)
    alt, az = (float(v[0]) for v in sun_altaz_deg(school, t))
    park = park_position(school)
    # At night anything goes straight.
    assert safe_route(school, (0, 20), (300, 60), park, mjd(NIGHT), 300) == [(300.0, 60.0)]
    # Straight across the Sun, with the Sun between the dish and the stow too: no way.
    assert safe_route(school, (az - 30, alt), (az + 30, alt), park, t, 60) is None
    # Diagonally across it: elevation first.
    route = safe_route(school, (az - 30, alt + 15), (az + 30, alt - 15), park, t, 60)
    assert route == [(az - 30, alt - 15), (az + 30, alt - 15)]
    assert move_clear_deg(school, 60) > school.rules.sun_hazard_deg + 0.25  # drift included
