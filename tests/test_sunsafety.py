"""Feed safety: Sun approaches to parked and moving beams, against astropy and by hand."""
import dataclasses

import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import AltAz, EarthLocation, SkyCoord, get_sun
from astropy.time import Time

from planner.pointing import below_pole_at_dec, from_altaz, on_meridian_at_dec
from planner.sunsafety import (PATH_STEP_DEG, meridian_angle_deg, meridian_move_sun_sep_deg, slew_sun_sep_deg,
                               sun_approaches, sun_hour_angle_deg, sun_safe_stow)

JUNE = 61202.0  # 2026-06-10 00:00 UTC, inside the bundled IERS table
DECEMBER = 61385.0  # 2026-12-10


def _location(site):
    return EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                         height=site.height_m * u.m)


def _arctic(club):
    """An invented 78 deg N site (midnight Sun in June) with a low elevation limit."""
    dish = dataclasses.replace(club.dish, elevation_min_deg=3.0, horizon_az_deg=(), horizon_el_deg=())
    return dataclasses.replace(club, name="Arctic test", latitude_deg=78.2, longitude_deg=15.6,
                               height_m=10.0, dish=dish)


def _astropy_sun_sep(site, pointing, mjd):
    """Separation (deg) of the apparent topocentric Sun from a fixed alt/az, full astropy."""
    frame = AltAz(obstime=Time(mjd, format="mjd", scale="utc"), location=_location(site))
    beam = SkyCoord(alt=np.full(mjd.shape, pointing.alt_deg) * u.deg,
                    az=np.full(mjd.shape, pointing.az_deg) * u.deg, frame=frame)
    return beam.separation(get_sun(frame.obstime).transform_to(frame)).deg


def _cases(club, school):
    arctic = _arctic(club)
    return [
        (club, JUNE, [on_meridian_at_dec(club, 23.0), on_meridian_at_dec(club, 16.0),
                      on_meridian_at_dec(club, 45.0), below_pole_at_dec(club, 62.0),
                      from_altaz(club, 40.0, 230.0)]),
        (school, DECEMBER, [on_meridian_at_dec(school, -23.0), on_meridian_at_dec(school, -30.0),
                            on_meridian_at_dec(school, 0.0), from_altaz(school, 60.0, 200.0)]),
        (arctic, JUNE, [below_pole_at_dec(arctic, 20.0), below_pole_at_dec(arctic, 30.0),
                        on_meridian_at_dec(arctic, 25.0), from_altaz(arctic, 20.0, 270.0)]),
    ]


def test_closest_approaches_match_astropy(club, school):
    """Every daily closest approach against astropy sampled each minute for +/-90 min.

    Requirement: separation within 0.05 deg, time within 60 s. The minute grid finds the
    minimum to within one sample, so the time check allows 60 s.
    """
    worst_sep = worst_dt = 0.0
    for site, start, pointings in _cases(club, school):
        found = sun_approaches(site, pointings, start, start + 3.0, limit_deg=10.0)
        # One approach per pointing per day (three days), at most one more at the edges.
        counts = np.bincount(found.row, minlength=len(pointings))
        assert np.all((counts >= 3) & (counts <= 4)), counts
        for r, p in enumerate(pointings):
            idx = np.flatnonzero(found.row == r)
            grid = found.closest_mjd[idx][:, None] + np.arange(-90, 91)[None, :] / 1440.0
            sep = _astropy_sun_sep(site, p, grid.ravel()).reshape(grid.shape)
            k = np.argmin(sep, axis=1)
            best = sep[np.arange(idx.size), k]
            worst_sep = max(worst_sep, np.max(np.abs(best - found.sep_deg[idx])))
            # Only approaches closer than 60 deg have a minimum sharp enough to time.
            sharp = found.sep_deg[idx] < 60.0
            dt = np.abs(k - 90)[sharp] * 60.0
            worst_dt = max(worst_dt, float(dt.max(initial=0.0)))
    assert worst_sep <= 0.05, worst_sep
    assert worst_dt <= 60.0, worst_dt


def test_entry_and_exit_bracket_the_limit(club):
    """Inside the reported window the Sun is closer than the limit; 30 s outside it is not."""
    site = club
    pointings = [on_meridian_at_dec(site, 23.0), on_meridian_at_dec(site, 18.0)]
    found = sun_approaches(site, pointings, JUNE, JUNE + 2.0, limit_deg=10.0)
    close = np.flatnonzero(found.within)
    assert close.size >= 4
    for i in close:
        p = pointings[found.row[i]]
        half = 30.0 / 86400.0  # the Sun moves 0.125 deg in 30 s; astropy agrees to 0.01 deg
        sep = _astropy_sun_sep(site, p, np.array([found.enter_mjd[i] - half, found.enter_mjd[i] + half,
                                                  found.exit_mjd[i] - half, found.exit_mjd[i] + half]))
        assert sep[0] > 10.0 > sep[1] and sep[2] < 10.0 < sep[3]


