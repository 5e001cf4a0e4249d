"""Galactic-plane passages of a parked beam.

A passage is an interval in which the beam centre lies within +/-b_max of the
galactic plane (|b| <= b_max). Method:

1. Sample the sky track on a regular grid (``step_s``, 60 s by default).
2. Runs of in-strip samples give passages; each boundary is refined by
   bisection on |b| - b_max to below 0.01 s (the issue asks for <= 1 s).
3. Shallow grazes that dip into the strip between two samples are caught by a
   golden-section search around every local minimum of |b| that lies within
   one step's worth of motion of the strip edge (the beam moves at most
   0.25 deg per minute).
4. The peak is the time of minimum |b| (golden-section search).
5. Each passage is then re-sampled every ``detail_step_s`` (10 s) for its
   longitude bins, time per bin, Sun and Moon separation, Sun altitude and
   LSR correction range.

A passage cut by the start or end of the period is marked ``clipped`` and
starts or ends at the period's edge. Times are float MJD (UTC) inside;
``Passage.start`` etc. give astropy ``Time``.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .avoidance import moon_direction, separation_deg, sun_altitude_deg, sun_direction
from .doppler import velocity_corrections
from .earth import earth_nodes, spherical_deg
from .galactic import ICRS_TO_GALACTIC
from .pointing import Pointing
from .site import Site
from .skytrack import FixedBeams
from .timebase import SECONDS_PER_DAY, from_mjd_utc, to_mjd_utc

SIDEREAL_RATE_DEG_PER_S = 360.0 / 86164.0905
_GOLDEN = (np.sqrt(5.0) - 1.0) / 2.0


@dataclass(frozen=True)
class Passage:
    """One passage of the beam through the |b| <= b_max strip. Angles in degrees."""

    start_mjd: float  # UTC
    end_mjd: float
    peak_mjd: float  # time of minimum |b|
    l_start_deg: float
    l_peak_deg: float
    l_end_deg: float
    b_min_abs_deg: float
    l_bins: tuple[float, ...]  # bin starts touched, in the order the beam meets them
    bin_seconds: tuple[float, ...]  # seconds spent in each of l_bins
    alt_deg: float
    az_deg: float
    sun_sep_min_deg: float
    sun_ok: bool
    sun_alt_max_deg: float
    night: bool  # Sun below the horizon for the whole passage
    moon_sep_min_deg: float
    moon_ok: bool
    clipped: bool
    lsr_corr_min_kms: float  # LSR correction range over the passage (see doppler)
    lsr_corr_max_kms: float

    @property
    def duration_min(self) -> float:
        return (self.end_mjd - self.start_mjd) * 1440.0

    @property
    def start(self):
        """Band entry as an astropy ``Time`` (UTC)."""
        return from_mjd_utc(self.start_mjd)

    @property
    def end(self):
        return from_mjd_utc(self.end_mjd)

    @property
    def peak(self):
        return from_mjd_utc(self.peak_mjd)


@dataclass(frozen=True)
class PassageSearch:
    """Result of a search: the passages and the closest approach seen."""

    passages: list[Passage]
    b_min_abs_deg: float  # smallest |b| of the beam over the period
    b_max_deg: float
    start_mjd: float
    end_mjd: float


def _bisect(func, lo: np.ndarray, hi: np.ndarray, tol_days: float) -> np.ndarray:
    """Roots of ``func`` in brackets [lo, hi] (sign change assumed), vectorized."""
    lo, hi = lo.copy(), hi.copy()
    if lo.size == 0:
        return lo
    f_lo = func(lo)
    while np.max(hi - lo) > tol_days:
        mid = 0.5 * (lo + hi)
        f_mid = func(mid)
        same = np.sign(f_mid) == np.sign(f_lo)
        lo = np.where(same, mid, lo)
        f_lo = np.where(same, f_mid, f_lo)
        hi = np.where(same, hi, mid)
    return 0.5 * (lo + hi)


def _golden_min(func, lo: np.ndarray, hi: np.ndarray, tol_days: float) -> tuple[np.ndarray, np.ndarray]:
    """Minimum (argmin, value) of unimodal ``func`` in [lo, hi], vectorized."""
    a, b = lo.copy(), hi.copy()
    if a.size == 0:
        return a, a
    c = b - _GOLDEN * (b - a)
    d = a + _GOLDEN * (b - a)
    fc, fd = func(c), func(d)
    while np.max(b - a) > tol_days:
        left = fc < fd
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        new_c = b - _GOLDEN * (b - a)
        new_d = a + _GOLDEN * (b - a)
        # Reuse the surviving interior point; evaluate only the new one.
        c_next = np.where(left, new_c, d)
        d_next = np.where(left, c, new_d)
        f_new = func(np.where(left, new_c, new_d))
        fc, fd = np.where(left, f_new, fd), np.where(left, fc, f_new)
        c, d = c_next, d_next
    x = 0.5 * (a + b)
    return x, func(x)


def _runs(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First and last index of each run of True in ``mask``."""
    padded = np.concatenate([[False], mask, [False]])
    edges = np.flatnonzero(np.diff(padded.astype(np.int8)))
    return edges[0::2], edges[1::2] - 1


