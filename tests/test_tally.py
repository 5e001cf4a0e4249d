"""The tally against an independent computation: astropy's galactic coordinates of the beam
at each spectrum's mid-exposure, its Sun, on synthetic recordings written here (CSV and FITS,
one of the single-dish convention with per-row times); the rules, the log rows, the command."""
import json

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import AltAz, EarthLocation, Galactic, SkyCoord, get_sun
from astropy.coordinates.builtin_frames.lsr import V_OFFSET_LSRK
from astropy.io import fits
from astropy.time import Time

from planner import tally as tally_module
from planner.cli import main
from planner.cli import tally as tally_cli
from planner.errors import UserError
from planner.obslog import coverage_minutes, read_log
from planner.pointing import below_pole_at_dec, on_meridian_at_dec
from planner.recordings import read_recordings, recordings_csv
from planner.tally import REASONS, Rules, Setting, log_rows, tally

NIGHT_START = 61466.9  # 2027-03-02 21:36 UTC
STEP_S = 60.0
# Our beam track agrees with astropy to ~2 arcsec (tests/test_skytrack.py); a spectrum
# whose longitude or latitude lies closer than this to a bin or strip edge may fall on
# the other side in either computation, so it is left out of the one-by-one comparison.
EDGE_DEG = 1e-3
# The Sun: our geometric geocentric direction against astropy's apparent one differs by
# ~20 arcsec (aberration), so the Sun rule is compared away from its edge by this much.
SUN_EDGE_DEG = 0.02


def _location(site):
    return EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                         height=site.height_m * u.m)


def _reference(site, mid_mjd, exposure_s, b_max, sun_min_sep, alt=None, az=None, ra=None, dec=None):
    """Independent: astropy positions of the beam (alt/az through AltAz, or ICRS as given),
    astropy's Sun; counted = in the strip and far enough from the Sun."""
    times = Time(mid_mjd, format="mjd", scale="utc")
    if ra is None:
        frame = AltAz(obstime=times, location=_location(site))
        beam = SkyCoord(alt=np.broadcast_to(alt, mid_mjd.shape) * u.deg,
                        az=np.broadcast_to(az, mid_mjd.shape) * u.deg, frame=frame)
    else:
        beam = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs")
    gal = beam.transform_to(Galactic())
    sun = get_sun(times)
    sep = SkyCoord(beam.icrs.ra, beam.icrs.dec).separation(SkyCoord(sun.ra, sun.dec)).deg
    l_deg, b_deg = gal.l.deg, gal.b.deg
    counted = (np.abs(b_deg) <= b_max) & (sep >= sun_min_sep)
    minutes = np.bincount(np.floor(l_deg).astype(int) % 360, weights=counted * exposure_s / 60.0,
                          minlength=360)
    near = ((np.abs(l_deg - np.round(l_deg)) < EDGE_DEG) | (np.abs(np.abs(b_deg) - b_max) < EDGE_DEG)
            | (np.abs(sep - sun_min_sep) < SUN_EDGE_DEG))
    return l_deg, b_deg, counted, minutes, near


def _compare(ours, ref_l, ref_counted, ref_minutes, near, exposure_s):
    """Spectrum by spectrum away from edges; per bin within the minutes of edge spectra."""
    assert near.sum() <= 3
    far = ~near
    assert np.array_equal(ours.counted[far], ref_counted[far])
    assert np.array_equal(ours.l_bin[far], np.floor(ref_l[far]).astype(int) % 360)
    slack = np.bincount(ours.l_bin[near] % 360, weights=exposure_s[near] / 60.0, minlength=360)
    # Sums of the same exposures in another order: 1e-9 min of round-off.
    assert np.all(np.abs(ours.bin_minutes - ref_minutes) <= slack + 1e-9)


def test_parked_csv_recording_matches_astropy(club, tmp_path):
    """A night at the demo plan's first setting, Dec +60.2 below the pole (facing north at
    elevation 23.6), one-minute spectra, no pointing in the file: the setting is given."""
    pointing = below_pole_at_dec(club, 60.2052)
    start = NIGHT_START + np.arange(480) * STEP_S / 86400
    path = tmp_path / "night.csv"
    path.write_text(recordings_csv(start, STEP_S))
    spectra = read_recordings([path])
    rules = Rules.of_site(club)
    ours = tally(club, spectra, rules, setting=Setting.fixed(pointing, len(spectra)))
    mid = start + 0.5 * STEP_S / 86400
    ref_l, ref_b, counted, minutes, near = _reference(club, mid, spectra.exposure_s, 3.0, 20.0,
                                                      alt=pointing.alt_deg, az=pointing.az_deg)
    assert counted.sum() > 300  # the night runs along the plane: most spectra count
    _compare(ours, ref_l, counted, minutes, near, spectra.exposure_s)
    sep = SkyCoord(ours.l_deg * u.deg, ours.b_deg * u.deg, frame="galactic").separation(
        SkyCoord(ref_l * u.deg, ref_b * u.deg, frame="galactic"))
    assert sep.arcsec.max() < 3.0  # the sky-track budget (README: worst 2.2 arcsec)


