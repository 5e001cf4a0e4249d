"""Pointed-survey scheduling for a steerable dish: constraints, dispatcher, plan document.

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

Scheduler: a deterministic greedy dispatcher with look-ahead. Whenever the dish
is free at time t it considers every unfinished target whose earliest possible
full-integration start lies within ``LOOKAHEAD_MIN`` of t. For each it works
out the real start: slew (shortest wrap-legal move, ``planner.slew``) to where
the target will be when the block starts, waiting if the target is not yet
startable, iterated until the dish arrives in time; with reference positions
the unit is target + slew + reference, and the reference must be startable
within ``REFERENCE_MAX_WAIT_MIN`` of the dish reaching it. Each feasible unit is
scored

    score = priority * efficiency * (1 + urgency)

``efficiency`` = integration minutes / minutes from t to the end of the unit
(slews, waits and the reference count against it, so short slews win);
``urgency`` = min(1, unit length * repeats still wanted / time left in the
period in which the target can still start a full block), so a target about
to be lost for good (it sets soonest, or this is its last night) can double its
score, while one with plenty of chances left barely changes. The best score
wins; ties go to the earlier target in the input (deterministic). Look-ahead
gap filling: if the winner must wait for its start, the best other unit that
ends early enough for the dish to reach the winner in time is done first.
When nothing is startable within the look-ahead, time jumps to the next start
possibility. The dispatcher therefore never places a block that breaks a
constraint, never overlaps blocks, and fits every slew in the gap before its
block; it does not guarantee an optimum.

Feed safety (the Sun never within ``sun_hazard_deg`` of the dish axis, moving,
parked or idle; ``planner.sunsafety``):

* Slews: a wrap choice whose path (both axes at once at their rates, the way
  the drive azimuth goes) passes within hazard + ``slew_sun_margin_deg`` of the
  Sun is illegal (``slew.choose_drive_az``); with no legal choice the unit is
  not startable then. The Sun is taken at one grid sample (the block start for
  moves to a block: the slew ends there) and the margin covers path sampling
  (PATH_STEP_DEG / 2), the fast Sun's 0.01 deg and the Sun's drift over the
  longest slew or one grid step, whichever is longer.
* Resting: between blocks the dish sits still at its last position (at its
  start position before the first slew, and after the last block). Every grid
  sample from the one at or before it stops through the one at or after the
  next slew leaves must keep the Sun beyond hazard + ``rest_sun_margin_deg``
  (0.01 deg plus the drift over half a step: every instant is within half a
  step of a checked sample). The Sun is followed one day past the period's end,
  since the dish stays where the plan leaves it. Where the dish would rest
  through a closer approach, it goes to ``sunsafety.sun_safe_stow`` first: a
  ``slew`` block (named ``STOW_NAME``; a wrap choice whose path is Sun-safe,
  leaving as soon as the dish stops, or at a later grid sample before the Sun
  arrives if the path is blocked at first) and a ``stow`` block from its
  arrival until the next slew leaves (the end of the period after the last
  one); later slews start from the stow. Stow slews leave when the dish stops,
  so one may run past the end of an availability window: safety first.
* A unit whose end position could not be left for the stow in time (the Sun
  blocking every path) is not chosen; a reference must be reachable without
  the dish resting near the Sun between target and reference. If the start
  position itself is trapped, the plan is refused with a ``UserError``.

Each target block then gets its LSR-correction range (``doppler``, one-minute
samples over the block) and receiver tuning (``spectral.tuning_advice`` with the
disc-HI envelope of ``galaxy`` at the target's l, b); a reference block keeps
its target's tuning, since position switching needs the same receiver setting
on and off (common practice). Angles in degrees, times as float MJD (UTC).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from .avoidance import DEFAULT_NIGHT, NIGHT_SUN_ALTITUDE_DEG, moon_direction, sun_direction
from .doppler import velocity_corrections
from .earth import earth_state, unit_vectors
from .errors import UserError
from .galactic import galactic_to_icrs_deg
from .galaxy import RotationModel, hi_velocity_envelope
from .obslog import LogEntry, coverage_minutes
from .site import DEFAULT_SUN_HAZARD_DEG, Site
from .skytrack import icrs_to_altaz_deg
from .slew import SlewModel, choose_drive_az, drive_options_deg, slew_model
from .sunsafety import PATH_STEP_DEG, SUN_DRIFT_DEG_PER_MIN, sun_safe_stow
from .spectral import TuningAdvice, tuning_advice
from .targets import ReferenceSpec, Target, position_name, reference_positions
from .timebase import SECONDS_PER_DAY, iso_local, iso_utc
from .windows import ALWAYS, Availability, window_intervals_mjd

SURVEY_SCHEMA = "hiplan.survey/1"
STEP_S = 60.0
ANGLE_MARGIN_DEG = 0.05
LOOKAHEAD_MIN = 60.0
REFERENCE_MAX_WAIT_MIN = 10.0
# Positions x samples held in memory (alt, az and separations as float32, masks, run
# lengths, plus float64 temporaries): about 50 bytes each at the peak, so about 1 GB.
MAX_POSITION_SAMPLES = 20_000_000
# The fast Sun (``avoidance``) and beam directions agree with astropy's apparent
# topocentric ones within 0.01 deg (planner.sunsafety, tests/test_sunsafety.py).
FAST_SUN_DEG = 0.01
# How far the resting dish's Sun check may look for a clear path to the stow after
# it stops (grid samples): four hours at one-minute steps; our choice.
STOW_SEARCH_SAMPLES = 240
STOW_NAME = "stow"
_EPS_DAYS = 1e-3 / SECONDS_PER_DAY  # 1 ms: float MJD round-off guard
MINUTES_PER_DAY = 1440.0

REASON_NEVER_UP = "never rises above the elevation limit"
REASON_NEVER_LONG = "never above the elevation limit for a whole integration"
REASON_SUN = "only near the Sun this period"
REASON_MOON = "only near the Moon this period"
REASON_DAYLIGHT = "only in daylight"
REASON_WINDOWS = "outside every window"
REASON_REFERENCE = "no reference position usable alongside it"
REASON_TIME = "not enough time this period"
REASON_DONE = "already observed (observation log)"


@dataclass(frozen=True)
class SurveySettings:
    """What to schedule against: period (MJD UTC), rules (deg), windows, references."""

    start_mjd: float
    end_mjd: float
    sun_min_sep_deg: float
    moon_min_sep_deg: float = 0.0
    night_only: bool = False
    night_sun_alt_deg: float = NIGHT_SUN_ALTITUDE_DEG[DEFAULT_NIGHT]  # with night_only
    night: str = DEFAULT_NIGHT  # the name of that limit, for the document
    sun_hazard_deg: float = DEFAULT_SUN_HAZARD_DEG  # feed safety (site rule)
    availability: Availability = ALWAYS
    reference: ReferenceSpec | None = None
    reference_minutes: float | None = None  # None: as long as the target's integration
    lsr_definition: str = "standard"
    rotation: RotationModel = field(default_factory=RotationModel)
    rotation_name: str = "iau1985"
    alarm_minutes: float = 15.0
    step_s: float = STEP_S


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


@dataclass(frozen=True)
class Block:
    """One entry of the plan: a target or reference integration, a slew, or a Sun-safe stow.

    A stow (and the slew to it) is a fixed alt/az, not a sky position: its l, b,
    RA and Dec are None and its target index is -1.
    """

    kind: str  # target | reference | slew | stow
    name: str
    target: int  # index of the target this block serves, -1 for stows
    start_mjd: float
    end_mjd: float
    l_deg: float | None
    b_deg: float | None
    ra_deg: float | None
    dec_deg: float | None
    alt_start_deg: float
    alt_end_deg: float
    az_start_deg: float  # sky azimuth, [0, 360)
    az_end_deg: float
    drive_az_start_deg: float  # cable-wrap (encoder) azimuth
    drive_az_end_deg: float
    sun_sep_min_deg: float | None = None
    moon_sep_min_deg: float | None = None
    repeat: int = 0  # 1-based repeat of the target, 0 for slews
    reference_for: str | None = None
    lsr_corr_min_kms: float | None = None
    lsr_corr_max_kms: float | None = None
    tuning: TuningAdvice | None = None

    @property
    def minutes(self) -> float:
        return (self.end_mjd - self.start_mjd) * MINUTES_PER_DAY


@dataclass(frozen=True)
class Unscheduled:
    """A target (or the rest of its repeats) left out, and why."""

    name: str
    reason: str
    repeats_wanted: int
    repeats_scheduled: int
    repeats_done_before: int


@dataclass(frozen=True)
class SurveyPlan:
    """The scheduler's result."""

    site: Site
    settings: SurveySettings
    targets: tuple[Target, ...]
    blocks: tuple[Block, ...]
    unscheduled: tuple[Unscheduled, ...]
    done_before: tuple[int, ...]  # repeats credited from the observation log, per target

    def completed(self) -> np.ndarray:
        """Target integrations scheduled, per target."""
        counts = np.zeros(len(self.targets), dtype=int)
        for b in self.blocks:
            if b.kind == "target":
                counts[b.target] += 1
        return counts