def search_passages_mjd(site: Site, pointing: Pointing, start_mjd: float, end_mjd: float,
                        b_max_deg: float | None = None, step_s: float = 60.0,
                        detail_step_s: float = 10.0,
                        solar_motion: str = "standard") -> PassageSearch:
    """All passages in [start_mjd, end_mjd] (UTC) with |b| <= b_max_deg.

    ``solar_motion`` names the LSR definition (see ``doppler.SOLAR_MOTIONS``).
    """
    b_max = site.rules.b_max_deg if b_max_deg is None else float(b_max_deg)
    n = max(2, int(np.ceil((end_mjd - start_mjd) * SECONDS_PER_DAY / step_s)) + 1)
    grid = np.linspace(start_mjd, end_mjd, n)
    step_days = grid[1] - grid[0]
    nodes = earth_nodes(start_mjd - 0.01, end_mjd + 0.01)
    track = FixedBeams(site, [pointing], nodes)
    abs_b = np.abs(track.b_deg(grid))
    excess = lambda t: np.abs(track.b_deg(t)) - b_max  # noqa: E731
    tol = 0.01 / SECONDS_PER_DAY

    inside = abs_b <= b_max
    # Grazes between samples: a local minimum outside the strip but within reach of it.
    reach = SIDEREAL_RATE_DEG_PER_S * step_days * SECONDS_PER_DAY
    i = np.arange(1, n - 1)
    cand = i[(~inside[i]) & (abs_b[i] <= abs_b[i - 1]) & (abs_b[i] <= abs_b[i + 1])
             & (abs_b[i] - b_max < reach)]
    t_min, f_min = _golden_min(excess, grid[cand - 1], grid[cand + 1], tol)
    graze = f_min <= 0
    graze_lo = _bisect(excess, grid[cand - 1][graze], t_min[graze], tol)
    graze_hi = _bisect(excess, t_min[graze], grid[cand + 1][graze], tol)

    first, last = _runs(inside)
    clipped_start = first == 0
    clipped_end = last == n - 1
    lo_edge = np.where(clipped_start, 0, first - 1)
    hi_edge = np.where(clipped_end, n - 1, last + 1)
    starts = grid[first].copy()
    ends = grid[last].copy()
    rise = ~clipped_start
    fall = ~clipped_end
    starts[rise] = _bisect(excess, grid[lo_edge[rise]], grid[first[rise]], tol)
    ends[fall] = _bisect(excess, grid[last[fall]], grid[hi_edge[fall]], tol)

    starts = np.concatenate([starts, graze_lo])
    ends = np.concatenate([ends, graze_hi])
    clipped = np.concatenate([clipped_start | clipped_end, np.zeros(graze.sum(), bool)])
    order = np.argsort(starts)
    starts, ends, clipped = starts[order], ends[order], clipped[order]

    # Peak: golden-section on |b| over the passage (|b| is unimodal within one passage
    # except when the beam crosses the plane twice; then either crossing has |b| = 0).
    peaks, peak_abs_b = _golden_min(lambda t: np.abs(track.b_deg(t)), starts, ends, tol)
    passages = _describe(site, pointing, track, starts, ends, peaks, peak_abs_b, clipped,
                         detail_step_s, solar_motion)
    closest = float(min(abs_b.min(), peak_abs_b.min() if peak_abs_b.size else np.inf,
                        (f_min + b_max).min() if f_min.size else np.inf))
    return PassageSearch(passages=passages, b_min_abs_deg=closest, b_max_deg=b_max,
                         start_mjd=start_mjd, end_mjd=end_mjd)