def test_single_dish_fits_with_per_row_times_and_azimuth_elevation(club, tmp_path):
    """The single-dish convention: DATE-OBS, EXPOSURE, AZIMUTH, ELEVATIO per row; a
    steered dish stepping through elevations 20-30 to the north (and 10 deg east of it)
    through the night, where the plane passes below the pole."""
    n = 400
    start = NIGHT_START + np.arange(n) * 90.0 / 86400
    exposure = np.full(n, 75.0)
    elevation = 20.0 + 2.5 * (np.arange(n) % 5)
    azimuth = np.where(np.arange(n) % 2 == 0, 0.0, 10.0)
    dates = Time(start, format="mjd", scale="utc").isot
    cols = [fits.Column(name="DATE-OBS", format="23A", array=dates),
            fits.Column(name="EXPOSURE", format="D", array=exposure),
            fits.Column(name="AZIMUTH", format="D", array=azimuth),
            fits.Column(name="ELEVATIO", format="D", array=elevation),
            fits.Column(name="DATA", format="32E", array=np.zeros((n, 32), dtype="f4"))]
    table = fits.BinTableHDU.from_columns(cols, name="SINGLE DISH")
    path = tmp_path / "scan.fits"
    fits.HDUList([fits.PrimaryHDU(), table]).writeto(path)
    spectra = read_recordings([path])
    ours = tally(club, spectra, Rules.of_site(club, b_max_deg=5.0))
    mid = start + 0.5 * exposure / 86400
    ref_l, _, counted, minutes, near = _reference(club, mid, exposure, 5.0, 20.0,
                                                  alt=elevation, az=azimuth)
    assert 20 < counted.sum() < n
    _compare(ours, ref_l, counted, minutes, near, exposure)


@pytest.mark.parametrize("kind", ["csv", "sdfits"])
def test_sky_positions_from_the_file_and_the_sun_rule(club, tmp_path, kind):
    """RA/Dec per spectrum (a tracking dish) near the Sun, as CSV columns or as the
    single-dish CRVAL2/CRVAL3: the frame rotation and the Sun rule against astropy.
    2027-03-02 the Sun is near RA 343, Dec -7: positions on either side of it, every 15
    minutes through a day."""
    n = 96
    start = 61466.0 + np.arange(n) / 96
    ra = (343.0 + np.linspace(-40, 40, n)) % 360.0
    dec = np.full(n, -7.0)
    if kind == "csv":
        path = tmp_path / "track.csv"
        path.write_text(recordings_csv(start, 600.0, ra_deg=ra, dec_deg=dec))
    else:
        cols = [fits.Column(name="DATE-OBS", format="23A", array=Time(start, format="mjd").isot),
                fits.Column(name="CRVAL2", format="D", array=ra),
                fits.Column(name="CRVAL3", format="D", array=dec)]
        header = fits.Header({"EXPOSURE": 600.0, "CTYPE2": "RA", "CTYPE3": "DEC", "EQUINOX": 2000.0})
        path = tmp_path / "track.fits"
        fits.HDUList([fits.PrimaryHDU(), fits.BinTableHDU.from_columns(
            cols, header=header, name="SINGLE DISH")]).writeto(path)
    spectra = read_recordings([path])
    rules = Rules.of_site(club, b_max_deg=89.0)  # every spectrum in the strip: the Sun decides
    ours = tally(club, spectra, rules)
    mid = start + 300.0 / 86400
    ref_l, _, counted, minutes, near = _reference(club, mid, spectra.exposure_s, 89.0, 20.0,
                                                  ra=ra, dec=dec)
    assert 0 < (~counted).sum() < n  # some spectra are within 20 deg of the Sun
    _compare(ours, ref_l, counted, minutes, near, spectra.exposure_s)
    assert set(ours.reason[~ours.counted]) == {REASONS.index("sun")}


