"""Dish slew model: hand-worked moves, cable-wrap choices, refusal of non-steerable mounts."""
import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from planner.errors import UserError
from planner.slew import choose_drive_az, drive_options_deg, move_time_s, slew_model


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
