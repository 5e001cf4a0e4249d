"""Reading spectrum recordings: CSV, ECSV and FITS (single-dish tables, header spectra),
finding files, and one-line errors naming the file and line."""
import os

import astropy.units as u
import numpy as np
import pytest
from astropy.io import fits
from astropy.table import Table
from astropy.time import Time

from planner import recordings
from planner.errors import UserError
from planner.galactic import galactic_to_icrs_deg
from planner.recordings import (find_recordings, parse_times, planned_spectra, read_recordings,
                                recordings_csv)
from planner.timebase import datetime_to_mjd_utc, iso_utc

T0 = "2027-03-01T21:00:00"
MJD0 = Time(T0, scale="utc").mjd  # 61465.875


def _csv(tmp_path, text, name="rec.csv", bom=False, crlf=False):
    path = tmp_path / name
    if crlf:
        text = text.replace("\n", "\r\n")
    path.write_bytes((b"\xef\xbb\xbf" if bom else b"") + text.encode("utf-8"))
    return path


def _error(paths) -> str:
    with pytest.raises(UserError) as info:
        read_recordings(paths if isinstance(paths, list) else [paths])
    message = str(info.value)
    assert "\n" not in message
    return message


# ------------------------------------------------------------------------ CSV

def test_csv_times_zones_bom_comments_and_extra_columns(tmp_path):
    path = _csv(tmp_path, "# recorder v2\n\n Time_UTC , exposure_s, tsys_k ,Alt_deg,az_deg\n"
                          f"{T0}Z, 60, 120.5,,\n"
                          "# a comment between rows\n"
                          "2027-03-01T22:01:00+01:00,30,121,40,180\n", bom=True, crlf=True)
    s = read_recordings([path])
    assert len(s) == 2
    # 22:01+01:00 is 21:01Z: one minute after the first (hand check, 1/1440 day).
    assert s.time_mjd[0] == pytest.approx(MJD0, abs=1e-9)
    assert s.time_mjd[1] - s.time_mjd[0] == pytest.approx(1 / 1440, abs=1e-9)
    assert list(s.exposure_s) == [60.0, 30.0]
    assert np.isnan(s.alt_deg[0]) and s.alt_deg[1] == 40.0 and s.az_deg[1] == 180.0
    assert list(s.has_altaz) == [False, True] and not s.has_sky.any()
    assert s.where(1) == f"{path}:6"


def test_csv_sky_pointing_wins_over_altaz(tmp_path):
    path = _csv(tmp_path, "time_utc,exposure_s,ra_deg,dec_deg,alt_deg,az_deg\n"
                          f"{T0}Z,10,83.6,22.0,40,180\n")
    s = read_recordings([path])
    assert s.has_sky[0] and not s.has_altaz[0]


def test_leap_second_time_is_read(tmp_path):
    # 2016-12-31 ends with a leap second: 23:59:60 is the day's 86,401st second.
    path = _csv(tmp_path, "time_utc,exposure_s\n2016-12-31T23:59:60Z,1\n2016-12-31T23:59:59Z,1\n")
    s = read_recordings([path])
    assert s.time_mjd[0] - s.time_mjd[1] == pytest.approx(1 / 86401, abs=1e-10)
    assert iso_utc(s.time_mjd[0]) == "2016-12-31T23:59:60Z"


