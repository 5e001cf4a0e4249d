"""Pointed-survey scheduler: every block re-checked with astropy, timing rules, reasons, CLI."""
import csv
import io
import json
from datetime import date, datetime

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import GCRS, AltAz, EarthLocation, SkyCoord, get_body, get_sun
from astropy.coordinates.builtin_frames.lsr import V_OFFSET_LSRK
from astropy.time import Time
from rich.console import Console

from planner.cli.common import Parser
from planner.cli import survey as survey_cli
from planner.errors import UserError
from planner.obslog import format_log
from planner.report import period_summary, to_json
from planner.survey import (REASON_DONE, REASON_NEVER_UP, REASON_SUN, REASON_TIME,
                            SurveySettings, plan_survey, survey_document)
from planner.targets import galactic_target, icrs_target, parse_grid, parse_reference
from planner.timebase import local_day_span
from planner.windows import parse_windows

# Saltbush Ridge site file values, read by eye from sites/saltbush-ridge.toml.
MASK = [[0, 18], [45, 15], [120, 22], [200, 15], [300, 25]]
EL_MIN, EL_MAX, AZ_MIN, AZ_MAX = 15.0, 88.0, -170.0, 350.0
RATE_AZ, RATE_EL, SETTLE = 1.5, 1.0, 10.0
START = date(2026, 6, 10)  # southern winter, inside the bundled IERS table
GRID = "l=260..40/20,b=-4..4/4"


def _mask_deg(az_deg):
    """The site's horizon: linear between the listed points, wrapping at 360, and >= EL_MIN."""
    az_pts = [p[0] for p in MASK]
    el_pts = [p[1] for p in MASK]
    return np.maximum(np.interp(np.mod(az_deg, 360.0), az_pts, el_pts, period=360.0), EL_MIN)


def _settings(site, days=2, **kw):
    start, end = local_day_span(START, days, site.tz)
    base = dict(start_mjd=start, end_mjd=end, sun_min_sep_deg=site.rules.sun_min_sep_deg,
                moon_min_sep_deg=site.rules.moon_min_sep_deg)
    base.update(kw)
    return SurveySettings(**base)


def _document(plan):
    s = plan.settings
    return survey_document(plan, period_summary(s.start_mjd, s.end_mjd, plan.site.tz))


@pytest.fixture(scope="module")
def sun_position(school):
    """Where the Sun is halfway through the two-day period (astropy, geocentric).

    The GCRS direction, not ``.icrs``: that would be the Sun seen from the barycentre.
    """
    start, end = local_day_span(START, 2, school.tz)
    sun = get_sun(Time((start + end) / 2, format="mjd"))
    return float(sun.ra.deg), float(sun.dec.deg)


@pytest.fixture(scope="module")
def plan(school, sun_position):
    targets = parse_grid(GRID, 10)
    targets.append(icrs_target("NorthCap", 30.0, 60.0, 10))  # dec +60 from latitude -35
    targets.append(icrs_target("SunSide", *sun_position, 10))
    targets.append(galactic_target("Deep300", 300.0, 1.0, 20, priority=2, repeats=2))
    return plan_survey(school, targets, _settings(school))


@pytest.fixture(scope="module")
def plan_windows(school):
    avail = parse_windows("daily 19:00-23:30")
    return plan_survey(school, parse_grid("l=280..20/20,b=0", 10),
                       _settings(school, night_only=True, availability=avail,
                                 reference=parse_reference("high-b")))


def _samples(blocks):
    """Every block's 1-minute sample times (start .. end, end included) with its coordinates."""
    mjd, ra, dec, owner = [], [], [], []
    for i, b in enumerate(blocks):
        steps = np.arange(0.0, b.minutes, 1.0)
        times = np.append(b.start_mjd + steps / 1440.0, b.end_mjd)
        mjd.append(times)
        ra.append(np.full(times.size, b.ra_deg))
        dec.append(np.full(times.size, b.dec_deg))
        owner.append(np.full(times.size, i))
    return (np.concatenate(mjd), np.concatenate(ra), np.concatenate(dec), np.concatenate(owner))