def test_night_only_against_the_astropy_sun_altitude(club, tmp_path):
    pointing = on_meridian_at_dec(club, 20.0)
    start = 61466.0 + np.arange(288) * 300.0 / 86400  # a day in five-minute spectra
    path = tmp_path / "day.csv"
    path.write_text(recordings_csv(start, 300.0))
    spectra = read_recordings([path])
    rules = Rules.of_site(club, b_max_deg=89.9, night_only=True, night_sun_alt_deg=-6.0)
    ours = tally(club, spectra, rules, setting=Setting.fixed(pointing, len(spectra)))
    mid = Time(start + 150.0 / 86400, format="mjd", scale="utc")
    sun_alt = get_sun(mid).transform_to(AltAz(obstime=mid, location=_location(club))).alt.deg
    far = np.abs(sun_alt + 6.0) > 0.05  # refraction-free both; 0.05 deg: apparent vs geometric Sun
    daylight = ours.reason == REASONS.index("daylight")
    sun = ours.reason == REASONS.index("sun")
    assert 50 < daylight.sum() < 250  # a March day: about half is daylight to -6 deg
    assert np.array_equal(daylight[far & ~sun], (sun_alt >= -6.0)[far & ~sun])


def test_lsr_correction_of_each_spectrum_matches_astropy(club, tmp_path):
    pointing = on_meridian_at_dec(club, 40.0)
    start = NIGHT_START + np.arange(12) * 1800.0 / 86400
    path = tmp_path / "lsr.csv"
    path.write_text(recordings_csv(start, 60.0))
    spectra = read_recordings([path])
    ours = tally(club, spectra, Rules.of_site(club, b_max_deg=89.9),
                 setting=Setting.fixed(pointing, len(spectra)))
    times = Time(ours.mid_mjd, format="mjd", scale="utc")
    coord = SkyCoord(ours.ra_deg * u.deg, ours.dec_deg * u.deg, frame="icrs")
    bary = coord.radial_velocity_correction(kind="barycentric", obstime=times,
                                            location=_location(club)).to_value(u.km / u.s)
    lsrk = coord.cartesian.xyz.value.T @ V_OFFSET_LSRK.d_xyz.to_value(u.km / u.s)
    # 5 m/s: the LSR budget of tests/test_doppler.py (our residual is under 0.3 m/s).
    assert np.max(np.abs(ours.lsr_corr_kms - (bary + lsrk))) < 0.005


def test_rules_precedence_duplicates_and_no_pointing(club, tmp_path):
    t0 = NIGHT_START
    path = tmp_path / "dup.csv"
    path.write_text("time_utc,exposure_s\n" + "".join(
        f"{Time(t0 + k / 1440, format='mjd').isot}Z,60\n" for k in (0, 1, 1, 2)))
    spectra = read_recordings([path])
    with pytest.raises(UserError, match=r"dup.csv:2: the recording gives no pointing"):
        tally(club, spectra, Rules.of_site(club))
    status = np.array([0, 1, 0, 2], dtype=np.int8)  # parked, moving, parked, unknown
    pointing = on_meridian_at_dec(club, 60.2)
    setting = Setting(np.full(4, pointing.ha_deg), np.full(4, pointing.dec_deg), status)
    ours = tally(club, spectra, Rules.of_site(club), setting=setting)
    # The repeat of line 3's time (line 4) is a duplicate even though it is also parked.
    assert [REASONS[c] if c >= 0 else "counted" for c in ours.reason][1:] == \
        ["moving", "duplicate", "no_setting"]
    assert list(ours.duplicate_of) == [-1, -1, 2 - 1, -1]
    assert np.isnan(ours.l_deg[1]) and ours.l_bin[3] == -1


@pytest.mark.parametrize("stamp, shift_s", [("start", 30.0), ("middle", 0.0), ("end", -30.0)])
def test_time_stamps_mark_start_middle_or_end(club, tmp_path, stamp, shift_s):
    path = tmp_path / "s.csv"
    path.write_text(recordings_csv(np.array([NIGHT_START]), 60.0))
    spectra = read_recordings([path])
    ours = tally(club, spectra, Rules.of_site(club), stamp,
                 Setting.fixed(on_meridian_at_dec(club, 60.0), 1))
    assert (ours.mid_mjd[0] - NIGHT_START) * 86400 == pytest.approx(shift_s, abs=1e-4)
    assert (ours.start_mjd[0] - NIGHT_START) * 86400 == pytest.approx(shift_s - 30.0, abs=1e-4)


