"""How long a steerable (alt-az) dish takes to move, and which way round its cable wrap.

Model: both axes drive at once at their own constant rates, so a move takes

    slew_s = max(|delta_az| / rate_az, |delta_el| / rate_el) + settle_s

(acceleration is folded into the settle time; common practice for small
motorised mounts, whose ramps last a second or two). A move of zero degrees
costs nothing: the dish is already tracking there.

Cable wrap: the drive azimuth (the angle the azimuth encoder reads) runs over
``[azimuth_min_deg, azimuth_max_deg]`` from the site file, which may span more
than 360 deg (Saltbush Ridge: -170 .. +350). A sky azimuth ``az`` (north through
east, [0, 360)) can then be reached at ``az + 360 k`` for every whole ``k`` that
lands inside the range. A target that is tracked for a while must stay inside
the range for the whole track, so the choice is made over the track, and among
the legal choices the shortest move wins.

Feed safety: given the Sun's position, a choice whose path (both axes at once,
the way the drive azimuth goes, possibly the long way round) passes closer to
the Sun than a given clearance is illegal too (``sunsafety.slew_sun_sep_deg``);
the caller's clearance carries the margins (see ``planner.surveyvisibility``).

Angles in degrees, rates in degrees per second, times in seconds.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import UserError
from .site import Site
from .sunsafety import slew_sun_sep_deg


@dataclass(frozen=True)
class SlewModel:
    """A dish's drive: rates (deg/s), settle time (s) and drive-azimuth range (deg)."""

    rate_az_deg_s: float
    rate_el_deg_s: float
    settle_s: float
    az_min_deg: float
    az_max_deg: float

    @property
    def wrap_turns(self) -> np.ndarray:
        """Whole turns k such that some az + 360 k (az in [0, 360)) can fall in the range."""
        lo = math.floor(self.az_min_deg / 360.0) - 1
        hi = math.ceil(self.az_max_deg / 360.0) + 1
        turns = np.arange(lo, hi + 1)
        keep = (turns * 360.0 + 360.0 > self.az_min_deg) & (turns * 360.0 <= self.az_max_deg)
        return turns[keep]

    @property
    def max_slew_s(self) -> float:
        """Longest possible move: the whole azimuth range or 90 deg of elevation, plus settling."""
        return max((self.az_max_deg - self.az_min_deg) / self.rate_az_deg_s,
                   90.0 / self.rate_el_deg_s) + self.settle_s


def slew_model(site: Site) -> SlewModel:
    """The drive of the site's dish; UserError unless it is a steerable (altaz) mount."""
    dish = site.dish
    if dish.mount != "altaz" or dish.slew_az_deg_s is None or dish.slew_el_deg_s is None:
        raise UserError(f"--site: {site.name} has a {dish.mount} mount; a pointed survey needs a "
                        "steerable altaz mount with slew rates (e.g. --site saltbush-ridge)")
    return SlewModel(rate_az_deg_s=float(dish.slew_az_deg_s), rate_el_deg_s=float(dish.slew_el_deg_s),
                     settle_s=float(dish.settle_s), az_min_deg=float(dish.azimuth_min_deg),
                     az_max_deg=float(dish.azimuth_max_deg))


def move_time_s(model: SlewModel, from_drive_az_deg, from_el_deg, to_drive_az_deg, to_el_deg):
    """Seconds to move between two drive positions (drive azimuths, not sky azimuths).

    Both axes move at once; the settle time is added when the dish moves at all.
    Broadcasts over array arguments.
    """
    daz = np.abs(np.asarray(to_drive_az_deg, dtype=float) - np.asarray(from_drive_az_deg, dtype=float))
    d_el = np.abs(np.asarray(to_el_deg, dtype=float) - np.asarray(from_el_deg, dtype=float))
    drive_s = np.maximum(daz / model.rate_az_deg_s, d_el / model.rate_el_deg_s)
    return np.where(drive_s > 0.0, drive_s + model.settle_s, 0.0)


def drive_options_deg(model: SlewModel, az_deg) -> np.ndarray:
    """Every drive azimuth that points at sky azimuth ``az_deg``: shape (..., K), NaN where illegal."""
    az = np.mod(np.asarray(az_deg, dtype=float), 360.0)[..., None]
    options = az + 360.0 * model.wrap_turns
    legal = (options >= model.az_min_deg) & (options <= model.az_max_deg)
    return np.where(legal, options, np.nan)


