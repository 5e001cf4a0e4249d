"""Figures: they build from small hand-made inputs, save as PNG and SVG, and draw the right things.

The drift plan is invented for the Hollowmere club (Europe/London, 53.42 N, 2.07 W)
across the change to summer time on Sunday 2027-03-28 (01:00 GMT -> 02:00 BST).
"""
from __future__ import annotations

import re
from datetime import UTC, datetime
from zoneinfo import ZoneInfo

import ephem
import numpy as np
import pytest
from astropy import units as u
from astropy.coordinates import SkyCoord, angular_separation
from matplotlib.figure import Figure

from planner import plots
from planner.errors import UserError
from planner.galactic import icrs_to_galactic_deg

LONDON = ZoneInfo("Europe/London")
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
UNITS = re.compile(r"\((deg|h|min)\b")

SITE = {
    "name": "Hollowmere Amateur Radio Astronomy Club", "latitude_deg": 53.42,
    "longitude_deg": -2.07, "height_m": 180.0, "timezone": "Europe/London",
    "mount": "transit", "diameter_m": 3.0, "beamwidth_deg": 4.93,
    "elevation_min_deg": 12.0, "elevation_max_deg": 90.0, "sun_min_sep_deg": 20.0,
    "b_max_deg": 3.0,
}


def _local(utc_text: str) -> str:
    moment = datetime.fromisoformat(utc_text)
    return moment.astimezone(LONDON).isoformat(timespec="seconds")


def _span(start_utc: str, end_utc: str) -> dict:
    return {"start_utc": start_utc, "end_utc": end_utc,
            "start_local": _local(start_utc), "end_local": _local(end_utc)}


def _recording(start_utc, end_utc, l_start, l_end) -> dict:
    bins = list(range(int(min(l_start, l_end)), int(max(l_start, l_end)) + 1))
    return {**_span(start_utc, end_utc), "peak_utc": start_utc,
            "l_start_deg": l_start, "l_end_deg": l_end, "l_bins": bins,
            "bin_minutes": [5.0] * len(bins), "new_bins": [], "sun_sep_min_deg": 60.0,
            "moon_sep_min_deg": 40.0, "night": True,
            "lsr_corr_min_kms": 10.0, "lsr_corr_max_kms": 12.0}


def _park(move_start_utc=None, move_end_utc=None) -> dict:
    park = {"dec_deg": 20.0, "alt_deg": 56.58, "az_deg": 180.0, "facing": "south",
            "move": move_start_utc is not None}
    if move_start_utc:
        park.update({"move_start_utc": move_start_utc, "move_end_utc": move_end_utc,
                     "move_start_local": _local(move_start_utc),
                     "move_end_local": _local(move_end_utc)})
    else:
        park.update({"move_start_utc": None, "move_end_utc": None,
                     "move_start_local": None, "move_end_local": None})
    return park


