"""Dish slew model: hand-worked moves, cable-wrap choices, refusal of non-steerable mounts."""
import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from planner.errors import UserError
from planner.slew import choose_drive_az, drive_options_deg, move_time_s, slew_model
from planner.sunsafety import slew_sun_sep_deg


@pytest.fixture(scope="module")
def model(school):
    # Saltbush Ridge: az 1.5 deg/s, el 1.0 deg/s, settle 10 s, drive azimuth -170 .. +350.
    return slew_model(school)


def test_model_from_site(model):
    assert (model.rate_az_deg_s, model.rate_el_deg_s, model.settle_s) == (1.5, 1.0, 10.0)
    assert (model.az_min_deg, model.az_max_deg) == (-170.0, 350.0)
    assert list(model.wrap_turns) == [-1, 0]
    # Longest move: the whole 520 deg of azimuth, 520 / 1.5 = 346.67 s, plus 10 s settling.
    assert model.max_slew_s == pytest.approx(356.6667, abs=1e-3)


@pytest.mark.parametrize("start, end, seconds", [
    # az 0 -> 90 at 1.5 deg/s = 60 s; el 30 -> 60 at 1 deg/s = 30 s; max 60 + settle 10 = 70 s.
    ((0.0, 30.0), (90.0, 60.0), 70.0),
    # Elevation-bound: az 10 deg = 6.7 s, el 40 deg = 40 s -> 50 s.
    ((100.0, 20.0), (110.0, 60.0), 50.0),
    # Across the wrap on the drive: -150 -> 300 is 450 deg of travel = 300 s, + 10 s.
    ((-150.0, 45.0), (300.0, 45.0), 310.0),
    # Tiny move: 0.3 deg az = 0.2 s + 10 s settle.
    ((200.0, 50.0), (200.3, 50.0), 10.2),
    # No move: nothing to wait for.
    ((12.0, 34.0), (12.0, 34.0), 0.0),
])
def test_hand_worked_moves(model, start, end, seconds):
    assert float(move_time_s(model, start[0], start[1], end[0], end[1])) == pytest.approx(seconds)


def test_wrap_options(model):
    # Sky az 200 is drive 200 or 200 - 360 = -160; sky 10 only drive 10 (370 > 350);
    # sky 355 only drive -5 (355 > 350).
    assert list(drive_options_deg(model, 200.0)) == [-160.0, 200.0]
    assert np.isnan(drive_options_deg(model, 10.0)).tolist() == [True, False]
    opts = drive_options_deg(model, 355.0)
    assert opts[0] == -5.0 and np.isnan(opts[1])


@pytest.mark.parametrize("from_drive, to_sky, expect_drive, expect_s", [
    # From drive -100 (sky 260) to sky 200: -160 is 60 deg away (40 s), 200 is 300 deg (200 s).
    (-100.0, 200.0, -160.0, 40.0 + 10.0),
    # From drive 300 to sky 200: 200 is 100 deg away (66.7 s), -160 is 460 deg.
    (300.0, 200.0, 200.0, 100 / 1.5 + 10.0),
    # From drive 340 to sky 10: 370 is out of range, so the long way, 330 deg = 220 s.
    (340.0, 10.0, 10.0, 220.0 + 10.0),
])
def test_shortest_legal_move(model, from_drive, to_sky, expect_drive, expect_s):
    drive, secs = choose_drive_az(model, from_drive, 40.0, to_sky, 40.0)
    assert float(drive) == pytest.approx(expect_drive)
    assert float(secs) == pytest.approx(expect_s)


def test_track_must_stay_in_range(model):
    # Sky az 340 reached from drive 330: drive 340 is 10 deg away, but a track that then
    # moves +15 deg would end at drive 355 > 350, so -20 (350 deg away) is the legal choice.
    drive, secs = choose_drive_az(model, 330.0, 40.0, 340.0, 40.0, 0.0, 15.0)
    assert float(drive) == pytest.approx(-20.0)
    assert float(secs) == pytest.approx(350 / 1.5 + 10.0)
    # A track wider than the whole range has no legal choice.
    drive, secs = choose_drive_az(model, 0.0, 40.0, 100.0, 40.0, -300.0, 300.0)
    assert np.isnan(drive) and np.isinf(secs)


def test_vectorized_over_targets(model):
    drive, secs = choose_drive_az(model, np.array([-100.0, 300.0]), np.array([40.0, 40.0]),
                                  np.array([200.0, 200.0]), np.array([40.0, 40.0]))
    assert drive.tolist() == [-160.0, 200.0]
    assert secs.shape == (2,)


@settings(max_examples=200, deadline=None)
@given(st.floats(-170, 350), st.floats(15, 88), st.floats(0, 359.999), st.floats(15, 88))
def test_chosen_move_is_legal_and_shortest(school, from_drive, from_el, to_az, to_el):
    model = slew_model(school)
    drive, secs = choose_drive_az(model, from_drive, from_el, to_az, to_el)
    assert model.az_min_deg <= drive <= model.az_max_deg
    assert (drive - to_az) % 360.0 == pytest.approx(0.0, abs=1e-6) or \
        (drive - to_az) % 360.0 == pytest.approx(360.0, abs=1e-6)
    # Every other legal representation is at least as far.
    for k in (-2, -1, 0, 1, 2):
        other = to_az + 360.0 * k
        if model.az_min_deg <= other <= model.az_max_deg:
            assert abs(drive - from_drive) <= abs(other - from_drive) + 1e-9
    assert secs <= model.max_slew_s + 1e-9


