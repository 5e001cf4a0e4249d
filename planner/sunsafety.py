"""Feed safety: when the Sun comes near the axis of a parked or moving dish.

A reflector focuses sunlight toward its feed when the Sun is within a few
degrees of the axis; the site rule ``sun_hazard_deg`` (default 10 deg, common
practice, no published source) is the closest it may come. This is separate
from the data-quality rule ``sun_min_sep_deg``, which only decides whether a
recording is worth keeping.

Parked dish. A parked beam keeps a fixed topocentric hour angle HA_b and
declination of date dec_b. The Sun's separation from it obeys

    cos(sep) = sin(dec_b) sin(dec_s) + cos(dec_b) cos(dec_s) cos(HA_s - HA_b)

so, with the Sun's declination changing by < 0.4 deg a day, there is exactly
one closest approach per solar day, when the Sun's hour angle equals the
beam's (HA_s = HA_b), at a separation of about |dec_s - dec_b|. The finder:

1. For each distinct beam hour angle, the instants HA_s = HA_b, one per day:
   a first guess from the mean solar rate (360 deg per day), then three
   fixed-point corrections (each shrinks the error ~1000-fold, since the true
   rate differs from the mean by < 0.1 %).
2. The separation of every (pointing, day) pair at that instant; pairs within
   ``REFINE_MARGIN_DEG`` of the limit (and each pointing's closest pair) are
   refined by a golden-section search for the true minimum within +/- 1 h
   (the declination drift moves it by seconds, a minute at most near the pole).
3. Pairs closer than the limit get their entry and exit (bisection to 1 s
   within +/- 6 h: at 6 h from the approach the separation exceeds 66 deg for
   any pointing, since cos(sep) = sin(dec_b) sin(dec_s) <= sin 23.44 deg), and
   the Sun's highest altitude in between (9 samples).

An approach is a *hazard* when it is closer than the limit and the Sun is up
(altitude above -0.833 deg, the almanac's sunrise: any part of the disc
visible) at some time within it; a Sun below the horizon cannot heat the feed.

Sun: geometric geocentric direction (``avoidance``), beam: the fast sky-track
engine (``skytrack``); together within 0.01 deg of astropy's apparent
topocentric Sun (aberration 20", parallax 9"). Checked against astropy at
1-minute sampling in tests/test_sunsafety.py.

Moving dish. ``meridian_move_sun_sep_deg`` gives the Sun's least distance from
the meridian arc a transit dish sweeps when tipped by hand from one setting to
another; ``slew_sun_sep_deg`` the least distance from the path a two-axis mount
drives when both axes move at once at their own rates (``planner.slew``).
``sun_safe_stow`` is a position the Sun never approaches: toward the elevated
celestial pole, which is always more than 66 deg from the Sun.

Angles in degrees, times float MJD (UTC), durations in seconds where named.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .avoidance import SUNSET_ALTITUDE_DEG, separation_deg, sun_direction
from .earth import EarthNodes, earth_nodes, earth_state, gcrs_to_cirs, spherical_deg, unit_vectors
from .pointing import Pointing, from_altaz
from .site import Site
from .skytrack import FixedBeams, icrs_to_altaz_deg
from .timebase import SECONDS_PER_DAY

# Pairs closer than limit + this at the hour-angle instant are refined (deg). The
# instant's separation exceeds the true minimum by < 0.01 deg (see module docstring).
REFINE_MARGIN_DEG = 2.0
_REFINE_HALF_WINDOW_D = 1.0 / 24.0
_WINDOW_HALF_SPAN_D = 0.25
_ONE_SECOND_D = 1.0 / SECONDS_PER_DAY
_GOLDEN = (np.sqrt(5.0) - 1.0) / 2.0
# Path sampling for moving dishes: the least distance to a path sampled every
# PATH_STEP_DEG is at most PATH_STEP_DEG / 2 too large; callers add that margin.
PATH_STEP_DEG = 0.25
# The Sun moves at most 0.25 deg per minute relative to a fixed alt/az direction
# (Earth's rotation; 360 deg / 1436 min).
SUN_DRIFT_DEG_PER_MIN = 360.0 / 1436.0


@dataclass(frozen=True)
class SunApproaches:
    """Daily closest approaches of the Sun to parked pointings (arrays of length A).

    ``row`` indexes the pointings given to ``sun_approaches``. ``enter_mjd`` and
    ``exit_mjd`` bound the time the Sun is closer than ``limit_deg`` (NaN when it
    never is that day); ``sun_alt_max_deg`` is the Sun's highest altitude then.
    """

    limit_deg: float
    row: np.ndarray
    closest_mjd: np.ndarray
    sep_deg: np.ndarray
    enter_mjd: np.ndarray
    exit_mjd: np.ndarray
    sun_alt_max_deg: np.ndarray

    @property
    def within(self) -> np.ndarray:
        """Approaches closer than the limit (whether or not the Sun is up)."""
        return self.sep_deg < self.limit_deg

    @property
    def hazard(self) -> np.ndarray:
        """Approaches closer than the limit with the Sun up: the feed is at risk."""
        return self.within & (self.sun_alt_max_deg > SUNSET_ALTITUDE_DEG)

    def select(self, mask: np.ndarray) -> SunApproaches:
        return SunApproaches(self.limit_deg, self.row[mask], self.closest_mjd[mask],
                             self.sep_deg[mask], self.enter_mjd[mask], self.exit_mjd[mask],
                             self.sun_alt_max_deg[mask])

    def hazards_overlapping(self, row: int, lo_mjd: float, hi_mjd: float) -> np.ndarray:
        """Indices of hazards of pointing ``row`` whose time within the limit overlaps [lo, hi)."""
        return np.flatnonzero(self.hazard & (self.row == row) & (self.enter_mjd < hi_mjd)
                              & (self.exit_mjd > lo_mjd))

    def closest_per_row(self, n_rows: int) -> tuple[np.ndarray, np.ndarray]:
        """(least separation, its time) per pointing over the period; inf/NaN without approaches."""
        sep = np.full(n_rows, np.inf)
        when = np.full(n_rows, np.nan)
        order = np.lexsort((self.sep_deg, self.row))
        rows, first = np.unique(self.row[order], return_index=True)
        sep[rows] = self.sep_deg[order][first]
        when[rows] = self.closest_mjd[order][first]
        return sep, when


def wrap180(angle_deg):
    return (np.asarray(angle_deg) + 180.0) % 360.0 - 180.0


def sun_hour_angle_deg(site: Site, mjd_utc, nodes: EarthNodes | None = None) -> np.ndarray:
    """The Sun's topocentric hour angle of date (deg, west positive, [-180, 180))."""
    state = earth_state(np.atleast_1d(np.asarray(mjd_utc, dtype=float)), nodes)
    ra_cirs, _ = spherical_deg(gcrs_to_cirs(sun_direction(state), state))
    return wrap180(np.degrees(state.era_rad) + site.longitude_deg - ra_cirs)