def choose_drive_az(model: SlewModel, from_drive_az_deg, from_el_deg, to_az_deg, to_el_deg,
                    track_lo_deg=0.0, track_hi_deg=0.0, sun_alt_deg=None, sun_az_deg=None,
                    sun_clear_deg: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """(drive azimuth, move seconds) of the shortest legal move to sky position (to_az, to_el).

    ``track_lo_deg``/``track_hi_deg`` are the least and greatest azimuth change
    (unwrapped, relative to the start) of the track that follows the move; the
    whole track must stay inside the drive range. With the Sun's altitude and
    azimuth (deg, one position per move), a choice whose path comes closer to
    the Sun than ``sun_clear_deg`` is illegal as well. Where no choice is legal
    the drive azimuth is NaN and the time +inf. Every argument broadcasts against
    every other (one start and many targets, many starts and one target, ...);
    ties go to the lower drive azimuth (deterministic).
    """
    sun_given = sun_alt_deg is not None and sun_az_deg is not None
    args = [from_drive_az_deg, from_el_deg, to_az_deg, to_el_deg, track_lo_deg, track_hi_deg]
    if sun_given:
        args += [sun_alt_deg, sun_az_deg]
    args = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in args))
    f_az, f_el, t_az, t_el, lo, hi = (a[..., None] for a in args[:6])
    options = drive_options_deg(model, args[2])  # (..., K)
    legal = (np.isfinite(options) & (options + lo >= model.az_min_deg)
             & (options + hi <= model.az_max_deg))
    if sun_given:
        s_alt, s_az = (a[..., None] for a in args[6:])
        legal &= _sun_clear(model, f_az, f_el, options, t_el, s_alt, s_az, legal,
                            float(sun_clear_deg))
    time_s = move_time_s(model, f_az, f_el, options, t_el)
    time_s = np.where(legal, time_s, np.inf)
    best = np.argmin(time_s, axis=-1)[..., None]
    chosen_s = np.take_along_axis(time_s, best, axis=-1)[..., 0]
    chosen_az = np.take_along_axis(options, best, axis=-1)[..., 0]
    return np.where(np.isfinite(chosen_s), chosen_az, np.nan), chosen_s


def _sun_clear(model: SlewModel, f_az, f_el, options, t_el, s_alt, s_az, legal,
               clear_deg: float) -> np.ndarray:
    """(..., K) True where the path to each option keeps at least ``clear_deg`` from the Sun.

    Only legal options that a cheap lower bound cannot clear are traced. The path
    stays inside its box: drive azimuths between start and end, elevations between
    theirs. A point of the box is at least |elevation - Sun's altitude| from the Sun
    (two directions are at least their altitude difference apart), and at least
    asin(cos(Sun's altitude) sin(min(d_az, 90 deg))) when its azimuth differs from
    the Sun's by d_az or more (the distance from the Sun to the half great circle
    from zenith to horizon at that azimuth, a right spherical triangle; it grows
    with d_az up to 90 deg and stays 90 - |altitude| beyond).
    """
    shape = options.shape
    f_az, f_el, t_el, s_alt, s_az = (np.broadcast_to(a, shape) for a in (f_az, f_el, t_el,
                                                                        s_alt, s_az))
    lo_el, hi_el = np.minimum(f_el, t_el), np.maximum(f_el, t_el)
    el_gap = np.maximum(np.maximum(lo_el - s_alt, s_alt - hi_el), 0.0)
    with np.errstate(invalid="ignore"):
        lo_az = np.minimum(f_az, options)
        span = np.abs(options - f_az)
        past = np.mod(s_az - lo_az, 360.0)  # how far past the box's low edge the Sun's azimuth is
        d_az = np.where(span >= 360.0, 0.0,
                        np.where(past <= span, 0.0, np.minimum(past - span, 360.0 - past)))
        az_gap = np.degrees(np.arcsin(np.cos(np.radians(s_alt))
                                      * np.sin(np.radians(np.minimum(d_az, 90.0)))))
    near = legal & (np.maximum(el_gap, az_gap) < clear_deg)
    clear = np.ones(shape, dtype=bool)
    if near.any():
        sep = slew_sun_sep_deg(f_az[near], f_el[near], options[near], t_el[near],
                               model.rate_az_deg_s, model.rate_el_deg_s, s_alt[near], s_az[near])
        clear[near] = sep >= clear_deg
    return clear
