"""Radiometer equation, drift time and day averaging against hand-worked values and geometry."""
import math

import numpy as np
import pytest
from astropy.coordinates import angular_separation
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.errors import UserError
from planner.sensitivity import days_to_reach, drift_time_s, radiometer_rms_k, rms_after_days

# Mean sidereal day, 86164.0905 s (Astronomical Almanac; from memory). It is measured
# against the precessing equinox; the Earth rotation angle rate used by the code is against
# the fixed stars, 0.0084 s/day (1e-7 relative) slower, so comparisons allow 1e-6 relative.
SIDEREAL_DAY_S = 86164.0905
SIDEREAL_REL = 1e-6


def test_radiometer_hand_worked():
    # Tsys 110 K, channel 2.4 MHz / 1024 = 2343.75 Hz, 60 s:
    # dnu * tau = 2343.75 * 60 = 140625 = 375^2, sigma = 110 / 375 = 0.293333 K.
    # Tolerance: exact arithmetic apart from float rounding.
    assert radiometer_rms_k(110.0, 2343.75, 60.0) == pytest.approx(110.0 / 375.0, rel=1e-14)
    assert radiometer_rms_k(110.0, 2343.75, 60.0) == pytest.approx(0.293333, abs=1e-6)


def test_radiometer_scaling_laws():
    base = radiometer_rms_k(110.0, 2343.75, 60.0)
    # sigma ~ 1/sqrt(tau) and 1/sqrt(dnu): four times either halves the noise.
    assert radiometer_rms_k(110.0, 2343.75, 240.0) == pytest.approx(base / 2, rel=1e-14)
    assert radiometer_rms_k(110.0, 4 * 2343.75, 60.0) == pytest.approx(base / 2, rel=1e-14)
    # Linear in Tsys and in the switching factor.
    assert radiometer_rms_k(220.0, 2343.75, 60.0) == pytest.approx(2 * base, rel=1e-14)
    assert radiometer_rms_k(110.0, 2343.75, 60.0, switching_factor=2.0) == pytest.approx(2 * base, rel=1e-14)


def test_radiometer_broadcasts():
    tau_s = np.array([60.0, 240.0, 960.0])
    sigma_k = radiometer_rms_k(110.0, 2343.75, tau_s)
    assert sigma_k.shape == (3,)
    # 110/375, then halved twice.
    assert np.allclose(sigma_k, [110 / 375, 110 / 750, 110 / 1500], rtol=1e-14, atol=0)


@pytest.mark.parametrize("name", ["tsys_k", "channel_width_hz", "integration_s", "switching_factor"])
@pytest.mark.parametrize("bad", [0.0, -1.0, math.nan, math.inf])
def test_radiometer_rejects_non_positive(name, bad):
    args = {"tsys_k": 110.0, "channel_width_hz": 2343.75, "integration_s": 60.0, "switching_factor": 1.0}
    args[name] = bad
    with pytest.raises(UserError, match=name):
        radiometer_rms_k(**args)


def test_radiometer_rejects_one_bad_element():
    with pytest.raises(UserError, match="integration_s"):
        radiometer_rms_k(110.0, 2343.75, np.array([60.0, 0.0]))


def test_drift_time_equator_hand_worked():
    # 4.93 deg beam at dec 0: 4.93 / 15.041 deg/h = 0.32777 h = 1180.0 s.
    # Published check: a beam of 4.93 deg is 4.93/360 of a sidereal day,
    # 4.93 / 360 * 86164.0905 = 1179.969 s.
    t_s = drift_time_s(4.93, 0.0)
    assert t_s == pytest.approx(4.93 / 360 * SIDEREAL_DAY_S, rel=SIDEREAL_REL)
    # The rounded rate 15.041 deg/h is good to 5e-6 relative.
    assert t_s == pytest.approx(4.93 / 15.041 * 3600, rel=1e-5)
    assert round(float(t_s)) == 1180


