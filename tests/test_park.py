"""Declination advice: goals, ranking, extreme sites, and the park command."""
import dataclasses
import json

import numpy as np
import pytest

from planner.cli import main
from planner.coverage import sweep
from planner.errors import UserError
from planner.galactic import PLANE_DEC_LIMIT_DEG
from planner.park import advise, candidate_pointings, compact_bins, parse_want

START = 61465.0


def test_parse_want():
    m = parse_want("30-90,120-140")
    assert m.sum() == 60 + 20 and m[30] and not m[90] and m[139] and not m[140]
    wrap = parse_want("350-10")
    assert wrap.sum() == 20 and wrap[355] and wrap[5] and not wrap[10]
    assert parse_want(None).all()
    for bad in ("30", "a-b", "30-30", "10-400", "30-90,"):
        with pytest.raises(UserError, match="--want"):
            parse_want(bad)


def test_compact_bins():
    assert compact_bins([28, 29, 30, 41, 187, 188]) == "28–30, 41, 187–188"


def test_reachable_declinations_follow_latitude_and_limits(club):
    pointings = candidate_pointings(club, 1.0)
    upper = [p.dec_deg for p in pointings if p.culmination == "upper"]
    lower = [p for p in pointings if p.culmination == "lower"]
    # South limit: elevation 12 deg at the meridian -> dec = 53.42 - 78 = -24.58 deg, the
    # exact end of the range (not the nearest grid point, -24).
    assert min(upper) == pytest.approx(-24.58) and max(upper) == pytest.approx(90.0)
    assert -24.0 in upper  # and the grid
    # Below the pole, facing north above the 15 deg mask: dec from 90 - 53.42 + 15 = 51.58
    # (elevation 15) up to, not including, the pole; hour angle 180.
    assert min(p.dec_deg for p in lower) == pytest.approx(51.58)
    assert max(p.dec_deg for p in lower) < 90.0
    for p in lower:
        assert p.ha_deg == 180.0 and p.az_deg == 0.0
        assert p.alt_deg == pytest.approx(p.dec_deg + 53.42 - 90.0, abs=1e-9)


def test_below_pole_matches_astropy(club):
    """A below-pole candidate looks where astropy says that declination passes 12 h after
    its upper culmination: same declination of date, hour angle 180 deg."""
    import astropy.units as u
    from astropy.coordinates import CIRS, AltAz, EarthLocation, SkyCoord
    from astropy.time import Time
    loc = EarthLocation(lat=club.latitude_deg * u.deg, lon=club.longitude_deg * u.deg,
                        height=club.height_m * u.m)
    t = Time("2026-03-01T22:00:00", scale="utc")
    for p in [q for q in candidate_pointings(club) if q.culmination == "lower"][::3]:
        beam = SkyCoord(alt=p.alt_deg * u.deg, az=p.az_deg * u.deg,
                        frame=AltAz(obstime=t, location=loc, pressure=0 * u.hPa))
        cirs = beam.transform_to(CIRS(obstime=t, location=loc))
        # Topocentric CIRS: the declination of date a parked dish holds (0.01 deg: the
        # fast path's budget; aberration is inside astropy's CIRS here too).
        assert cirs.dec.deg == pytest.approx(p.dec_deg, abs=0.01)
        # CIRS right ascension counts from the CIO: hour angle = ERA + longitude - RA.
        local_era = t.earth_rotation_angle(club.longitude_deg * u.deg).deg
        ha = (local_era - cirs.ra.deg + 540.0) % 360.0 - 180.0
        assert abs(abs(ha) - 180.0) < 0.05  # within 3 s of time of the lower meridian


def test_grid_ends_and_facing(club):
    """An invented 47.5 deg N transit dish facing south with zenith reach: the top of its
    range is the zenith, dec 47.5, which the half-beam grid from -90 misses."""
    dish = dataclasses.replace(club.dish, facing="south", elevation_min_deg=17.0,
                               horizon_az_deg=(), horizon_el_deg=())
    site = dataclasses.replace(club, latitude_deg=47.5, dish=dish)
    decs = [p.dec_deg for p in candidate_pointings(site)]
    assert max(decs) == pytest.approx(47.5) and min(decs) == pytest.approx(47.5 - 90 + 17)
    assert all(p.culmination == "upper" for p in candidate_pointings(site))  # faces south only
    # The zenith setting sees longitudes 86-91 (the plane crosses dec 47.4 near l 88), so
    # the month's gap reasons must not call l 88-89 "never reachable".
    from planner.month import Goal, gap_reasons
    result = sweep(site, candidate_pointings(site), START, START + 2, per_occurrence=True)
    assert all(result.rows[-1].bin_total_s[b] > 0 for b in (87, 88, 89))
    goal = Goal(want=parse_want("86-92"), target_minutes=1e4, done_minutes=np.zeros(360))
    reasons = gap_reasons(result, goal, np.zeros(360), False)
    assert all(reasons[b] != "never reachable from this site" for b in (86, 87, 88, 89, 90))