def _hour_angle_instants(site: Site, ha_deg: float, lo_mjd: float, hi_mjd: float,
                         nodes: EarthNodes) -> np.ndarray:
    """Every instant in [lo, hi] (UTC) when the Sun's hour angle equals ``ha_deg``."""
    # Time until the Sun's hour angle next reaches ha_deg, at the mean solar rate.
    lead = (ha_deg - sun_hour_angle_deg(site, lo_mjd, nodes)[0]) % 360.0 / 360.0
    t = lo_mjd + lead + np.arange(int(np.ceil(hi_mjd - lo_mjd)) + 1)
    for _ in range(3):  # fixed-point corrections; see the module docstring
        t = t + wrap180(ha_deg - sun_hour_angle_deg(site, t, nodes)) / 360.0
    return t[(t >= lo_mjd) & (t <= hi_mjd)]


def golden_min(func, lo: np.ndarray, hi: np.ndarray, tol_days: float):
    """Minimum (argmin, value) of unimodal ``func`` on [lo, hi], vectorized."""
    a, b = lo.copy(), hi.copy()
    c, d = b - _GOLDEN * (b - a), a + _GOLDEN * (b - a)
    fc, fd = func(c), func(d)
    while a.size and np.max(b - a) > tol_days:
        left = fc < fd
        b, a = np.where(left, d, b), np.where(left, a, c)
        new = np.where(left, b - _GOLDEN * (b - a), a + _GOLDEN * (b - a))
        f_new = func(new)
        c, d = np.where(left, new, d), np.where(left, c, new)
        fc, fd = np.where(left, f_new, fd), np.where(left, fc, f_new)
    x = 0.5 * (a + b)
    return x, func(x)