def test_log_rows_read_back_give_the_tally(club, tmp_path):
    from planner.obslog import format_log
    start = np.concatenate([NIGHT_START + np.arange(300) * 60.0 / 86400,
                            NIGHT_START + 1 + np.arange(300) * 60.0 / 86400])
    path = tmp_path / "two.csv"
    path.write_text(recordings_csv(start, 60.0))
    spectra = read_recordings([path])
    ours = tally(club, spectra, Rules.of_site(club),
                 setting=Setting.fixed(below_pole_at_dec(club, 60.2), len(spectra)))
    rows = log_rows(ours)
    log = tmp_path / "log.csv"
    log.write_text(format_log(rows))
    entries = read_log(log)
    # Two nights: rows per (night, bin); sums in another order, 1e-9 min of round-off.
    assert len({(e.start_mjd - 0.5) // 1 for e in entries}) == 2  # noon to noon
    assert np.allclose(coverage_minutes(entries), ours.bin_minutes, rtol=0, atol=1e-9)
    assert all(e.dec_deg == pytest.approx(60.2, abs=1e-4) and e.l_from_deg == e.l_to_deg
               for e in entries)


def test_parser_constants_agree():
    assert tally_cli.STAMPS == tally_module.STAMPS


# --------------------------------------------------------------------- command

BELOW_POLE = ("--dec", "60.2", "--ha", "180")  # the demo plan's first setting


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def night(tmp_path):
    path = tmp_path / "night.csv"
    start = NIGHT_START + np.arange(240, 480) * 60.0 / 86400
    path.write_text(recordings_csv(start, 60.0))
    return path


def test_command_json_log_and_duplicates(tmp_path, capsys, night):
    copy = tmp_path / "again.csv"
    copy.write_text(night.read_text().splitlines(keepends=True)[0]
                    + "".join(night.read_text().splitlines(keepends=True)[1:4]))
    out = tmp_path / "t.json"
    code, _, err = _run(capsys, "tally", night, copy, *BELOW_POLE, "--format", "json",
                        "-o", out, "--log-out", tmp_path / "log.csv")
    assert code == 0, err
    doc = json.loads(out.read_text())
    assert doc["schema"] == "hiplan.tally/1" and doc["site"]["name"].startswith("Hollowmere")
    assert doc["spectra"]["read"] == 242 and doc["rejected"]["duplicate"]["spectra"] == 2
    assert f"{copy}:3: the same time as {night}:3" in err and "counted once" in err
    minutes = sum(b["minutes"] for b in doc["bins"])
    assert minutes == pytest.approx(doc["spectra"]["counted_minutes"])
    assert coverage_minutes(read_log(tmp_path / "log.csv")).sum() == pytest.approx(minutes)
    assert set(doc["rejected"]) == set(REASONS)


def test_command_table_and_csv(tmp_path, capsys, night):
    code, out, _ = _run(capsys, "tally", night, "--elevation", "80", "--facing", "north")
    assert code == 0 and "Counted:" in out and "Minutes per bin" in out
    code, out, _ = _run(capsys, "tally", night, "--alt", "80", "--az", "0", "--format", "csv")
    lines = out.splitlines()
    assert lines[0].split(",") == list(tally_module.SPECTRA_CSV_FIELDS) and len(lines) == 241
    assert lines[1].startswith(f"{night}:3,")


@pytest.mark.parametrize("extra, message", [
    ((), "night.csv:3: the recording gives no pointing"),
    (("--dec", "60", "--plan", "p.json"), "give --plan or a pointing"),
    (("--dec", "60", "--chart", "c.png"), "--chart needs --plan"),
    (("--dec", "60", "--stamp", "later"), "invalid choice: 'later'"),
])
def test_command_refusals(tmp_path, capsys, night, extra, message):
    code, _, err = _run(capsys, "tally", night, *extra)
    assert code == 2 and message in err and "Traceback" not in err


def test_nothing_written_on_error_and_inputs_never_replaced(tmp_path, capsys, night):
    bad = tmp_path / "bad.csv"
    bad.write_text("time_utc,exposure_s\n2027-03-02T22:00:00,60\n")
    log = tmp_path / "log.csv"
    code, _, err = _run(capsys, "tally", night, bad, "--dec", "60", "--log-out", log, "-o",
                        tmp_path / "t.json", "--format", "json")
    assert code == 2 and "bad.csv:2: time_utc" in err
    assert not log.exists() and not (tmp_path / "t.json").exists()
    code, _, err = _run(capsys, "tally", night, "--dec", "60", "--log-out", night, "--force")
    assert code == 2 and "would replace the recording this command reads" in err


def test_many_files_with_a_progress_bar_on_a_terminal(tmp_path, capsys, monkeypatch):
    import sys
    for k in range(tally_cli.PROGRESS_FROM_FILES):
        start = NIGHT_START + (240 + 10 * k + np.arange(10)) * 60.0 / 86400
        (tmp_path / f"part-{k:02d}.csv").write_text(recordings_csv(start, 60.0))
    monkeypatch.setattr(sys.stderr, "isatty", lambda: True)
    code, out, err = _run(capsys, "tally", str(tmp_path / "part-*.csv"), *BELOW_POLE,
                          "--format", "json")
    assert code == 0, err
    assert json.loads(out)["spectra"]["read"] == 10 * tally_cli.PROGRESS_FROM_FILES