@pytest.mark.parametrize("lat,expect_lo,expect_hi", [(78.0, -2.0, 90.0), (-35.0, -90.0, 45.0)])
def test_extreme_latitudes(club, lat, expect_lo, expect_hi):
    # Elevation limit 10 deg, no mask: reachable decs are lat-80 .. 90 (north) or -90 .. lat+80
    # (hand-worked: 78 - 80 = -2; -35 + 80 = 45).
    dish = dataclasses.replace(club.dish, elevation_min_deg=10.0, horizon_az_deg=(), horizon_el_deg=())
    site = dataclasses.replace(club, latitude_deg=lat, dish=dish)
    pointings = candidate_pointings(site, 1.0)
    decs = np.array([p.dec_deg for p in pointings])
    assert decs.min() >= expect_lo - 1 and decs.max() <= expect_hi + 1e-9
    result = sweep(site, pointings, START, START + 2)
    ranked = advise(result, np.ones(360, bool), np.zeros(360))
    assert ranked[0].score > 0
    for a in ranked:  # no NaN leaks, every row explained
        assert np.isfinite(a.score) and a.reason
        # Beyond the plane's reach plus the band (margin 0.5 deg: these are declinations of
        # date, up to 0.2 deg from J2000 by precession) the beam never meets the strip.
        if abs(a.pointing.dec_deg) > PLANE_DEC_LIMIT_DEG + site.rules.b_max_deg + 0.5:
            assert "never comes within" in a.reason


def test_nothing_reachable_is_a_clear_error(club, tmp_path, capsys):
    text = (club.source and open(club.source).read())
    # A horizon mask above the highest elevation the mount reaches: no setting at all
    # (a narrow elevation window alone would still leave the exact ends of its range).
    text = text.replace("elevation_min_deg = 12", "elevation_min_deg = 89.5").replace(
        "elevation_max_deg = 90", "elevation_max_deg = 89.9").replace(
        "horizon = [[0, 15], [170, 12], [190, 12], [350, 15]]", "horizon = [[0, 89.95], [180, 89.95]]")
    site_file = tmp_path / "steep.toml"
    site_file.write_text(text)
    code = main(["park", "--site", str(site_file), "--start", "2027-03-01", "--days", "2"])
    err = capsys.readouterr().err
    assert code == 2 and "no declination is reachable" in err


def test_ranking_prefers_wanted_and_uncovered(club):
    pointings = candidate_pointings(club, 2.5)
    result = sweep(club, pointings, START, START + 10)
    want = parse_want("120-140")
    best = advise(result, want, np.zeros(360))[0]
    assert set(range(120, 140)) & set(best.usable_bins)
    # Once the log says 120-140 is done, nothing scores: the ranking falls back to hours.
    done = np.where(want, 1000.0, 0.0)
    ranked = advise(result, want, done)
    assert all(a.score == 0 for a in ranked)
    hours = [a.usable_hours for a in ranked]
    assert hours == sorted(hours, reverse=True)


def test_park_command_json(capsys):
    code = main(["park", "--start", "2027-03-01", "--days", "7", "--want", "30-90,120-140",
                 "--log", "examples/observation-log.csv", "--windows", "daily 18:00-23:59",
                 "--format", "json"])
    out = capsys.readouterr().out
    assert code == 0
    doc = json.loads(out)
    assert doc["schema"] == "hiplan.park/1" and "site" in doc
    rows = doc["declinations"]
    for key in ("dec_deg", "elevation_deg", "l_ranges", "passages_per_day", "sun_lost_fraction",
                "usable_hours", "lsr_corr_min_kms", "lsr_corr_max_kms", "score"):
        assert key in rows[0]
    scores = [r["score"] for r in rows]
    assert scores == sorted(scores, reverse=True)
    assert [r["rank"] for r in rows] == list(range(1, len(rows) + 1))


def test_park_deterministic(capsys):
    argv = ["park", "--start", "2027-03-01", "--days", "5", "--format", "json"]
    main(argv)
    first = capsys.readouterr().out
    main(argv)
    assert capsys.readouterr().out == first


def test_park_plots_written(tmp_path, capsys):
    atlas = tmp_path / "atlas.svg"
    assert main(["park", "--start", "2027-03-01", "--days", "3", "--plot", str(atlas)]) == 0
    capsys.readouterr()
    assert atlas.read_text().lstrip().startswith(("<?xml", "<svg"))
    assert (tmp_path / "atlas-sky.svg").stat().st_size > 1000
    assert main(["park", "--start", "2027-03-01", "--days", "3", "--plot", str(tmp_path / "x.pdf")]) == 2
    assert "--plot: " in capsys.readouterr().err


JUNE_2027 = 61566.0  # 2027-06-10 00:00 UTC