def _bisect(func, inside: np.ndarray, outside: np.ndarray, tol_days: float) -> np.ndarray:
    """Boundary between ``inside`` (func < 0) and ``outside`` (func >= 0) times, vectorized."""
    a, b = inside.copy(), outside.copy()
    while a.size and np.max(np.abs(b - a)) > tol_days:
        mid = 0.5 * (a + b)
        neg = func(mid) < 0
        a, b = np.where(neg, mid, a), np.where(neg, b, mid)
    return 0.5 * (a + b)


def sun_approaches(site: Site, pointings: list[Pointing], start_mjd: float, end_mjd: float,
                   limit_deg: float | None = None, nodes: EarthNodes | None = None) -> SunApproaches:
    """Every daily closest approach of the Sun to each parked pointing that bears on [start, end].

    Listed: approaches whose closest instant lies in the period, and those closer
    than the limit whose time within it overlaps the period. ``limit_deg`` defaults
    to the site's ``sun_hazard_deg``. See the module docstring for the method.
    """
    limit = site.rules.sun_hazard_deg if limit_deg is None else float(limit_deg)
    if nodes is None:
        nodes = earth_nodes(start_mjd - 1.5, end_mjd + 1.5)
    beams = FixedBeams(site, pointings, nodes)
    rows_all, times_all = [], []
    for ha in np.unique(beams.ha_deg):  # a few distinct hour angles (0 and 180 on the meridian)
        t = _hour_angle_instants(site, float(ha), start_mjd - 0.5, end_mjd + 0.5, nodes)
        rows = np.flatnonzero(beams.ha_deg == ha)
        rows_all.append(np.repeat(rows, t.size))
        times_all.append(np.tile(t, rows.size))
    row = np.concatenate(rows_all) if rows_all else np.zeros(0, int)
    t = np.concatenate(times_all) if times_all else np.zeros(0)

    def sep_at(mjd, which):
        state, vec = beams.locate(mjd, row[which])
        return separation_deg(vec, sun_direction(state))

    everything = np.arange(row.size)
    sep = sep_at(t, everything) if row.size else np.zeros(0)
    refine = sep < limit + REFINE_MARGIN_DEG
    if row.size:  # each pointing's closest pair too, so its reported minimum is exact
        order = np.lexsort((sep, row))
        refine[order[np.unique(row[order], return_index=True)[1]]] = True
    idx = np.flatnonzero(refine)
    if idx.size:
        t[idx], sep[idx] = golden_min(lambda m: sep_at(m, idx), t[idx] - _REFINE_HALF_WINDOW_D,
                                       t[idx] + _REFINE_HALF_WINDOW_D, _ONE_SECOND_D)

    enter = np.full(row.size, np.nan)
    leave = np.full(row.size, np.nan)
    alt_max = np.full(row.size, np.nan)
    close = np.flatnonzero(sep < limit)
    if close.size:
        excess = lambda m: sep_at(m, close) - limit  # noqa: E731
        enter[close] = _bisect(excess, t[close], t[close] - _WINDOW_HALF_SPAN_D, _ONE_SECOND_D)
        leave[close] = _bisect(excess, t[close], t[close] + _WINDOW_HALF_SPAN_D, _ONE_SECOND_D)
        frac = np.linspace(0.0, 1.0, 9)
        when = (enter[close][:, None] + frac * (leave - enter)[close][:, None]).ravel()
        state = earth_state(when, nodes)
        alt, _ = icrs_to_altaz_deg(site, sun_direction(state), state)
        alt_max[close] = alt.reshape(-1, frac.size).max(axis=1)

    in_period = (t >= start_mjd) & (t < end_mjd)
    overlaps = (sep < limit) & (enter < end_mjd) & (leave > start_mjd)
    keep = in_period | overlaps
    order = np.lexsort((t[keep], row[keep]))
    return SunApproaches(limit, row[keep][order], t[keep][order], sep[keep][order],
                         enter[keep][order], leave[keep][order], alt_max[keep][order])


