"""Survey visibility: every target and reference position against every constraint on a time grid.

Constraints, checked for the WHOLE of every integration on a time grid
(``step_s``, default 60 s; every grid sample from the block's start through
the first sample at or after its end must pass):

* elevation >= max(elevation_min_deg, horizon mask at that azimuth) and
  <= elevation_max_deg (site file);
* separation from the Sun >= max(Sun rule + ``ANGLE_MARGIN_DEG``, feed-safety
  rule ``sun_hazard_deg`` + ``slew_sun_margin_deg``): feed safety is never
  weaker than the data rule, and a block's start and end positions must be
  reachable by Sun-safe slews (below); from the Moon >= the Moon rule (when > 0);
* with ``night_only``, the Sun's geometric centre below ``night_sun_alt_deg``
  (0 = the horizon, or a twilight limit, ``avoidance.NIGHT_SUN_ALTITUDE_DEG``;
  the same "night" as drift plans);
* inside one operator availability window (``planner.windows``), slews included;
* the drive azimuth stays inside the cable-wrap range for the whole track
  (``planner.slew``).

Every angular limit is tightened by ``ANGLE_MARGIN_DEG`` = 0.05 deg: it covers
the fast path's difference from a full astropy transform (0.01 deg, see
``skytrack``) plus what can happen between two grid samples one minute apart:
elevation changes by < 0.25 deg per minute, near-linearly, and at a culmination
between samples it differs from them by < 0.003 deg; low down the azimuth moves
< 0.3 deg per minute, so the mask (steepest slope 0.12 deg per deg at
Saltbush Ridge) moves < 0.04 deg.

Visibility is computed once, for every target and reference position on the
whole grid: alt/az with ``skytrack.icrs_to_altaz_deg`` (one call per position,
each vectorized over all times, sharing one ``earth_state``), Sun and Moon
separations as one matrix product each, and run lengths of the combined mask
with cumulative minima, so "can a block of n samples start at sample k" is one
comparison.

The clearances feed safety adds to ``sun_hazard_deg`` for moving and resting dishes are
``slew_sun_margin_deg`` and ``rest_sun_margin_deg`` (their use in ``planner.surveydispatch``).
Angles in degrees, times as float MJD (UTC).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .avoidance import moon_direction, sun_direction
from .earth import earth_state, unit_vectors
from .errors import UserError
from .site import Site
from .skytrack import icrs_to_altaz_deg
from .slew import SlewModel, slew_model
from .sunsafety import PATH_STEP_DEG, SUN_DRIFT_DEG_PER_MIN
from .surveyplan import SurveySettings
from .timebase import SECONDS_PER_DAY
from .windows import window_intervals_mjd

ANGLE_MARGIN_DEG = 0.05
# Positions x samples held in memory (alt, az and separations as float32, masks, run
# lengths, plus float64 temporaries): about 50 bytes each at the peak, so about 1 GB.
MAX_POSITION_SAMPLES = 20_000_000
# The fast Sun (``avoidance``) and beam directions agree with astropy's apparent
# topocentric ones within 0.01 deg (planner.sunsafety, tests/test_sunsafety.py).
FAST_SUN_DEG = 0.01
EPS_DAYS = 1e-3 / SECONDS_PER_DAY  # 1 ms: float MJD round-off guard


@dataclass(frozen=True)
class Visibility:
    """Per position (rows) and grid sample (columns): where it is and which limits it meets."""

    mjd_utc: np.ndarray  # (N,)
    alt_deg: np.ndarray  # (P, N) float32
    az_deg: np.ndarray  # (P, N) float32, sky azimuth [0, 360)
    sun_sep_deg: np.ndarray  # (P, N) float32
    moon_sep_deg: np.ndarray  # (P, N) float32
    elevation_ok: np.ndarray  # (P, N) bool, mask and limits with the margin
    sun_ok: np.ndarray  # (P, N) bool
    moon_ok: np.ndarray  # (P, N) bool
    night: np.ndarray  # (N,) bool, all True unless night_only
    window_start_mjd: np.ndarray  # (N,) start of the window holding the sample, else +inf
    window_end_mjd: np.ndarray  # (N,) its end, else -inf
    # The Sun's alt/az (float64) on the grid continued one day past its end, (N + E,):
    # a dish left at rest after the plan stays there.
    sun_alt_deg: np.ndarray
    sun_az_deg: np.ndarray

    @property
    def ok(self) -> np.ndarray:
        return self.elevation_ok & self.sun_ok & self.moon_ok & self.night[None, :]


# ------------------------------------------------------------------ helpers


def _grid_mjd(start_mjd: float, end_mjd: float, step_s: float) -> np.ndarray:
    step_d = step_s / SECONDS_PER_DAY
    n = int(math.floor((end_mjd - start_mjd) / step_d + 1e-6)) + 1
    return start_mjd + step_d * np.arange(n)


def run_lengths(mask: np.ndarray) -> np.ndarray:
    """Consecutive True samples starting at each sample, along the last axis (int32)."""
    n = mask.shape[-1]
    index = np.arange(n, dtype=np.int32)
    false_at = np.where(mask, np.int32(n), index)
    next_false = np.minimum.accumulate(false_at[..., ::-1], axis=-1)[..., ::-1]
    return next_false - index


def next_true(mask: np.ndarray) -> np.ndarray:
    """Index of the first True at or after each sample (N when none), along the last axis."""
    n = mask.shape[-1]
    index = np.where(mask, np.arange(n, dtype=np.int32), np.int32(n))
    return np.minimum.accumulate(index[..., ::-1], axis=-1)[..., ::-1]


def samples_needed(minutes, step_s: float) -> np.ndarray:
    """Grid steps a block of ``minutes`` spans (it covers that many steps plus one sample)."""
    steps = np.asarray(minutes, dtype=float) * 60.0 / step_s
    return np.maximum(1, np.ceil(steps - 1e-9)).astype(np.int64)


def _window_edges(mjd: np.ndarray, intervals: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    spans = np.asarray(intervals, dtype=float).reshape(-1, 2)
    if spans.shape[0] == 0:
        return np.full(mjd.shape, np.inf), np.full(mjd.shape, -np.inf)
    index = np.searchsorted(spans[:, 0], mjd + EPS_DAYS, side="right") - 1
    safe = np.maximum(index, 0)
    inside = (index >= 0) & (mjd < spans[safe, 1] - EPS_DAYS)
    return (np.where(inside, spans[safe, 0], np.inf), np.where(inside, spans[safe, 1], -np.inf))


def slew_sun_margin_deg(model: SlewModel, step_s: float) -> float:
    """Clearance (deg) added to ``sun_hazard_deg`` for slew paths (module docstring).

    Path sampling (PATH_STEP_DEG / 2), the fast Sun (FAST_SUN_DEG), and the Sun's
    drift relative to alt/az (SUN_DRIFT_DEG_PER_MIN) over the longest time between
    the sample the Sun is taken at and any instant of the slew: the longest slew
    (moves to a block, Sun at the block start) or one step (moves to the stow,
    Sun at the sample after they leave), whichever is longer.
    """
    return (PATH_STEP_DEG / 2.0 + FAST_SUN_DEG
            + SUN_DRIFT_DEG_PER_MIN * max(model.max_slew_s, step_s) / 60.0)


def rest_sun_margin_deg(step_s: float) -> float:
    """Clearance (deg) added to ``sun_hazard_deg`` for a resting dish checked at grid samples.

    Every instant is within half a step of a checked sample, over which the Sun
    moves at most SUN_DRIFT_DEG_PER_MIN relative to a fixed alt/az; plus FAST_SUN_DEG.
    """
    return FAST_SUN_DEG + SUN_DRIFT_DEG_PER_MIN * step_s / 120.0


def compute_visibility(site: Site, ra_deg, dec_deg, settings: SurveySettings) -> Visibility:
    """Positions (ICRS RA/Dec, deg) against every constraint on the period's time grid."""
    mjd = _grid_mjd(settings.start_mjd, settings.end_mjd, settings.step_s)
    ra = np.atleast_1d(np.asarray(ra_deg, dtype=float))
    dec = np.atleast_1d(np.asarray(dec_deg, dtype=float))
    if ra.size * mjd.size > MAX_POSITION_SAMPLES:
        raise UserError(f"--days/--grid: {ra.size} positions (targets and references) over "
                        f"{mjd.size} time steps is too big a problem (limit "
                        f"{MAX_POSITION_SAMPLES:,} position-steps); plan fewer days or fewer "
                        "targets at a time")
    state = earth_state(mjd)
    vec = unit_vectors(ra, dec)  # (P, 3)
    alt = np.empty((ra.size, mjd.size), dtype=np.float32)
    az = np.empty_like(alt)
    for p in range(ra.size):  # per position; each call covers every time sample
        alt[p], az[p] = icrs_to_altaz_deg(site, vec[p], state)
    sun = sun_direction(state)
    sun_sep = _separations_deg(vec, sun)
    # The Sun's alt/az on the grid and one day past it, for slews and the resting dish.
    step_d = settings.step_s / SECONDS_PER_DAY
    tail = mjd[-1] + step_d * np.arange(1, int(math.ceil(1.0 / step_d)) + 1)
    tail_state = earth_state(tail)
    sun_alt, sun_az = icrs_to_altaz_deg(site, sun, state)
    tail_alt, tail_az = icrs_to_altaz_deg(site, sun_direction(tail_state), tail_state)
    sun_alt = np.concatenate([sun_alt, tail_alt])
    sun_az = np.concatenate([sun_az, tail_az])
    moon_sep = _separations_deg(vec, moon_direction(site, state))
    dish = site.dish
    limit = dish.horizon_limit_deg(az).astype(np.float32)
    margin = ANGLE_MARGIN_DEG
    elevation_ok = (alt >= limit + margin) & (alt <= dish.elevation_max_deg - margin)
    # Feed safety is never weaker than the data rule, and a block's start and end must
    # be reachable by a Sun-safe slew, so the hazard keeps the slew clearance.
    sun_limit = max(settings.sun_min_sep_deg + margin, settings.sun_hazard_deg
                    + slew_sun_margin_deg(slew_model(site), settings.step_s))
    sun_ok = sun_sep >= sun_limit
    if settings.moon_min_sep_deg > 0:
        moon_ok = moon_sep >= settings.moon_min_sep_deg + margin
    else:
        moon_ok = np.ones_like(sun_ok)
    if settings.night_only:
        night = sun_alt[:mjd.size] < settings.night_sun_alt_deg
    else:
        night = np.ones(mjd.size, dtype=bool)
    intervals = window_intervals_mjd(settings.availability, settings.start_mjd,
                                     settings.end_mjd, site.tz)
    w_start, w_end = _window_edges(mjd, intervals)
    return Visibility(mjd_utc=mjd, alt_deg=alt, az_deg=az, sun_sep_deg=sun_sep,
                      moon_sep_deg=moon_sep, elevation_ok=elevation_ok, sun_ok=sun_ok,
                      moon_ok=moon_ok, night=night, window_start_mjd=w_start,
                      window_end_mjd=w_end, sun_alt_deg=sun_alt, sun_az_deg=sun_az)


def _separations_deg(vec: np.ndarray, body: np.ndarray) -> np.ndarray:
    """Angles (deg, float32) between every position (P, 3) and a body's track (N, 3).

    arccos of the dot product: float64 round-off is negligible even at the few-degree
    Moon limit, and float32 storage keeps 1e-5 deg, far inside the margin.
    """
    cos_sep = np.clip(vec @ body.T, -1.0, 1.0)
    return np.degrees(np.arccos(cos_sep)).astype(np.float32)