def _describe(site, pointing, track, starts, ends, peaks, peak_abs_b, clipped, detail_step_s,
              solar_motion):
    """Sample every passage finely and reduce to per-passage figures."""
    if starts.size == 0:
        return []
    step = detail_step_s / SECONDS_PER_DAY
    counts = np.maximum(np.ceil((ends - starts) / step).astype(int), 1) + 1
    offsets = np.concatenate([[0], np.cumsum(counts)[:-1]])
    owner = np.repeat(np.arange(starts.size), counts)
    k = np.arange(counts.sum()) - offsets[owner]
    frac = k / (counts[owner] - 1)  # 0 at start, 1 at end, evenly spaced
    mjd = starts[owner] + frac * (ends - starts)[owner]

    state, icrs = track.locate(mjd)
    l_deg, b_deg = spherical_deg(icrs @ ICRS_TO_GALACTIC.T)
    sun_sep = separation_deg(icrs, sun_direction(state))
    moon_sep = separation_deg(icrs, moon_direction(site, state))
    sun_alt = sun_altitude_deg(site, state)
    ra_deg, dec_deg = spherical_deg(icrs)
    lsr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra_deg,
                               dec_deg, mjd, solar_motion, state).lsr_corr_kms
    l_peak, _ = spherical_deg(track.locate(peaks)[1] @ ICRS_TO_GALACTIC.T)

    rules = site.rules
    bw = rules.bin_width_deg
    passages = []
    for p in range(starts.size):  # loop over passages (tens), not samples
        sl = slice(offsets[p], offsets[p] + counts[p])
        l_p = l_deg[sl]
        # Time per bin: each sub-interval goes to the bin of its midpoint longitude.
        dt_s = np.diff(mjd[sl]) * SECONDS_PER_DAY
        mid_l = _mid_longitude(l_p)
        bins = np.floor(np.concatenate([l_p, mid_l]) / bw) * bw % 360.0
        seen, first_seen = np.unique(bins, return_index=True)
        ordered = seen[np.argsort(first_seen)]
        mid_bins = np.floor(mid_l / bw) * bw % 360.0
        secs = [float(dt_s[mid_bins == b].sum()) for b in ordered]
        sun_min = float(sun_sep[sl].min())
        moon_min = float(moon_sep[sl].min())
        sun_alt_max = float(sun_alt[sl].max())
        passages.append(Passage(
            start_mjd=float(starts[p]), end_mjd=float(ends[p]), peak_mjd=float(peaks[p]),
            l_start_deg=float(l_p[0]), l_peak_deg=float(l_peak[p]), l_end_deg=float(l_p[-1]),
            b_min_abs_deg=float(min(np.abs(b_deg[sl]).min(), peak_abs_b[p])),
            l_bins=tuple(_tidy(b) for b in ordered), bin_seconds=tuple(secs),
            alt_deg=pointing.alt_deg, az_deg=pointing.az_deg,
            sun_sep_min_deg=sun_min, sun_ok=sun_min >= rules.sun_min_sep_deg,
            sun_alt_max_deg=sun_alt_max, night=sun_alt_max < 0.0,
            moon_sep_min_deg=moon_min, moon_ok=moon_min >= rules.moon_min_sep_deg,
            clipped=bool(clipped[p]),
            lsr_corr_min_kms=float(lsr[sl].min()), lsr_corr_max_kms=float(lsr[sl].max()),
        ))
    return passages


def _mid_longitude(l_deg: np.ndarray) -> np.ndarray:
    """Midpoints of consecutive longitudes (deg), correct across the 0/360 wrap."""
    step = (np.diff(l_deg) + 180.0) % 360.0 - 180.0
    return (l_deg[:-1] + 0.5 * step) % 360.0


def _tidy(value: float) -> float | int:
    return int(value) if float(value).is_integer() else float(value)


def find_passages(site: Site, pointing: Pointing, start, end,
                  b_max_deg: float | None = None, solar_motion: str = "standard") -> PassageSearch:
    """Passages of ``pointing`` between two astropy Times (b_max in degrees)."""
    return search_passages_mjd(site, pointing, float(to_mjd_utc(start)[0]),
                               float(to_mjd_utc(end)[0]), b_max_deg, solar_motion=solar_motion)


def lsr_range_kms(search: PassageSearch) -> tuple[float, float] | None:
    """(min, max) LSR correction over all passages of a search, or None without passages."""
    if not search.passages:
        return None
    return (min(p.lsr_corr_min_kms for p in search.passages),
            max(p.lsr_corr_max_kms for p in search.passages))