@pytest.fixture(scope="module")
def drift_plan() -> dict:
    """Four local days, Fri 26 to Mon 29 March 2027, with recordings across the DST night."""
    days = [
        {"date": "2027-03-26", "park": _park("2027-03-26T19:00:00Z", "2027-03-26T19:15:00Z"),
         "recordings": [_recording("2027-03-26T20:10:00Z", "2027-03-26T21:40:00Z", 53.9, 57.2)],
         "skipped": [{**_span("2027-03-26T06:00:00Z", "2027-03-26T06:30:00Z"),
                      "l_bins": [80, 81], "reason": "outside windows"}],
         "tuning": None},
        # Starts 23:30 GMT on Saturday, ends 02:15 UTC = 03:15 BST on Sunday: crosses the change.
        {"date": "2027-03-27", "park": _park(),
         "recordings": [_recording("2027-03-27T23:30:00Z", "2027-03-28T02:15:00Z", 60.0, 75.0)],
         "skipped": [], "tuning": None},
        # 10:00-12:30 UTC = 11:00-13:30 BST: crosses local noon, so it spans two chart rows.
        {"date": "2027-03-28", "park": _park(),
         "recordings": [_recording("2027-03-28T10:00:00Z", "2027-03-28T12:30:00Z", 350.0, 8.0)],
         "skipped": [{**_span("2027-03-28T12:40:00Z", "2027-03-28T13:20:00Z"),
                      "l_bins": [10, 11], "reason": "sun"}],
         "tuning": None},
        {"date": "2027-03-29", "park": _park("2027-03-29T18:00:00Z", "2027-03-29T18:15:00Z"),
         "recordings": [_recording("2027-03-29T19:00:00Z", "2027-03-29T20:00:00Z", 120.0, 124.0)],
         "skipped": [], "tuning": None},
    ]
    wanted = [str(b) for b in list(range(50, 80)) + list(range(120, 130))]
    return {
        "schema": "hiplan.plan/1", "kind": "drift", "site": SITE,
        "period": {"start_utc": "2027-03-26T00:00:00Z", "end_utc": "2027-03-29T23:00:00Z",
                   "start_local": "2027-03-26T00:00:00+00:00",
                   "end_local": "2027-03-30T00:00:00+01:00", "days": 4},
        "settings": {"b_max_deg": 3.0, "bin_width_deg": 1.0, "want": [[50, 80], [120, 130]],
                     "target_minutes": 60.0, "target_rms_k": None, "night_only": False,
                     "windows": ["Mon–Fri 19:00–23:30", "Sat 21:00-02:00"],
                     "max_reparks_per_day": 1, "repark_minutes": 15, "sun_min_sep_deg": 20.0,
                     "lsr_definition": "standard", "rotation_model": "iau1985",
                     "alarm_minutes": 15},
        "days": days,
        "summary": {
            "wanted_bins": len(wanted), "done_before": 3, "done_after": 21,
            "depth_before_min": {k: (70.0 if int(k) < 53 else 10.0) for k in wanted},
            "depth_after_min": {k: (70.0 if int(k) < 70 else 35.0) for k in wanted},
            "gaps": [{"l_range": "70–79", "bins": list(range(70, 80)),
                      "reason": "not enough time this period"}],
        },
    }


@pytest.fixture(scope="module")
def survey_plan() -> dict:
    """An invented one-night survey: three targets, a reference, slews, one step across l = 0."""
    rows = [  # kind, name, start, end, l, b, alt start, alt end
        ("target", "G120+0", "2027-03-26T21:00:00Z", "2027-03-26T21:20:00Z",
         120.0, 0.0, 60.0, 61.0),
        ("slew", "slew", "2027-03-26T21:20:00Z", "2027-03-26T21:23:00Z", None, None, 61.0, 45.0),
        ("reference", "REF-off", "2027-03-26T21:23:00Z", "2027-03-26T21:33:00Z",
         140.0, 20.0, 45.0, 46.0),
        ("slew", "slew", "2027-03-26T21:33:00Z", "2027-03-26T21:37:00Z", None, None, 46.0, 30.0),
        ("target", "G10+0", "2027-03-26T21:37:00Z", "2027-03-26T21:57:00Z", 10.0, 0.0, 30.0, 32.0),
        ("slew", "slew", "2027-03-26T21:57:00Z", "2027-03-26T22:00:00Z", None, None, 32.0, 35.0),
        ("target", "G350+0", "2027-03-26T22:00:00Z", "2027-03-26T22:20:00Z",
         350.0, 0.0, 35.0, 33.0),
    ]
    blocks = []
    for kind, name, t0, t1, l_deg, b_deg, a0, a1 in rows:
        block = {"kind": kind, "name": name, **_span(t0, t1), "alt_start_deg": a0,
                 "alt_end_deg": a1, "az_start_deg": 180.0, "az_end_deg": 181.0}
        if l_deg is not None:
            block.update({"l_deg": l_deg, "b_deg": b_deg, "ra_deg": 0.0, "dec_deg": 0.0,
                          "sun_sep_min_deg": 90.0, "lsr_corr_min_kms": 1.0,
                          "lsr_corr_max_kms": 1.2, "tuning": {"centre_mhz": 1420.4}})
        else:
            block.update({"l_deg": None, "b_deg": None, "tuning": None})
        blocks.append(block)
    return {
        "schema": "hiplan.survey/1", "kind": "survey", "site": SITE,
        "period": {"start_utc": "2027-03-26T18:00:00Z", "end_utc": "2027-03-27T06:00:00Z",
                   "start_local": "2027-03-26T18:00:00+00:00",
                   "end_local": "2027-03-27T06:00:00+00:00", "days": 1},
        "settings": {"night_only": False, "windows": [], "sun_min_sep_deg": 25.0,
                     "moon_min_sep_deg": 5.0, "alarm_minutes": 15,
                     "lsr_definition": "standard"},
        "blocks": blocks,
        "unscheduled": [{"name": "G300+0", "reason": "never rises above the elevation limit"}],
    }


