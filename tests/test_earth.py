"""Earth nodes and their interpolation against ERFA evaluated at every sample."""
import erfa
import numpy as np

from planner.earth import (AU_KM, LONG_SPAN_DAYS, earth_nodes, earth_state)
from planner.timebase import MJD_ZERO_JD, SECONDS_PER_DAY, tt_minus_utc_s

from conftest import MJD_HI, MJD_LO


def _direct(mjd):
    """c2i, barycentric velocity (km/s) and Sun vector straight from ERFA at each time."""
    tt = mjd + tt_minus_utc_s(mjd) / SECONDS_PER_DAY
    pvh, pvb = erfa.epv00(MJD_ZERO_JD, tt)
    return erfa.c2i06a(MJD_ZERO_JD, tt), pvb["v"] * (AU_KM / SECONDS_PER_DAY), -pvh["p"]


def _errors(span_days, rng):
    lo = rng.uniform(MJD_LO, MJD_HI - span_days)
    mjd = np.sort(rng.uniform(lo, lo + span_days, 3000))
    state = earth_state(mjd, earth_nodes(lo - 1.0, lo + span_days + 1.0))
    c2i, vel, sun = _direct(mjd)
    # Matrix error as a rotation angle (rad): the largest element of the difference.
    mat = np.abs(state.c2i - c2i).max()
    return mat, np.abs(state.earth_vel_kms - vel).max(), np.abs(state.sun_from_earth_au - sun).max()


def test_short_spans_linear_on_half_day_nodes(rng):
    nodes = earth_nodes(61000.0, 61030.0)
    assert nodes.order == 1 and np.allclose(np.diff(nodes.mjd_utc), 0.5)
    mat, vel, sun = _errors(30.0, rng)
    # Module docstring: 0.01 arcsec (5e-8 rad) and 3e-4 km/s.
    assert mat < 5e-8 and vel < 3e-4 and sun < 1e-4


def test_long_spans_quadratic_on_two_day_nodes(rng):
    nodes = earth_nodes(61000.0, 61000.0 + 2 * LONG_SPAN_DAYS)
    assert nodes.order == 2 and np.allclose(np.diff(nodes.mjd_utc), 2.0)
    for _ in range(3):  # three random years
        mat, vel, sun = _errors(365.0, rng)
        # Module docstring: under 0.01 arcsec (5e-8 rad) and 3e-4 km/s (0.3 m/s; the LSR
        # tests allow 5 m/s); the Sun direction to 5e-6 AU (1 arcsec).
        assert mat < 5e-8 and vel < 3e-4 and sun < 5e-6, (mat, vel, sun)


def test_rotation_at_utc_reads_no_earth_orientation(monkeypatch):
    """``ut1=False``: the rotation angle at UTC, without the EOP table (chart shading). It
    differs from the UT1 one by UT1-UTC times the Earth's rate (IERS: |UT1-UTC| < 0.9 s)."""
    mjd = np.linspace(61000.0, 61030.0, 50)
    with_ut1 = earth_state(mjd)
    import planner.earth as earth_module

    def no_table(_):
        raise AssertionError("the Earth-orientation table was read")
    monkeypatch.setattr(earth_module, "dut1_s", no_table)
    at_utc = earth_state(mjd, ut1=False)
    assert np.allclose(at_utc.c2i, with_ut1.c2i) and np.allclose(at_utc.sun_from_earth_au, with_ut1.sun_from_earth_au)
    turn_s = np.angle(np.exp(1j * (with_ut1.era_rad - at_utc.era_rad))) / (2 * np.pi * 1.00273781191135448) * 86400
    assert np.all(np.abs(turn_s) < 0.9) and np.ptp(turn_s) > 0  # moved, by under 0.9 s of time
