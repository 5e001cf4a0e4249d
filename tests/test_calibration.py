"""Standard HI regions, calibration passes of a parked beam, the gain helper, and how plans,
calendars, briefs and survey blocks carry them."""
import json

import numpy as np
import pytest

from planner.calibration import STANDARD_REGIONS, gain_from_peak
from planner.calpasses import calibrator_passes, expected_pass_peaks_k
from planner.calsurvey import calibration_unit
from planner.cli import main
from planner.pointing import on_meridian_at_dec
from planner.site import load_site
from planner.slew import slew_model
from planner.timebase import astropy_offline, parse_instant


def test_region_positions_against_astropy():
    # ICRS positions as astropy gives them (REFERENCES: S7 31.55/+60.55, S8 86.84/-1.67,
    # S9 268.02/-34.42): our galactic frame within 0.01 deg.
    astropy_offline()
    import astropy.units as u
    from astropy.coordinates import SkyCoord
    for r in STANDARD_REGIONS:
        c = SkyCoord(r.l_deg * u.deg, r.b_deg * u.deg, frame="galactic").icrs
        ra, dec = r.icrs_deg
        assert c.separation(SkyCoord(ra * u.deg, dec * u.deg)).deg < 0.01


def test_pass_is_the_closest_approach_astropy_says():
    """A parked beam at the declination of S7: astropy's AltAz->ICRS beam direction, sampled
    every 20 s around our closest instant, is nearest S7 at that instant (within 40 s) and at
    our separation (within 0.02 deg: the fast beam path's 0.01 deg plus sampling)."""
    astropy_offline()
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, SkyCoord
    from astropy.time import Time
    site = load_site("hollowmere")
    p = on_meridian_at_dec(site, 61.0)
    start = parse_instant("2027-03-01T00:00:00Z", "t")
    passes = calibrator_passes(site, [p], start, start + 2.0)
    assert list(passes.names(np.arange(passes.row.size))) == ["S7", "S7"]
    t0 = float(passes.closest_mjd[0])
    times = Time(t0 + np.arange(-30, 31) * 20.0 / 86400.0, format="mjd", scale="utc")
    loc = EarthLocation.from_geodetic(site.longitude_deg * u.deg, site.latitude_deg * u.deg,
                                      site.height_m * u.m)
    beam = SkyCoord(az=np.full(times.size, p.az_deg) * u.deg, alt=np.full(times.size, p.alt_deg) * u.deg,
                    frame=AltAz(obstime=times, location=loc)).icrs
    ra, dec = STANDARD_REGIONS[0].icrs_deg
    sep = beam.separation(SkyCoord(ra * u.deg, dec * u.deg)).deg
    k = int(np.argmin(sep))
    assert abs(times[k].mjd - t0) * 86400.0 <= 40.0
    assert sep[k] == pytest.approx(float(passes.sep_deg[0]), abs=0.02)
    assert float(passes.sep_deg[0]) <= site.dish.beamwidth_deg / 2
    # Expected peak in a 4.9 deg beam: the published 100 K scaled by the model, within a third.
    peak = expected_pass_peaks_k(site, [p], passes)[0]
    assert 100.0 * 2 / 3 <= peak <= 100.0


def test_gain_helper_hand_worked():
    g = gain_from_peak("S9", 0.6, peak_counts=1000.0, offline_counts=2000.0)
    # At the published beam the expected peak is the published 85 K: scale 0.085 K/count,
    # T_sys = 0.085 * 2000 = 170 K.
    assert g.expected_peak_k == pytest.approx(85.0)
    assert g.kelvin_per_count == pytest.approx(0.085) and g.tsys_k == pytest.approx(170.0)
    assert g.caveat is None
    # 3 dB above the line-free level: 10^0.3 - 1 = 0.995, T_sys = 85 / 0.995 = 85.4 K.
    assert gain_from_peak("s9", 0.6, peak_db=3.0).tsys_k == pytest.approx(85.0 / (10 ** 0.3 - 1))
    assert "beam" in gain_from_peak("S9", 4.9, peak_db=3.0).caveat
    with pytest.raises(Exception, match="S10"):
        gain_from_peak("S10", 4.9, peak_db=1.0)
    with pytest.raises(Exception, match="give one or the other"):
        gain_from_peak("S9", 0.6, peak_counts=1000.0, offline_counts=2000.0, peak_db=1.0)


