"""Radial-velocity corrections to the barycentre and the local standard of rest.

Sign convention (used everywhere in hiplan):

``lsr_corr_kms`` is the value ADDED to a topocentric radial velocity to give
the LSR radial velocity, ``v_lsr = v_topo + lsr_corr``. It is (to first order
in v/c, see below) the component, along the unit vector n toward the
pointing, of the observer's velocity relative to the LSR::

    lsr_corr = (v_site_rot + v_earth_bary + v_sun_rel_lsr) . n

so it is positive when the observer moves toward the pointing direction.
``bary_corr_kms`` is the same without the solar-motion term. Both in km/s.
This is the additive form of the correction returned by astropy's
``SkyCoord.radial_velocity_correction`` (Wright & Eastman 2014, PASP 126, 838).

Frequency mapping: a line at LSR velocity ``v_lsr`` appears at the
topocentric radio velocity ``v_topo = v_lsr - lsr_corr``, i.e. at the sky
frequency ``f = f0 (1 - v_topo / c)`` (radio convention, v = c (f0 - f) / f0;
the conversion itself lives in ``planner.spectral``).

Velocities: Earth orbit and rotation from ``planner.earth`` (ERFA ``epv00``,
IAU 2006/2000A orientation). The barycentric part also carries the two
small relativistic terms of Wright & Eastman 2014 eq. 28 (no Shapiro delay,
no source motion), as astropy does::

    bary_corr = c [gamma (1 + beta . n) / (1 + phi / c^2) - 1]

with beta = v_obs / c, gamma the Lorentz factor (+1.5 m/s) and phi the
Newtonian potential at the observer (adds +3.0 m/s from the Sun at 1 AU and
+0.2 m/s from the Earth). Without them our values sat 4.65 m/s below
astropy's, just over the 5 m/s test budget once other small differences add
in; they cost two extra array operations. Left out: the Moon (0.04 m/s),
Jupiter (< 0.001 m/s) and the +/-1.7% change of the Sun's distance over the
year (+/-0.05 m/s). At 1 kHz (0.21 km/s) per channel none of this is visible
in a small-dish spectrum; it is kept so the numbers match the reference.

Solar motion relative to the LSR (``SOLAR_MOTIONS``, ICRS axes, km/s):

* ``standard``: kinematic LSR, 20 km/s toward RA 18h, Dec +30 deg (B1900)
  (Gordon 1975, Methods of Experimental Physics 12C, sec. 6.1). The B1900
  apex is carried to J2000 by IAU 1976 precession (Lieske et al. 1977,
  A&A 58, 1) and then to ICRS by the FK5 frame rotation (ERFA ``fk5hz``).
  The FK4 E-terms and FK4/FK5 equinox offset are ignored: together with
  the precession-model difference they move the apex by 0.25 arcsec,
  i.e. 2e-5 km/s on 20 km/s.
* ``dynamical``: (U, V, W) = (9, 12, 7) km/s (Delhaye 1965, "Solar Motion
  and Velocity Distribution of Common Stars", the dynamical LSR).
* ``schoenrich2010``: (U, V, W) = (11.1, 12.24, 7.25) km/s (Schoenrich,
  Binney & Dehnen 2010, MNRAS 403, 1829).

U points toward l = 0, V toward l = 90 deg, W toward b = +90 deg; the
galactic axes are taken to ICRS with ERFA ``g2icrs`` (Hipparcos galactic
frame definition).
"""
from __future__ import annotations

from dataclasses import dataclass

import erfa
import numpy as np

from .earth import EarthState, earth_state, site_gcrs_velocity_kms, site_itrs_m, unit_vectors
from .errors import UserError
from .site import SPEED_OF_LIGHT_KMS
from .timebase import to_mjd_utc

# Gordon 1975 kinematic LSR: speed and apex (mean equator and equinox B1900).
LSRK_SPEED_KMS = 20.0
LSRK_APEX_RA_DEG = 270.0
LSRK_APEX_DEC_DEG = 30.0
_J2000_JD = 2451545.0
# Nominal mass parameters, IAU 2015 Resolution B3 (m^3/s^2); AU: IAU 2012 Res. B2.
GM_SUN_M3_S2 = 1.3271244e20
GM_EARTH_M3_S2 = 3.986004e14
AU_M = 149597870700.0


def _standard_solar_motion_kms() -> np.ndarray:
    """Gordon (1975) solar motion as an ICRS vector (km/s)."""
    b1900_jd1, b1900_jd2 = erfa.epb2jd(1900.0)
    apex_b1900 = erfa.s2c(np.radians(LSRK_APEX_RA_DEG), np.radians(LSRK_APEX_DEC_DEG))
    # pmat76 rotates J2000 mean coordinates to those of the date: invert it.
    apex_j2000 = erfa.pmat76(b1900_jd1, b1900_jd2).T @ apex_b1900
    ra_rad, dec_rad = erfa.c2s(apex_j2000)
    ra_icrs_rad, dec_icrs_rad = erfa.fk5hz(ra_rad, dec_rad, _J2000_JD, 0.0)
    return LSRK_SPEED_KMS * erfa.s2c(ra_icrs_rad, dec_icrs_rad)