# ------------------------------------------------------------------ helpers


def _grid_mjd(start_mjd: float, end_mjd: float, step_s: float) -> np.ndarray:
    step_d = step_s / SECONDS_PER_DAY
    n = int(math.floor((end_mjd - start_mjd) / step_d + 1e-6)) + 1
    return start_mjd + step_d * np.arange(n)


def _run_lengths(mask: np.ndarray) -> np.ndarray:
    """Consecutive True samples starting at each sample, along the last axis (int32)."""
    n = mask.shape[-1]
    index = np.arange(n, dtype=np.int32)
    false_at = np.where(mask, np.int32(n), index)
    next_false = np.minimum.accumulate(false_at[..., ::-1], axis=-1)[..., ::-1]
    return next_false - index


def _next_true(mask: np.ndarray) -> np.ndarray:
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
    index = np.searchsorted(spans[:, 0], mjd + _EPS_DAYS, side="right") - 1
    safe = np.maximum(index, 0)
    inside = (index >= 0) & (mjd < spans[safe, 1] - _EPS_DAYS)
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


def repeats_done_from_log(targets, entries: list[LogEntry], bin_width_deg: float) -> np.ndarray:
    """Whole integrations already in the log, per target: bin minutes // target minutes.

    The log records longitude ranges only, so a target counts as observed when
    the longitude bin holding its l has at least its minutes (any b).
    """
    minutes_per_bin = coverage_minutes(entries, bin_width_deg)
    n_bins = minutes_per_bin.size
    done = []
    for t in targets:
        covered = minutes_per_bin[int(math.floor(t.l_deg / bin_width_deg + 1e-9)) % n_bins]
        done.append(int(min(t.repeats, math.floor(covered / t.minutes + 1e-9))))
    return np.array(done, dtype=int)


def _start_drive(site: Site, model: SlewModel) -> tuple[float, float]:
    """Where the dish is when the plan starts: the site's [pointing], else high at azimuth 0."""
    point = site.default_pointing
    if "alt_deg" in point and "az_deg" in point:
        alt, az = float(point["alt_deg"]), float(point["az_deg"])
    else:
        alt, az = site.dish.elevation_max_deg, 0.0
    options = drive_options_deg(model, az)
    centre = 0.5 * (model.az_min_deg + model.az_max_deg)
    best = int(np.nanargmin(np.abs(options - centre)))
    return float(options[best]), alt


# ------------------------------------------------------------------ scheduler


def _first_usable(table: np.ndarray, rows: np.ndarray, k: np.ndarray) -> np.ndarray:
    """``table[rows, k]`` for a next-true table, N where k is past the grid."""
    n = table.shape[-1]
    inside = k < n
    out = np.full(k.shape, n, dtype=np.int64)
    out[inside] = table[rows[inside], k[inside]]
    return out


@dataclass(frozen=True)
class _Rest:
    """The dish at rest at (drive azimuth, elevation) since ``since`` (MJD).

    ``danger_k``: the first sample of the continued grid, from the one at or before
    ``since``, at which the Sun is within hazard + rest margin of it (past the grid:
    never). ``route``: how to reach the stow when it must, (leave MJD, drive
    azimuth at the stow, slew seconds), or None.
    """

    az: float
    el: float
    since: float
    danger_k: int
    needs_stow: bool
    route: tuple[float, float, float] | None

    @property
    def trapped(self) -> bool:
        return self.needs_stow and self.route is None