def _check_saves(fig: Figure, tmp_path, stem: str) -> None:
    png, svg = tmp_path / f"{stem}.png", tmp_path / f"{stem}.svg"
    fig.savefig(png, dpi=80)
    fig.savefig(svg)
    assert png.read_bytes()[:8] == PNG_MAGIC
    text = svg.read_text(encoding="utf-8")
    assert "<svg" in text and len(text) > 1000


def _check_labels_and_legend(fig: Figure) -> None:
    labels = [lab for ax in fig.axes for lab in (ax.get_xlabel(), ax.get_ylabel()) if lab]
    with_units = [lab for lab in labels if UNITS.search(lab)]
    assert len(with_units) >= 2, labels  # both data axes of the main plot carry units
    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend()]
    assert legends and all(leg.get_texts() for leg in legends)


def _patches(fig: Figure, prefix: str) -> list:
    """Extents (x0, y0, x1, y1) of the rectangles with this gid: single patches, or the paths
    of a collection (the month chart draws each kind of rectangle as one collection)."""
    out = [p.get_extents().transformed(p.axes.transData.inverted()).extents
           for ax in fig.axes for p in ax.patches if (p.get_gid() or "").startswith(prefix)]
    out += [path.get_extents().extents for ax in fig.axes for c in ax.collections
            if (c.get_gid() or "").startswith(prefix) for path in c.get_paths()]
    return out


def _bars_by_row(fig: Figure, gid: str) -> list[tuple[int, float, float]]:
    """(row index, x0, x1) of the rectangles with this gid, sorted."""
    out = []
    for x0, y0, x1, y1 in _patches(fig, gid):
        out.append((round((y0 + y1) / 2), round(x0, 6), round(x1, 6)))
    return sorted(out)


# ---------------------------------------------------------------- coverage atlas


def test_coverage_atlas_builds_and_draws_the_plane(tmp_path, rng):
    dec = np.arange(-20.0, 81.0, 5.0)
    starts = np.arange(0.0, 360.0, 1.0)
    hours = np.where(rng.random((dec.size, starts.size)) < 0.2, rng.random((dec.size, 360)) * 6, 0)
    fig = plots.coverage_atlas(dec, starts, hours, reachable_dec=(-24.0, 90.0),
                               wanted_bins=range(30, 90), covered_bins=range(40, 52),
                               site_name=SITE["name"], period_text="March 2027", b_max_deg=3.0)
    _check_saves(fig, tmp_path, "atlas")
    _check_labels_and_legend(fig)
    main = next(ax for ax in fig.axes if "Declination" in ax.get_ylabel())
    assert main.get_xlim() == (360.0, 0.0)  # longitude increases to the left, as labelled
    assert "left" in main.get_xlabel()
    assert any(ax.get_label() == "<colorbar>" and "(h)" in ax.get_ylabel() for ax in fig.axes)
    # The b = 0 curve against astropy's Galactic -> ICRS. 1e-4 deg: our frame drops the
    # ICRS/FK5 frame bias (~0.02 arcsec = 6e-6 deg); the rest is rounding.
    plane = main.get_lines()[0]
    l_deg, dec_deg = plane.get_xdata(), plane.get_ydata()
    ref = SkyCoord(l=l_deg * u.deg, b=np.zeros_like(l_deg) * u.deg, frame="galactic").icrs
    assert np.max(np.abs(dec_deg - ref.dec.deg)) < 1e-4
    # The plane reaches Dec +/-62.87 deg = +/-(90 - 27.128), the NGP declination (astropy's J2000 values after Blaauw et al. 1960).
    assert abs(np.max(dec_deg) - 62.8717) < 0.01