def _galactic_uvw_to_icrs_kms(uvw_kms) -> np.ndarray:
    """ICRS vector (km/s) of a galactic (U, V, W) velocity."""
    axes_l_rad = np.radians([0.0, 90.0, 0.0])
    axes_b_rad = np.radians([0.0, 0.0, 90.0])
    ra_rad, dec_rad = erfa.g2icrs(axes_l_rad, axes_b_rad)
    axes_icrs = erfa.s2c(ra_rad, dec_rad)  # rows: ICRS unit vectors of U, V, W
    return np.asarray(uvw_kms, dtype=float) @ axes_icrs


SOLAR_MOTIONS: dict[str, np.ndarray] = {
    "standard": _standard_solar_motion_kms(),
    "dynamical": _galactic_uvw_to_icrs_kms([9.0, 12.0, 7.0]),
    "schoenrich2010": _galactic_uvw_to_icrs_kms([11.1, 12.24, 7.25]),
}
for _vec in SOLAR_MOTIONS.values():
    _vec.flags.writeable = False  # shared module constants: guard against in-place edits
del _vec


@dataclass(frozen=True)
class VelocityCorrection:
    """Corrections added to a topocentric radial velocity (km/s, see module doc)."""

    bary_corr_kms: np.ndarray  # (N,) to the solar-system barycentre
    lsr_corr_kms: np.ndarray  # (N,) to the local standard of rest


def solar_motion_kms(solar_motion: str) -> np.ndarray:
    """Sun's velocity relative to the LSR (ICRS axes, km/s) for a model name."""
    try:
        return SOLAR_MOTIONS[solar_motion]
    except (KeyError, TypeError):
        valid = ", ".join(SOLAR_MOTIONS)
        raise UserError(f"solar_motion: unknown model '{solar_motion}' (valid: {valid})") from None


def velocity_corrections(latitude_deg, longitude_deg, height_m, ra_deg, dec_deg, mjd_utc,
                         solar_motion: str = "standard",
                         state: EarthState | None = None) -> VelocityCorrection:
    """Barycentric and LSR corrections (km/s) for a site, pointings and times.

    Site: geodetic latitude/longitude (deg, east positive) and height (m) on
    WGS84, scalars or arrays of the sample count. ``ra_deg``/``dec_deg`` are
    ICRS, broadcastable with ``mjd_utc`` (float MJD, UTC). ``state`` is an
    ``EarthState`` already computed for exactly ``mjd_utc``; it saves the
    Earth-orientation work when a caller has one.
    """
    v_sun_kms = solar_motion_kms(solar_motion)
    mjd = np.atleast_1d(np.asarray(mjd_utc, dtype=float))
    if state is None:
        state = earth_state(mjd)
    elif state.mjd_utc.shape != mjd.shape:
        raise ValueError(f"state has {state.mjd_utc.shape} samples, mjd_utc has {mjd.shape}")
    site_xyz_m = site_itrs_m(latitude_deg, longitude_deg, height_m)
    v_obs_kms = state.earth_vel_kms + site_gcrs_velocity_kms(state, site_xyz_m)
    n = unit_vectors(ra_deg, dec_deg)
    beta_dot_n = np.einsum("...i,...i->...", v_obs_kms, n) / SPEED_OF_LIGHT_KMS
    gamma = 1.0 / np.sqrt(1.0 - np.sum(v_obs_kms**2, axis=-1) / SPEED_OF_LIGHT_KMS**2)
    site_radius_m = np.linalg.norm(site_xyz_m, axis=-1)
    phi_over_c2 = -(GM_SUN_M3_S2 / AU_M + GM_EARTH_M3_S2 / site_radius_m) / (
        SPEED_OF_LIGHT_KMS * 1e3) ** 2
    # float64 round-off here is 1e-16 x c = 3e-11 km/s, so the direct form is safe.
    bary_kms = SPEED_OF_LIGHT_KMS * (gamma * (1.0 + beta_dot_n) / (1.0 + phi_over_c2) - 1.0)
    lsr_kms = bary_kms + n @ v_sun_kms
    return VelocityCorrection(bary_corr_kms=np.atleast_1d(bary_kms),
                              lsr_corr_kms=np.atleast_1d(lsr_kms))


def lsr_correction(site, coord, times, solar_motion: str = "standard"):
    """LSR correction (astropy Quantity, km/s) for a ``Site``, SkyCoord and Time.

    ``coord`` and ``times`` broadcast against each other; the result has
    their broadcast shape.
    """
    icrs = coord.icrs
    shape = np.broadcast_shapes(np.shape(icrs), np.shape(times))
    ra_deg = np.broadcast_to(icrs.ra.deg, shape).ravel()
    dec_deg = np.broadcast_to(icrs.dec.deg, shape).ravel()
    mjd = np.broadcast_to(to_mjd_utc(times).reshape(np.shape(times)), shape).ravel()
    corr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m,
                                ra_deg, dec_deg, mjd, solar_motion=solar_motion)
    import astropy.units as u  # the astropy boundary; imported on use (fast start-up)
    return corr.lsr_corr_kms.reshape(shape) * (u.km / u.s)


def correction_range_kms(latitude_deg, longitude_deg, height_m, ra_deg, dec_deg, mjd_utc,
                         solar_motion: str = "standard",
                         state: EarthState | None = None) -> tuple[float, float]:
    """(min, max) LSR correction (km/s) over the samples of one pointing.

    Same arguments as ``velocity_corrections``.
    """
    lsr_kms = velocity_corrections(latitude_deg, longitude_deg, height_m, ra_deg, dec_deg,
                                   mjd_utc, solar_motion, state).lsr_corr_kms
    return float(np.min(lsr_kms)), float(np.max(lsr_kms))