class _Dispatcher:
    """The greedy dispatcher of the module docstring: state of one scheduling run."""

    def __init__(self, site: Site, targets, settings: SurveySettings, vis: Visibility,
                 ref_table: np.ndarray, ref_rows: np.ndarray, remaining: np.ndarray):
        self.site, self.targets, self.settings, self.vis = site, targets, settings, vis
        self.model = slew_model(site)
        self.step_s = settings.step_s
        self.step_d = settings.step_s / SECONDS_PER_DAY
        self.n = vis.mjd_utc.size
        self.lookahead = int(round(LOOKAHEAD_MIN * 60.0 / self.step_s))
        self.ref_wait = int(round(REFERENCE_MAX_WAIT_MIN * 60.0 / self.step_s))
        # Samples from a target's end to the latest start of its reference.
        self.ref_reach = self.ref_wait + int(math.ceil(self.model.max_slew_s / self.step_s)) + 2
        m = len(targets)
        self.minutes = np.array([t.minutes for t in targets], dtype=float)
        self.priority = np.array([t.priority for t in targets], dtype=float)
        self.need = samples_needed(self.minutes, self.step_s)
        self.ref_minutes = (self.minutes if settings.reference_minutes is None
                            else np.full(m, float(settings.reference_minutes)))
        self.ref_need = samples_needed(self.ref_minutes, self.step_s)
        self.ref_table = ref_table  # (R, 4): l, b, ra, dec of reference positions
        self.ref_rows = ref_rows  # (M, J) visibility rows of reference options, -1 = none
        self.run_len = _run_lengths(vis.ok)
        mjd = vis.mjd_utc
        fits_window = (mjd[None, :] + self.minutes[:, None] / MINUTES_PER_DAY
                       <= vis.window_end_mjd[None, :] + _EPS_DAYS)
        # Target alone: the whole block visible and inside one window.
        self.target_can_start = (self.run_len[:m] >= self.need[:, None] + 1) & fits_window
        self.can_start = self.target_can_start & self._reference_plausible()
        self.next_start = _next_true(self.can_start)
        self.startable_after = np.cumsum(self.can_start[:, ::-1], axis=1,
                                         dtype=np.int32)[:, ::-1]
        self.remaining = remaining.astype(int).copy()
        # Feed safety: the Sun on the grid continued one day (east, north, up unit vectors).
        hazard = settings.sun_hazard_deg
        self.slew_clear_deg = hazard + slew_sun_margin_deg(self.model, self.step_s)
        self.rest_cos = math.cos(math.radians(hazard + rest_sun_margin_deg(self.step_s)))
        self.sun_enu = unit_vectors(90.0 - vis.sun_az_deg, vis.sun_alt_deg)
        self.n_ext = vis.sun_alt_deg.size
        self.stow = sun_safe_stow(site)
        self.ref_failed = np.zeros(m, dtype=bool)
        self.unit_ok_ever = np.zeros(m, dtype=bool)
        self.repeat_no = np.zeros(m, dtype=int)

    def _reference_plausible(self) -> np.ndarray:
        """(M, N): some reference option could start soon after a target block starting here.

        A filter, not a guarantee: it lets the dispatcher skip times when no
        reference is up instead of trying them one step at a time.
        """
        m = len(self.targets)
        if self.settings.reference is None:
            return np.ones((m, self.n), dtype=bool)
        ref_any = np.zeros((m, self.n), dtype=bool)
        for j in range(self.ref_rows.shape[1]):  # loop over <= 8 options per target
            rows = self.ref_rows[:, j]
            has = rows >= 0
            ref_any[has] |= self.run_len[rows[has]] >= self.ref_need[has, None] + 1
        reach = self.ref_reach
        next_ref = _next_true(ref_any)
        after = np.minimum(np.arange(self.n)[None, :] + self.need[:, None], self.n - 1)
        first = np.take_along_axis(next_ref, after, axis=1)
        return first <= after + reach

    # -- geometry

    def _track(self, rows, k, need, minutes):
        """Start alt/az, least and greatest unwrapped azimuth change, end offset and end alt.

        All (C,) arrays: visibility rows, start samples, steps and minutes of the blocks.
        """
        vis = self.vis
        steps = np.arange(int(need.max()) + 1)
        idx = np.minimum(k[:, None] + steps, self.n - 1)
        az = vis.az_deg[rows[:, None], idx].astype(float)
        alt = vis.alt_deg[rows[:, None], idx].astype(float)
        rel = np.unwrap(az, period=360.0, axis=1)
        rel -= rel[:, :1]
        inside = steps[None, :] <= need[:, None]
        lo = np.where(inside, rel, np.inf).min(axis=1)
        hi = np.where(inside, rel, -np.inf).max(axis=1)
        # The end falls between samples need-1 and need: interpolate (exact on whole steps).
        frac = minutes * 60.0 / self.step_s - (need - 1)
        i = np.arange(len(rows))
        rel_end = rel[i, need - 1] + frac * (rel[i, need] - rel[i, need - 1])
        alt_end = alt[i, need - 1] + frac * (alt[i, need] - alt[i, need - 1])
        return alt[:, 0], az[:, 0], lo, hi, rel_end, alt_end

    def _arrive(self, rows, k, need, minutes, from_az, from_el, free_mjd, next_usable):
        """Earliest usable start samples (>= k) that the dish, free at ``free_mjd``, reaches in time.

        Arguments are (C,) arrays. ``next_usable(i, kk)`` gives the first usable
        start at or after sample kk for entries i (N if none). The slew starts at
        max(free time, start of the window holding the block) and goes to where the
        source is at the block start; a late arrival moves the start on. Returns
        (k, drive azimuth, slew seconds, on_time).
        """
        vis = self.vis
        k = k.astype(np.int64).copy()
        drive = np.full(len(rows), np.nan)
        slew_s = np.full(len(rows), np.inf)
        on_time = np.zeros(len(rows), dtype=bool)
        alive = k < self.n
        for _ in range(6):  # sources move < 0.3 deg per step: two or three rounds settle it
            a = np.flatnonzero(alive & ~on_time)
            if a.size == 0:
                break
            alt0, az0, lo, hi, _, _ = self._track(rows[a], k[a], need[a], minutes[a])
            drive[a], slew_s[a] = choose_drive_az(
                self.model, from_az[a], from_el[a], az0, alt0, lo, hi,
                sun_alt_deg=vis.sun_alt_deg[k[a]], sun_az_deg=vis.sun_az_deg[k[a]],
                sun_clear_deg=self.slew_clear_deg)
            free = np.maximum(free_mjd[a], vis.window_start_mjd[k[a]])
            arrival = free + slew_s[a] / SECONDS_PER_DAY
            good = arrival <= vis.mjd_utc[k[a]] + _EPS_DAYS
            on_time[a[good]] = True
            late = a[~good]
            arr = arrival[~good]
            after = np.where(np.isfinite(arr),
                             np.ceil((arr - vis.mjd_utc[0]) / self.step_d - 1e-6), k[late] + 1)
            k[late] = next_usable(late, np.maximum(after.astype(np.int64), k[late] + 1))
            alive[late] = k[late] < self.n
        return k, drive, slew_s, on_time & alive

    # -- feed safety

    def _ceil_k(self, mjd_utc: float) -> int:
        """Index of the first grid sample at or after ``mjd_utc`` (1 ms round-off guard)."""
        return int(math.ceil((mjd_utc - self.vis.mjd_utc[0]) / self.step_d - 1e-6))

    def _floor_k(self, mjd_utc: float) -> int:
        return max(0, int(math.floor((mjd_utc - self.vis.mjd_utc[0]) / self.step_d + 1e-6)))

    def _rest_clear(self, drive_az, el, since, until) -> np.ndarray:
        """(C,) True where a dish resting at (drive az, el) from ``since`` to ``until``
        keeps the Sun beyond hazard + rest margin at every sample from the one at or
        before ``since`` to the one at or after ``until`` (all (C,) arrays)."""
        t0 = self.vis.mjd_utc[0]
        k0 = np.maximum(np.floor((since - t0) / self.step_d + 1e-6), 0).astype(np.int64)
        k1 = np.ceil((until - t0) / self.step_d - 1e-6).astype(np.int64)
        k1 = np.clip(k1, k0, self.n_ext - 1)
        steps = np.arange(int((k1 - k0).max()) + 1)
        idx = np.minimum(k0[:, None] + steps, self.n_ext - 1)
        beam = unit_vectors(90.0 - np.asarray(drive_az, dtype=float), np.asarray(el, dtype=float))
        near = np.einsum("cwi,ci->cw", self.sun_enu[idx], beam) > self.rest_cos
        return ~(near & (steps[None, :] <= (k1 - k0)[:, None])).any(axis=1)

    def _rest(self, drive_az: float, el: float, since: float) -> _Rest:
        """The dish coming to rest: when the Sun would reach it and, if so, its way to the stow."""
        k0 = self._floor_k(since)
        beam = unit_vectors(90.0 - drive_az, el)
        near = np.flatnonzero(self.sun_enu[k0:] @ beam > self.rest_cos)
        if near.size == 0:
            return _Rest(drive_az, el, since, self.n_ext, False, None)
        danger = k0 + int(near[0])
        return _Rest(drive_az, el, since, danger, True,
                     self._stow_route(drive_az, el, since, danger))

    def _stow_route(self, drive_az: float, el: float, since: float, danger_k: int):
        """(leave MJD, drive azimuth, slew s) of a Sun-safe move to the stow, or None.

        Leaves at ``since`` (the Sun taken at the next sample) if a wrap choice's path
        is clear; else at the first later grid sample before ``danger_k`` (and within
        STOW_SEARCH_SAMPLES) at which one is.
        """
        vis, stow = self.vis, self.stow
        k_first = min(self._ceil_k(since), self.n_ext - 1)
        later = np.arange(k_first + 1, min(danger_k, k_first + 1 + STOW_SEARCH_SAMPLES,
                                           self.n_ext))
        for ks, at_once in ((np.array([k_first]), True), (later, False)):
            if ks.size == 0:
                continue
            drive, slew_s = choose_drive_az(self.model, drive_az, el, stow.az_deg, stow.alt_deg,
                                            sun_alt_deg=vis.sun_alt_deg[ks],
                                            sun_az_deg=vis.sun_az_deg[ks],
                                            sun_clear_deg=self.slew_clear_deg)
            ok = np.flatnonzero(np.isfinite(slew_s))
            if ok.size:
                j = int(ok[0])
                leave = since if at_once else float(vis.mjd_utc[0] + self.step_d * ks[j])
                return leave, float(drive[j]), float(slew_s[j])
        return None

    def _stow(self, blocks: list[Block], rest: _Rest, t: float):
        """Send the resting dish to the stow: append the slew and an open stow block.

        Returns the new free time, position, rest and the stow block's index.
        """
        leave, drive, slew_s = rest.route
        arrive = leave + slew_s / SECONDS_PER_DAY
        alt, az = float(self.stow.alt_deg), float(self.stow.az_deg) % 360.0
        nowhere = dict(l_deg=None, b_deg=None, ra_deg=None, dec_deg=None)
        if slew_s > 0:
            blocks.append(Block(
                kind="slew", name=STOW_NAME, target=-1, start_mjd=leave, end_mjd=arrive,
                **nowhere, alt_start_deg=rest.el, alt_end_deg=alt,
                az_start_deg=rest.az % 360.0, az_end_deg=az, drive_az_start_deg=rest.az,
                drive_az_end_deg=drive))
        blocks.append(Block(
            kind="stow", name=STOW_NAME, target=-1, start_mjd=arrive, end_mjd=arrive, **nowhere,
            alt_start_deg=alt, alt_end_deg=alt, az_start_deg=az, az_end_deg=az,
            drive_az_start_deg=drive, drive_az_end_deg=drive))
        after = self._rest(drive, alt, arrive)
        if after.needs_stow:  # sun_safe_stow keeps > 45 deg; only an odd site gets here
            raise UserError(f"site: the Sun comes within {self.settings.sun_hazard_deg:g}° of "
                            f"the stow position (elevation {alt:.1f}°, azimuth {az:.1f}°); "
                            "lower sun_hazard_deg")
        return max(t, arrive), drive, alt, after, len(blocks) - 1

    def _close_stow(self, blocks: list[Block], i: int, end_mjd: float) -> None:
        """End stow block i at ``end_mjd``, with the Sun's least distance over it."""
        b = blocks[i]
        end_mjd = max(end_mjd, b.start_mjd)
        k0 = self._floor_k(b.start_mjd)
        k1 = max(k0, min(self._ceil_k(end_mjd), self.n_ext - 1))
        beam = unit_vectors(90.0 - b.drive_az_start_deg, b.alt_start_deg)
        cos_max = float(np.max(self.sun_enu[k0:k1 + 1] @ beam))
        blocks[i] = replace(b, end_mjd=end_mjd,
                            sun_sep_min_deg=math.degrees(math.acos(min(1.0, max(-1.0, cos_max)))))

    # -- candidate units

    def _units(self, cand, k, t, pos_az, pos_el) -> dict:
        """Target blocks (and their references) for candidates ``cand`` from time t."""
        vis, c_n = self.vis, len(cand)
        need, minutes = self.need[cand], self.minutes[cand]
        k, drive, slew_s, ok = self._arrive(
            cand, k, need, minutes, np.full(c_n, pos_az), np.full(c_n, pos_el), np.full(c_n, t),
            lambda i, kk: _first_usable(self.next_start, cand[i], kk))
        kk = np.minimum(k, self.n - 1)
        end_mjd = vis.mjd_utc[kk] + minutes / MINUTES_PER_DAY
        u = {"cand": cand, "k": k, "drive": drive, "slew_s": slew_s, "ok": ok,
             "end_mjd": end_mjd, "unit_end_mjd": end_mjd.copy(),
             "ref_row": np.full(c_n, -1), "ref_k": np.full(c_n, -1),
             "ref_drive": np.full(c_n, np.nan), "ref_slew_s": np.zeros(c_n)}
        if self.settings.reference is None or not ok.any():
            return u
        a = np.flatnonzero(ok)
        _, _, _, _, rel_end, alt_end = self._track(cand[a], k[a], need[a], minutes[a])
        end_drive = drive[a] + rel_end
        # Every (candidate, reference option) pair at once.
        options = self.ref_rows[cand[a]]
        pair_c, pair_j = np.nonzero(options >= 0)
        rows = options[pair_c, pair_j]
        owner = cand[a][pair_c]
        r_need, r_min = self.ref_need[owner], self.ref_minutes[owner]
        t_end = end_mjd[a][pair_c]
        w_end = vis.window_end_mjd[k[a]][pair_c]
        k0 = np.ceil((t_end - vis.mjd_utc[0]) / self.step_d - 1e-6).astype(np.int64)
        reach = self.ref_reach
        steps = np.arange(reach)
        idx = k0[:, None] + steps
        safe = np.minimum(idx, self.n - 1)
        fits = ((idx < self.n)
                & (self.run_len[rows[:, None], safe] >= r_need[:, None] + 1)
                & (vis.mjd_utc[safe] + r_min[:, None] / MINUTES_PER_DAY
                   <= w_end[:, None] + _EPS_DAYS))
        first_fit = _next_true(fits)  # (pairs, reach): first fitting step at or after each

        def next_ref(i, kk):
            off = kk - k0[i]
            out = np.full(len(i), self.n, dtype=np.int64)
            inside = (off >= 0) & (off < reach)
            hit = first_fit[i[inside], off[inside]]
            out[inside] = np.where(hit < reach, k0[i[inside]] + hit, self.n)
            return out

        pairs = np.arange(len(rows))
        start = next_ref(pairs, k0)
        rk, rdrive, rslew, rok = self._arrive(rows, start, r_need, r_min, end_drive[pair_c],
                                              alt_end[pair_c], t_end, next_ref)
        rkk = np.minimum(rk, self.n - 1)
        # Switching wants the reference soon after the target: limit the wait on arrival.
        rok &= vis.mjd_utc[rkk] <= t_end + rslew / SECONDS_PER_DAY + self.ref_wait * self.step_d \
            + _EPS_DAYS
        # The dish rests at the target's end position until the reference slew leaves.
        waits = np.flatnonzero(rok)
        if waits.size:
            leave = vis.mjd_utc[rkk[waits]] - rslew[waits] / SECONDS_PER_DAY
            rok[waits] = self._rest_clear(end_drive[pair_c[waits]], alt_end[pair_c[waits]],
                                          t_end[waits], leave)
        ref_end = np.where(rok, vis.mjd_utc[rkk] + r_min / MINUTES_PER_DAY, np.inf)
        # Per candidate: the option that ends first; ties keep the preference order.
        order = np.lexsort((pair_j, ref_end, pair_c))
        _, first = np.unique(pair_c[order], return_index=True)
        best = order[first]  # one pair per candidate that has any option
        has = np.isfinite(ref_end[best])
        sel = a[pair_c[best]]
        self.ref_failed[cand[sel[~has]]] = True
        u["ok"][sel[~has]] = False
        p, s = best[has], sel[has]
        u["ref_row"][s], u["ref_k"][s] = rows[p], rk[p]
        u["ref_drive"][s], u["ref_slew_s"][s] = rdrive[p], rslew[p]
        u["unit_end_mjd"][s] = ref_end[p]
        no_option = np.setdiff1d(a, sel)
        u["ok"][no_option] = False
        return u

    def _scores(self, u: dict, t: float) -> np.ndarray:
        """priority * efficiency * (1 + urgency), -inf for infeasible units."""
        ok = u["ok"]
        c = u["cand"]
        kk = np.minimum(u["k"], self.n - 1)
        unit_s = np.maximum((u["unit_end_mjd"] - t) * SECONDS_PER_DAY, 1e-9)
        efficiency = self.minutes[c] * 60.0 / unit_s
        length_s = (u["unit_end_mjd"] - self.vis.mjd_utc[kk]) * SECONDS_PER_DAY
        left_s = self.startable_after[c, kk] * self.step_s
        urgency = np.minimum(1.0, length_s * self.remaining[c] / np.maximum(left_s, self.step_s))
        return np.where(ok, self.priority[c] * efficiency * (1.0 + urgency), -np.inf)

    # -- main loop

    def run(self, start_az: float, start_el: float) -> list[Block]:
        vis = self.vis
        mjd = vis.mjd_utc
        blocks: list[Block] = []
        t, pos_az, pos_el = float(mjd[0]), start_az, start_el
        rest = self._rest(pos_az, pos_el, t)
        if rest.trapped:
            raise UserError(
                f"site [pointing]: the Sun comes within {self.settings.sun_hazard_deg:g}° of "
                f"the dish's start position (elevation {pos_el:.1f}°, azimuth "
                f"{pos_az % 360.0:.1f}°) on {iso_utc(float(mjd[min(rest.danger_k, self.n - 1)]))} "
                "and no Sun-safe path to the stow position is clear before then; stow the dish "
                "or start the plan at another time")
        stow_at: int | None = None  # index of the open stow block
        max_slew_d = self.model.max_slew_s / SECONDS_PER_DAY
        while True:
            active = np.flatnonzero(self.remaining > 0)
            if active.size == 0:
                break
            k_now = self._ceil_k(t)
            if k_now >= self.n:
                break
            if k_now >= rest.danger_k:  # any slew from here leaves too late: stow first
                t, pos_az, pos_el, rest, stow_at = self._stow(blocks, rest, t)
                continue
            first = self.next_start[active, k_now]
            possible = first < self.n
            if not possible.any():
                break
            k_first = int(first[possible].min())
            if k_first > k_now + self.lookahead:
                t = max(t, float(mjd[k_first]) - max_slew_d)  # idle until then
                continue
            pick = possible & (first <= k_now + self.lookahead)
            cand = active[pick]
            u = self._units(cand, first[pick].astype(np.int64), t, pos_az, pos_el)
            self.unit_ok_ever[cand[u["ok"]]] = True
            score = self._scores(u, t)
            chosen, after = self._choose(u, score, t, rest)
            if chosen is None:
                t = float(mjd[k_now]) + self.step_d
                continue
            if after is None:  # the dish would rest here through a close approach
                t, pos_az, pos_el, rest, stow_at = self._stow(blocks, rest, t)
                continue
            if stow_at is not None:
                self._close_stow(blocks, stow_at, self._departure(u, chosen))
                stow_at = None
            t, pos_az, pos_el = self._commit(u, chosen, t, pos_az, pos_el, blocks)
            rest = after
        if rest.danger_k < self.n_ext and stow_at is None:
            t, pos_az, pos_el, rest, stow_at = self._stow(blocks, rest, t)
        if stow_at is not None:
            self._close_stow(blocks, stow_at, max(self.settings.end_mjd, blocks[stow_at].start_mjd))
        return blocks

    def _choose(self, u: dict, score: np.ndarray, t: float, rest: _Rest):
        """(unit index, rest after it) to commit; (None, None) when none is feasible.

        (i, None): the best unit leaves after the Sun reaches the resting dish, so
        the dish must stow first. Units whose end position is trapped (the Sun would
        reach it before any path to the stow clears) are dropped.
        """
        score = score.copy()
        while np.isfinite(score).any():
            best = int(np.argmax(score))
            chosen = self._fill_gap(u, score, best, t)
            if self._ceil_k(self._departure(u, chosen)) >= rest.danger_k:
                return chosen, None
            end_az, end_el = self._unit_end_position(u, np.array([chosen]))
            after = self._rest(float(end_az[0]), float(end_el[0]),
                               float(u["unit_end_mjd"][chosen]))
            if not after.trapped:
                return chosen, after
            score[chosen] = -np.inf
        return None, None

    def _departure(self, u: dict, i: int) -> float:
        """When the first slew of unit i leaves (its block start if there is no slew)."""
        return float(self.vis.mjd_utc[int(u["k"][i])]) - float(u["slew_s"][i]) / SECONDS_PER_DAY

    def _fill_gap(self, u: dict, score: np.ndarray, best: int, t: float) -> int:
        """Another unit to do first when the best one must wait and the wait is long enough."""
        vis = self.vis
        k_b = int(u["k"][best])
        free_b = max(t, float(vis.window_start_mjd[k_b]))
        wait_d = vis.mjd_utc[k_b] - (free_b + u["slew_s"][best] / SECONDS_PER_DAY)
        if wait_d <= self.step_d:
            return best
        others = np.flatnonzero(np.isfinite(score) & (u["unit_end_mjd"] <= vis.mjd_utc[k_b]))
        others = others[others != best]
        if others.size == 0:
            return best
        # Where the dish ends after each other unit, then the move to the best one's start.
        c_b = u["cand"][best]
        alt0, az0, lo, hi, _, _ = self._track(np.array([c_b]), np.array([k_b]),
                                              self.need[[c_b]], self.minutes[[c_b]])
        end_az, end_el = self._unit_end_position(u, others)
        _, move_s = choose_drive_az(self.model, end_az, end_el, az0[0], alt0[0], lo[0], hi[0],
                                    sun_alt_deg=vis.sun_alt_deg[k_b],
                                    sun_az_deg=vis.sun_az_deg[k_b],
                                    sun_clear_deg=self.slew_clear_deg)
        free = np.maximum(u["unit_end_mjd"][others], vis.window_start_mjd[k_b])
        fits = free + move_s / SECONDS_PER_DAY <= vis.mjd_utc[k_b] + _EPS_DAYS
        if not fits.any():
            return best
        fitting = others[fits]
        return int(fitting[np.argmax(score[fitting])])

    def _unit_end_position(self, u: dict, sel: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Drive azimuth and elevation of the dish at the end of units ``sel``."""
        c = u["cand"][sel]
        has_ref = u["ref_row"][sel] >= 0
        az = np.empty(len(sel))
        el = np.empty(len(sel))
        t_only = ~has_ref
        if t_only.any():
            s = sel[t_only]
            _, _, _, _, rel_end, alt_end = self._track(c[t_only], u["k"][s], self.need[c[t_only]],
                                                       self.minutes[c[t_only]])
            az[t_only], el[t_only] = u["drive"][s] + rel_end, alt_end
        if has_ref.any():
            s = sel[has_ref]
            cr = c[has_ref]
            _, _, _, _, rel_end, alt_end = self._track(u["ref_row"][s], u["ref_k"][s],
                                                       self.ref_need[cr], self.ref_minutes[cr])
            az[has_ref], el[has_ref] = u["ref_drive"][s] + rel_end, alt_end
        return az, el

    def _commit(self, u: dict, i: int, t: float, pos_az: float, pos_el: float,
                blocks: list[Block]) -> tuple[float, float, float]:
        """Append the slew(s) and block(s) of unit i; return the new free time and position."""
        c = int(u["cand"][i])
        self.remaining[c] -= 1
        self.repeat_no[c] += 1
        target = self.targets[c]
        pos_az, pos_el, end = self._place(blocks, "target", c, c, int(u["k"][i]),
                                          self.need[c], self.minutes[c], float(u["drive"][i]),
                                          float(u["slew_s"][i]), pos_az, pos_el, target.name)
        if u["ref_row"][i] >= 0:
            row = int(u["ref_row"][i])
            pos_az, pos_el, end = self._place(blocks, "reference", c, row, int(u["ref_k"][i]),
                                              self.ref_need[c], self.ref_minutes[c],
                                              float(u["ref_drive"][i]),
                                              float(u["ref_slew_s"][i]), pos_az, pos_el,
                                              target.name)
        return end, pos_az, pos_el

    def _place(self, blocks, kind, c, row, k, need, minutes, drive, slew_s, from_az, from_el,
               target_name):
        vis = self.vis
        start = float(vis.mjd_utc[k])
        end = start + float(minutes) / MINUTES_PER_DAY
        alt0, az0, _, _, rel_end, alt_end = self._track(np.array([row]), np.array([k]),
                                                        np.array([need]), np.array([minutes]))
        l_deg, b_deg, ra, dec, name = self._position(row)
        geo = dict(l_deg=l_deg, b_deg=b_deg, ra_deg=ra, dec_deg=dec)
        if slew_s > 0:
            blocks.append(Block(
                kind="slew", name=name, target=c, start_mjd=start - slew_s / SECONDS_PER_DAY,
                end_mjd=start, **geo, alt_start_deg=float(from_el), alt_end_deg=float(alt0[0]),
                az_start_deg=float(from_az % 360.0), az_end_deg=float(az0[0]),
                drive_az_start_deg=float(from_az), drive_az_end_deg=drive,
                reference_for=target_name if kind == "reference" else None))
        span = slice(k, min(k + need + 1, self.n))
        moon = (float(vis.moon_sep_deg[row, span].min())
                if self.settings.moon_min_sep_deg > 0 else None)
        end_drive = drive + float(rel_end[0])
        blocks.append(Block(
            kind=kind, name=name, target=c, start_mjd=start, end_mjd=end, **geo,
            alt_start_deg=float(alt0[0]), alt_end_deg=float(alt_end[0]),
            az_start_deg=float(az0[0]), az_end_deg=float(end_drive % 360.0),
            drive_az_start_deg=drive, drive_az_end_deg=end_drive,
            sun_sep_min_deg=float(vis.sun_sep_deg[row, span].min()), moon_sep_min_deg=moon,
            repeat=int(self.repeat_no[c]),
            reference_for=target_name if kind == "reference" else None))
        return end_drive, float(alt_end[0]), end

    def _position(self, row: int):
        m = len(self.targets)
        if row < m:
            t = self.targets[row]
            return t.l_deg, t.b_deg, t.ra_deg, t.dec_deg, t.name
        l_deg, b_deg, ra, dec = self.ref_table[row - m]
        return l_deg, b_deg, ra, dec, position_name(l_deg, b_deg)


# ------------------------------------------------------------------ public API


def _reference_table(targets, spec: ReferenceSpec | None):
    """Unique reference positions (l, b, ra, dec) and, per target, their indices (-1 padded)."""
    if spec is None:
        return np.empty((0, 4)), np.full((len(targets), 1), -1)
    index: dict[tuple[float, float], int] = {}
    per_target = []
    for t in targets:
        rows = []
        for l_deg, b_deg in reference_positions(spec, t):
            key = (round(l_deg % 360.0, 9), round(b_deg, 9))
            rows.append(index.setdefault(key, len(index)))
        per_target.append(rows)
    width = max(len(r) for r in per_target)
    options = np.full((len(targets), width), -1)
    for i, rows in enumerate(per_target):
        options[i, :len(rows)] = rows
    lb = np.array(list(index.keys()), dtype=float).reshape(-1, 2)
    ra, dec = galactic_to_icrs_deg(lb[:, 0], lb[:, 1])
    return np.column_stack([lb, ra, dec]), options


def _reasons(d: _Dispatcher, vis: Visibility, targets, wanted, done_before, scheduled):
    """Why each target with repeats still wanted was left out (first failing rule)."""
    out = []
    for i, t in enumerate(targets):
        if wanted[i] == 0:
            if t.repeats > 0 and done_before[i] >= t.repeats:
                out.append(Unscheduled(t.name, REASON_DONE, t.repeats, 0, int(done_before[i])))
            continue
        if scheduled[i] >= wanted[i]:
            continue
        need = d.need[i] + 1

        def fits(mask, need=need) -> bool:
            return bool((_run_lengths(mask) >= need).any())

        elev = vis.elevation_ok[i]
        if not elev.any():
            reason = REASON_NEVER_UP
        elif not fits(elev):
            reason = REASON_NEVER_LONG
        elif not fits(elev & vis.sun_ok[i]):
            reason = REASON_SUN
        elif not fits(elev & vis.sun_ok[i] & vis.moon_ok[i]):
            reason = REASON_MOON
        elif not fits(elev & vis.sun_ok[i] & vis.moon_ok[i] & vis.night):
            reason = REASON_DAYLIGHT
        elif not d.target_can_start[i].any():
            reason = REASON_WINDOWS
        elif not d.can_start[i].any() or (d.ref_failed[i] and not d.unit_ok_ever[i]):
            reason = REASON_REFERENCE
        else:
            reason = REASON_TIME
        if scheduled[i] > 0 or t.repeats > 1:
            reason += f" ({int(scheduled[i])} of {int(wanted[i])} repeats scheduled)"
        out.append(Unscheduled(t.name, reason, int(wanted[i]), int(scheduled[i]),
                               int(done_before[i])))
    return tuple(out)


def plan_survey(site: Site, targets, settings: SurveySettings,
                done_before=None) -> SurveyPlan:
    """Schedule pointed integrations of ``targets`` at ``site`` (see the module docstring).

    ``done_before``: whole integrations per target already observed (e.g. from
    ``repeats_done_from_log``); they are subtracted from each target's repeats.
    """
    targets = tuple(targets)
    model = slew_model(site)  # refuses non-steerable mounts first
    if not targets:
        raise UserError("no targets: give --grid or --targets")
    if not settings.end_mjd > settings.start_mjd:
        raise ValueError("empty period")
    done = (np.zeros(len(targets), dtype=int) if done_before is None
            else np.asarray(done_before, dtype=int))
    wanted = np.maximum(np.array([t.repeats for t in targets]) - done, 0)
    ref_table, ref_options = _reference_table(targets, settings.reference)
    ra = np.concatenate([[t.ra_deg for t in targets], ref_table[:, 2]])
    dec = np.concatenate([[t.dec_deg for t in targets], ref_table[:, 3]])
    vis = compute_visibility(site, ra, dec, settings)
    ref_rows = np.where(ref_options >= 0, ref_options + len(targets), -1)
    dispatcher = _Dispatcher(site, targets, settings, vis, ref_table, ref_rows, wanted)
    start_az, start_el = _start_drive(site, model)
    blocks = dispatcher.run(start_az, start_el)
    blocks = annotate_blocks(site, targets, blocks, settings)
    scheduled = np.zeros(len(targets), dtype=int)
    for b in blocks:
        if b.kind == "target":
            scheduled[b.target] += 1
    unscheduled = _reasons(dispatcher, vis, targets, wanted, done, scheduled)
    return SurveyPlan(site=site, settings=settings, targets=targets, blocks=tuple(blocks),
                      unscheduled=unscheduled, done_before=tuple(int(x) for x in done))


def annotate_blocks(site: Site, targets, blocks: list[Block], settings: SurveySettings):
    """Blocks with LSR-correction ranges (target/reference) and tuning (target, and its reference).

    LSR corrections are sampled each minute through the block (end included), all
    blocks in one ``velocity_corrections`` call.
    """
    observed = [i for i, b in enumerate(blocks) if b.kind in ("target", "reference")]
    if not observed:
        return list(blocks)
    mjd_parts, ra_parts, dec_parts, counts = [], [], [], []
    for i in observed:  # per block, building its sample list
        b = blocks[i]
        n = int(math.ceil(b.minutes - 1e-9))
        times = b.start_mjd + np.minimum(np.arange(n + 1), b.minutes) / MINUTES_PER_DAY
        mjd_parts.append(times)
        ra_parts.append(np.full(times.size, b.ra_deg))
        dec_parts.append(np.full(times.size, b.dec_deg))
        counts.append(times.size)
    mjd = np.concatenate(mjd_parts)
    corr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m,
                                np.concatenate(ra_parts), np.concatenate(dec_parts), mjd,
                                solar_motion=settings.lsr_definition).lsr_corr_kms
    offsets = np.concatenate([[0], np.cumsum(counts)[:-1]])
    lo = np.minimum.reduceat(corr, offsets)
    hi = np.maximum.reduceat(corr, offsets)
    target_blocks = [i for i in observed if blocks[i].kind == "target"]
    env = hi_velocity_envelope(np.array([blocks[i].l_deg for i in target_blocks]),
                               np.array([blocks[i].b_deg for i in target_blocks]),
                               settings.rotation)
    out = list(blocks)
    range_of = dict(zip(observed, zip(lo, hi)))
    last_tuning: dict[int, TuningAdvice] = {}
    env_of = {i: j for j, i in enumerate(target_blocks)}
    for i in observed:  # per block: scalar tuning advice
        b = blocks[i]
        corr_lo, corr_hi = (float(v) for v in range_of[i])
        if b.kind == "target":
            j = env_of[i]
            tuning = tuning_advice(float(env.v_min_kms[j]), float(env.v_max_kms[j]), corr_lo,
                                   corr_hi, site.receiver)
            last_tuning[b.target] = tuning
        else:
            tuning = last_tuning.get(b.target)
        out[i] = replace(b, lsr_corr_min_kms=corr_lo, lsr_corr_max_kms=corr_hi, tuning=tuning)
    return out


# ------------------------------------------------------------------ document

BLOCK_FIELDS = (
    "kind", "name", "start_utc", "end_utc", "start_local", "end_local", "minutes", "l_deg", "b_deg",
    "ra_deg", "dec_deg", "alt_start_deg", "alt_end_deg", "az_start_deg", "az_end_deg",
    "drive_az_start_deg", "drive_az_end_deg", "sun_sep_min_deg", "moon_sep_min_deg",
    "lsr_corr_min_kms", "lsr_corr_max_kms", "repeat", "reference_for", "tuning_centre_mhz",
)


def _r(value, digits):
    return None if value is None else round(float(value), digits)


def tuning_record(advice: TuningAdvice | None) -> dict | None:
    """The drift plan's ``tuning`` object (frequencies MHz, velocities km/s)."""
    if advice is None:
        return None
    return {
        "centre_mhz": round(advice.centre_mhz, 6), "line_low_mhz": round(advice.line_low_mhz, 6),
        "line_high_mhz": round(advice.line_high_mhz, 6), "fits": bool(advice.fits),
        "margin_mhz": round(advice.margin_mhz, 6), "spike_clear": bool(advice.spike_clear),
        "channel_width_kms": round(advice.channel_width_kms, 4),
        "v_lsr_min_kms": round(advice.v_lsr_min_kms, 2),
        "v_lsr_max_kms": round(advice.v_lsr_max_kms, 2),
        "lsr_corr_min_kms": round(advice.lsr_corr_min_kms, 3),
        "lsr_corr_max_kms": round(advice.lsr_corr_max_kms, 3),
    }


def block_record(b: Block, tz) -> dict:
    """One block as a JSON-ready dict."""
    return {
        "kind": b.kind, "name": b.name,
        "start_utc": iso_utc(b.start_mjd), "end_utc": iso_utc(b.end_mjd),
        "start_local": iso_local(b.start_mjd, tz), "end_local": iso_local(b.end_mjd, tz),
        "minutes": round(b.minutes, 3),
        "l_deg": _r(b.l_deg, 4), "b_deg": _r(b.b_deg, 4),
        "ra_deg": _r(b.ra_deg, 4), "dec_deg": _r(b.dec_deg, 4),
        "alt_start_deg": round(b.alt_start_deg, 2), "alt_end_deg": round(b.alt_end_deg, 2),
        "az_start_deg": round(b.az_start_deg, 2), "az_end_deg": round(b.az_end_deg, 2),
        "drive_az_start_deg": round(b.drive_az_start_deg, 2),
        "drive_az_end_deg": round(b.drive_az_end_deg, 2),
        "sun_sep_min_deg": _r(b.sun_sep_min_deg, 2), "moon_sep_min_deg": _r(b.moon_sep_min_deg, 2),
        "lsr_corr_min_kms": _r(b.lsr_corr_min_kms, 3), "lsr_corr_max_kms": _r(b.lsr_corr_max_kms, 3),
        "repeat": b.repeat, "reference_for": b.reference_for,
        "tuning": tuning_record(b.tuning) if b.kind in ("target", "reference") else None,
    }


def plan_summary(plan: SurveyPlan) -> dict:
    """Totals: targets, integrations wanted/scheduled, minutes on targets, references, slews, stows."""
    wanted = sum(max(t.repeats - d, 0) for t, d in zip(plan.targets, plan.done_before))
    done = plan.completed()
    minutes = {"target": 0.0, "reference": 0.0, "slew": 0.0, "stow": 0.0}
    for b in plan.blocks:
        minutes[b.kind] += b.minutes
    weight = sum(t.priority * int(n) for t, n in zip(plan.targets, done))
    return {
        "targets": len(plan.targets),
        "integrations_wanted": int(wanted),
        "integrations_scheduled": int(done.sum()),
        "targets_complete": int(sum(1 for t, n, d in zip(plan.targets, done, plan.done_before)
                                    if n + d >= t.repeats)),
        "priority_weighted": round(float(weight), 3),
        "integration_minutes": round(float(minutes["target"]), 2),
        "reference_minutes": round(float(minutes["reference"]), 2),
        "slew_minutes": round(float(minutes["slew"]), 2),
        "stows": sum(1 for b in plan.blocks if b.kind == "stow"),
        "stow_minutes": round(float(minutes["stow"]), 2),
        "done_before": int(sum(plan.done_before)),
    }


def survey_document(plan: SurveyPlan, period: dict) -> dict:
    """The ``hiplan.survey/1`` document (docs/plan-format.md); ``period`` as in other plans."""
    s = plan.settings
    tz = plan.site.tz
    return {
        "schema": SURVEY_SCHEMA,
        "kind": "survey",
        "site": plan.site.summary(),
        "period": period,
        "settings": {
            "night_only": s.night_only,
            "night": s.night if s.night_only else None,
            "night_sun_alt_deg": s.night_sun_alt_deg if s.night_only else None,
            "windows": s.availability.normalised(),  # machine-readable; [] = any time
            "sun_min_sep_deg": s.sun_min_sep_deg,
            "sun_hazard_deg": s.sun_hazard_deg,
            "moon_min_sep_deg": s.moon_min_sep_deg,
            "alarm_minutes": s.alarm_minutes,
            "lsr_definition": s.lsr_definition,
            "rotation_model": s.rotation_name,
            "reference": None if s.reference is None else s.reference.describe(),
            "reference_minutes": s.reference_minutes,
            "step_s": s.step_s,
            # The drive (encoder) azimuth range, which may exceed 360 deg: the cable wrap.
            "azimuth_min_deg": plan.site.dish.azimuth_min_deg,
            "azimuth_max_deg": plan.site.dish.azimuth_max_deg,
        },
        "blocks": [block_record(b, tz) for b in plan.blocks],
        "unscheduled": [{"name": u.name, "reason": u.reason} for u in plan.unscheduled],
        "summary": plan_summary(plan),
    }