def test_transit_mount_refused(club, school):
    with pytest.raises(UserError, match="altaz"):
        slew_model(club)
    no_rates = dataclasses.replace(school, dish=dataclasses.replace(school.dish, slew_az_deg_s=None))
    with pytest.raises(UserError, match="slew"):
        slew_model(no_rates)


# ------------------------------------------------------------------ feed safety

# About the clearance the survey asks of Saltbush Ridge slews: 10 deg of feed safety plus
# 1.63 deg of margin (planner.survey.slew_sun_margin_deg), rounded.
CLEAR = 11.7


def test_sun_on_the_short_path_forces_the_long_way(model):
    # From drive -100 (sky 260) to sky 200 at elevation 40: the short move is drive -160
    # (60 deg of azimuth, 40 s + 10 s settle); the long one is drive +200 (300 deg through
    # north, 200 s + 10 s). The Sun at elevation 40, azimuth 230 sits on the short path
    # (drive -130). The long one passes sky azimuths 260..360 and 0..200, so its nearest
    # points are its ends, 30 deg of azimuth away at elevation 40:
    # cos d = sin^2 40 + cos^2 40 cos 30 = 0.4132 + 0.5082, d = 22.9 deg, clear of CLEAR.
    free = choose_drive_az(model, -100.0, 40.0, 200.0, 40.0)
    assert float(free[0]) == pytest.approx(-160.0) and float(free[1]) == pytest.approx(50.0)
    drive, secs = choose_drive_az(model, -100.0, 40.0, 200.0, 40.0, sun_alt_deg=40.0,
                                  sun_az_deg=230.0, sun_clear_deg=CLEAR)
    assert float(drive) == pytest.approx(200.0)
    assert float(secs) == pytest.approx(300 / 1.5 + 10.0)
    # The same Sun 12 deg off the path (elevation 52) leaves the short move legal: the
    # clearance is a distance, not a side of the sky.
    drive, _ = choose_drive_az(model, -100.0, 40.0, 200.0, 40.0, sun_alt_deg=52.0,
                               sun_az_deg=230.0, sun_clear_deg=CLEAR)
    assert float(drive) == pytest.approx(-160.0)


def test_sun_near_the_start_refuses_every_move(model):
    # Every path starts where the dish is; with the Sun 5 deg above it no choice is legal.
    drive, secs = choose_drive_az(model, -100.0, 40.0, 200.0, 40.0, sun_alt_deg=45.0,
                                  sun_az_deg=260.0, sun_clear_deg=CLEAR)
    assert np.isnan(drive) and np.isinf(secs)


def test_sun_guard_is_vectorized_and_pruned(model):
    # A Sun far below every path (night) costs no tracing and changes nothing.
    starts = np.array([-100.0, 300.0, 0.0])
    free = choose_drive_az(model, starts, 40.0, 200.0, 40.0)
    night = choose_drive_az(model, starts, 40.0, 200.0, 40.0, sun_alt_deg=-30.0,
                            sun_az_deg=np.array([230.0, 250.0, 100.0]), sun_clear_deg=CLEAR)
    assert np.array_equal(free[0], night[0]) and np.array_equal(free[1], night[1])


def test_many_starts_one_target_broadcasts(model):
    # Regression: one target position against an array of start positions (the survey's
    # gap filling) used to fail inside take_along_axis.
    drive, secs = choose_drive_az(model, np.array([-100.0, 300.0, 340.0]),
                                  np.array([40.0, 40.0, 40.0]), 200.0, 40.0, 0.0, 0.0)
    assert drive.tolist() == [-160.0, 200.0, 200.0]
    assert secs.shape == (3,)


@settings(max_examples=100, deadline=None)
@given(st.floats(-170, 350), st.floats(15, 88), st.floats(0, 359.999), st.floats(15, 88),
       st.floats(-10, 89), st.floats(0, 359.999))
def test_sun_guard_agrees_with_the_traced_path(school, from_drive, from_el, to_az, to_el,
                                               sun_alt, sun_az):
    # The pruning bound never clears a path the full trace would refuse: the chosen move's
    # traced distance is at least the clearance, and a refused target has no clear choice.
    model = slew_model(school)
    clear = CLEAR
    drive, secs = choose_drive_az(model, from_drive, from_el, to_az, to_el, sun_alt_deg=sun_alt,
                                  sun_az_deg=sun_az, sun_clear_deg=clear)
    options = drive_options_deg(model, to_az)
    traced = [float(slew_sun_sep_deg(from_drive, from_el, o, to_el, model.rate_az_deg_s,
                                     model.rate_el_deg_s, sun_alt, sun_az))
              for o in options if np.isfinite(o)]
    if np.isfinite(secs):
        assert float(slew_sun_sep_deg(from_drive, from_el, drive, to_el, model.rate_az_deg_s,
                                      model.rate_el_deg_s, sun_alt, sun_az)) >= clear
    else:
        assert all(sep < clear for sep in traced)