@pytest.mark.parametrize("text, message", [
    ("exposure_s\n60\n", "rec.csv:1: missing column 'time_utc'"),
    ("time,exposure_s\nx,1\n", "missing column 'time_utc' (is 'time' meant?)"),
    ("time_utc,exposure_s,ra_deg\n2027-03-01T21:00:00Z,1,3\n", "column 'ra_deg' without 'dec_deg'"),
    ("time_utc,exposure_s\n2027-03-01T21:00:00,1\n",
     "rec.csv:2: time_utc '2027-03-01T21:00:00' has no UTC offset; add Z"),
    ("time_utc,exposure_s\n2027-03-41T21:00:00Z,1\n", "rec.csv:2: time_utc '2027-03-41T21:00:00Z' is not an ISO"),
    ("time_utc,exposure_s\n2027-03-01T23:59:60Z,1\n", "rec.csv:2: time_utc '2027-03-01T23:59:60Z' has second 60"),
    ("time_utc,exposure_s\n2127-03-01T21:00:00Z,1\n", "outside the dates hiplan supports"),
    ("time_utc,exposure_s\n\n# c\n2027-03-01T21:00:00Z,0\n", "rec.csv:4: exposure_s = 0 is outside (0, 86400]"),
    ("time_utc,exposure_s\n2027-03-01T21:00:00Z,sixty\n", "rec.csv:2: exposure_s 'sixty' is not a number"),
    ("time_utc,exposure_s\n2027-03-01T21:00:00Z,\n", "rec.csv:2: exposure_s is empty but required"),
    ("time_utc,exposure_s\n,5\n", "rec.csv:2: time_utc is empty but required"),
    ("time_utc,exposure_s\n2027-03-01T21:00:00Z,1,2\n", "rec.csv:2: row has 3 fields but the header has 2"),
    ("time_utc,exposure_s,alt_deg,az_deg\n2027-03-01T21:00:00Z,1,95,10\n", "alt_deg = 95 is outside [-90, 90]"),
    ("time_utc,exposure_s,alt_deg,az_deg\n2027-03-01T21:00:00Z,1,45,\n",
     "rec.csv:2: alt_deg and az_deg must both be given or both be empty"),
    ("time_utc,exposure_s,exposure_s\n", "column 'exposure_s' appears twice"),
    ("2027-03-01T21:00:00Z,1\n", "rec.csv:1: no header"),
    ("# only a comment\n", "rec.csv:1: no header"),
    ("time_utc,exposure_s\n", "no spectra to tally"),
    ('time_utc,exposure_s\n# c\n"2027-03-01T21:00:00Z,1\n', "rec.csv:3: cannot split the line into fields"),
])
def test_csv_errors_are_one_line_naming_file_and_line(tmp_path, text, message):
    assert message in _error(_csv(tmp_path, text))


def test_file_problems(tmp_path, monkeypatch):
    assert "rec.csv:1: recording not found" in _error(tmp_path / "rec.csv")
    (tmp_path / "bad.csv").write_bytes(b"time_utc,exposure_s\n\xe9,1\n")
    assert "not UTF-8 text (byte 0xE9 on line 2)" in _error(tmp_path / "bad.csv")
    monkeypatch.setattr(recordings, "MAX_TABLE_BYTES", 10)
    assert "larger than the 1e-05 MB limit for a recording" in _error(
        _csv(tmp_path, "time_utc,exposure_s\n2027-03-01T21:00:00Z,1\n"))


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="needs FIFOs")
def test_a_pipe_is_refused_unread(tmp_path):
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    assert "it is a pipe (FIFO), not a regular file" in _error(fifo)


def test_too_many_spectra(tmp_path, monkeypatch):
    monkeypatch.setattr(recordings, "MAX_SPECTRA", 2)
    path = _csv(tmp_path, "time_utc,exposure_s\n" + "".join(
        f"2027-03-01T21:00:0{k}Z,1\n" for k in range(3)))
    assert "more than 2 spectra in all" in _error(path)


def test_parse_times_matches_the_obslog_rule():
    texts = ["2027-03-01T21:00:00.250Z", "2027-03-01T21:00:00.250-03:30"]
    mjd = parse_times(texts, lambda i: f"x:{i}")
    from datetime import datetime
    for text, value in zip(texts, mjd):
        assert value == datetime_to_mjd_utc(datetime.fromisoformat(text))


# ----------------------------------------------------------------------- ECSV