def test_drift_time_grows_as_one_over_cos_dec_for_small_beams():
    dec_deg = np.array([0.0, 30.0, 45.0, 60.0, 75.0])
    t_s = drift_time_s(0.1, dec_deg)
    # The exact spherical time differs from HPBW / (rate cos dec) by order (HPBW tan dec)^2 / 96,
    # for 0.1 deg at dec 75 about 4.4e-7 relative; allow 1e-6.
    assert np.allclose(t_s / t_s[0], 1 / np.cos(np.radians(dec_deg)), rtol=1e-6, atol=0)
    assert np.all(np.diff(t_s) > 0)


@pytest.mark.parametrize("beam_deg, dec_deg", [(4.93, 20.0), (4.93, 60.0), (7.5, 80.0), (20.0, -70.0)])
def test_drift_time_matches_spherical_geometry(beam_deg, dec_deg):
    # At the beam edges (half the drift time either side of transit) the source must be
    # exactly HPBW/2 from the beam centre, measured with astropy's great-circle separation.
    t_s = drift_time_s(beam_deg, dec_deg)
    half_hour_angle_deg = 0.5 * t_s / SIDEREAL_DAY_S * 360.0
    sep = angular_separation(0.0, math.radians(dec_deg), math.radians(half_hour_angle_deg),
                             math.radians(dec_deg))
    # Sidereal-day rate against the code's rate: 1e-7 relative on the angle, so 1e-6 relative.
    assert math.degrees(sep) == pytest.approx(beam_deg / 2, rel=SIDEREAL_REL)


def test_drift_time_near_pole():
    # A source stays inside the half-power circle all day when its polar distance is at most
    # HPBW/4: 4.93/4 = 1.2325 deg, so dec 89 (1 deg) never leaves, dec 88 (2 deg) does.
    t_s = drift_time_s(4.93, np.array([88.0, 89.0, 90.0, -89.0, -90.0]))
    assert np.isfinite(t_s[0]) and t_s[0] > drift_time_s(4.93, 80.0)
    assert np.all(np.isinf(t_s[1:]))
    # Just outside polar distance HPBW/4 the source reaches the edge only after half a turn:
    # the drift time approaches one sidereal day.
    t_edge_s = drift_time_s(4.93, 90.0 - 4.93 / 4 - 1e-9)
    assert t_edge_s == pytest.approx(SIDEREAL_DAY_S, rel=1e-3)  # sqrt-like approach to the limit


@pytest.mark.parametrize("beam, dec, name", [(0.0, 0.0, "beamwidth_deg"), (-1.0, 0.0, "beamwidth_deg"),
                                             (200.0, 0.0, "beamwidth_deg"), (4.93, 91.0, "dec_deg"),
                                             (4.93, math.nan, "dec_deg")])
def test_drift_time_rejects_bad_input(beam, dec, name):
    with pytest.raises(UserError, match=name):
        drift_time_s(beam, dec)


def test_days_hand_worked():
    # 0.3 K per day to 0.1 K: (0.3 / 0.1)^2 = 9 days; after 9 days 0.3 / 3 = 0.1 K.
    # Tolerance: float rounding of 0.3/0.1 only.
    assert days_to_reach(0.3, 0.1) == pytest.approx(9.0, rel=1e-12)
    assert rms_after_days(0.3, 9.0) == pytest.approx(0.1, rel=1e-12)
    # Four days halve the noise.
    assert rms_after_days(0.3, 4.0) == pytest.approx(0.15, rel=1e-12)


@settings(max_examples=200, deadline=None)
@given(st.floats(1e-3, 10.0), st.floats(1e-3, 10.0))
def test_days_to_reach_inverts_rms_after_days(rms_day_k, target_k):
    days = days_to_reach(rms_day_k, target_k)
    # Square then square root: a few ulps.
    assert rms_after_days(rms_day_k, days) == pytest.approx(target_k, rel=1e-12)


def test_days_rejects_non_positive():
    with pytest.raises(UserError, match="target_rms_k"):
        days_to_reach(0.3, 0.0)
    with pytest.raises(UserError, match="days"):
        rms_after_days(0.3, -1.0)
