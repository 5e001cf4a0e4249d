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
    decs = [p.dec_deg for p in candidate_pointings(club, 1.0)]
    # South limit: elevation 12 deg at the meridian -> dec = 53.42 - 78 = -24.58 deg.
    assert min(decs) == pytest.approx(-24.0) and max(decs) == pytest.approx(90.0)


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
        if abs(a.pointing.dec_deg) > PLANE_DEC_LIMIT_DEG + site.rules.band_deg + 0.5:
            assert "never comes within" in a.reason


def test_nothing_reachable_is_a_clear_error(club, tmp_path, capsys):
    text = (club.source and open(club.source).read())
    text = text.replace("elevation_min_deg = 12", "elevation_min_deg = 89.5").replace(
        "elevation_max_deg = 90", "elevation_max_deg = 89.9")
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
