"""What driving a plan means for the dish: steps, tracks, the park position, Sun-safe moves.

A plan document becomes a list of ``Step`` s, each a place for the dish to be
over an interval, in time order:

* survey plans (``hiplan.survey/1``): every ``target`` and ``reference`` block is
  a tracked step (the dish follows the sky position), every ``stow`` block a
  fixed one; ``slew`` blocks are not steps, they say when the move to the next
  block leaves (``depart_mjd``). Positions are the plan's drive azimuth (the
  cable-wrap angle) and elevation.
* drift plans (``hiplan.plan/1``) for a motorised elevation axis: each re-park
  (``park.move``) is a fixed step from the move's start, each recording a fixed
  step at the setting the plan gives it (sky azimuth 0 or 180 as the drive
  azimuth, the elevation); the dish does not track.

Tracks are sampled every ``TRACK_SAMPLE_S`` of plan time with the fast position
engine (``skytrack``, the one the survey planner uses), the azimuth unwrapped
from the plan's drive azimuth at the block start, and re-commanded each time the
path since the last command reaches a tenth of the beamwidth (``TRACK_STEP_BEAMS``).
The path length along the track is never shorter than the straight distance,
so the dish is never more than that step behind the sky position.

Feed safety while driving (the plan's promises hold only if the dish does what
the plan says; a run that skips a block or starts late moves differently):

* a move is checked against the Sun at the time it starts, with the Sun's drift
  over the longest time the move may take, path sampling and the fast Sun's
  error as margin (``move_clear_deg``); a direct move that is not clear is
  replaced by a two-leg one (elevation first, or azimuth first) or a detour
  through the park position, whichever is clear first; none clear: no move.
  A motorised transit or fixed mount (drift plans) tips along the meridian, as the
  month planner assumes (``sunsafety.meridian_move_sun_sep_deg``), so its only
  detour is through the park position;
* a dish resting at a fixed position is checked every minute from when it stops
  until it next moves, with hazard + ``surveyvisibility.rest_sun_margin_deg``;
* the park position must keep the Sun that far away from the start of the run
  until a day after the plan ends (the dish stays parked afterwards).

A Sun at or below the almanac horizon (altitude -0.833 deg, less its drift over
the interval checked) cannot heat the feed and is not counted, as everywhere in
hiplan. Angles in degrees; azimuths are drive angles unless called sky
azimuths; times float MJD (UTC).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .avoidance import SUNSET_ALTITUDE_DEG, sun_direction
from .earth import earth_state, unit_vectors
from .errors import UserError
from .galactic import ICRS_TO_GALACTIC
from .pointing import from_altaz
from .site import Site
from .skytrack import fixed_pointing_icrs, icrs_to_altaz_deg
from .slew import move_time_s, slew_model
from .sunsafety import (PATH_STEP_DEG, SUN_DRIFT_DEG_PER_MIN, meridian_angle_deg,
                        meridian_move_sun_sep_deg, slew_sun_sep_deg, sun_safe_stow)
from .surveyvisibility import FAST_SUN_DEG, rest_sun_margin_deg
from .timebase import SECONDS_PER_DAY, iso_utc, parse_instant

TRACK_SAMPLE_S = 10.0  # the sky moves < 0.13 deg in azimuth per 10 s below 88 deg elevation
TRACK_STEP_BEAMS = 0.1  # re-command after a tenth of the beamwidth of sky motion
REST_SAMPLE_S = 60.0  # the resting dish and the park position: the Sun every minute
# Plan and site must agree on where a block starts: the same engine made the plan, and the
# plan rounds positions to 0.01 deg, so more than this means another site or an edited plan.
PLAN_AGREEMENT_DEG = 0.1
# Elevation a drive can physically reach: the horizon to the zenith. Readings outside
# (beyond the pointing tolerance) mean a wrong encoder or a wrong controller.
ELEVATION_RANGE_DEG = (0.0, 90.0)
HI_REST_MHZ = 1420.405751768  # Hellwig et al. 1970, for steps without tuning advice


@dataclass(frozen=True)
class Track:
    """A tracked block's drive positions sampled over its interval (arrays)."""

    mjd_utc: np.ndarray
    az_deg: np.ndarray  # drive azimuth, continuous across 0/360
    el_deg: np.ndarray
    path_deg: np.ndarray  # angle travelled along the track since its start

    def at(self, mjd_utc: float) -> tuple[float, float]:
        t = min(max(float(mjd_utc), float(self.mjd_utc[0])), float(self.mjd_utc[-1]))
        return (float(np.interp(t, self.mjd_utc, self.az_deg)),
                float(np.interp(t, self.mjd_utc, self.el_deg)))

    def command_times(self, step_deg: float) -> np.ndarray:
        """When the path since the start first reaches each whole multiple of ``step_deg``."""
        total = float(self.path_deg[-1])
        if total < step_deg:
            return np.zeros(0)
        marks = step_deg * np.arange(1, int(math.floor(total / step_deg)) + 1)
        return np.interp(marks, self.path_deg, self.mjd_utc)


