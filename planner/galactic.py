"""The galactic coordinate frame: rotation matrix and conversions.

The frame is the IAU 1958 system (Blaauw et al. 1960, MNRAS 121, 123) carried to
J2000 as astropy does it: north galactic pole at RA 192.8594812 deg,
Dec +27.1282512 deg, galactic longitude of the north celestial pole
122.9319186 deg. The ICRS/FK5-J2000 frame bias (~0.02 arcsec) is neglected.
Consequence used throughout: the galactic plane (b = 0) reaches declinations
+/-(90 - 27.1282512) = +/-62.8717 deg.
"""
from __future__ import annotations

import numpy as np

from .earth import spherical_deg, unit_vectors

NGP_RA_DEG = 192.8594812065348
NGP_DEC_DEG = 27.12825118085622
NCP_L_DEG = 122.9319185680026
PLANE_DEC_LIMIT_DEG = 90.0 - NGP_DEC_DEG


def _rot(axis: int, angle_deg: float) -> np.ndarray:
    """Passive rotation of the coordinate axes about ``axis`` (0=x, 1=y, 2=z)."""
    a = np.radians(angle_deg)
    c, s = np.cos(a), np.sin(a)
    i, j = [(1, 2), (2, 0), (0, 1)][axis]
    m = np.eye(3)
    m[i, i] = c
    m[j, j] = c
    m[i, j] = s
    m[j, i] = -s
    return m


# v_gal = ICRS_TO_GALACTIC @ v_icrs: turn the NGP to +z, then l of the NCP to its value.
ICRS_TO_GALACTIC = _rot(2, 180.0 - NCP_L_DEG) @ _rot(1, 90.0 - NGP_DEC_DEG) @ _rot(2, NGP_RA_DEG)
GALACTIC_TO_ICRS = ICRS_TO_GALACTIC.T


def icrs_to_galactic_deg(ra_deg, dec_deg) -> tuple[np.ndarray, np.ndarray]:
    """(l, b) in degrees, l in [0, 360), from ICRS RA/Dec in degrees."""
    return spherical_deg(unit_vectors(ra_deg, dec_deg) @ ICRS_TO_GALACTIC.T)


def galactic_to_icrs_deg(l_deg, b_deg) -> tuple[np.ndarray, np.ndarray]:
    """ICRS (RA in [0, 360), Dec) in degrees from galactic l/b in degrees."""
    return spherical_deg(unit_vectors(l_deg, b_deg) @ GALACTIC_TO_ICRS.T)


def plane_declination_deg(l_deg) -> np.ndarray:
    """ICRS declination (deg) of the point (l, b=0) on the galactic plane."""
    return galactic_to_icrs_deg(l_deg, np.zeros_like(np.asarray(l_deg, dtype=float)))[1]