def test_unsafe_settings_never_rank_above_safe(club):
    """June at Hollowmere: Dec +23.3 has the Sun 0.0-0.3 deg from the beam at noon every day
    (the Sun's declination is +23.0 .. +23.4). It must be marked unsafe, ranked below every
    safe setting and never recommended, whatever it would score."""
    from planner.park import recommended
    from planner.sunsafety import sun_approaches
    pointings = candidate_pointings(club, extra=())
    result = sweep(club, pointings, JUNE_2027, JUNE_2027 + 14)
    approaches = sun_approaches(club, pointings, JUNE_2027, JUNE_2027 + 14)
    ranked = advise(result, parse_want("40-70"), np.zeros(360), approaches=approaches)
    safe = [a.sun_safe for a in ranked]
    assert safe == sorted(safe, reverse=True)  # every safe setting before every unsafe one
    assert all(a.sun_safe and a.score > 0 for a in recommended(ranked))
    near = min(ranked, key=lambda a: abs(a.pointing.dec_deg - 23.3))
    assert not near.sun_safe and near.sun_closest_deg < 0.5 and "UNSAFE" in near.reason
    assert len(near.hazard_dates) == 14
    # Safe rows keep the Sun beyond the limit all period (as computed), unsafe ones not.
    for a in ranked:
        assert a.sun_safe == (not np.any(approaches.hazard & (approaches.row == pointings.index(a.pointing))))


def test_june_park_command_gives_no_unsafe_advice(capsys):
    code = main(["park", "--site", "hollowmere", "--start", "2027-06-10", "--days", "14",
                 "--want", "40-70", "--format", "json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0 and doc["site"]["sun_hazard_deg"] == 10.0
    rows = {r["rank"]: r for r in doc["declinations"]}
    assert doc["recommended"] and all(rows[k]["sun_safe"] for k in doc["recommended"])
    unsafe = [r for r in doc["declinations"] if not r["sun_safe"]]
    assert unsafe and all(r["sun_hazard_dates"] and r["sun_closest_deg"] < 10 for r in unsafe)
    first_unsafe = min(r["rank"] for r in unsafe)
    assert all(r["sun_safe"] for r in doc["declinations"] if r["rank"] < first_unsafe)


def test_readme_first_example_recommends_a_real_setting(capsys):
    """The README's first example (night only, March) is served below the pole."""
    code = main(["park", "--site", "hollowmere", "--start", "2027-03-01", "--days", "30",
                 "--want", "30-90,120-140", "--log", "examples/observation-log.csv", "--night-only",
                 "--format", "json"])
    doc = json.loads(capsys.readouterr().out)
    assert code == 0 and doc["recommended"]
    best = doc["declinations"][doc["recommended"][0] - 1]
    assert best["score"] >= 10 and best["culmination"] == "lower" and best["facing"] == "north"


def test_nothing_to_recommend_is_said(capsys):
    # Early March, l 60-62 (dec +24) crosses the meridian by day only, and Hollowmere
    # cannot reach dec +24 below the pole: nothing serves it at night.
    code = main(["park", "--site", "hollowmere", "--start", "2027-03-01", "--days", "3",
                 "--want", "60-62", "--night-only"])
    out = capsys.readouterr().out
    assert code == 0 and "None: no Sun-safe setting serves" in out


def test_night_definitions_against_astropy(club):
    """Usable passages under --night civil have the Sun below -6 deg (astropy) at start,
    middle and end; civil night never gives more usable time than horizon night."""
    import astropy.units as u
    from astropy.coordinates import AltAz, EarthLocation, get_sun
    from astropy.time import Time
    from planner.avoidance import NIGHT_SUN_ALTITUDE_DEG
    pointings = [p for p in candidate_pointings(club) if p.culmination == "lower"][:3]
    by_kind = {k: sweep(club, pointings, START, START + 5, night_only=True, night_sun_alt_deg=v)
               for k, v in NIGHT_SUN_ALTITUDE_DEG.items()}
    hours = [sum(r.bin_usable_s.sum() for r in res.rows) for res in by_kind.values()]
    assert hours == sorted(hours, reverse=True)  # horizon >= sunset >= civil >= ...
    occ = by_kind["civil"].rows[0].occurrences
    use = np.flatnonzero(occ.usable)
    assert use.size
    t = np.concatenate([occ.start_mjd[use], 0.5 * (occ.start_mjd + occ.end_mjd)[use], occ.end_mjd[use]])
    loc = EarthLocation(lat=club.latitude_deg * u.deg, lon=club.longitude_deg * u.deg)
    frame = AltAz(obstime=Time(t, format="mjd"), location=loc)
    alt = get_sun(frame.obstime).transform_to(frame).alt.deg
    assert np.all(alt < -6.0 + 0.01)  # 0.01 deg: the fast Sun position's budget
