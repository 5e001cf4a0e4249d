"""Sun and Moon: where they are, how far the beam is from them, day or night.

Sun: geometric geocentric position from ERFA ``epv00`` (via ``earth``), good to
~20 arcsec (aberration neglected), far below any avoidance radius.
Moon: ERFA ``moon98`` (Meeus's simplified lunar theory, ~10 arcsec), made
topocentric by subtracting the site's geocentric position; the Moon's
parallax reaches 1 deg, so this matters for small separations.
Angles in degrees.
"""
from __future__ import annotations

import erfa
import numpy as np

from .earth import AU_KM, EarthState, earth_state, site_gcrs_position_m, spherical_deg
from .galactic import ICRS_TO_GALACTIC
from .site import Site
from .skytrack import icrs_to_altaz_deg, site_xyz_m
from .timebase import MJD_ZERO_JD, SECONDS_PER_DAY, tt_minus_utc_s

# Sun's altitude at sunrise/sunset: refraction 34' + semi-diameter 16' (almanac convention).
SUNSET_ALTITUDE_DEG = -0.833

# What counts as night: the Sun's geometric centre below these altitudes (deg).
# "horizon" is hiplan's documented default; the twilight limits are the standard
# definitions (Explanatory Supplement to the Astronomical Almanac, 1992, sec. 9.33:
# civil -6, nautical -12, astronomical -18 deg).
NIGHT_SUN_ALTITUDE_DEG = {
    "horizon": 0.0,
    "sunset": SUNSET_ALTITUDE_DEG,
    "civil": -6.0,
    "nautical": -12.0,
    "astronomical": -18.0,
}
DEFAULT_NIGHT = "horizon"


def _unit(vec: np.ndarray) -> np.ndarray:
    return vec / np.linalg.norm(vec, axis=-1, keepdims=True)


def sun_direction(state: EarthState) -> np.ndarray:
    """Geocentric unit vectors (N, 3) toward the Sun, ICRS axes."""
    return _unit(state.sun_from_earth_au)


def moon_direction(site: Site, state: EarthState) -> np.ndarray:
    """Topocentric unit vectors (N, 3) toward the Moon, GCRS axes."""
    mjd_tt = state.mjd_utc + tt_minus_utc_s(state.mjd_utc) / SECONDS_PER_DAY
    moon_au = erfa.moon98(MJD_ZERO_JD, mjd_tt)["p"]
    site_au = site_gcrs_position_m(state, site_xyz_m(site)) / (AU_KM * 1e3)
    return _unit(moon_au - site_au)


def separation_deg(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Angle (deg) between unit vectors a and b (N, 3); stable at small angles."""
    cross = np.linalg.norm(np.cross(a, b), axis=-1)
    dot = np.einsum("...i,...i->...", a, b)
    return np.degrees(np.arctan2(cross, dot))


def sun_altitude_deg(site: Site, state: EarthState) -> np.ndarray:
    """Sun's geometric altitude (deg) at the site (no refraction)."""
    alt, _ = icrs_to_altaz_deg(site, sun_direction(state), state)
    return alt


def sun_galactic_deg(mjd_utc) -> tuple[np.ndarray, np.ndarray]:
    """The Sun's galactic (l, b) in degrees at ``mjd_utc`` (geocentric, for maps)."""
    state = earth_state(np.atleast_1d(np.asarray(mjd_utc, dtype=float)))
    return spherical_deg(sun_direction(state) @ ICRS_TO_GALACTIC.T)