@dataclass(frozen=True)
class Step:
    """One place for the dish to be: ``kind`` target | reference | stow | move | drift.

    ``number``: the survey block index, or the drift plan's step count. The dish
    leaves for it at ``depart_mjd`` and should be at (``az_deg``, ``el_deg``) at
    ``start_mjd``; target, reference and drift steps are recorded until ``end_mjd``.
    """

    number: int
    kind: str
    name: str
    depart_mjd: float
    start_mjd: float
    end_mjd: float
    az_deg: float
    el_deg: float
    track: Track | None = None
    l_deg: float | None = None
    b_deg: float | None = None
    l_from_deg: float | None = None
    l_to_deg: float | None = None
    ra_deg: float | None = None
    dec_deg: float | None = None
    freq_mhz: float | None = None

    @property
    def records(self) -> bool:
        return self.kind in ("target", "reference", "calibration", "drift")

    def position_at(self, mjd_utc: float) -> tuple[float, float]:
        return self.track.at(mjd_utc) if self.track is not None else (self.az_deg, self.el_deg)


# ------------------------------------------------------------------ the plan as steps


def _field(obj: dict, key: str, where: str, kinds=(int, float), optional=False):
    value = obj.get(key) if isinstance(obj, dict) else None
    if value is None and optional:
        return None
    if isinstance(value, bool) or not isinstance(value, kinds) or (
            isinstance(value, float) and not math.isfinite(value)):
        want = "a number" if kinds == (int, float) else "text"
        raise UserError(f"{where}.{key} must be {want}, got {value!r}")
    return float(value) if kinds == (int, float) else value


def _time(obj: dict, key: str, where: str) -> float:
    value = obj.get(key)
    if not isinstance(value, str):
        raise UserError(f"{where}.{key} must be an ISO 8601 time, got {value!r}")
    return parse_instant(value, f"{where}.{key}")


def _freq(tuning) -> float | None:
    if isinstance(tuning, dict) and isinstance(tuning.get("centre_mhz"), (int, float)) \
            and not isinstance(tuning.get("centre_mhz"), bool):
        return float(tuning["centre_mhz"])
    return None


def check_site_matches(doc: dict, site: Site, src: str) -> None:
    """UserError unless the plan was made for this site (name and position)."""
    plan_site = doc.get("site") if isinstance(doc.get("site"), dict) else {}
    same = (plan_site.get("name") == site.name
            and all(isinstance(plan_site.get(k), (int, float))
                    and abs(float(plan_site[k]) - v) < 1e-6
                    for k, v in (("latitude_deg", site.latitude_deg),
                                 ("longitude_deg", site.longitude_deg))))
    if not same:
        raise UserError(f"{src}: the plan is for {plan_site.get('name')!r}, not for the site "
                        f"{site.name!r} ({site.source}); give the plan's site with --site")