def _astropy_check(site, blocks, sun_limit, moon_limit, night=False):
    """Elevation, mask, Sun and Moon distance of every sample with astropy's full transforms."""
    mjd, ra, dec, _ = _samples(blocks)
    loc = EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                        height=site.height_m * u.m)
    times = Time(mjd, format="mjd", scale="utc")
    coord = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs")
    frame = AltAz(obstime=times, location=loc)  # pressure 0: geometric, as the planner
    altaz = coord.transform_to(frame)
    alt, az = altaz.alt.deg, altaz.az.deg
    # The scheduler keeps 0.05 deg of margin on every limit, so astropy's values must clear
    # the limits outright: no tolerance.
    assert np.all(alt >= _mask_deg(az)), np.min(alt - _mask_deg(az))
    assert np.all(alt <= EL_MAX)
    gcrs = coord.transform_to(GCRS(obstime=times))  # the geocentric view, where get_sun lives
    sun_sep = get_sun(times).separation(gcrs).deg
    assert np.all(sun_sep >= sun_limit), sun_sep.min()
    if moon_limit:
        moon = get_body("moon", times, loc)
        moon_sep = moon.separation(coord.transform_to(moon.frame)).deg
        assert np.all(moon_sep >= moon_limit), moon_sep.min()
    if night:
        sun_alt = get_sun(times).transform_to(frame).alt.deg
        assert np.all(sun_alt < 0.0), sun_alt.max()
    return alt, az


def test_every_block_meets_the_constraints_by_astropy(school, plan):
    observed = [b for b in plan.blocks if b.kind != "slew"]
    assert len(observed) > 20
    alt, az = _astropy_check(school, observed, 25.0, 5.0)
    # The reported start positions agree with astropy: output rounding (0.01 deg) plus the
    # fast path's 0.01 deg.
    _, _, _, owner = _samples(observed)
    first = np.concatenate([[0], np.flatnonzero(np.diff(owner)) + 1])
    start_alt = np.array([b.alt_start_deg for b in observed])
    start_az = np.array([b.az_start_deg for b in observed])
    assert np.max(np.abs(alt[first] - start_alt)) < 0.02
    assert np.max(np.abs((az[first] - start_az + 180) % 360 - 180)) < 0.05  # az: 0.02/cos(alt)


def test_windows_night_and_references_by_astropy(school, plan_windows):
    observed = [b for b in plan_windows.blocks if b.kind != "slew"]
    assert any(b.kind == "reference" for b in observed)
    _astropy_check(school, observed, 25.0, 5.0, night=True)
    # Windows, read independently in local wall time: every block (slews too) lies in
    # 19:00-23:30 of one local day.
    doc = _document(plan_windows)
    for b in doc["blocks"]:
        start = datetime.fromisoformat(b["start_local"])
        end = datetime.fromisoformat(b["end_local"])
        assert start.date() == end.date()
        assert start.strftime("%H:%M:%S") >= "19:00:00" and end.strftime("%H:%M:%S") <= "23:30:00"


def test_reference_follows_each_target(plan_windows):
    blocks = [b for b in plan_windows.blocks if b.kind != "slew"]
    assert len(blocks) % 2 == 0
    for target, ref in zip(blocks[::2], blocks[1::2]):
        assert target.kind == "target" and ref.kind == "reference"
        assert ref.reference_for == target.name
        assert ref.l_deg == pytest.approx(target.l_deg)
        assert 30.0 <= abs(ref.b_deg) <= 60.0
        # Position switching keeps one receiver setting on and off.
        assert ref.tuning == target.tuning
        # The reference starts within the allowed wait (10 min) plus one slew of the target.
        assert (ref.start_mjd - target.end_mjd) * 1440 <= 10 + 6 + 1


def test_blocks_ordered_disjoint_and_slews_fit(plan, plan_windows):
    for p in (plan, plan_windows):
        blocks = p.blocks
        for prev, nxt in zip(blocks, blocks[1:]):
            assert nxt.start_mjd >= prev.end_mjd - 1e-9  # 1e-9 d = 0.1 ms round-off
        for i, b in enumerate(blocks):
            if b.kind != "slew":
                continue
            after = blocks[i + 1]
            assert after.kind != "slew" and after.name == b.name
            assert b.end_mjd == pytest.approx(after.start_mjd, abs=1e-9)
            # Hand formula: both axes at once, then settle.
            expect_s = max(abs(b.drive_az_end_deg - b.drive_az_start_deg) / RATE_AZ,
                           abs(b.alt_end_deg - b.alt_start_deg) / RATE_EL) + SETTLE
            assert b.minutes * 60 == pytest.approx(expect_s, abs=1e-3)
            assert b.drive_az_end_deg == pytest.approx(after.drive_az_start_deg)
            assert b.alt_end_deg == pytest.approx(after.alt_start_deg)


def test_dish_positions_chain_and_stay_in_the_cable_wrap(plan):
    observed = [b for b in plan.blocks]
    for b in observed:
        for drive, sky in ((b.drive_az_start_deg, b.az_start_deg), (b.drive_az_end_deg, b.az_end_deg)):
            assert AZ_MIN <= drive <= AZ_MAX
            assert (drive - sky) % 360 == pytest.approx(0, abs=1e-6) or \
                (drive - sky) % 360 == pytest.approx(360, abs=1e-6)
    for prev, nxt in zip(observed, observed[1:]):
        if nxt.kind == "slew":
            assert nxt.drive_az_start_deg == pytest.approx(prev.drive_az_end_deg)