def test_crossings_park_month_calendar_and_brief_carry_the_passes(tmp_path, capsys):
    out = tmp_path / "c.json"
    assert main(["crossings", "--site", "hollowmere", "--dec", "61", "--start", "2027-03-01",
                 "--days", "3", "--format", "json", "-o", str(out)]) == 0
    passes = json.loads(out.read_text())["calibrator_passes"]
    assert [p["region"] for p in passes] == ["S7"] * 3
    assert all(p["sep_deg"] <= p["half_beamwidth_deg"] for p in passes)
    park = tmp_path / "p.json"
    assert main(["park", "--site", "hollowmere", "--start", "2027-03-01", "--days", "3",
                 "--format", "json", "-o", str(park)]) == 0
    rows = json.loads(park.read_text())["declinations"]
    seeing = {r["calibrators"] for r in rows if r["calibrators"]}
    assert seeing == {"S7", "S8"}  # S9 (Dec -34.4) is below Hollowmere's limit
    # A 7-day plan parked near S7's declination (the site's own pointing is moved there).
    plan = tmp_path / "plan.json"
    assert main(["month", "--site", "hollowmere", "--start", "2027-03-01", "--days", "9",
                 "--want", "120-140", "--start-dec", "60.2", "--max-moves", "0", "-o", str(plan),
                 "--ics", str(tmp_path / "plan.ics")]) == 0
    doc = json.loads(plan.read_text())
    cals = [c for day in doc["days"] for c in day["calibrations"]]
    assert cals and all(c["region"] == "S7" for c in cals)
    tasks = [c for c in cals if c["task"]]
    # The first pass, then one a week.
    assert len(tasks) == 2 and tasks[0] is cals[0]
    assert "it should peak near" in tasks[0]["action"]
    ics = (tmp_path / "plan.ics").read_text()
    assert ics.count("SUMMARY:Calibrate: record the S7 pass") == 2
    assert doc["expected"]["groups"] and len(doc["expected"]["bins"]) == 20
    md = tmp_path / "brief.md"
    assert main(["brief", str(plan), "-o", str(md)]) == 0
    text = md.read_text()
    assert "CALIBRATE: record the S7 pass at" in text
    assert "## What the receiver should show" in text and "brief-spectra.png" in text
    assert (tmp_path / "brief-spectra.png").read_bytes()[:4] == b"\x89PNG"
    capsys.readouterr()


def test_survey_calibration_unit_before_and_after_a_session():
    site = load_site("saltbush-ridge")
    model = slew_model(site)
    t = parse_instant("2027-03-01T13:30:00Z", "t")  # midnight in Adelaide
    before = calibration_unit(site, model, t, 180.0, 45.0, sun_min_sep_deg=25.0,
                              sun_hazard_deg=10.0, before=True, tz=site.tz)
    after = calibration_unit(site, model, t, 180.0, 45.0, sun_min_sep_deg=25.0,
                             sun_hazard_deg=10.0, before=False, tz=site.tz)
    for unit in (before, after):
        kinds = [r["kind"] for r in unit.records]
        assert "calibration" in kinds and kinds[0] == "slew"
        cal = unit.records[kinds.index("calibration")]
        assert cal["minutes"] == pytest.approx(5.0, abs=0.02)
        assert cal["alt_start_deg"] >= site.dish.elevation_min_deg
        assert cal["sun_sep_min_deg"] >= 25.0
    # Before the session the unit ends back at the first position exactly at its start.
    assert before.end_mjd == pytest.approx(t, abs=1e-6)
    assert (before.end_drive_az_deg, before.end_alt_deg) == (180.0, 45.0)
    assert after.start_mjd == pytest.approx(t, abs=1e-9)
    # Best placed: no other visible region is a shorter slew away.
    assert before.region.name in ("S8", "S9")