def _wrap180(angle):
    return (np.asarray(angle, dtype=float) + 180.0) % 360.0 - 180.0


def block_track(site: Site, ra_deg: float, dec_deg: float, start_mjd: float, end_mjd: float,
                drive_az_start_deg: float) -> Track:
    """The drive positions that follow (RA, Dec) from start to end, from a drive azimuth."""
    n = max(2, int(math.ceil((end_mjd - start_mjd) * SECONDS_PER_DAY / TRACK_SAMPLE_S)) + 1)
    mjd = np.linspace(start_mjd, end_mjd, n)
    state = earth_state(mjd)
    alt, az = icrs_to_altaz_deg(site, unit_vectors(ra_deg, dec_deg), state)
    unwrapped = np.unwrap(np.asarray(az, dtype=float), period=360.0)
    drive = drive_az_start_deg + (unwrapped - unwrapped[0])
    vec = unit_vectors(90.0 - az, alt)
    steps = np.degrees(np.arccos(np.clip(np.einsum("ni,ni->n", vec[1:], vec[:-1]), -1.0, 1.0)))
    path = np.concatenate([[0.0], np.cumsum(steps)])
    return Track(mjd_utc=mjd, az_deg=drive, el_deg=np.asarray(alt, dtype=float), path_deg=path)


def _separation_deg(alt1, az1, alt2, az2) -> float:
    a = unit_vectors(90.0 - np.asarray(az1, dtype=float), np.asarray(alt1, dtype=float))
    b = unit_vectors(90.0 - np.asarray(az2, dtype=float), np.asarray(alt2, dtype=float))
    return float(np.degrees(np.arccos(np.clip(np.sum(a * b, axis=-1), -1.0, 1.0))))


def survey_steps(doc: dict, site: Site, src: str) -> list[Step]:
    """The steps of a survey plan (see the module docstring); UserError for a broken block."""
    blocks = doc["blocks"]
    steps = []
    for i, b in enumerate(blocks):  # one per block: tens to a few hundred
        where = f"{src}: blocks[{i}]"
        kind = b["kind"]
        if kind == "slew":
            continue
        start, end = _time(b, "start_utc", where), _time(b, "end_utc", where)
        depart = start
        if i > 0 and blocks[i - 1].get("kind") == "slew":
            prev = blocks[i - 1]
            if abs(_time(prev, "end_utc", f"{src}: blocks[{i - 1}]") - start) * SECONDS_PER_DAY < 1.5:
                depart = _time(prev, "start_utc", f"{src}: blocks[{i - 1}]")
        az = _field(b, "drive_az_start_deg", where)
        el = _field(b, "alt_start_deg", where)
        name = _field(b, "name", where, kinds=(str,))
        if kind == "stow":
            steps.append(Step(i, kind, name, depart, start, max(end, start), az, el))
            continue
        ra, dec = _field(b, "ra_deg", where), _field(b, "dec_deg", where)
        if not end > start:
            raise UserError(f"{where}: ends before it starts")
        track = block_track(site, ra, dec, start, end, az)
        sky_az = _field(b, "az_start_deg", where)
        off = _separation_deg(track.el_deg[0], float(track.az_deg[0]) % 360.0, el, sky_az)
        if off > PLAN_AGREEMENT_DEG:
            raise UserError(f"{where} ({name}): this site puts it {off:.2f}° from where the plan "
                            "says it starts; the plan was made for another site or edited")
        l_deg, b_deg = _field(b, "l_deg", where), _field(b, "b_deg", where)
        steps.append(Step(i, kind, name, depart, start, end, float(track.az_deg[0]),
                          float(track.el_deg[0]), track, l_deg=l_deg, b_deg=b_deg,
                          l_from_deg=l_deg, l_to_deg=l_deg, ra_deg=ra, dec_deg=dec,
                          freq_mhz=_freq(b.get("tuning"))))
    return steps


