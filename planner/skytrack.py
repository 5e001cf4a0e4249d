"""Where a fixed beam points on the sky over time: the fast sky-track engine.

For a parked dish the topocentric hour angle and declination of date are
constant, so the beam centre's CIRS right ascension is ERA + longitude - HA.
From there to ICRS: rotate CIRS -> GCRS (IAU 2006/2000A matrix, interpolated,
see ``earth``), then remove the aberration due to the observer's velocity
(orbital + diurnal; first order in v/c, error ~ (v/c)^2 ~ 2 mas). Light
deflection by the Sun (1.75 arcsec at the limb, < 0.05 arcsec beyond 10 deg)
and polar motion (< 0.5 arcsec) are neglected. Refraction is not modelled (geometric
pointing, the same as astropy's AltAz frame with zero pressure).

Measured against astropy's full AltAz -> ICRS/Galactic transform: median
0.1 arcsec, worst ~2 arcsec next to the Sun (tests allow 0.01 deg); see
tests/test_skytrack.py and benchmarks/bench_skytrack.py for the speed ratio.
"""
from __future__ import annotations

from dataclasses import dataclass

import erfa
import numpy as np

from .earth import (EarthNodes, EarthState, cirs_to_gcrs, earth_state, gcrs_to_cirs,
                    site_gcrs_velocity_kms, site_itrs_m, spherical_deg, unit_vectors)
from .galactic import ICRS_TO_GALACTIC
from .pointing import Pointing
from .site import SPEED_OF_LIGHT_KMS, Site
from .timebase import from_mjd_utc, to_mjd_utc


@dataclass(frozen=True)
class BeamTrack:
    """Beam-centre positions at each sample: ICRS and galactic, degrees."""

    mjd_utc: np.ndarray
    ra_deg: np.ndarray  # [0, 360)
    dec_deg: np.ndarray
    l_deg: np.ndarray  # [0, 360)
    b_deg: np.ndarray

    @property
    def times(self):
        """The sample times as an astropy ``Time`` (UTC)."""
        return from_mjd_utc(self.mjd_utc)


def site_xyz_m(site: Site) -> np.ndarray:
    """The site's geocentric ITRS position (m)."""
    return site_itrs_m(site.latitude_deg, site.longitude_deg, site.height_m)


def _observer_beta(site: Site, state: EarthState) -> np.ndarray:
    """Observer's barycentric velocity over c, (N, 3), GCRS/ICRS axes."""
    v = state.earth_vel_kms + site_gcrs_velocity_kms(state, site_xyz_m(site))
    return v / SPEED_OF_LIGHT_KMS


def _normalise(vec: np.ndarray) -> np.ndarray:
    return vec / np.linalg.norm(vec, axis=-1, keepdims=True)


def fixed_pointing_icrs(site: Site, ha_deg: float, dec_deg: float, state: EarthState) -> np.ndarray:
    """ICRS unit vectors (N, 3) of a fixed topocentric (HA, Dec of date) pointing."""
    ra_cirs_deg = np.degrees(state.era_rad) + site.longitude_deg - ha_deg
    apparent = cirs_to_gcrs(unit_vectors(ra_cirs_deg, dec_deg), state)
    beta = _observer_beta(site, state)
    # Invert first-order aberration p' = p + beta - (p.beta) p.
    dot = np.einsum("ni,ni->n", apparent, beta)[:, None]
    return _normalise(apparent - beta + dot * apparent)


def icrs_to_altaz_deg(site: Site, vec_icrs: np.ndarray, state: EarthState) -> tuple[np.ndarray, np.ndarray]:
    """(alt, az) in degrees at the site for ICRS directions (N, 3) at the state's times.

    The inverse of ``fixed_pointing_icrs`` (aberration applied, no refraction).
    """
    vec = np.broadcast_to(vec_icrs, state.era_rad.shape + (3,))
    beta = _observer_beta(site, state)
    dot = np.einsum("ni,ni->n", vec, beta)[:, None]
    cirs = gcrs_to_cirs(_normalise(vec + beta - dot * vec), state)
    ra_cirs_deg, dec_deg = spherical_deg(cirs)
    ha_rad = np.radians(np.degrees(state.era_rad) + site.longitude_deg - ra_cirs_deg)
    az, el = erfa.hd2ae(ha_rad, np.radians(dec_deg), np.radians(site.latitude_deg))
    return np.degrees(el), np.degrees(az)


class FixedBeams:
    """ICRS directions and galactic latitude of parked pointings at any (time, row) pairs.

    The Earth nodes are shared, so root finders can evaluate many times cheaply;
    ``row`` indexes ``pointings`` (default 0 for a single pointing).
    """

    def __init__(self, site: Site, pointings: list[Pointing], nodes: EarthNodes):
        self.site = site
        self.ha_deg = np.array([p.ha_deg for p in pointings])
        self.dec_deg = np.array([p.dec_deg for p in pointings])
        self.nodes = nodes

    def locate(self, mjd_utc, row=0) -> tuple[EarthState, np.ndarray]:
        """(Earth state, ICRS unit vectors (N, 3)) at the given times and rows."""
        state = earth_state(np.asarray(mjd_utc, dtype=float), self.nodes)
        return state, fixed_pointing_icrs(self.site, self.ha_deg[row], self.dec_deg[row], state)

    def b_deg_grid(self, mjd_utc) -> np.ndarray:
        """Galactic latitude (deg) of every pointing at every time: (rows, times).

        The Earth state is computed once for the times and shared by all rows (the
        same arithmetic as ``b_deg`` on each (time, row) pair).
        """
        state = earth_state(np.asarray(mjd_utc, dtype=float), self.nodes)
        beta = _observer_beta(self.site, state)
        ra_cirs_deg = (np.degrees(state.era_rad)[None, :] + self.site.longitude_deg
                       - self.ha_deg[:, None])
        cirs = unit_vectors(ra_cirs_deg, self.dec_deg[:, None])
        apparent = np.einsum("mji,rmj->rmi", state.c2i, cirs)
        dot = np.einsum("rmi,mi->rm", apparent, beta)[..., None]
        vec = _normalise(apparent - beta[None] + dot * apparent)
        z = vec @ ICRS_TO_GALACTIC[2]
        return np.degrees(np.arcsin(np.clip(z, -1.0, 1.0)))

    def b_deg(self, mjd_utc, row=0) -> np.ndarray:
        """Galactic latitude (deg) of the beam centre."""
        z = self.locate(mjd_utc, row)[1] @ ICRS_TO_GALACTIC[2]
        return np.degrees(np.arcsin(np.clip(z, -1.0, 1.0)))


def track_mjd(site: Site, pointing: Pointing, mjd_utc, nodes: EarthNodes | None = None) -> BeamTrack:
    """Beam track for float MJD (UTC) samples; the fast path used in hot loops."""
    state = earth_state(mjd_utc, nodes)
    vec = fixed_pointing_icrs(site, pointing.ha_deg, pointing.dec_deg, state)
    ra, dec = spherical_deg(vec)
    l, b = spherical_deg(vec @ ICRS_TO_GALACTIC.T)
    return BeamTrack(mjd_utc=state.mjd_utc, ra_deg=ra, dec_deg=dec, l_deg=l, b_deg=b)


def beam_track(site: Site, pointing: Pointing, times) -> BeamTrack:
    """Beam-centre track of a fixed pointing at ``times`` (any astropy time scale)."""
    return track_mjd(site, pointing, to_mjd_utc(times))