def test_coverage_atlas_two_culminations_zoom_and_partial_depth(tmp_path):
    """Below-pole settings get their own map; the main map spans only declinations where
    the plane (|dec| <= 62.87 + 3) can be met, so cells are readable; partial depth shades
    the 'already covered' strip."""
    starts = np.arange(0.0, 360.0, 1.0)
    dec = np.arange(-24.0, 90.1, 2.5)
    low = np.arange(52.0, 89.9, 2.5)
    fraction = np.zeros(360)
    fraction[40:45] = [0.2, 0.4, 0.6, 0.8, 1.0]
    fig = plots.coverage_atlas(dec, starts, np.ones((dec.size, 360)), reachable_dec=(-24.6, 90.0),
                               lower_dec_deg=low, lower_hours=np.ones((low.size, 360)),
                               covered_fraction=fraction, b_max_deg=3.0)
    _check_saves(fig, tmp_path, "atlas2")
    main = next(ax for ax in fig.axes if ax.get_ylabel().startswith("Declination"))
    lower = next(ax for ax in fig.axes if "below the pole" in ax.get_ylabel())
    lo, hi = main.get_ylim()
    assert lo == pytest.approx(-27.6) and hi == pytest.approx(62.8717 + 3 + 3, abs=0.01)
    assert "Below the pole" in lower.get_title()
    strip = next(ax for ax in fig.axes if "already covered" in [t.get_text() for t in ax.get_yticklabels()])
    shaded = strip.collections[0].get_array()
    assert shaded.count() == 5 and np.allclose(shaded.compressed(), fraction[40:45])


def test_coverage_atlas_rejects_a_wrong_shape():
    with pytest.raises(ValueError, match="usable_hours"):
        plots.coverage_atlas([0.0, 10.0], [0.0, 1.0, 2.0], np.zeros((3, 2)))


# ---------------------------------------------------------------- sky track and Sun circle


SUNS_L = np.array([5.0, 120.0, 300.0, 200.0])
SUNS_B = np.array([-10.0, 80.0, 0.0, -75.0])  # one near l = 0 (wrap), two enclosing a pole
RADIUS_DEG = 20.0


def test_avoidance_circle_is_on_the_sphere():
    lon, lat = plots.avoidance_circle_deg(SUNS_L, SUNS_B, RADIUS_DEG, points=181)
    assert lon.shape == (4, 181)
    sep = angular_separation(np.radians(lon), np.radians(lat),
                             np.radians(SUNS_L)[:, None], np.radians(SUNS_B)[:, None])
    # 1e-6 deg: pure float64 rotations, errors ~1e-13 rad.
    assert np.max(np.abs(np.degrees(sep) - RADIUS_DEG)) < 1e-6
    # A flat circle in (l, b) would fail this: near b = 80 the circle spans all longitudes.
    assert np.ptp(lon[1]) > 300.0


def test_sky_track_map(tmp_path):
    # Track of a parked Dec = +30 deg beam over a sidereal day: RA runs through 360 deg.
    ra = np.linspace(0.0, 360.0, 1441)
    l_deg, b_deg = icrs_to_galactic_deg(ra, np.full_like(ra, 30.0))
    fig = plots.sky_track_map(l_deg, b_deg, b_max_deg=3.0, in_passage=np.abs(b_deg) <= 3.0,
                              sun_l_deg=SUNS_L, sun_b_deg=SUNS_B, sun_radius_deg=RADIUS_DEG,
                              title="Dec +30°, March 2027")
    _check_saves(fig, tmp_path, "skytrack")
    _check_labels_and_legend(fig)
    ring = next(line for ax in fig.axes for line in ax.get_lines()
                if line.get_gid() == "sun-avoidance")
    x, y = np.asarray(ring.get_xdata(), float), np.asarray(ring.get_ydata(), float)
    ok = np.isfinite(x)
    sep_deg = np.degrees(angular_separation(
        np.radians(x[ok])[:, None], np.radians(y[ok])[:, None],
        np.radians(SUNS_L)[None, :], np.radians(SUNS_B)[None, :]))
    # Every drawn point lies on some Sun's circle (1e-6 deg: float64 rotations).
    assert np.max(np.min(np.abs(sep_deg - RADIUS_DEG), axis=1)) < 1e-6
    # No drawn segment jumps across the map at the 0/360 wrap.
    for line in fig.axes[0].get_lines():
        xs = np.asarray(line.get_xdata(), float)
        steps = np.abs(np.diff(xs))
        assert not np.any(steps[np.isfinite(steps)] > 180.0)


# ---------------------------------------------------------------- month chart