def test_ecsv_with_time_column_units_and_masked_pointing(tmp_path):
    table = Table({"time_utc": Time([T0, "2027-03-01T21:01:00"], scale="tai"),
                   "exposure_s": [1.0, 0.5] * u.min,
                   "ra_deg": np.ma.masked_array([83.6, 0.0], mask=[False, True]),
                   "dec_deg": np.ma.masked_array([22.0, 0.0], mask=[False, True])})
    path = tmp_path / "rec.ecsv"
    table.write(path, format="ascii.ecsv")
    s = read_recordings([path])
    # TAI - UTC = 37 s in 2027 (no leap second since 2017): the scale is converted.
    assert s.time_mjd[0] == pytest.approx(MJD0 - 37 / 86400, abs=1e-9)
    assert list(s.exposure_s) == [60.0, 30.0]
    assert s.has_sky[0] and not s.has_sky[1]


def test_ecsv_string_times_need_a_zone_and_lines_are_named(tmp_path):
    path = tmp_path / "rec.ecsv"
    Table({"time_utc": [f"{T0}Z", T0], "exposure_s": [1.0, 1.0]}).write(path, format="ascii.ecsv")
    message = _error(path)
    lines = path.read_text().splitlines()
    line = next(k for k, text in enumerate(lines, start=1) if text.startswith(T0 + " "))
    assert message.startswith(f"{path}:{line}: time_utc '{T0}' has no UTC offset")


def test_ecsv_problems(tmp_path):
    path = tmp_path / "rec.ecsv"
    Table({"time_utc": [f"{T0}Z"], "exposure_s": [1.0] * u.m}).write(path, format="ascii.ecsv")
    assert "column 'exposure_s' has unit 'm', which is not a time" in _error(path)
    path.write_text("# %ECSV 1.0\n# ---\n# datatype: [\n")
    assert _error(path).startswith(f"{path}: not a readable ECSV table")


# ----------------------------------------------------------------------- FITS

def _sdfits(path, n=4, **columns):
    """A single-dish FITS file: primary HDU, one SINGLE DISH binary table."""
    cols = [fits.Column(name="DATA", format="16E", array=np.zeros((n, 16), dtype="f4"))]
    header = fits.Header()
    for name, value in columns.items():
        name = name.replace("_", "-")
        if isinstance(value, np.ndarray):
            fmt = "30A" if value.dtype.kind in "US" else "D"
            cols.append(fits.Column(name=name, format=fmt, array=value))
        else:
            header[name] = value
    table = fits.BinTableHDU.from_columns(cols, header=header, name="SINGLE DISH")
    fits.HDUList([fits.PrimaryHDU(), table]).writeto(path)
    return path


def _dates(n, step_s=60.0):
    return np.array([(Time(T0) + k * step_s * u.s).isot for k in range(n)])


def test_sdfits_per_row_times_exposure_and_sky_positions(tmp_path):
    path = _sdfits(tmp_path / "s.fits", DATE_OBS=_dates(4), EXPOSURE=np.full(4, 60.0),
                   CRVAL2=np.array([10.0, 20.0, 30.0, 40.0]), CRVAL3=np.full(4, 5.0),
                   CTYPE2="RA---GLS", CTYPE3="DEC--GLS", EQUINOX=2000.0)
    s = read_recordings([path])
    assert s.time_mjd == pytest.approx(MJD0 + np.arange(4) / 1440, abs=1e-9)
    assert list(s.ra_deg) == [10.0, 20.0, 30.0, 40.0] and s.has_sky.all()
    assert s.where(2) == f"{path}: HDU 1 row 3"