# ------------------------------------------------------------------ moving dishes


def _sun_enu(site: Site, mjd_utc) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(east, north, up) unit-vector components of the Sun at the site, and its altitude."""
    state = earth_state(np.atleast_1d(np.asarray(mjd_utc, dtype=float)))
    alt, az = icrs_to_altaz_deg(site, sun_direction(state), state)
    enu = unit_vectors(90.0 - az, alt)  # x = east, y = north, z = up
    return enu, alt, az


def meridian_angle_deg(alt_deg, az_deg) -> np.ndarray:
    """Position along the meridian: 0 at the south horizon, 90 at the zenith, 180 north.

    Only meaningful for meridian pointings (azimuth 0 or 180).
    """
    alt = np.asarray(alt_deg, dtype=float)
    north = np.abs(wrap180(np.asarray(az_deg, dtype=float))) < 90.0
    return np.where(north, 180.0 - alt, alt)


def meridian_move_sun_sep_deg(site: Site, from_angle_deg, to_angle_deg, t0_mjd: float,
                              t1_mjd: float) -> tuple[np.ndarray, float]:
    """(least Sun distance, the Sun's highest altitude) while a dish is tipped along the meridian.

    The dish may be anywhere on the arc between the two meridian angles
    (``meridian_angle_deg``) at any time in [t0, t1]; the Sun is sampled every
    minute. Broadcasts over the angles. Distances in degrees.
    """
    lo = np.minimum(from_angle_deg, to_angle_deg)
    hi = np.maximum(from_angle_deg, to_angle_deg)
    n = max(2, int(np.ceil((t1_mjd - t0_mjd) * 1440.0)) + 1)
    enu, alt, _ = _sun_enu(site, np.linspace(t0_mjd, t1_mjd, n))
    east, north, up = enu[:, 0], enu[:, 1], enu[:, 2]
    along = np.degrees(np.arctan2(up, -north))  # the Sun's projection on the meridian plane
    off_plane = np.degrees(np.arcsin(np.clip(np.abs(east), 0.0, 1.0)))
    lo_b, hi_b = np.asarray(lo, dtype=float)[..., None], np.asarray(hi, dtype=float)[..., None]

    def end_distance(angle):
        """Angle to the meridian point at ``angle`` (unit vector (0, -cos, sin) in E, N, U)."""
        rad = np.radians(angle)
        return np.degrees(np.arccos(np.clip(-north * np.cos(rad) + up * np.sin(rad), -1.0, 1.0)))

    within = (along >= lo_b) & (along <= hi_b)
    dist = np.where(within, off_plane, np.minimum(end_distance(lo_b), end_distance(hi_b)))
    return dist.min(axis=-1), float(alt.max())


def slew_sun_sep_deg(from_az_deg, from_el_deg, to_az_deg, to_el_deg, rate_az_deg_s: float,
                     rate_el_deg_s: float, sun_alt_deg, sun_az_deg) -> np.ndarray:
    """Least angle (deg) between the Sun and a two-axis slew path.

    Both axes start together and move at their own constant rates until each
    reaches its target (``planner.slew``); azimuths are drive angles, so a move
    of more than 180 deg goes the long way round as the mount does. The path is
    sampled every ``PATH_STEP_DEG`` or finer along each axis; the Sun (one
    position per slew) is fixed during it: callers add its drift. Broadcasts
    over the slews.
    """
    f_az, f_el, t_az, t_el, s_alt, s_az = np.broadcast_arrays(
        *(np.asarray(v, dtype=float) for v in (from_az_deg, from_el_deg, to_az_deg, to_el_deg,
                                               sun_alt_deg, sun_az_deg)))
    d_az, d_el = t_az - f_az, t_el - f_el
    dur_s = np.maximum(np.abs(d_az) / rate_az_deg_s, np.abs(d_el) / rate_el_deg_s)
    span = np.nanmax(np.maximum(np.abs(d_az), np.abs(d_el))) if d_az.size else 0.0
    n = int(np.ceil(np.nan_to_num(span) / PATH_STEP_DEG)) + 2
    tau = np.linspace(0.0, 1.0, n) * dur_s[..., None]
    az = f_az[..., None] + np.sign(d_az)[..., None] * np.minimum(rate_az_deg_s * tau,
                                                                  np.abs(d_az)[..., None])
    el = f_el[..., None] + np.sign(d_el)[..., None] * np.minimum(rate_el_deg_s * tau,
                                                                  np.abs(d_el)[..., None])
    path = unit_vectors(90.0 - az, el)
    sun = unit_vectors(90.0 - s_az, s_alt)[..., None, :]
    return separation_deg(path, np.broadcast_to(sun, path.shape)).min(axis=-1)


def sun_safe_stow(site: Site) -> Pointing:
    """A stow position the Sun never approaches: on the meridian toward the elevated pole
    (a transit dish that cannot face the pole: as high as it goes on its own side).

    Elevation = |latitude| (the pole itself), raised to the horizon limit there and
    capped at the dish's maximum; the pole lies more than 66.5 deg from the Sun
    (its declination never exceeds 23.44 deg), and a few degrees off the pole keep
    that margin for any site where the pole is above the dish's limits.
    """
    az = 0.0 if site.latitude_deg >= 0 else 180.0
    dish = site.dish
    if dish.mount == "transit" and dish.facing not in ("either", "north" if az == 0.0 else "south"):
        # A transit dish that cannot face the pole: as high as it goes on its own side, the
        # nearest it comes to the pole (dec = |lat| - (90 - alt) there). At the zenith the Sun
        # stays >= |lat| - 23.44 deg away; a site where that is too little sets [dish] park_*.
        return from_altaz(site, dish.elevation_max_deg, 180.0 - az, given_as="altaz")
    alt = min(max(abs(site.latitude_deg), float(dish.horizon_limit_deg(az))), dish.elevation_max_deg)
    return from_altaz(site, alt, az, given_as="altaz")


def move_sun_sep_deg(site: Site, start: Pointing, ends: list[Pointing], t0_mjd: float,
                     t1_mjd: float) -> tuple[np.ndarray, float]:
    """(least Sun distance per end pointing, the Sun's highest altitude) for re-parking moves.

    The dish is moved from ``start`` to each of ``ends`` at some time in [t0, t1]. A
    transit or fixed mount is tipped along the meridian (``meridian_move_sun_sep_deg``;
    pointings off the meridian are treated as their meridian angle's nearest point,
    which only a fixed mount can hold); an alt-az mount drives both axes at once at its
    slew rates the short way round (``slew_sun_sep_deg``), against the Sun each minute.
    Degrees.
    """
    alt = np.array([p.alt_deg for p in ends])
    az = np.array([p.az_deg for p in ends])
    dish = site.dish
    if dish.mount != "altaz" or dish.slew_az_deg_s is None or dish.slew_el_deg_s is None:
        return meridian_move_sun_sep_deg(site, meridian_angle_deg(start.alt_deg, start.az_deg),
                                         meridian_angle_deg(alt, az), t0_mjd, t1_mjd)
    n = max(2, int(np.ceil((t1_mjd - t0_mjd) * 1440.0)) + 1)
    _, s_alt, s_az = _sun_enu(site, np.linspace(t0_mjd, t1_mjd, n))
    to_az = start.az_deg + wrap180(az - start.az_deg)  # the short way round
    sep = slew_sun_sep_deg(start.az_deg, start.alt_deg, to_az[:, None], alt[:, None],
                           float(dish.slew_az_deg_s), float(dish.slew_el_deg_s),
                           s_alt[None, :], s_az[None, :])
    return sep.min(axis=1), float(s_alt.max())


def move_safe_matrix(site: Site, pointings: list[Pointing], t0_mjd: float, t1_mjd: float,
                     limit_deg: float | None = None) -> np.ndarray:
    """(R, R) True where moving the dish from pointing a to pointing b during [t0, t1] keeps
    the visible Sun (above -0.833 deg) at least ``limit_deg`` from the beam all the way.

    The same path models as ``move_sun_sep_deg`` (meridian arc for transit and fixed
    mounts; both axes at their rates, the short way round, for alt-az mounts), the Sun
    each minute. For alt-az mounts a cheap lower bound (the distance from the Sun to the
    box of azimuths and elevations the path stays in) clears most pairs before any path
    is traced, and a traced path is checked against the Sun at mid-move with its drift
    to either end added to the limit. Diagonal entries (no move) are True.
    """
    limit = site.rules.sun_hazard_deg if limit_deg is None else float(limit_deg)
    n_rows = len(pointings)
    ok = np.ones((n_rows, n_rows), dtype=bool)
    n = max(2, int(np.ceil((t1_mjd - t0_mjd) * 1440.0)) + 1)
    enu, s_alt, s_az = _sun_enu(site, np.linspace(t0_mjd, t1_mjd, n))
    up = s_alt > SUNSET_ALTITUDE_DEG
    if not up.any() or n_rows < 2:
        return ok
    enu, s_alt, s_az = enu[up], s_alt[up], s_az[up]
    alt = np.array([p.alt_deg for p in pointings])
    az = np.array([p.az_deg for p in pointings])
    dish = site.dish
    if dish.mount != "altaz" or dish.slew_az_deg_s is None or dish.slew_el_deg_s is None:
        theta = meridian_angle_deg(alt, az)
        north, upc = enu[:, 1], enu[:, 2]
        along = np.degrees(np.arctan2(upc, -north))  # (S,)
        off_plane = np.degrees(np.arcsin(np.clip(np.abs(enu[:, 0]), 0.0, 1.0)))
        rad = np.radians(theta)[:, None]
        to_end = np.degrees(np.arccos(np.clip(-north * np.cos(rad) + upc * np.sin(rad), -1, 1)))
        lo = np.minimum(theta[:, None], theta[None, :])[..., None]
        hi = np.maximum(theta[:, None], theta[None, :])[..., None]
        within = (along >= lo) & (along <= hi)
        ends = np.minimum(to_end[:, None, :], to_end[None, :, :])
        dist = np.where(within, off_plane, ends).min(axis=-1)
        ok = dist >= limit
    else:
        to_az = az[:, None] + wrap180(az[None, :] - az[:, None])  # the short way round
        lo_az = np.minimum(az[:, None], to_az)[..., None]
        span = np.abs(to_az - az[:, None])[..., None]
        lo_el = np.minimum(alt[:, None], alt[None, :])[..., None]
        hi_el = np.maximum(alt[:, None], alt[None, :])[..., None]
        # Lower bound: a box point is at least the altitude gap from the Sun, and at least
        # asin(cos(alt_sun) sin(d_az)) when its azimuth is d_az <= 90 deg from the Sun's.
        el_gap = np.maximum(np.maximum(lo_el - s_alt, s_alt - hi_el), 0.0)
        past = np.mod(s_az - lo_az, 360.0)
        d_az = np.where(past <= span, 0.0, np.minimum(past - span, 360.0 - past))
        az_gap = np.degrees(np.arcsin(np.cos(np.radians(s_alt))
                                      * np.sin(np.radians(np.minimum(d_az, 90.0)))))
        near = np.maximum(el_gap, az_gap) < limit  # (R, R, S)
        pair_a, pair_b = np.nonzero(near.any(axis=-1))
        rates = (float(dish.slew_az_deg_s), float(dish.slew_el_deg_s))

        def traced(a, b, sun_alt, sun_az):
            return slew_sun_sep_deg(az[a][:, None], alt[a][:, None], to_az[a, b][:, None],
                                    alt[b][:, None], *rates, sun_alt[None, :], sun_az[None, :])

        if pair_a.size:
            # Against the Sun mid-window, with the Sun's drift to either end as margin
            # (conservative by at most that drift, 1.9 deg for a 15-minute move).
            mid = s_alt.size // 2
            drift = SUN_DRIFT_DEG_PER_MIN * (t1_mjd - t0_mjd) * 1440.0 / 2.0
            sep_mid = traced(pair_a, pair_b, s_alt[mid:mid + 1], s_az[mid:mid + 1])[:, 0]
            ok[pair_a, pair_b] = sep_mid >= limit + drift
    np.fill_diagonal(ok, True)
    return ok
