"""Calibration passes: when a parked beam drifts over an IAU standard HI region.

A parked beam keeps its hour angle and declination of date, so it sweeps the circle of its
declination once a sidereal day; a standard region (``calibration.STANDARD_REGIONS``, fixed
ICRS position) passes closest when the beam's right ascension equals the region's, at a
separation of about the difference in declination. A pass counts when that separation is at
most half the beamwidth (the region inside the half-power beam).

Method, vectorized over pointings and days: rows whose declination is within half a beamwidth
plus ``DEC_MARGIN_DEG`` of the region's are kept (the declination of date differs from the
ICRS one by precession, under 0.5 deg this century); the first instant with equal right
ascension comes from the sidereal rate, two fixed-point corrections make it exact to well
under a second, and a golden-section search within +-``REFINE_HALF_WINDOW_MIN`` finds the true
closest approach to 1 s. Beam directions come from ``skytrack.FixedBeams`` (within 0.01 deg of
astropy). Times float MJD (UTC), angles degrees.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .avoidance import separation_deg
from .calibration import STANDARD_REGIONS, StandardRegion
from .earth import EarthNodes, earth_nodes, spherical_deg, unit_vectors
from .pointing import Pointing
from .site import Site
from .skytrack import FixedBeams
from .sunsafety import golden_min, wrap180
from .timebase import SECONDS_PER_DAY

SIDEREAL_DEG_PER_DAY = 360.98564736629  # Earth rotation angle rate (IERS Conventions 2010)
DEC_MARGIN_DEG = 1.0
REFINE_HALF_WINDOW_MIN = 20.0


@dataclass(frozen=True)
class CalibratorPasses:
    """Passes of standard regions through parked beams (arrays of length N, in time order).

    ``row`` indexes the pointings given to ``calibrator_passes``; ``region`` indexes
    ``regions``; ``sep_deg`` is the least distance between the beam centre and the region.
    """

    regions: tuple[StandardRegion, ...]
    row: np.ndarray
    region: np.ndarray
    closest_mjd: np.ndarray
    sep_deg: np.ndarray

    def for_row(self, row: int) -> np.ndarray:
        return np.flatnonzero(self.row == row)

    def names(self, idx) -> list[str]:
        return [self.regions[int(k)].name for k in np.atleast_1d(self.region[idx])]


def calibrator_passes(site: Site, pointings: list[Pointing], start_mjd: float, end_mjd: float,
                      regions=STANDARD_REGIONS, half_width_deg: float | None = None,
                      nodes: EarthNodes | None = None) -> CalibratorPasses:
    """Every pass of each region within ``half_width_deg`` (default half the site's beamwidth)
    of each parked pointing, with its closest instant in [start, end)."""
    regions = tuple(regions)
    limit = site.dish.beamwidth_deg / 2.0 if half_width_deg is None else float(half_width_deg)
    if nodes is None:
        nodes = earth_nodes(start_mjd - 1.0, end_mjd + 1.0)
    beams = FixedBeams(site, pointings, nodes)
    rows_all, regs_all, times_all = [], [], []
    n_days = int(np.ceil(end_mjd - start_mjd)) + 2
    for k, reg in enumerate(regions):  # three regions
        ra_r, dec_r = reg.icrs_deg
        rows = np.flatnonzero(np.abs(beams.dec_deg - dec_r) <= limit + DEC_MARGIN_DEG)
        if rows.size == 0:
            continue
        t0 = np.full(rows.size, start_mjd - 1.0)
        ra0, _ = spherical_deg(beams.locate(t0, rows)[1])
        lead = ((ra_r - ra0) % 360.0) / SIDEREAL_DEG_PER_DAY
        t = (t0 + lead)[:, None] + np.arange(n_days)[None, :] * (360.0 / SIDEREAL_DEG_PER_DAY)
        row_grid = np.broadcast_to(rows[:, None], t.shape).ravel()
        t = t.ravel()
        for _ in range(2):  # fixed-point corrections to equal right ascension
            ra, _ = spherical_deg(beams.locate(t, row_grid)[1])
            t = t + wrap180(ra_r - ra) / SIDEREAL_DEG_PER_DAY
        target = unit_vectors(ra_r, dec_r)

        def sep(m, rows_=row_grid, target_=target):
            return separation_deg(beams.locate(m, rows_)[1], target_)

        half = REFINE_HALF_WINDOW_MIN / 1440.0
        t, s = golden_min(sep, t - half, t + half, 1.0 / SECONDS_PER_DAY)
        keep = (s <= limit) & (t >= start_mjd) & (t < end_mjd)
        rows_all.append(row_grid[keep])
        regs_all.append(np.full(int(keep.sum()), k))
        times_all.append(t[keep])
        # store separations alongside
        rows_all[-1] = np.stack([row_grid[keep], s[keep]], axis=1)
    if not rows_all:
        empty = np.zeros(0)
        return CalibratorPasses(regions, empty.astype(int), empty.astype(int), empty, empty)
    stacked = np.concatenate(rows_all)
    row = stacked[:, 0].astype(int)
    sep_deg = stacked[:, 1]
    region = np.concatenate(regs_all)
    closest = np.concatenate(times_all)
    order = np.argsort(closest, kind="stable")
    return CalibratorPasses(regions, row[order], region[order], closest[order], sep_deg[order])


def pass_positions_deg(site: Site, pointings: list[Pointing], passes: CalibratorPasses,
                       nodes: EarthNodes | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Galactic (l, b) of the beam centre at each pass's closest instant."""
    from .galactic import ICRS_TO_GALACTIC
    if passes.row.size == 0:
        return np.zeros(0), np.zeros(0)
    if nodes is None:
        nodes = earth_nodes(float(passes.closest_mjd.min()) - 0.1, float(passes.closest_mjd.max()) + 0.1)
    beams = FixedBeams(site, pointings, nodes)
    vec = beams.locate(passes.closest_mjd, passes.row)[1]
    return spherical_deg(vec @ ICRS_TO_GALACTIC.T)


def expected_pass_peaks_k(site: Site, pointings: list[Pointing], passes: CalibratorPasses,
                          nodes: EarthNodes | None = None) -> np.ndarray:
    """Peak T_B (K) each pass should show in the site's beam (``calibration.expected_peaks_k``
    at the beam's position when the region is closest)."""
    from .calibration import expected_peaks_k
    if passes.row.size == 0:
        return np.zeros(0)
    l_deg, b_deg = pass_positions_deg(site, pointings, passes, nodes)
    # One model evaluation per distinct (region, rounded position): passes repeat daily.
    keys = np.round(np.stack([passes.region, l_deg, b_deg], axis=1), 1)
    uniq, inverse = np.unique(keys, axis=0, return_inverse=True)
    peaks = expected_peaks_k([passes.regions[int(k)] for k in uniq[:, 0]], site.dish.beamwidth_deg,
                             uniq[:, 1], uniq[:, 2])
    return peaks[np.ravel(inverse)]