def test_sdfits_galactic_axes_and_header_exposure(tmp_path):
    path = _sdfits(tmp_path / "g.fits", n=2, DATE_OBS=_dates(2), EXPOSURE=2.5,
                   CRVAL2=np.array([30.0, 31.0]), CRVAL3=np.array([0.0, 1.0]),
                   CTYPE2="GLON-CAR", CTYPE3="GLAT-CAR")
    s = read_recordings([path])
    ra, dec = galactic_to_icrs_deg(np.array([30.0, 31.0]), np.array([0.0, 1.0]))
    assert s.ra_deg == pytest.approx(ra, abs=1e-9) and s.dec_deg == pytest.approx(dec, abs=1e-9)
    assert list(s.exposure_s) == [2.5, 2.5]  # the keyword stands for every row


def test_sdfits_azimuth_elevation_and_timesys(tmp_path):
    path = _sdfits(tmp_path / "a.fits", n=3, DATE_OBS=_dates(3), EXPOSURE=np.full(3, 1.0),
                   AZIMUTH=np.array([180.0, 180.0, 360.0]), ELEVATIO=np.full(3, 50.0), TIMESYS="TAI")
    s = read_recordings([path])
    assert s.has_altaz.all() and list(s.az_deg) == [180.0, 180.0, 0.0]
    assert s.time_mjd[0] == pytest.approx(Time(T0, scale="tai").utc.mjd, abs=1e-9)


def test_sdfits_gps_clock(tmp_path):
    path = _sdfits(tmp_path / "gps.fits", n=1, DATE_OBS=_dates(1), EXPOSURE=1.0, TIMESYS="GPS")
    s = read_recordings([path])
    # GPS = TAI - 19 s, TAI = UTC + 37 s in 2027: a GPS reading is 18 s ahead of UTC.
    assert s.time_mjd[0] == pytest.approx(MJD0 - 18 / 86400, abs=1e-9)


def test_fits_header_spectra_one_per_hdu(tmp_path):
    first = fits.PrimaryHDU(np.zeros(64, dtype="f4"))
    first.header.update({"DATE-OBS": T0, "EXPTIME": 30.0, "CTYPE1": "FREQ", "CTYPE2": "RA",
                         "CTYPE3": "DEC", "CRVAL2": 83.6, "CRVAL3": 22.0})
    second = fits.ImageHDU(np.zeros(64, dtype="f4"))
    second.header.update({"DATE-OBS": "2027-03-01T21:00:30", "EXPOSURE": 30.0, "AZIMUTH": 180.0,
                          "ELEVATIO": 45.0})
    path = tmp_path / "h.fits"
    fits.HDUList([first, second]).writeto(path)
    s = read_recordings([path])
    assert len(s) == 2 and s.has_sky[0] and s.has_altaz[1]
    assert (s.ra_deg[0], s.dec_deg[0]) == (83.6, 22.0)
    assert s.where(1) == f"{path}: HDU 1"


@pytest.mark.parametrize("columns, message", [
    ({"DATE_OBS": np.array(["2027-03-01", "2027-03-01"])}, "HDU 1 row 1: DATE-OBS '2027-03-01' has no time of day"),
    ({"DATE_OBS": np.array([T0, "2027-03-01T25:00:00"]), "EXPOSURE": 1.0},
     "HDU 1 row 2: DATE-OBS '2027-03-01T25:00:00' is not a FITS time"),
    ({"DATE_OBS": np.array([T0, T0])}, "HDU 1: no EXPOSURE (or EXPTIME) column or keyword"),
    ({"DATE_OBS": np.array([T0, T0]), "EXPOSURE": np.array([1.0, -1.0])},
     "HDU 1 row 2: exposure_s = -1 is outside (0, 86400] seconds"),
    ({"DATE_OBS": np.array([T0, T0]), "EXPOSURE": 1.0, "TIMESYS": "TCB"}, "TIMESYS 'TCB' is not a clock"),
    ({"DATE_OBS": np.array([T0, T0]), "EXPOSURE": 1.0, "CRVAL2": np.array([1.0, 2.0]),
      "CRVAL3": np.array([1.0, 2.0]), "EQUINOX": 1950.0}, "EQUINOX 1950: hiplan reads J2000/ICRS"),
    ({"DATE_OBS": np.array([T0, T0]), "EXPOSURE": 1.0, "CRVAL2": np.array([1.0, 2.0]),
      "CRVAL3": np.array([1.0, 95.0])}, "HDU 1 row 2: DEC = 95 is outside [-90, 90]"),
])
def test_fits_errors(tmp_path, columns, message):
    assert message in _error(_sdfits(tmp_path / "bad.fits", n=2, **columns))


