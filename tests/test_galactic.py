"""Galactic frame against published definitions and astropy."""
import numpy as np
from astropy.coordinates import FK4, SkyCoord
import astropy.units as u

from planner.galactic import (PLANE_DEC_LIMIT_DEG, galactic_to_icrs_deg, icrs_to_galactic_deg,
                              plane_declination_deg)


def test_pole_and_centre_match_published_j2000_values():
    # NGP J2000: RA 192.8594812, Dec +27.1282512; (l, b) = (0, 0) at RA 266.4051, Dec -28.936175
    # (astropy's documented J2000 values, derived from Blaauw et al. 1960, MNRAS 121, 123).
    ra, dec = galactic_to_icrs_deg(0.0, 90.0)
    assert abs(ra - 192.8594812) < 1e-6 and abs(dec - 27.1282512) < 1e-6
    ra, dec = galactic_to_icrs_deg(0.0, 0.0)
    # 1e-3 deg: the published centre position is given to 4-6 decimals.
    assert abs(ra - 266.4051) < 1e-3 and abs(dec - (-28.936175)) < 1e-3


def test_iau_1958_b1950_pole_is_b_90():
    # IAU 1958 definition (Blaauw et al. 1960): NGP at B1950 RA 192.25, Dec +27.4 (FK4).
    # astropy precesses FK4 -> ICRS; our frame must put that point at b = +90 within
    # 0.01 deg (the 1958 definition's own rounding of the pole to 0.05 deg / 0.1 deg).
    pole = SkyCoord(192.25 * u.deg, 27.4 * u.deg, frame=FK4(equinox="B1950")).icrs
    _, b = icrs_to_galactic_deg(pole.ra.deg, pole.dec.deg)
    assert b > 89.99


def test_sgr_a_star_near_centre():
    # Sgr A*: RA 17h45m40.0409s, Dec -29d00m28.118s J2000 (Reid & Brunthaler 2004, ApJ 616, 872);
    # its galactic position is l = 359.944 deg, b = -0.046 deg (from memory), 0.002 deg tolerance.
    ra = (17 + 45 / 60 + 40.0409 / 3600) * 15
    dec = -(29 + 0 / 60 + 28.118 / 3600)
    l, b = icrs_to_galactic_deg(ra, dec)
    assert abs(l - 359.944) < 0.002 and abs(b + 0.046) < 0.002


def test_plane_declination_extremes():
    # The plane reaches +/-(90 - 27.1282512) = +/-62.8717 deg (NGP declination, astropy's J2000 values after Blaauw et al. 1960).
    decs = plane_declination_deg(np.linspace(0, 360, 36001))
    assert abs(decs.max() - 62.8717) < 1e-3 and abs(decs.min() + 62.8717) < 1e-3
    assert abs(PLANE_DEC_LIMIT_DEG - 62.8717488) < 1e-6


def test_agrees_with_astropy_everywhere(rng):
    ra = rng.uniform(0, 360, 2000)
    dec = np.degrees(np.arcsin(rng.uniform(-1, 1, 2000)))
    l, b = icrs_to_galactic_deg(ra, dec)
    ref = SkyCoord(ra * u.deg, dec * u.deg).galactic
    sep = SkyCoord(l * u.deg, b * u.deg, frame="galactic").separation(ref).arcsec
    # 0.1 arcsec: we neglect the ICRS-FK5 frame bias (~0.02 arcsec) that astropy applies.
    assert sep.max() < 0.1
    ra2, dec2 = galactic_to_icrs_deg(l, b)
    assert np.max(np.abs((ra2 - ra + 180) % 360 - 180) * np.cos(np.radians(dec))) < 1e-9