def drive_azimuth(site: Site, sky_az_deg: float, near_deg: float | None = None) -> float:
    """The drive azimuth for a sky azimuth: inside the drive range, nearest ``near_deg``
    (default the middle of the range); ties to the lower angle."""
    dish = site.dish
    options = (sky_az_deg % 360.0) + 360.0 * np.arange(-2, 3)
    legal = options[(options >= dish.azimuth_min_deg - 1e-9)
                    & (options <= dish.azimuth_max_deg + 1e-9)]
    if legal.size == 0:
        raise UserError(f"site [dish]: sky azimuth {sky_az_deg:.1f}° is outside the drive range "
                        f"{dish.azimuth_min_deg:g}..{dish.azimuth_max_deg:g}°")
    centre = (0.5 * (dish.azimuth_min_deg + dish.azimuth_max_deg) if near_deg is None
              else near_deg)
    return float(legal[np.argmin(np.abs(legal - centre))])


def drift_steps(doc: dict, site: Site, src: str) -> list[Step]:
    """The steps of a drift plan: re-park moves and recordings at fixed settings."""
    steps: list[Step] = []
    for d, day in enumerate(doc["days"]):  # per day of the plan
        where = f"{src}: days[{d}]"
        if not isinstance(day, dict):
            raise UserError(f"{where} is not an object")
        park = day.get("park")
        tuning = _freq(day.get("tuning"))
        if isinstance(park, dict) and park.get("move"):
            start = _time(park, "move_start_utc", f"{where}.park")
            end = _time(park, "move_end_utc", f"{where}.park")
            alt = _field(park, "alt_deg", f"{where}.park")
            az = drive_azimuth(site, _field(park, "az_deg", f"{where}.park"))
            dec = _field(park, "dec_deg", f"{where}.park")
            steps.append(Step(len(steps), "move", f"re-park to dec {dec:.1f}°",
                              start, start, max(end, start), az, alt))
        for r, rec in enumerate(day.get("recordings") or []):  # a few per day
            rw = f"{where}.recordings[{r}]"
            start, end = _time(rec, "start_utc", rw), _time(rec, "end_utc", rw)
            dish = rec.get("dish") if isinstance(rec.get("dish"), dict) else park
            if not isinstance(dish, dict):
                raise UserError(f"{rw}: no dish setting")
            alt = _field(dish, "alt_deg", f"{rw}.dish")
            sky_az = _field(dish, "az_deg", f"{rw}.dish")
            l_from, l_to = _field(rec, "l_start_deg", rw), _field(rec, "l_end_deg", rw)
            pointing = from_altaz(site, alt, sky_az, given_as="altaz")
            mid = 0.5 * (start + end)
            state = earth_state(np.array([mid]))
            vec = fixed_pointing_icrs(site, pointing.ha_deg, pointing.dec_deg, state)
            gal = vec @ ICRS_TO_GALACTIC.T
            l_mid = float(np.degrees(np.arctan2(gal[0, 1], gal[0, 0])) % 360.0)
            b_mid = float(np.degrees(np.arcsin(np.clip(gal[0, 2], -1.0, 1.0))))
            steps.append(Step(len(steps), "drift", f"drift l {l_from:.0f}–{l_to:.0f}", start,
                              start, end, drive_azimuth(site, sky_az), alt, None, l_deg=l_mid,
                              b_deg=b_mid, l_from_deg=l_from, l_to_deg=l_to,
                              dec_deg=pointing.dec_deg, freq_mhz=tuning))
    steps.sort(key=lambda s: (s.start_mjd, s.number))
    return steps


def plan_steps(doc: dict, site: Site, src: str) -> list[Step]:
    """The steps of a checked plan document (``planfile.read_plan``) for ``site``."""
    check_site_matches(doc, site, src)
    steps = survey_steps(doc, site, src) if doc.get("kind") == "survey" or "blocks" in doc \
        else drift_steps(doc, site, src)
    check_limits(steps, site, src)
    return steps