def test_not_fits_and_no_spectra(tmp_path):
    (tmp_path / "x.fits").write_bytes(b"SIMPLE? no" * 400)
    assert _error(tmp_path / "x.fits").startswith(f"{tmp_path / 'x.fits'}: not a readable FITS file")
    fits.HDUList([fits.PrimaryHDU(np.zeros(4))]).writeto(tmp_path / "e.fits")
    assert "no spectra: no table with a DATE-OBS column" in _error(tmp_path / "e.fits")


# ----------------------------------------------------------------- finding files

def test_find_recordings_folders_patterns_and_names(tmp_path, monkeypatch):
    (tmp_path / "n1").mkdir()
    (tmp_path / "n1" / "deep").mkdir()
    (tmp_path / ".hidden").mkdir()
    for name in ("n1/a.csv", "n1/deep/b.FITS", "n1/notes.txt", ".hidden/c.csv", "n2.ecsv"):
        (tmp_path / name).write_text("x")
    monkeypatch.chdir(tmp_path)
    assert find_recordings(["n1"]) == [tmp_path.joinpath("n1/a.csv").relative_to(tmp_path),
                                       tmp_path.joinpath("n1/deep/b.FITS").relative_to(tmp_path)]
    # A pattern hiplan expands itself (a quoted glob); a file named twice is read once.
    found = find_recordings(["n*", "n2.ecsv"])
    assert [p.name for p in found] == ["a.csv", "b.FITS", "n2.ecsv"]
    with pytest.raises(UserError, match="nothing.csv:1: recording not found"):
        read_recordings(find_recordings(["nothing.csv"]))
    with pytest.raises(UserError, match=r"x\*\.csv: no recording file matches this pattern"):
        find_recordings(["x*.csv"])
    with pytest.raises(UserError, match=r"notes.txt: not a kind of recording"):
        find_recordings(["n1/notes.txt"])
    (tmp_path / "empty").mkdir()
    with pytest.raises(UserError, match="empty: no recording files in this folder"):
        find_recordings(["empty"])


# ------------------------------------------------------------------------ writing

def test_written_recordings_read_back(tmp_path):
    mjd = MJD0 + np.array([0.0, 0.5, 1.25]) / 1440
    text = recordings_csv(mjd, 30.0, alt_deg=np.array([40.0, np.nan, 41.0]),
                          az_deg=np.array([180.0, np.nan, 180.0]))
    s = read_recordings([_csv(tmp_path, text)])
    assert s.time_mjd == pytest.approx(mjd, abs=1e-8)  # written to the millisecond
    assert list(s.has_altaz) == [True, False, True]


def test_planned_spectra_follow_the_recordings():
    plan = {"days": [
        {"date": "2027-03-01", "recordings": [{"start_utc": f"{T0}Z", "end_utc": "2027-03-01T21:05:30Z"}]},
        {"date": "2027-03-02", "recordings": [{"start_utc": "2027-03-02T21:00:00Z",
                                               "end_utc": "2027-03-02T21:01:00Z"}]}]}
    t = planned_spectra(plan, 60.0)
    # 5.5 minutes: six one-minute spectra (the last runs past the end), then one more day.
    assert t.size == 7 and t[0] == pytest.approx(MJD0, abs=1e-9)
    assert planned_spectra(plan, 60.0, ["2027-03-02"]).size == 6