def test_hand_worked_noon_transit(club):
    """Dec +23 on the meridian in June: the Sun (dec ~ +23.0..+23.4) transits through the beam.

    Hand check: closest approach at local apparent noon, about 12:08 UTC at longitude
    2.07 W (12:00 + 4 min/deg x 2.07 deg + 0 to 1 min equation of time in mid-June), at
    a separation |dec_sun - 23| < 0.5 deg.
    """
    found = sun_approaches(club, [on_meridian_at_dec(club, 23.0)], JUNE, JUNE + 1.0)
    assert found.row.size == 1 and found.hazard[0]
    hours = (found.closest_mjd[0] - JUNE) * 24.0
    assert 12.0 + 7.0 / 60 < hours < 12.0 + 10.0 / 60
    assert found.sep_deg[0] < 0.5
    # At the closest instant the Sun's hour angle equals the beam's (0).
    assert abs(sun_hour_angle_deg(club, found.closest_mjd[0])[0]) < 0.02


def test_sun_below_horizon_is_not_a_hazard(club):
    """60 deg N, below the pole at dec +32 (elevation 2 deg) in June: the Sun passes ~9 deg
    away at local midnight, 6.6 deg below the horizon (23.4 + 60 - 90). Within the limit,
    harmless to the feed."""
    site = dataclasses.replace(club, latitude_deg=60.0)
    found = sun_approaches(site, [below_pole_at_dec(site, 32.0)], JUNE, JUNE + 2.0)
    assert found.within.any()
    assert not found.hazard.any()
    assert np.all(found.sun_alt_max_deg[found.within] < -5.0)


def test_midnight_sun_is_a_hazard(club):
    """78.2 deg N in June: below the pole at dec +20 (elevation 8.2 deg) the midnight Sun
    (elevation ~ 23.2 + 78.2 - 90 = 11.4 deg) passes ~3 deg from the beam."""
    site = _arctic(club)
    found = sun_approaches(site, [below_pole_at_dec(site, 20.0)], JUNE, JUNE + 2.0)
    assert found.hazard.sum() >= 2
    assert np.all(np.abs(found.sep_deg[found.hazard] - 3.2) < 0.5)


def test_closest_per_row(club):
    pointings = [on_meridian_at_dec(club, d) for d in (23.0, 0.0)]
    found = sun_approaches(club, pointings, JUNE, JUNE + 3.0)
    sep, when = found.closest_per_row(3)
    assert sep[0] < 0.5 and 22.0 < sep[1] < 24.0 and np.isinf(sep[2]) and np.isnan(when[2])


def test_meridian_move_through_the_sun(club):
    """Tipping a transit dish from dec 0 to dec 40 at noon in June sweeps across the Sun
    (dec 23); the same move at 20:00 UTC stays far from it. Checked by brute force with
    astropy: points every 0.1 deg along the arc against the Sun each minute."""
    a = on_meridian_at_dec(club, 0.0)
    b = on_meridian_at_dec(club, 40.0)
    th_a, th_b = meridian_angle_deg(a.alt_deg, a.az_deg), meridian_angle_deg(b.alt_deg, b.az_deg)
    for t0 in (JUNE + 12.0 / 24, JUNE + 20.0 / 24):
        ours, _ = meridian_move_sun_sep_deg(club, th_a, th_b, t0, t0 + 15.0 / 1440)
        mjd = t0 + np.arange(16) / 1440.0
        frame = AltAz(obstime=Time(mjd, format="mjd"), location=_location(club))
        sun = get_sun(frame.obstime).transform_to(frame)
        alts = np.arange(a.alt_deg, b.alt_deg + 0.05, 0.1)
        arc = SkyCoord(alt=np.repeat(alts, mjd.size) * u.deg, az=np.full(alts.size * mjd.size, 180.0) * u.deg,
                       frame="altaz")
        sun_rep = SkyCoord(alt=np.tile(sun.alt.deg, alts.size) * u.deg,
                           az=np.tile(sun.az.deg, alts.size) * u.deg, frame="altaz")
        brute = arc.separation(sun_rep).deg.min()
        assert ours == pytest.approx(brute, abs=0.06)  # 0.05 arc sampling + 0.01 fast path
    noon, _ = meridian_move_sun_sep_deg(club, th_a, th_b, JUNE + 0.5, JUNE + 0.5 + 15 / 1440)
    assert noon < 1.0