def test_month_chart_builds(drift_plan, tmp_path):
    fig = plots.month_chart(drift_plan)
    _check_saves(fig, tmp_path, "month")
    _check_labels_and_legend(fig)


def test_month_chart_bars_sit_at_the_local_times(drift_plan):
    fig = plots.month_chart(drift_plan)
    ax = fig.axes[0]
    # Rows run noon to noon; the period starts at 00:00 on Fri 26, inside the row of Thu 25.
    assert ax.get_yticklabels()[0].get_text() == "Thu 25 Mar"
    assert len(ax.get_yticks()) == 5  # rows of 25, 26, 27, 28, 29 March
    bars = _bars_by_row(fig, "recording")
    expected = [
        # Fri 26 (GMT = UTC): 20:10-21:40 -> x 20.1667 .. 21.6667 in row 1.
        (1, round(20 + 10 / 60, 6), round(21 + 40 / 60, 6)),
        # Sat 27 23:30 GMT to 02:15 UTC = 03:15 BST on Sunday: wall clock 23.5 .. 24 + 3.25 in
        # row 2 (3.75 clock hours for 2.75 elapsed hours: the clock skipped 01:00-02:00).
        (2, 23.5, 27.25),
        # Sun 28 10:00-12:30 UTC = 11:00-13:30 BST: 11:00-12:00 ends row 2 (x 35..36),
        # 12:00-13:30 starts row 3 (x 12..13.5).
        (2, 35.0, 36.0), (3, 12.0, 13.5),
        # Mon 29 19:00-20:00 UTC = 20:00-21:00 BST in row 4.
        (4, 20.0, 21.0),
    ]
    assert bars == sorted(expected)  # these four recordings, and nothing else
    # Every recording starts a bar at its plan *_local wall time, read by slicing the strings.
    starts = {x0 for _, x0, _ in bars}
    for day in drift_plan["days"]:
        for rec in day["recordings"]:
            hh, mm = int(rec["start_local"][11:13]), int(rec["start_local"][14:16])
            assert round(hh + mm / 60 + (24 if hh < 12 else 0), 6) in starts


def test_month_chart_windows_and_night(drift_plan):
    fig = plots.month_chart(drift_plan)
    windows = _bars_by_row(fig, "window")
    # Fri 26 "Mon–Fri 19:00–23:30" -> x 19 .. 23.5 in row 1.
    assert (1, 19.0, 23.5) in windows
    # Sat 27 "Sat 21:00-02:00": ends 02:00 BST on Sunday (02:00 exists after the jump) -> 21 .. 26.
    assert (2, 21.0, 26.0) in windows
    # Mon 29 19:00-23:30 BST, period ends at midnight -> 19 .. 23.5 in row 4.
    assert (4, 19.0, 23.5) in windows
    assert len(windows) == 3  # Sun 28 has no window; Thu 25 lies before the period
    # Night edges against ephem's sunset and sunrise: Sun centre at -0:50 (almanac altitude,
    # refraction and semi-diameter included in the -0.833 deg), pressure 0 = no extra refraction.
    obs = ephem.Observer()
    obs.lat, obs.lon, obs.elevation = "53.42", "-2.07", 180.0
    obs.pressure, obs.horizon = 0.0, "-0:50"
    obs.date = "2027/3/27 12:00"
    sunset = obs.next_setting(ephem.Sun(), use_center=True).datetime().replace(tzinfo=UTC)
    sunrise = obs.next_rising(ephem.Sun(), use_center=True).datetime().replace(tzinfo=UTC)

    def clock_h(moment, day_shift):  # wall-clock hours after Sat 27 00:00 local
        wall = moment.astimezone(LONDON)
        return 24 * day_shift + wall.hour + wall.minute / 60 + wall.second / 3600

    nights = [(x0, x1) for row, x0, x1 in _bars_by_row(fig, "night") if row == 2]
    assert len(nights) == 1  # Sat 27 noon to Sun 28 noon holds one night
    # 30 s: linear interpolation of a nearly straight altitude curve between 10-minute samples
    # (measured about 2 s) and ephem's apparent vs our geometric Sun (20 arcsec, about 1 s).
    assert abs(nights[0][0] - clock_h(sunset, 0)) < 30 / 3600
    # Sunrise on Sunday is read on the summer-time clock (about 06:45 BST, not 05:45).
    assert abs(nights[0][1] - clock_h(sunrise, 1)) < 30 / 3600
    assert nights[0][1] > 24 + 6.5