def check_limits(steps: list[Step], site: Site, src: str) -> None:
    """UserError when a step would drive outside the dish's drive range or elevation limit."""
    dish = site.dish
    for s in steps:
        az = s.track.az_deg if s.track is not None else np.array([s.az_deg])
        el = s.track.el_deg if s.track is not None else np.array([s.el_deg])
        if az.min() < dish.azimuth_min_deg - 1e-6 or az.max() > dish.azimuth_max_deg + 1e-6:
            raise UserError(f"{src}: {s.name} needs drive azimuth {az.min():.1f}..{az.max():.1f}°, "
                            f"outside this dish's range {dish.azimuth_min_deg:g}.."
                            f"{dish.azimuth_max_deg:g}°")
        if el.min() < ELEVATION_RANGE_DEG[0] or el.max() > dish.elevation_max_deg + 0.05:
            raise UserError(f"{src}: {s.name} needs elevation {el.min():.1f}..{el.max():.1f}°, "
                            f"outside 0..{dish.elevation_max_deg:g}°")


# ------------------------------------------------------------------ Sun safety while driving


def sun_altaz_deg(site: Site, mjd_utc) -> tuple[np.ndarray, np.ndarray]:
    """The Sun's (altitude, sky azimuth) at the site (fast Sun, within 0.01 deg)."""
    state = earth_state(np.atleast_1d(np.asarray(mjd_utc, dtype=float)))
    return icrs_to_altaz_deg(site, sun_direction(state), state)


def move_clear_deg(site: Site, seconds: float) -> float:
    """Least Sun distance (deg) a move lasting up to ``seconds`` must keep, margins included."""
    return (site.rules.sun_hazard_deg + PATH_STEP_DEG / 2.0 + FAST_SUN_DEG
            + SUN_DRIFT_DEG_PER_MIN * max(seconds, 0.0) / 60.0)


def rest_clear_deg(site: Site) -> float:
    """Least Sun distance (deg) a resting dish checked every REST_SAMPLE_S must keep."""
    return site.rules.sun_hazard_deg + rest_sun_margin_deg(REST_SAMPLE_S)


def _steerable(site: Site) -> bool:
    dish = site.dish
    return dish.mount == "altaz" and dish.slew_az_deg_s is not None \
        and dish.slew_el_deg_s is not None


def route_clearance_deg(site: Site, start, waypoints, mjd_utc: float, seconds: float) -> float:
    """Least Sun distance along a route through ``waypoints`` leaving at ``mjd_utc``.

    A steerable mount drives both axes at once at its slew rates, the Sun taken when it
    leaves (callers add its drift); a motorised transit or fixed mount tips along the
    meridian (``sunsafety.meridian_move_sun_sep_deg``, the Sun each minute of the move).
    """
    legs = list(zip([start, *waypoints[:-1]], waypoints))
    if not _steerable(site):
        return min(float(meridian_move_sun_sep_deg(
            site, meridian_angle_deg(a[1], a[0] % 360.0), meridian_angle_deg(b[1], b[0] % 360.0),
            mjd_utc, mjd_utc + seconds / SECONDS_PER_DAY)[0]) for a, b in legs)
    sun_alt, sun_az = (float(v[0]) for v in sun_altaz_deg(site, mjd_utc))
    f_az, f_el = (np.array([leg[0][k] for leg in legs]) for k in (0, 1))
    t_az, t_el = (np.array([leg[1][k] for leg in legs]) for k in (0, 1))
    return float(np.min(slew_sun_sep_deg(f_az, f_el, t_az, t_el, float(site.dish.slew_az_deg_s),
                                         float(site.dish.slew_el_deg_s), sun_alt, sun_az)))