def test_unscheduled_reasons(plan):
    reasons = {u.name: u.reason for u in plan.unscheduled}
    assert reasons["NorthCap"] == REASON_NEVER_UP
    assert reasons["SunSide"] == REASON_SUN
    scheduled = {b.name for b in plan.blocks if b.kind == "target"}
    assert "NorthCap" not in scheduled and "SunSide" not in scheduled
    # Each named target is either scheduled in full or listed with a reason.
    for t in plan.targets:
        count = sum(1 for b in plan.blocks if b.kind == "target" and b.name == t.name)
        assert count == t.repeats or t.name in reasons
    deep = [b for b in plan.blocks if b.name == "Deep300" and b.kind == "target"]
    assert len(deep) == 2 and all(b.minutes == pytest.approx(20) for b in deep)


def test_lsr_range_matches_astropy(school, plan):
    block = next(b for b in plan.blocks if b.kind == "target")
    mjd = np.append(block.start_mjd + np.arange(0, block.minutes, 1.0) / 1440, block.end_mjd)
    loc = EarthLocation(lat=school.latitude_deg * u.deg, lon=school.longitude_deg * u.deg,
                        height=school.height_m * u.m)
    coord = SkyCoord(block.ra_deg * u.deg, block.dec_deg * u.deg)
    bary = coord.radial_velocity_correction(kind="barycentric", obstime=Time(mjd, format="mjd"),
                                            location=loc).to_value(u.km / u.s)
    lsr = bary + coord.cartesian.xyz.value @ V_OFFSET_LSRK.d_xyz.to_value(u.km / u.s)
    # doppler agrees with astropy to ~5 m/s (tests/test_doppler.py); 10 m/s leaves room.
    assert block.lsr_corr_min_kms == pytest.approx(lsr.min(), abs=0.01)
    assert block.lsr_corr_max_kms == pytest.approx(lsr.max(), abs=0.01)
    assert block.tuning.lsr_corr_min_kms == block.lsr_corr_min_kms
    assert block.tuning.line_low_mhz < 1420.405751768 < block.tuning.line_high_mhz


def test_deterministic_json(school, plan, sun_position):
    targets = list(plan.targets)
    again = plan_survey(school, targets, plan.settings)
    assert to_json(_document(again)) == to_json(_document(plan))


def test_higher_priority_wins_a_single_slot(school):
    # A 15-minute window holds one 10-minute block; the two positions are 1 deg apart.
    avail = parse_windows("daily 21:00-21:15")
    targets = [galactic_target("Low", 300.0, 0.0, 10, priority=1),
               galactic_target("High", 301.0, 0.0, 10, priority=3)]
    p = plan_survey(school, targets, _settings(school, days=1, availability=avail))
    assert [b.name for b in p.blocks if b.kind == "target"] == ["High"]
    assert [(u.name, u.reason) for u in p.unscheduled] == [("Low", REASON_TIME)]


def test_setting_target_goes_first(school):
    # Window 20:00-20:30 local on 10 June 2026 (UTC+9:30). "Setting" sits in the south-west
    # at 20:14 local just above the mask (az 240: 15 + 40/100 * 10 = 19 deg), so it can only be
    # done first; "Easy" is high up next to the dish's start position (alt 60, az 200) and
    # listed first, so without urgency the tie would go to it.
    loc = EarthLocation(lat=school.latitude_deg * u.deg, lon=school.longitude_deg * u.deg,
                        height=school.height_m * u.m)
    t_set = Time("2026-06-10T10:44:00", scale="utc")  # 20:14 local
    t_start = Time("2026-06-10T10:30:00", scale="utc")
    setting = SkyCoord(alt=19.4 * u.deg, az=240 * u.deg,
                       frame=AltAz(obstime=t_set, location=loc)).icrs
    easy = SkyCoord(alt=58 * u.deg, az=202 * u.deg,
                    frame=AltAz(obstime=t_start, location=loc)).icrs
    targets = [icrs_target("Easy", easy.ra.deg, easy.dec.deg, 10),
               icrs_target("Setting", setting.ra.deg, setting.dec.deg, 10)]
    avail = parse_windows("daily 20:00-20:30")
    p = plan_survey(school, targets, _settings(school, days=1, availability=avail,
                                               moon_min_sep_deg=0.0))
    assert [b.name for b in p.blocks if b.kind == "target"] == ["Setting", "Easy"]


# ------------------------------------------------------------------ command line


def _cli(argv):
    """Run the command module through a parser built with its own add_arguments."""
    parser = Parser(prog="hiplan survey")
    survey_cli.add_arguments(parser)
    args = parser.parse_args(argv)
    console = Console(file=io.StringIO(), width=160)
    code = survey_cli.run(args, console)
    return code, console.file.getvalue()