def test_month_chart_marks_reparks_and_clock_change(drift_plan):
    fig = plots.month_chart(drift_plan)
    ax = fig.axes[0]
    parks = [line for line in ax.get_lines() if line.get_gid() == "repark"]
    # Fri 26 19:00-19:15 GMT and Mon 29 18:00-18:15 UTC = 19:00-19:15 BST.
    assert sorted(tuple(np.round(line.get_xdata(), 6)) for line in parks) == [
        (19.0, 19.25), (19.0, 19.25)]
    notes = [t.get_text() for t in ax.texts]
    assert notes == ["clocks +1 h"]  # only the night of Sat 27 holds a change


def test_month_chart_without_windows_and_wrong_schema(drift_plan):
    plan = {**drift_plan, "settings": {**drift_plan["settings"], "windows": []}}
    fig = plots.month_chart(plan)
    assert not _patches(fig, "window")
    with pytest.raises(UserError, match="schema"):
        plots.month_chart({**drift_plan, "schema": "hiplan.survey/1"})


# ---------------------------------------------------------------- depth chart


def test_depth_chart(drift_plan, tmp_path):
    fig = plots.depth_chart(drift_plan)
    _check_saves(fig, tmp_path, "depth")
    _check_labels_and_legend(fig)
    ax = fig.axes[0]
    summary = drift_plan["summary"]
    for gid, key in (("depth-after", "depth_after_min"), ("depth-before", "depth_before_min")):
        got = {round((x0 + x1) / 2 - 0.5): y1 - y0 for x0, y0, x1, y1 in _patches(fig, gid)}
        assert got == {int(k): v for k, v in summary[key].items()}
    target = [line for line in ax.get_lines() if "target" in (line.get_label() or "")]
    assert target and np.allclose(target[0].get_ydata(), 60.0)


# ---------------------------------------------------------------- survey charts


def test_survey_chart(survey_plan, tmp_path):
    fig = plots.survey_chart(survey_plan)
    _check_saves(fig, tmp_path, "survey")
    _check_labels_and_legend(fig)
    ax = fig.axes[0]
    centres = sorted(round(p.get_y() + p.get_height() / 2, 6) for p in ax.patches)
    assert centres == [10.0, 120.0, 140.0, 350.0]
    elevation = fig.axes[1].get_lines()[0]
    assert list(elevation.get_ydata()) == [60.0, 61.0, 61.0, 45.0, 45.0, 46.0, 46.0, 30.0,
                                           30.0, 32.0, 32.0, 35.0, 35.0, 33.0]
    with pytest.raises(UserError, match="schema"):
        plots.survey_chart({**survey_plan, "schema": "hiplan.plan/1"})


def test_survey_sky(survey_plan, tmp_path):
    fig = plots.survey_sky(survey_plan)
    _check_saves(fig, tmp_path, "survey_sky")
    _check_labels_and_legend(fig)
    ax = fig.axes[0]
    assert [t.get_text() for t in ax.texts] == ["1", "2", "3", "4"]
    arrows = [p for p in ax.patches if type(p).__name__ == "FancyArrowPatch"]
    # Three steps; 120->140 and 140->10 stay on the map; 10->350 crosses l = 0 and is drawn
    # as two clipped arrows (leaving at the right edge, entering at the left).
    assert len(arrows) == 4


def test_month_chart_marks_the_replan_day(drift_plan):
    """A re-planned plan: the step at local midnight starting the re-plan day (24 h in the row
    of the evening before); rows run from Thu 25 Mar (row 0), so Sat 27 is row 2."""
    fig = plots.month_chart({**drift_plan, "replan": {"from_day": "2027-03-28", "kept_days": 2}})
    line = [ln for ln in fig.axes[0].get_lines() if ln.get_gid() == "replan"]
    assert len(line) == 1
    assert list(line[0].get_xdata()) == [12.0, 24.0, 24.0, 36.0]
    assert list(line[0].get_ydata()) == [2.5, 2.5, 1.5, 1.5]  # under row 2's evening, over its morning
    assert not [ln for ln in plots.month_chart(drift_plan).axes[0].get_lines() if ln.get_gid() == "replan"]
