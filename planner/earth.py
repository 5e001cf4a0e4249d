"""Earth orientation and motion on a time grid, fast.

Everything a sky-track, Sun or Doppler computation needs per time sample:
Earth rotation angle (from UT1), the GCRS->CIRS matrix (IAU 2006/2000A via
ERFA ``c2i06a``), the barycentric velocity of the geocentre and the geocentric
Sun position (ERFA ``epv00``). The slowly varying parts (matrix, orbital velocity) are computed
on a coarse node grid and interpolated to the samples:

* spans up to ``LONG_SPAN_DAYS`` (two months): 12-hour nodes, linear. The error
  is below 0.01 arcsec for the matrix (shortest nutation terms: 5.6 d,
  0.03 arcsec) and 3e-4 km/s for the velocity (30 km/s x (0.0086 rad)^2 / 8,
  curvature of a 1 deg/day orbit over 12 h).
* longer spans: 2-day nodes, quadratic (three nodes around each sample), four
  times fewer ERFA calls for a year. The error of quadratic interpolation is
  about h^3 |third derivative| / 16 with h = 2 d: the Earth-Moon wobble of the
  velocity (12.6 m/s over 27.3 d) and the orbit give under 3e-4 km/s (measured:
  2e-4 km/s over random years, tests/test_earth.py), the matrix under 0.01
  arcsec, the Sun's direction under 1 arcsec.

Conventions: vectors are Cartesian float arrays with the axis last (N, 3).
``v_cirs = c2i @ v_gcrs``; ``v_cirs = R3(-era) @ v_itrs`` (polar motion,
< 0.5 arcsec, is neglected). Velocities in km/s, positions in metres.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass

import erfa
import numpy as np

from .timebase import END_MJD, FIRST_MJD, MJD_ZERO_JD, SECONDS_PER_DAY, dut1_s, tt_minus_utc_s

AU_KM = 149597870.7  # IAU 2012 Resolution B2
# Earth's sidereal angular velocity in rad/s (IERS Conventions 2010, ERA rate).
EARTH_OMEGA_RAD_S = 2.0 * np.pi * 1.00273781191135448 / SECONDS_PER_DAY
NODE_SPACING_DAYS = 0.5
LONG_SPAN_DAYS = 64.0
LONG_NODE_SPACING_DAYS = 2.0
# eraEpv00 is stated for 1900-2100 AD and warns outside it; its accuracy falls off
# gradually. hiplan's dates end a day inside that range (timebase.FIRST_DAY, LAST_DAY),
# so nodes a few days past them (interpolation margins, far-west zones) need no warning.
_EPV00_QUIET_MJD = (FIRST_MJD - 4.0, END_MJD + 4.0)


@dataclass(frozen=True)
class EarthNodes:
    """Slowly varying Earth quantities on a coarse grid, for interpolation."""

    mjd_utc: np.ndarray  # (M,) node times
    c2i: np.ndarray  # (M, 3, 3) GCRS -> CIRS rotation
    earth_vel_kms: np.ndarray  # (M, 3) barycentric velocity of the geocentre, ICRS axes
    sun_from_earth_au: np.ndarray  # (M, 3) geometric Sun position seen from the geocentre
    order: int = 1  # interpolation: 1 linear, 2 quadratic


@dataclass(frozen=True)
class EarthState:
    """Earth orientation and orbital motion at each sample time."""

    mjd_utc: np.ndarray  # (N,) days
    era_rad: np.ndarray  # (N,) Earth rotation angle
    c2i: np.ndarray  # (N, 3, 3) GCRS -> CIRS rotation
    earth_vel_kms: np.ndarray  # (N, 3) barycentric velocity of the geocentre, ICRS axes
    sun_from_earth_au: np.ndarray  # (N, 3) geometric geocentric Sun position


def earth_nodes(mjd_lo: float, mjd_hi: float, spacing_days: float | None = None) -> EarthNodes:
    """Node grid covering [mjd_lo, mjd_hi] (UTC); spacing and order by span (module doc)."""
    long_span = mjd_hi - mjd_lo > LONG_SPAN_DAYS
    if spacing_days is None:
        spacing_days = LONG_NODE_SPACING_DAYS if long_span else NODE_SPACING_DAYS
    order = 2 if spacing_days > NODE_SPACING_DAYS else 1
    n = max(order + 1, int(np.ceil((mjd_hi - mjd_lo) / spacing_days)) + 1)
    nodes = mjd_lo + spacing_days * np.arange(n)
    nodes_tt = nodes + tt_minus_utc_s(nodes) / SECONDS_PER_DAY
    c2i = erfa.c2i06a(MJD_ZERO_JD, nodes_tt)
    # epv00 wants TDB; TT differs by < 2 ms, i.e. < 1e-6 km/s here.
    with warnings.catch_warnings():
        if _EPV00_QUIET_MJD[0] <= nodes.min() and nodes.max() <= _EPV00_QUIET_MJD[1]:
            warnings.simplefilter("ignore", erfa.ErfaWarning)
        pvh, pvb = erfa.epv00(MJD_ZERO_JD, nodes_tt)
    return EarthNodes(mjd_utc=nodes, c2i=c2i,
                      earth_vel_kms=pvb["v"] * (AU_KM / SECONDS_PER_DAY),
                      sun_from_earth_au=-pvh["p"], order=order)


def _node_table(nodes: EarthNodes) -> tuple[np.ndarray, np.ndarray]:
    """Node values (M, 15): matrix, velocity, Sun side by side; and per-interval slopes."""
    cached = getattr(nodes, "_table", None)
    if cached is None:
        values = np.concatenate([nodes.c2i.reshape(len(nodes.mjd_utc), 9), nodes.earth_vel_kms,
                                 nodes.sun_from_earth_au], axis=1)
        slopes = (values[1:] - values[:-1]) / np.diff(nodes.mjd_utc)[:, None]
        cached = (values, slopes)
        object.__setattr__(nodes, "_table", cached)
    return cached


def _interp_nodes(x: np.ndarray, nodes: EarthNodes) -> np.ndarray:
    """Linear interpolation of all node quantities at ``x`` (N, 15).

    The same arithmetic as ``numpy.interp`` (slope * (x - x_j) + f_j, the last node
    exactly), bit for bit, but one index search for all fifteen quantities.
    """
    xp = nodes.mjd_utc
    values, slopes = _node_table(nodes)
    if nodes.order == 2:  # Lagrange through the three nodes around each sample
        h = xp[1] - xp[0]
        k = np.clip(np.rint((x - xp[0]) / h).astype(np.int64) - 1, 0, xp.size - 3)
        u = ((x - xp[k]) / h)[:, None]
        return (0.5 * (u - 1.0) * (u - 2.0) * values[k] - u * (u - 2.0) * values[k + 1]
                + 0.5 * u * (u - 1.0) * values[k + 2])
    j = np.clip(np.searchsorted(xp, x, side="right") - 1, 0, xp.size - 2)
    out = slopes[j] * (x - xp[j])[:, None] + values[j]
    out[x >= xp[-1]] = values[-1]
    out[x <= xp[0]] = values[0]
    return out


def earth_state(mjd_utc, nodes: EarthNodes | None = None, ut1: bool = True) -> EarthState:
    """Earth rotation angle, GCRS->CIRS matrix, geocentre velocity and Sun at ``mjd_utc``.

    Pass ``nodes`` (from ``earth_nodes``) covering the times to reuse them across calls.
    ``ut1=False`` takes the rotation angle at UTC instead of UT1: |UT1-UTC| < 0.9 s turns
    the sky by under 14 arcsec, nothing for coarse uses (chart shading), and no
    Earth-orientation table is read.
    """
    mjd = np.atleast_1d(np.asarray(mjd_utc, dtype=float))
    if nodes is None:
        nodes = earth_nodes(float(np.min(mjd)), float(np.max(mjd)))
    era = erfa.era00(MJD_ZERO_JD, mjd + (dut1_s(mjd) / SECONDS_PER_DAY if ut1 else 0.0))
    table = _interp_nodes(mjd, nodes)
    return EarthState(
        mjd_utc=mjd, era_rad=era, c2i=table[:, :9].reshape(-1, 3, 3),
        earth_vel_kms=table[:, 9:12], sun_from_earth_au=table[:, 12:15],
    )


def site_itrs_m(latitude_deg: float, longitude_deg: float, height_m: float) -> np.ndarray:
    """Geocentric ITRS position (m) of a site on the WGS84 ellipsoid."""
    return erfa.gd2gc(1, np.radians(longitude_deg), np.radians(latitude_deg), height_m)


def itrs_to_cirs(vec_itrs: np.ndarray, era_rad: np.ndarray) -> np.ndarray:
    """Rotate Earth-fixed vectors (N,3) or (3,) by the Earth rotation angle."""
    v = np.broadcast_to(vec_itrs, era_rad.shape + (3,))
    c, s = np.cos(era_rad), np.sin(era_rad)
    return np.stack([c * v[..., 0] - s * v[..., 1], s * v[..., 0] + c * v[..., 1], v[..., 2]], axis=-1)


def cirs_to_gcrs(vec_cirs: np.ndarray, state: EarthState) -> np.ndarray:
    """CIRS -> GCRS (inverse rotation of ``c2i``)."""
    return np.einsum("nji,nj->ni", state.c2i, vec_cirs)


def gcrs_to_cirs(vec_gcrs: np.ndarray, state: EarthState) -> np.ndarray:
    """GCRS -> CIRS."""
    return np.einsum("nij,nj->ni", state.c2i, vec_gcrs)


def site_gcrs_position_m(state: EarthState, site_xyz_m: np.ndarray) -> np.ndarray:
    """Site position relative to the geocentre, GCRS axes (m)."""
    return cirs_to_gcrs(itrs_to_cirs(site_xyz_m, state.era_rad), state)


def site_gcrs_velocity_kms(state: EarthState, site_xyz_m: np.ndarray) -> np.ndarray:
    """Site velocity from Earth rotation, relative to the geocentre, GCRS axes (km/s)."""
    r_cirs = itrs_to_cirs(site_xyz_m, state.era_rad) / 1e3
    v_cirs = EARTH_OMEGA_RAD_S * np.stack(
        [-r_cirs[:, 1], r_cirs[:, 0], np.zeros(len(r_cirs))], axis=-1)
    return cirs_to_gcrs(v_cirs, state)


def unit_vectors(lon_deg, lat_deg) -> np.ndarray:
    """Unit vectors (N,3) from longitude-like and latitude-like angles (deg)."""
    lon, lat = np.radians(lon_deg), np.radians(lat_deg)
    cl = np.cos(lat)
    return np.stack(np.broadcast_arrays(cl * np.cos(lon), cl * np.sin(lon), np.sin(lat)), axis=-1)


def spherical_deg(vec: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(longitude in [0, 360), latitude) in degrees of vectors (N,3)."""
    x, y, z = vec[..., 0], vec[..., 1], vec[..., 2]
    lon = np.degrees(np.arctan2(y, x)) % 360.0
    lat = np.degrees(np.arctan2(z, np.hypot(x, y)))
    return lon, lat