PERIOD = ["--start", "2026-06-10", "--days", "1"]


def test_cli_json_document(capsys):
    code, _ = _cli(["--site", "saltbush-ridge", "--grid", "l=300..340/20,b=0", *PERIOD,
                    "--format", "json"])
    out = capsys.readouterr().out
    assert code == 0
    doc = json.loads(out)
    assert doc["schema"] == "hiplan.survey/1" and doc["kind"] == "survey"
    for key in ("name", "latitude_deg", "longitude_deg", "height_m", "timezone", "mount",
                "diameter_m", "beamwidth_deg", "elevation_min_deg", "elevation_max_deg",
                "sun_min_sep_deg", "band_deg"):
        assert key in doc["site"]
    assert set(doc["period"]) == {"start_utc", "end_utc", "start_local", "end_local", "days"}
    for key in ("night_only", "windows", "sun_min_sep_deg", "moon_min_sep_deg", "alarm_minutes",
                "lsr_definition"):
        assert key in doc["settings"]
    kinds = {b["kind"] for b in doc["blocks"]}
    assert kinds <= {"target", "reference", "slew"} and "target" in kinds
    for b in doc["blocks"]:
        for key in ("name", "start_utc", "end_utc", "start_local", "end_local", "l_deg", "b_deg",
                    "ra_deg", "dec_deg", "alt_start_deg", "alt_end_deg", "az_start_deg",
                    "az_end_deg", "sun_sep_min_deg", "lsr_corr_min_kms", "lsr_corr_max_kms",
                    "tuning"):
            assert key in b
        assert b["start_utc"].endswith("Z") and b["start_local"].endswith("+09:30")
        if b["kind"] == "slew":
            assert b["tuning"] is None
        else:
            assert {"centre_mhz", "line_low_mhz", "line_high_mhz", "fits", "margin_mhz",
                    "spike_clear", "channel_width_kms", "v_lsr_min_kms", "v_lsr_max_kms",
                    "lsr_corr_min_kms", "lsr_corr_max_kms"} <= set(b["tuning"])


def test_cli_csv_and_table(capsys):
    _cli(["--site", "saltbush-ridge", "--grid", "l=300..340/20,b=0", *PERIOD, "--format", "csv"])
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert rows and rows[0]["kind"] in ("slew", "target")
    assert any(r["tuning_centre_mhz"] for r in rows if r["kind"] == "target")
    code, text = _cli(["--site", "saltbush-ridge", "--grid", "l=300..340/20,b=0", *PERIOD])
    assert code == 0 and "Saltbush Ridge" in text and "G300+0" in text


def test_cli_default_site_is_refused():
    with pytest.raises(UserError, match="altaz"):
        _cli(["--grid", "l=300..340/20,b=0", *PERIOD])


def test_cli_needs_targets_and_checks_options():
    with pytest.raises(UserError, match="--grid"):
        _cli(["--site", "saltbush-ridge", *PERIOD])
    with pytest.raises(UserError, match="--grid"):
        _cli(["--site", "saltbush-ridge", "--grid", "l=10..20", *PERIOD])
    with pytest.raises(UserError, match="--reference"):
        _cli(["--site", "saltbush-ridge", "--grid", "l=300,b=0", "--reference-minutes", "5",
              *PERIOD])


def test_cli_output_file_and_force(tmp_path):
    out = tmp_path / "plan.json"
    argv = ["--site", "saltbush-ridge", "--grid", "l=300,b=0", *PERIOD, "--format", "json",
            "--output", str(out)]
    assert _cli(argv)[0] == 0
    assert json.loads(out.read_text())["schema"] == "hiplan.survey/1"
    with pytest.raises(UserError, match="already exists"):
        _cli(argv)
    assert _cli(argv + ["--force"])[0] == 0


def test_cli_log_marks_targets_done(tmp_path, capsys):
    log = tmp_path / "log.csv"
    # 15 good minutes over l 299.5-300.5: bins 299 and 300 (1-deg bins) each get 15 >= 10.
    log.write_text(format_log([{"start_utc": "2026-05-01T12:00:00Z", "l_from_deg": 299.5,
                                "l_to_deg": 300.5, "minutes": 15, "quality": "good"}]))
    _cli(["--site", "saltbush-ridge", "--grid", "l=300..320/20,b=0", *PERIOD, "--log", str(log),
          "--format", "json"])
    doc = json.loads(capsys.readouterr().out)
    assert {"name": "G300+0", "reason": REASON_DONE} in doc["unscheduled"]
    assert "G300+0" not in {b["name"] for b in doc["blocks"]}
    assert "G320+0" in {b["name"] for b in doc["blocks"]}