def safe_route(site: Site, start, goal, park, mjd_utc: float, seconds: float):
    """Waypoints of a Sun-safe way from ``start`` to ``goal`` (drive az, el) leaving at
    ``mjd_utc`` and taking up to ``seconds``: direct, elevation first, azimuth first, or
    through ``park``; None when none is clear (module docstring)."""
    start = (float(start[0]), float(start[1]))
    goal = (float(goal[0]), float(goal[1]))
    alt = float(sun_altaz_deg(site, mjd_utc)[0][0])
    drift = SUN_DRIFT_DEG_PER_MIN * seconds / 60.0
    candidates = [[goal]]
    if _steerable(site):  # a meridian mount has one way between two settings
        candidates += [[(start[0], goal[1]), goal], [(goal[0], start[1]), goal]]
    if park is not None and tuple(park) not in (start, goal):
        candidates.append([tuple(park), goal])
    if alt <= SUNSET_ALTITUDE_DEG - drift:
        return candidates[0]
    # The meridian model follows the Sun minute by minute: no drift margin to add.
    clear = (move_clear_deg(site, seconds) if _steerable(site)
             else site.rules.sun_hazard_deg + FAST_SUN_DEG + SUN_DRIFT_DEG_PER_MIN / 2.0)
    for waypoints in candidates:  # at most four
        if route_clearance_deg(site, start, waypoints, mjd_utc, seconds) >= clear:
            return waypoints
    return None


def rest_danger_mjd(site: Site, az_deg: float, el_deg: float, start_mjd: float,
                    end_mjd: float) -> float | None:
    """First sample time in [start, end] (every REST_SAMPLE_S, both ends included) at which
    the Sun, up, is within ``rest_clear_deg`` of a dish resting at (drive az, el); None if never."""
    step_d = REST_SAMPLE_S / SECONDS_PER_DAY
    n = int(math.ceil(max(end_mjd - start_mjd, 0.0) / step_d)) + 1
    mjd = start_mjd + step_d * np.arange(n)
    mjd[-1] = max(end_mjd, start_mjd)
    alt, az = sun_altaz_deg(site, mjd)
    sep = np.degrees(np.arccos(np.clip(
        unit_vectors(90.0 - az, alt) @ unit_vectors(90.0 - az_deg, el_deg), -1.0, 1.0)))
    up = alt > SUNSET_ALTITUDE_DEG - SUN_DRIFT_DEG_PER_MIN * REST_SAMPLE_S / 120.0
    near = np.flatnonzero(up & (sep < rest_clear_deg(site)))
    return float(mjd[near[0]]) if near.size else None


def park_position(site: Site) -> tuple[float, float]:
    """(drive azimuth, elevation) of the site's park: ``[dish] park_az_deg``/``park_alt_deg``,
    else the Sun-safe stow toward the elevated pole (``sunsafety.sun_safe_stow``)."""
    dish = site.dish
    if dish.park_alt_deg is not None and dish.park_az_deg is not None:
        return float(dish.park_az_deg), float(dish.park_alt_deg)
    stow = sun_safe_stow(site)
    return drive_azimuth(site, stow.az_deg), float(stow.alt_deg)


def check_park(site: Site, park, start_mjd: float, end_mjd: float) -> None:
    """UserError when the Sun comes within the hazard of the park position between the start
    of the run and a day after ``end_mjd`` (the dish stays parked after the run)."""
    danger = rest_danger_mjd(site, park[0], park[1], start_mjd, end_mjd + 1.0)
    if danger is not None:
        configured = site.dish.park_alt_deg is not None
        raise UserError(
            f"{site.source or 'site'}: [dish] park position (elevation {park[1]:g}°, drive "
            f"azimuth {park[0]:g}°) has the Sun within {site.rules.sun_hazard_deg:g}° of it "
            f"(sun_hazard_deg plus margin) at {iso_utc(danger)}"
            + ("; choose another park_alt_deg/park_az_deg" if configured else ""))


def move_seconds(site: Site, start, goal) -> float | None:
    """Expected seconds for a move with the site's slew rates; None for a mount without rates."""
    if not _steerable(site):
        return None
    return float(move_time_s(slew_model(site), start[0], start[1], goal[0], goal[1]))