def _brute_slew(f_az, f_el, t_az, t_el, r_az, r_el, s_alt, s_az):
    """Independent check: walk the path in 1000 time steps, spherical law of cosines."""
    dur = max(abs(t_az - f_az) / r_az, abs(t_el - f_el) / r_el)
    tau = np.linspace(0, dur, 1001)
    az = f_az + np.sign(t_az - f_az) * np.minimum(r_az * tau, abs(t_az - f_az))
    el = f_el + np.sign(t_el - f_el) * np.minimum(r_el * tau, abs(t_el - f_el))
    cosd = (np.sin(np.radians(el)) * np.sin(np.radians(s_alt))
            + np.cos(np.radians(el)) * np.cos(np.radians(s_alt)) * np.cos(np.radians(az - s_az)))
    return np.degrees(np.arccos(np.clip(cosd, -1, 1))).min()


def test_slew_path_separation(rng):
    # Hand case: an azimuth-only slew along elevation 30 through the Sun at (30, 90): zero,
    # up to half a sampling step (0.125 deg of azimuth = 0.108 deg of arc at elevation 30).
    assert slew_sun_sep_deg(60.0, 30.0, 120.0, 30.0, 1.5, 1.0, 30.0, 90.0) <= PATH_STEP_DEG / 2
    # Elevation reaches 50 after 40 s while azimuth is still at 60 deg; the Sun at (50, 61)
    # is 0.64 deg from that path point (1 deg of azimuth at elevation 50).
    assert slew_sun_sep_deg(0.0, 10.0, 180.0, 50.0, 1.5, 1.0, 50.0, 61.0) == pytest.approx(
        _brute_slew(0.0, 10.0, 180.0, 50.0, 1.5, 1.0, 50.0, 61.0), abs=0.13)
    f_az, t_az = rng.uniform(-170, 350, 40), rng.uniform(-170, 350, 40)
    f_el, t_el = rng.uniform(15, 88, 40), rng.uniform(15, 88, 40)
    s_alt, s_az = rng.uniform(-10, 80, 40), rng.uniform(0, 360, 40)
    ours = slew_sun_sep_deg(f_az, f_el, t_az, t_el, 1.5, 1.0, s_alt, s_az)
    brute = np.array([_brute_slew(*args, 1.5, 1.0, sa, sz) for *args, sa, sz
                      in zip(f_az, f_el, t_az, t_el, s_alt, s_az)])
    # Both sample the path: ours every 0.25 deg (<= 0.125 deg too large), brute every
    # 0.52 deg at most (520 deg / 1000 steps).
    assert np.all(np.abs(ours - brute) < 0.3)


def test_stow_of_a_dish_that_cannot_face_the_pole(club):
    """A transit dish that only faces the equator stows on its own side, as high as it goes:
    at Hollowmere's zenith the Sun stays >= 53.4 - 23.44 = 30.0 deg away (astropy)."""
    mjd = JUNE + np.arange(0, 365, 1.0) + 0.5  # local noon: the Sun on the meridian, at its highest
    for lat, facing, az in ((53.42, "south", 180.0), (-34.9, "north", 0.0)):
        site = dataclasses.replace(club, latitude_deg=lat, longitude_deg=0.0,
                                   dish=dataclasses.replace(club.dish, mount="transit", facing=facing))
        stow = sun_safe_stow(site)
        assert stow.az_deg == pytest.approx(az % 360.0) and stow.alt_deg == site.dish.elevation_max_deg
        sep = _astropy_sun_sep(site, stow, mjd)
        assert sep.min() > abs(lat) - 23.44 - 0.5 and sep.min() > site.rules.sun_hazard_deg, (lat, sep.min())


def test_stow_is_far_from_the_sun_all_year(club, rng):
    mjd = JUNE + np.arange(0, 365, 3.0) + 0.37
    for lat in (-78.0, -34.9, -5.0, 0.0, 12.0, 53.4, 78.2):
        site = dataclasses.replace(club, latitude_deg=lat)
        stow = sun_safe_stow(site)
        sep = _astropy_sun_sep(site, stow, mjd)
        # Pole at or above the limit: >= 66.5 - small; equatorial sites stow at the
        # 15 deg mask limit, 15 deg off the pole: still >= 51 deg from the Sun.
        assert sep.min() > 45.0, (lat, sep.min())
