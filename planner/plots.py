"""Figures: coverage atlas, sky track, drift-plan month chart, depth and survey charts.

Every function returns a ``matplotlib.figure.Figure`` built directly (no
pyplot, no backend choice, no global state); the caller saves it with
``fig.savefig("x.png")`` or ``"x.svg"``. Nothing here touches files, except
that ``read_windows`` (used by ``month_chart``) would read a file if a plan's
window text happened to name one.

Colours are chosen to stay distinguishable with colour-vision deficiencies:
categorical items use the Okabe-Ito palette (Okabe & Ito 2008, "Color
Universal Design"), continuous quantities use matplotlib's ``cividis``
(Nunez, Anderton & Renslow 2018, PLoS ONE 13, e0199239) or ``viridis``
(perceptually uniform, matplotlib's default map).

Galactic longitude axes follow the astronomers' sky-map convention: l
increases to the LEFT (0 deg at the right edge, 360 deg at the left), and
every such axis label says so.
"""
from __future__ import annotations

from dataclasses import dataclass
from datetime import date, datetime, time, timedelta
from zoneinfo import ZoneInfo

import numpy as np
from matplotlib import dates as mdates
from matplotlib.cm import ScalarMappable
from matplotlib.collections import PatchCollection
from matplotlib.colors import Normalize
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import FancyArrowPatch, Patch, Rectangle

from .avoidance import SUNSET_ALTITUDE_DEG, sun_altitude_deg
from .earth import earth_state, spherical_deg
from .errors import UserError
from .galactic import PLANE_DEC_LIMIT_DEG, galactic_to_icrs_deg, plane_declination_deg
from .timebase import mjd_to_datetime_utc, parse_instant, parse_iso
from .windows import read_windows, window_intervals_mjd

__all__ = [
    "OKABE_ITO",
    "avoidance_circle_deg",
    "coverage_atlas",
    "depth_chart",
    "expected_spectra_grid",
    "expected_spectrum_chart",
    "month_chart",
    "sky_track_map",
    "survey_chart",
    "survey_sky",
    "tally_chart",
]

# Okabe & Ito 2008, "Color Universal Design (CUD): how to make figures and
# presentations that are friendly to colorblind people", the eight-colour set.
OKABE_ITO = {
    "black": "#000000",
    "orange": "#E69F00",
    "sky_blue": "#56B4E9",
    "green": "#009E73",
    "yellow": "#F0E442",
    "blue": "#0072B2",
    "vermillion": "#D55E00",
    "purple": "#CC79A7",
}
_GREY = "#8C8C8C"
_NIGHT = "#D5DCE8"  # light blue-grey: behind everything, never confused with a data colour

_DRIFT_SCHEMA = "hiplan.plan/1"
_SURVEY_SCHEMA = "hiplan.survey/1"
_HOUR = timedelta(hours=1)
# A chart row runs from local noon to the next local noon (x = 12 .. 36 h).
_ROW_START_H = 12
_NIGHT_GRID_MIN = 10  # Sun altitude sampling for the night shading


# ---------------------------------------------------------------- shared helpers


def _longitude_axis(ax, label: str = "Galactic longitude l") -> None:
    """0..360 deg, l increasing to the left, ticks every 30 deg."""
    ax.set_xlim(360.0, 0.0)
    ax.set_xticks(np.arange(0.0, 361.0, 30.0))
    ax.set_xlabel(f"{label} (deg, increasing to the left)")


def _break_at_wrap(l_deg, *others) -> tuple[np.ndarray, ...]:
    """Insert NaN where l jumps across 0/360 so lines are not drawn across the map.

    A jump is a step of more than 180 deg between neighbours; every array in
    ``others`` gets a NaN at the same place.
    """
    lon = np.asarray(l_deg, dtype=float)
    cuts = np.flatnonzero(np.abs(np.diff(lon)) > 180.0) + 1
    out = [np.insert(lon, cuts, np.nan)]
    for arr in others:
        out.append(np.insert(np.asarray(arr, dtype=float), cuts, np.nan))
    return tuple(out)


def _runs(values, width: float) -> list[tuple[float, float]]:
    """Merge sorted bin starts into (start, length) runs of touching bins."""
    starts = np.unique(np.asarray(list(values), dtype=float))
    if starts.size == 0:
        return []
    breaks = np.flatnonzero(np.diff(starts) > width * 1.0001) + 1
    return [(float(g[0]), float(g[-1] - g[0] + width)) for g in np.split(starts, breaks)]


def _require(plan: dict, schema: str, kind: str) -> None:
    found = plan.get("schema") if isinstance(plan, dict) else None
    if found != schema:
        raise UserError(f"plan: schema '{found}' is not '{schema}'")
    if plan.get("kind") != kind:
        raise UserError(f"plan: kind '{plan.get('kind')}' is not '{kind}'")


def avoidance_circle_deg(l0_deg, b0_deg, radius_deg: float,
                         points: int = 361) -> tuple[np.ndarray, np.ndarray]:
    """Points (l, b) in degrees at angular distance ``radius_deg`` from each centre.

    ``l0_deg``/``b0_deg``: scalars or (S,) arrays of centres. Returns arrays of
    shape (S, points) (or (points,) for scalar centres), l in [0, 360). The
    circle is built around +z and rotated so that +z lands on the centre, so
    every point is exactly ``radius_deg`` away on the sphere (not a flat
    circle on the l-b plane, which would be wrong away from b = 0).
    """
    scalar = np.ndim(l0_deg) == 0 and np.ndim(b0_deg) == 0
    l0 = np.radians(np.atleast_1d(np.asarray(l0_deg, dtype=float)))[:, None]
    b0 = np.radians(np.atleast_1d(np.asarray(b0_deg, dtype=float)))[:, None]
    theta = np.linspace(0.0, 2.0 * np.pi, points)[None, :]
    r = np.radians(radius_deg)
    # circle about +z at colatitude r
    x, y, z = np.sin(r) * np.cos(theta), np.sin(r) * np.sin(theta), np.cos(r) + 0.0 * theta
    # tilt +z down to latitude b0 (rotation about y by 90 deg - b0), then turn by l0 about z
    tilt = np.pi / 2.0 - b0
    x1 = x * np.cos(tilt) + z * np.sin(tilt)
    z1 = -x * np.sin(tilt) + z * np.cos(tilt)
    x2 = x1 * np.cos(l0) - y * np.sin(l0)
    y2 = x1 * np.sin(l0) + y * np.cos(l0)
    lon, lat = spherical_deg(np.stack([x2, y2, z1 + 0.0 * x2], axis=-1))
    if scalar:
        return lon[0], lat[0]
    return lon, lat


def _circles_as_one_line(l_deg: np.ndarray, b_deg: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(S, P) circles into one NaN-separated polyline, broken at the 0/360 wrap."""
    sep = np.full((l_deg.shape[0], 1), np.nan)
    lon = np.concatenate([l_deg, sep], axis=1).ravel()
    lat = np.concatenate([b_deg, sep], axis=1).ravel()
    return _break_at_wrap(lon, lat)


# ---------------------------------------------------------------- coverage atlas


def _edges_from_centres(centres: np.ndarray) -> np.ndarray:
    if centres.size == 1:
        return np.array([centres[0] - 0.5, centres[0] + 0.5])
    mid = 0.5 * (centres[1:] + centres[:-1])
    return np.concatenate([[2 * centres[0] - mid[0]], mid, [2 * centres[-1] - mid[-1]]])


def coverage_atlas(dec_deg, bin_starts_deg, usable_hours, *, reachable_dec=(-90.0, 90.0),
                   wanted_bins=(), covered_bins=(), site_name: str = "", period_text: str = "",
                   b_max_deg: float = 3.0, bin_width_deg: float = 1.0, lower_dec_deg=None,
                   lower_hours=None, covered_fraction=None) -> Figure:
    """Where a drifting beam crosses the galactic plane: declination x longitude atlas.

    ``dec_deg`` (D,) parked declinations (deg, rows, ascending); ``bin_starts_deg``
    (B,) contiguous longitude bin starts (deg) of width ``bin_width_deg``;
    ``usable_hours`` (D, B): hours the beam centre spends in each bin over the
    period in usable passages (0 = none, left blank). ``reachable_dec`` (lo, hi)
    deg: the site's declination range, the rest is hatched. ``wanted_bins`` /
    ``covered_bins``: bin starts (deg) shown in a strip above the map (wanted,
    and already covered by the observation log); ``covered_fraction`` (B,), when
    given, shades that strip by the fraction of the target depth each bin has
    (0..1, partial depth visible). The map spans the declinations where the plane
    can be met (|dec| <= 62.9 + b_max, within the reachable range) so its cells
    stay readable. The galactic plane b = 0 and
    the strip edges b = +/-``b_max_deg`` are drawn as declination curves.
    ``lower_dec_deg`` (L,) / ``lower_hours`` (L, B): the same for settings below the
    pole (lower culmination, 12 h later), drawn as a second map under the first,
    over their own declination span, on the same colour scale.
    Colours: ``cividis`` for hours, Okabe-Ito for lines and strips.
    """
    dec = np.asarray(dec_deg, dtype=float).ravel()
    starts = np.asarray(bin_starts_deg, dtype=float).ravel()
    hours = np.asarray(usable_hours, dtype=float)
    if hours.shape != (dec.size, starts.size):
        raise ValueError(f"usable_hours has shape {hours.shape}, expected "
                         f"({dec.size}, {starts.size}) (declinations, bins)")
    order = np.argsort(dec)
    dec, hours = dec[order], hours[order]
    has_lower = lower_dec_deg is not None and np.size(lower_dec_deg) > 0
    if has_lower:
        low_dec = np.asarray(lower_dec_deg, dtype=float).ravel()
        low_hours = np.asarray(lower_hours, dtype=float).reshape(low_dec.size, starts.size)
        low_order = np.argsort(low_dec)
        low_dec, low_hours = low_dec[low_order], low_hours[low_order]

    fig = Figure(figsize=(13.0, 9.0 if has_lower else 7.0), layout="constrained")
    if has_lower:
        low_span = max(float(np.ptp(low_dec)) + 10.0, 25.0)
        strip, ax, ax_low = fig.subplots(3, 1, sharex=True, height_ratios=[1, 9, 9 * low_span / 180.0])
    else:
        strip, ax = fig.subplots(2, 1, sharex=True, height_ratios=[1, 9])
        ax_low = None

    l_edges = np.append(starts, starts[-1] + bin_width_deg) if starts.size else np.array([0.0, 1.0])
    vmax = max(float(hours.max()) if hours.size else 0.0,
               float(low_hours.max()) if has_lower and low_hours.size else 0.0, 1e-3)
    mesh = ax.pcolormesh(l_edges, _edges_from_centres(dec), np.ma.masked_less_equal(hours, 0.0),
                         cmap="cividis", vmin=0.0, vmax=vmax, shading="flat")
    fig.colorbar(mesh, ax=[strip, ax] + ([ax_low] if has_lower else []),
                 label="Usable hours in the period (h)", pad=0.01)

    lo, hi = sorted(float(v) for v in reachable_dec)
    unreachable = {"facecolor": "none", "edgecolor": _GREY, "hatch": "//", "linewidth": 0.0}
    ax.axhspan(-90.0, lo, **unreachable)
    ax.axhspan(hi, 90.0, **unreachable)

    l_grid = np.linspace(0.0, 360.0, 721)
    for axis in (ax, ax_low) if has_lower else (ax,):
        axis.plot(l_grid, plane_declination_deg(l_grid), color=OKABE_ITO["vermillion"], lw=1.8)
        for sign in (-1.0, 1.0):
            band_dec = galactic_to_icrs_deg(l_grid, np.full_like(l_grid, sign * b_max_deg))[1]
            axis.plot(l_grid, band_dec, color=OKABE_ITO["vermillion"], lw=0.9, ls="--")
        axis.grid(True, color="0.85", lw=0.5)
        axis.set_axisbelow(True)

    # Only declinations where the beam can meet the strip carry data: show those.
    reach = PLANE_DEC_LIMIT_DEG + b_max_deg + 3.0
    y_lo, y_hi = max(-90.0, -reach, lo - 3.0), min(90.0, reach, hi + 3.0)
    if y_hi - y_lo < 10.0:  # the plane is out of reach: show the reachable range itself
        y_lo, y_hi = max(-90.0, lo - 5.0), min(90.0, hi + 5.0)
    ax.set_ylim(y_lo, y_hi)
    ax.set_yticks(np.arange(np.ceil(y_lo / 15.0) * 15.0, y_hi + 0.1, 15.0))
    ax.set_ylabel("Declination of the parked beam (deg)")
    if has_lower:
        ax_low.pcolormesh(l_edges, _edges_from_centres(low_dec), np.ma.masked_less_equal(low_hours, 0.0),
                          cmap="cividis", vmin=0.0, vmax=vmax, shading="flat")
        centre = 0.5 * (low_dec.min() + low_dec.max())
        ax_low.set_ylim(max(centre - low_span / 2, -90.0), min(centre + low_span / 2, 90.0))
        ax_low.set_ylabel("Dec, below the pole (deg)")
        ax_low.set_title(f"Below the pole: the same declinations 12 h later "
                         f"(reachable Dec {low_dec.min():.1f}° to {low_dec.max():.1f}°)", fontsize=10)
        _longitude_axis(ax_low)
        ax.tick_params(axis="x", labelbottom=False)
        ax.set_title("Upper culmination (on the meridian at the declination's highest point)",
                     fontsize=10)
    else:
        _longitude_axis(ax)

    if covered_fraction is not None:  # shaded by depth: partial coverage shows
        frac = np.clip(np.asarray(covered_fraction, dtype=float).ravel(), 0.0, 1.0)
        strip.pcolormesh(l_edges, [0.15, 0.85], np.ma.masked_less_equal(frac[None, :], 0.0),
                         cmap="Greens", vmin=0.0, vmax=1.0, shading="flat")
        covered_bins = ()
    for row, (bins, colour) in enumerate(((covered_bins, OKABE_ITO["green"]),
                                          (wanted_bins, OKABE_ITO["orange"]))):
        runs = _runs(bins, bin_width_deg)
        if runs:
            strip.broken_barh(runs, (row + 0.15, 0.7), facecolors=colour)
    strip.set_ylim(0.0, 2.0)
    strip.set_yticks([0.5, 1.5], ["already covered", "wanted"], fontsize=8)
    strip.tick_params(axis="x", labelbottom=False)
    strip.grid(True, axis="x", color="0.85", lw=0.5)

    title = "Usable drift-scan hours per galactic longitude bin"
    where = ", ".join(t for t in (site_name, period_text) if t)
    fig.suptitle(f"{title}\n{where}" if where else title)
    handles = [
        Line2D([], [], color=OKABE_ITO["vermillion"], lw=1.8, label="galactic plane (b = 0°)"),
        Line2D([], [], color=OKABE_ITO["vermillion"], lw=0.9, ls="--",
               label=f"strip edges (b = ±{b_max_deg:g}°)"),
        Patch(facecolor="none", edgecolor=_GREY, hatch="//",
              label=f"not reachable (outside Dec {lo:.1f}° to {hi:.1f}°)"),
        Patch(facecolor=OKABE_ITO["orange"], label="wanted bins"),
        Patch(facecolor=OKABE_ITO["green"],
              label="already covered (observation log" + ("; shade = share of the target depth)"
                                                          if covered_fraction is not None else ")")),
    ]
    fig.legend(handles=handles, loc="outside lower center", ncols=3, fontsize=9)
    return fig


# ---------------------------------------------------------------- sky track map


def sky_track_map(track_l_deg, track_b_deg, *, b_max_deg: float, in_passage, sun_l_deg,
                  sun_b_deg, sun_radius_deg: float, title: str = "") -> Figure:
    """The beam-centre track of one parked declination on a galactic l-b map.

    ``track_l_deg``/``track_b_deg`` (N,) over a sidereal day; ``in_passage`` (N,)
    bool, True inside usable passages (drawn thick); the strip |b| <=
    ``b_max_deg`` is shaded. ``sun_l_deg``/``sun_b_deg`` (S,): the Sun over the
    period (e.g. daily), each with its avoidance circle of angular radius
    ``sun_radius_deg`` computed on the sphere (``avoidance_circle_deg``); the
    circles are one line artist with gid ``"sun-avoidance"``. Lines are broken
    where l wraps through 0/360. Okabe-Ito colours.
    """
    lon = np.asarray(track_l_deg, dtype=float)
    lat = np.asarray(track_b_deg, dtype=float)
    mask = np.asarray(in_passage, dtype=bool)
    sun_l = np.atleast_1d(np.asarray(sun_l_deg, dtype=float))
    sun_b = np.atleast_1d(np.asarray(sun_b_deg, dtype=float))

    fig = Figure(figsize=(11.0, 6.0), layout="constrained")
    ax = fig.subplots()
    ax.axhspan(-b_max_deg, b_max_deg, color=OKABE_ITO["sky_blue"], alpha=0.35, lw=0)

    l_line, b_line, m_line = _break_at_wrap(lon, lat, mask.astype(float))
    ax.plot(l_line, b_line, color=_GREY, lw=1.0)
    ax.plot(l_line, np.where(m_line == 1.0, b_line, np.nan), color=OKABE_ITO["blue"], lw=3.0,
            solid_capstyle="butt")

    if sun_l.size:
        circle_l, circle_b = avoidance_circle_deg(sun_l, sun_b, sun_radius_deg)
        ring_l, ring_b = _circles_as_one_line(circle_l, circle_b)
        ax.plot(ring_l, ring_b, color=OKABE_ITO["vermillion"], lw=0.8, alpha=0.7,
                gid="sun-avoidance")
        ax.plot(sun_l, sun_b, ls="none", marker="o", ms=5, color=OKABE_ITO["orange"],
                markeredgecolor=OKABE_ITO["black"], markeredgewidth=0.5)

    _longitude_axis(ax)
    ax.set_ylim(-90.0, 90.0)
    ax.set_yticks(np.arange(-90.0, 91.0, 30.0))
    ax.set_ylabel("Galactic latitude b (deg)")
    ax.grid(True, color="0.85", lw=0.5)
    ax.set_axisbelow(True)
    ax.set_title(title or "Beam-centre track over one sidereal day")
    handles = [
        Patch(facecolor=OKABE_ITO["sky_blue"], alpha=0.35, label=f"|b| ≤ {b_max_deg:g}° strip"),
        Line2D([], [], color=_GREY, lw=1.0, label="beam track (one sidereal day)"),
        Line2D([], [], color=OKABE_ITO["blue"], lw=3.0, label="usable passages"),
        Line2D([], [], ls="none", marker="o", color=OKABE_ITO["orange"],
               markeredgecolor="black", label="Sun over the period"),
        Line2D([], [], color=OKABE_ITO["vermillion"], lw=0.8,
               label=f"Sun avoidance ({sun_radius_deg:g}° radius)"),
    ]
    fig.legend(handles=handles, loc="outside lower center", ncols=5, fontsize=9)
    return fig


# ---------------------------------------------------------------- month chart


@dataclass(frozen=True)
class _Place:
    """Site position only: all ``sun_altitude_deg`` reads from a site."""

    latitude_deg: float
    longitude_deg: float
    height_m: float


def _row_of(wall: datetime) -> date:
    """Chart row (the date whose noon starts it) holding a naive local wall time."""
    return (wall - timedelta(hours=_ROW_START_H)).date()


def _wall_pieces(start_wall: datetime, end_wall: datetime) -> list[tuple[date, float, float]]:
    """Split a wall-clock interval at the row boundaries (local noons).

    Returns (row date, x0, x1) with x in wall-clock hours after the row date's
    local midnight, so x runs from 12 to 36.
    """
    pieces = []
    t = start_wall
    while t < end_wall:
        row = _row_of(t)
        zero = datetime.combine(row, time())
        stop = min(end_wall, zero + timedelta(hours=_ROW_START_H + 24))
        pieces.append((row, (t - zero) / _HOUR, (stop - zero) / _HOUR))
        t = stop
    return pieces


def _local_span(start_local: str, end_local: str) -> tuple[datetime, datetime]:
    """Naive wall-clock (start, end) from two ISO strings with offsets.

    Wall-clock differences ignore the offset change, which is what the chart
    shows. In a fall-back hour the wall end can precede the wall start; the
    bar then keeps its elapsed length.
    """
    start = datetime.fromisoformat(start_local)
    end = datetime.fromisoformat(end_local)
    start_wall, end_wall = start.replace(tzinfo=None), end.replace(tzinfo=None)
    if end_wall <= start_wall:
        end_wall = start_wall + (end - start)
    return start_wall, end_wall


def _mjd_span_to_wall(start_mjd: float, end_mjd: float, tz: ZoneInfo) -> tuple[datetime, datetime]:
    a = mjd_to_datetime_utc(start_mjd).astimezone(tz)
    b = mjd_to_datetime_utc(end_mjd).astimezone(tz)
    return _local_span(a.isoformat(), b.isoformat())


def _night_intervals_mjd(site: dict, start_mjd: float, end_mjd: float) -> np.ndarray:
    """(K, 2) MJD intervals with the Sun below the sunset altitude.

    Sun altitude (geometric, ``avoidance.sun_altitude_deg``) on a 10-minute
    grid; crossings of -0.833 deg (refraction + semi-diameter, almanac
    convention) are interpolated linearly between samples, good to about a
    minute, ample for shading.
    """
    step = _NIGHT_GRID_MIN / 1440.0
    mjd = np.arange(start_mjd, end_mjd + step, step)
    place = _Place(float(site["latitude_deg"]), float(site["longitude_deg"]),
                   float(site.get("height_m", 0.0)))
    # UTC for UT1: shading to the minute needs no Earth-orientation table
    alt = sun_altitude_deg(place, earth_state(mjd, ut1=False)) - SUNSET_ALTITUDE_DEG
    dark = alt < 0.0
    change = np.flatnonzero(dark[1:] != dark[:-1])
    frac = alt[change] / (alt[change] - alt[change + 1])
    cross = mjd[change] + frac * step
    edges = np.concatenate([[mjd[0]] if dark[0] else [], cross, [mjd[-1]] if dark[-1] else []])
    return edges.reshape(-1, 2)


def _clock_changes(row: date, tz: ZoneInfo) -> list[tuple[float, float]]:
    """(x of the new wall time, shift in hours) for UTC-offset changes within a row."""
    noon = datetime.combine(row, time(_ROW_START_H), tzinfo=tz)
    after = datetime.combine(row + timedelta(days=1), time(_ROW_START_H), tzinfo=tz)
    if noon.utcoffset() == after.utcoffset():
        return []
    # Scan the row in 15-minute UTC steps (zones change on quarter hours at the finest).
    start_utc = noon.astimezone(ZoneInfo("UTC"))
    moments = [start_utc + timedelta(minutes=15 * k) for k in range(4 * 25 + 1)]
    offsets = [m.astimezone(tz).utcoffset() for m in moments]
    changes = []
    zero = datetime.combine(row, time())
    for k in range(1, len(moments)):
        if offsets[k] != offsets[k - 1]:
            new_wall = moments[k].astimezone(tz).replace(tzinfo=None)
            changes.append(((new_wall - zero) / _HOUR, (offsets[k] - offsets[k - 1]) / _HOUR))
    return changes


def _mid_longitude_deg(l_start: float, l_end: float) -> float:
    """Longitude half-way along the passage, along the short way round."""
    step = (l_end - l_start + 180.0) % 360.0 - 180.0
    return (l_start + 0.5 * step) % 360.0


def month_chart(plan: dict) -> Figure:
    """A drift plan as a chart: local date (rows) x local wall-clock time (columns).

    Each row runs from local noon to the next local noon (x = 12 .. 36 h, ticks
    labelled modulo 24) so a night is one unbroken stretch; the row is named
    by the date of its evening. Times are wall-clock readings from the plan's
    ``*_local`` strings, so on a DST night a row still spans 24 clock hours
    and a dashed mark shows where the clocks change. Drawn per row: night
    (Sun below -0.833 deg, 10-minute grid), operator windows (outlines, from
    ``settings.windows``), recordings (bars coloured by mid-passage galactic
    longitude, viridis 0..360 deg; gid ``"recording:<start_utc>"``), passages
    skipped for the Sun (grey bars) or other reasons (thin grey lines), re-park
    moves (black triangle and line) and the parts outside the plan period
    (hatched). Raises UserError for a plan that is not a drift plan.
    """
    _require(plan, _DRIFT_SCHEMA, "drift")
    site, period, settings = plan["site"], plan["period"], plan.get("settings", {})
    tz = ZoneInfo(site["timezone"])
    start_mjd = parse_instant(period["start_utc"], "plan: period.start_utc")
    end_mjd = parse_instant(period["end_utc"], "plan: period.end_utc")
    if not end_mjd > start_mjd:
        raise UserError("plan: period.end_utc is not after period.start_utc")
    period_wall = _mjd_span_to_wall(start_mjd, end_mjd, tz)
    first_row = _row_of(period_wall[0])
    last_row = _row_of(period_wall[1] - timedelta(seconds=1))
    rows = (last_row - first_row).days + 1

    fig = Figure(figsize=(12.0, 2.6 + 0.3 * rows), layout="constrained")
    ax = fig.subplots()
    x_lo, x_hi = float(_ROW_START_H), float(_ROW_START_H + 24)

    # Rectangles are gathered per kind and drawn as one collection each (hundreds of
    # separate patches cost far more to draw and save); each keeps its own colours.
    kinds: dict[str, tuple[list, dict]] = {}

    def place(start_wall, end_wall, y_off, height, gid="other", **style):
        made = []
        for row, x0, x1 in _wall_pieces(start_wall, end_wall):
            i = (row - first_row).days
            if 0 <= i < rows:
                made.append(Rectangle((x0, i + y_off), x1 - x0, height, **style))
        if made:
            key = f"{gid}|{style.get('zorder')}|{style.get('hatch')}"
            kinds.setdefault(key, ([], {"gid": gid, "zorder": style.get("zorder", 1),
                                        "hatch": style.get("hatch")}))[0].extend(made)
        return made

    legend: dict[str, object] = {}

    # Outside the plan period: the ends of the first and last rows.
    hatch = {"facecolor": "none", "edgecolor": "0.75", "hatch": "xx", "lw": 0, "zorder": 0.5}
    row0 = datetime.combine(first_row, time(_ROW_START_H))
    row_end = datetime.combine(last_row + timedelta(days=1), time(_ROW_START_H))
    if place(row0, period_wall[0], -0.5, 1.0, gid="outside", **hatch) + place(
            period_wall[1], row_end, -0.5, 1.0, gid="outside", **hatch):
        legend["outside"] = Patch(facecolor="none", edgecolor="0.6", hatch="xx",
                                  label="outside the plan period")

    # Night: computed over whole rows so the shading runs to the chart edges.
    grid_lo = start_mjd - 1.0
    grid_hi = end_mjd + 1.0
    for a, b in _night_intervals_mjd(site, grid_lo, grid_hi):
        place(*_mjd_span_to_wall(a, b, tz), -0.5, 1.0, facecolor=_NIGHT, lw=0, zorder=0,
              gid="night")
    legend["night"] = Patch(facecolor=_NIGHT, label="night (Sun below −0.83°)")

    windows = [w for w in settings.get("windows") or [] if w.strip()]
    if windows:
        avail = read_windows("\n".join(windows))
        for a, b in window_intervals_mjd(avail, start_mjd, end_mjd, tz):
            place(*_mjd_span_to_wall(a, b, tz), -0.42, 0.84, facecolor="none",
                  edgecolor=OKABE_ITO["green"], lw=1.3, zorder=1, gid="window")
        legend["windows"] = Patch(facecolor="none", edgecolor=OKABE_ITO["green"], lw=1.3,
                                  label="operator available")
    else:
        legend["windows"] = Patch(facecolor="none", edgecolor="none",
                                  label="operator: any time (no windows)")

    cmap = ScalarMappable(norm=Normalize(0.0, 360.0), cmap="viridis")
    for day in plan["days"]:
        for skip in day.get("skipped") or []:
            span = _local_span(skip["start_local"], skip["end_local"])
            if skip.get("reason") == "sun":
                place(*span, -0.25, 0.5, facecolor=_GREY, lw=0, zorder=2, gid="skipped-sun")
                legend["sun"] = Patch(facecolor=_GREY, label="skipped: too near the Sun")
            else:
                place(*span, -0.04, 0.08, facecolor="0.6", lw=0, zorder=2, gid="skipped-other")
                legend["other"] = Line2D([], [], color="0.6", lw=2.5,
                                         label="skipped: daylight, windows or not wanted")
        for rec in day.get("recordings") or []:
            span = _local_span(rec["start_local"], rec["end_local"])
            colour = cmap.to_rgba(_mid_longitude_deg(rec["l_start_deg"], rec["l_end_deg"]))
            place(*span, -0.25, 0.5, facecolor=colour, edgecolor="black", lw=0.4, zorder=3,
                  gid="recording")
            legend["rec"] = Patch(facecolor=cmap.to_rgba(180.0), edgecolor="black", lw=0.4,
                                  label="recording (colour: galactic longitude)")
        park = day.get("park") or {}
        if park.get("move") and park.get("move_start_local") and park.get("move_end_local"):
            pieces = _wall_pieces(*_local_span(park["move_start_local"], park["move_end_local"]))
            for n, (row, x0, x1) in enumerate(pieces):
                y = (row - first_row).days - 0.36
                ax.plot([x0, x1], [y, y], color="black", lw=2.2, zorder=4,
                        solid_capstyle="butt", marker="v" if n == 0 else None, markevery=[0],
                        ms=7, gid="repark")
            legend["park"] = Line2D([], [], color="black", lw=2.2, marker="v", ms=7,
                                    label="re-park the dish (move window)")
        for hazard in day.get("sun_hazards") or []:
            place(*_local_span(hazard["from_local"], hazard["to_local"]), -0.5, 1.0,
                  facecolor="none", edgecolor=OKABE_ITO["vermillion"], hatch="\\\\", lw=1.5,
                  zorder=4.5, gid="sun-hazard")
            legend["hazard"] = Patch(facecolor="none", edgecolor=OKABE_ITO["vermillion"], hatch="\\\\",
                                     label="SUN HAZARD: cover the feed or move the dish first")

    for rects, style in kinds.values():
        ax.add_collection(PatchCollection(rects, match_original=True, **style))

    labels = []
    for i in range(rows):
        row = first_row + timedelta(days=i)
        for x, shift in _clock_changes(row, tz):
            ax.plot([x, x], [i - 0.5, i + 0.5], color=OKABE_ITO["vermillion"], lw=1.5, ls="--",
                    zorder=5)
            # Below the bars, on a white ground, so it stays readable over a recording.
            ax.annotate(f"clocks {shift:+g} h", (x, i + 0.36), xytext=(3, 0),
                        textcoords="offset points", va="center", ha="left", fontsize=7,
                        color=OKABE_ITO["vermillion"], zorder=6,
                        bbox={"boxstyle": "square,pad=0.1", "facecolor": "white", "lw": 0,
                              "alpha": 0.85})
            legend["dst"] = Line2D([], [], color=OKABE_ITO["vermillion"], lw=1.5, ls="--",
                                   label="clock change (daylight saving)")
        labels.append(f"{row:%a %d %b}")

    ax.set_xlim(x_lo, x_hi)
    ticks = np.arange(x_lo, x_hi + 0.1, 2.0)
    ax.set_xticks(ticks, [f"{int(t) % 24:02d}:00" for t in ticks])
    ax.set_ylim(rows - 0.5, -0.5)
    ax.set_yticks(np.arange(rows), labels, fontsize=8 if rows > 20 else 9)
    ax.set_xlabel(f"Local time, {site['timezone']} wall clock (h); "
                  "each row runs from noon to the next noon")
    ax.set_ylabel("Local date (evening of the row)")
    ax.grid(True, axis="x", color="0.8", lw=0.5)
    ax.set_axisbelow(True)
    fig.colorbar(cmap, ax=ax, label="Galactic longitude at mid-recording (deg)",
                 ticks=np.arange(0, 361, 60), pad=0.01)
    title = (f"Drift plan: {site.get('name', '')}\n{period_wall[0]:%Y-%m-%d %H:%M} to "
             f"{period_wall[1]:%Y-%m-%d %H:%M} local time ({site['timezone']})")
    if plan.get("warnings"):
        title += "\nSUN HAZARD on the hatched red days: read the plan's warning before observing"
    fig.suptitle(title, color=OKABE_ITO["vermillion"] if plan.get("warnings") else "black")
    replan = plan.get("replan") if isinstance(plan.get("replan"), dict) else None
    if replan and replan.get("from_day"):
        # A re-planned plan: local midnight starting the re-plan day, traced as a step (it
        # falls at 24 h in the row of the evening before): before it, the kept days.
        i = (date.fromisoformat(replan["from_day"]) - first_row).days
        ax.plot([x_lo, x_lo + 12.0, x_lo + 12.0, x_hi], [i - 0.5, i - 0.5, i - 1.5, i - 1.5],
                color=OKABE_ITO["purple"], lw=2.0, zorder=5.5, gid="replan")
        legend["replan"] = Line2D([], [], color=OKABE_ITO["purple"], lw=2.0,
                                  label=f"re-planned from {replan['from_day']} (above: as planned before)")
    order = ["night", "windows", "rec", "sun", "other", "park", "hazard", "dst", "outside", "replan"]
    fig.legend(handles=[legend[k] for k in order if k in legend], loc="outside lower center",
               ncols=4, fontsize=9)
    return fig


# ---------------------------------------------------------------- depth chart


def bin_bars(ax, centres, heights, width: float, gid: str, label: str, **style) -> None:
    """Bars of one kind as a single collection (hundreds of bins draw and save far faster
    than as separate patches), with a legend entry. ``style``: Rectangle keywords."""
    rects = [Rectangle((c - 0.5 * width, 0.0), width, h, **style)
             for c, h in zip(np.asarray(centres, float), np.asarray(heights, float))]
    ax.add_collection(PatchCollection(rects, match_original=True, gid=gid, zorder=2))
    # the legend's entry: an empty rectangle on the first bar (adds nothing to the limits)
    first = float(centres[0]) if len(centres) else 0.0
    ax.add_patch(Rectangle((first, 0.0), 0.0, 0.0, label=label, **style))
    ax.update_datalim([(float(np.min(centres, initial=0.0)), 0.0),
                       (float(np.max(centres, initial=0.0)), float(np.max(heights, initial=0.0)))])
    ax.autoscale_view()


def depth_chart(plan: dict) -> Figure:
    """Integration depth (minutes) per wanted bin, before and after the plan.

    Bars span each bin (width ``settings.bin_width_deg``) on a longitude axis
    increasing to the left; "after" drawn wide in sky blue, "before" narrow in
    blue on top, the target depth as a dashed vermillion line (Okabe-Ito).
    """
    _require(plan, _DRIFT_SCHEMA, "drift")
    summary, settings = plan["summary"], plan.get("settings", {})
    width = float(settings.get("bin_width_deg", 1.0))
    before = summary.get("depth_before_min", {})
    after = summary.get("depth_after_min", {})
    keys = sorted(set(before) | set(after), key=float)
    starts = np.array([float(k) for k in keys])
    before_min = np.array([float(before.get(k, 0.0)) for k in keys])
    after_min = np.array([float(after.get(k, 0.0)) for k in keys])
    target = settings.get("target_minutes")

    fig = Figure(figsize=(11.0, 5.0), layout="constrained")
    ax = fig.subplots()
    centres = starts + 0.5 * width
    bin_bars(ax, centres, after_min, width, "depth-after", "after the plan",
             facecolor=OKABE_ITO["sky_blue"], edgecolor="white", lw=0.3)
    bin_bars(ax, centres, before_min, 0.5 * width, "depth-before", "before (observation log)",
             facecolor=OKABE_ITO["blue"], lw=0)
    if target is not None:
        ax.axhline(float(target), color=OKABE_ITO["vermillion"], ls="--", lw=1.5,
                   label=f"target depth ({float(target):g} min)")
    if starts.size:
        lo, hi = float(starts.min()), float(starts.max() + width)
        pad = max(2.0, 0.03 * (hi - lo))
        ax.set_xlim(hi + pad, lo - pad)
    else:
        ax.set_xlim(360.0, 0.0)
    ax.set_xlabel("Galactic longitude l of the bin (deg, increasing to the left)")
    ax.set_ylabel("Integration depth (min)")
    ax.grid(True, axis="y", color="0.85", lw=0.5)
    ax.set_axisbelow(True)
    done = (f"wanted bins at target depth: {summary.get('done_before', '?')} before, "
            f"{summary.get('done_after', '?')} after, of {summary.get('wanted_bins', len(keys))}")
    top = max([float(after_min.max()) if after_min.size else 0.0,
               float(before_min.max()) if before_min.size else 0.0,
               float(target) if target is not None else 0.0, 1.0])
    ax.set_ylim(0.0, 1.08 * top)
    ax.set_title(f"Depth per bin — {plan['site'].get('name', '')}\n{done}")
    fig.legend(loc="outside lower center", ncols=3, fontsize=9)
    return fig


# ---------------------------------------------------------------- survey charts


def _survey_blocks(plan: dict) -> list[dict]:
    _require(plan, _SURVEY_SCHEMA, "survey")
    blocks = plan.get("blocks") or []
    if not blocks:
        raise UserError("plan: survey plan has no blocks")
    return blocks


def survey_chart(plan: dict) -> Figure:
    """A survey plan over time: target longitude (left axis) and elevation (right axis).

    Blocks are bars at their galactic longitude, targets in blue and
    references in orange (Okabe-Ito); slews are dashed grey lines from one
    pointing's longitude to the next. A stow (the dish parked safe from the Sun,
    no sky position) is a pale yellow band over its time. The elevation of the
    dish through every block is the vermillion line on the twin axis, with the
    site's minimum elevation dotted. Time axis in the site's local zone.
    """
    blocks = _survey_blocks(plan)
    site = plan["site"]
    tz = ZoneInfo(site["timezone"])
    fig = Figure(figsize=(12.0, 5.5), layout="constrained")
    ax = fig.subplots()
    elev = ax.twinx()

    pointed = [b for b in blocks
               if b.get("kind") not in ("slew", "stow") and b.get("l_deg") is not None]
    l_all = np.array([b["l_deg"] for b in pointed], dtype=float)
    span = float(np.ptp(l_all)) if l_all.size else 0.0
    height = max(2.0, 0.04 * span)
    colours = {"target": OKABE_ITO["blue"], "reference": OKABE_ITO["orange"]}

    last_l = None
    elev_t, elev_v = [], []
    for k, blk in enumerate(blocks):
        # parse_iso: a time in a leap second (second 60) reads as second 59
        t0 = mdates.date2num(parse_iso(blk["start_utc"])[0])
        t1 = mdates.date2num(parse_iso(blk["end_utc"])[0])
        if blk.get("kind") == "slew":
            nxt = next((b for b in blocks[k + 1:] if b.get("kind") != "slew"), None)
            if last_l is not None and nxt is not None and nxt.get("l_deg") is not None:
                ax.plot([t0, t1], [last_l, nxt["l_deg"]], color=_GREY, ls="--", lw=1.2)
        elif blk.get("kind") == "stow":
            ax.axvspan(t0, t1, facecolor=OKABE_ITO["yellow"], alpha=0.35, lw=0, zorder=1)
            last_l = None  # the next slew starts from the stow, not from a sky position
        else:
            l_deg = float(blk["l_deg"])
            ax.add_patch(Rectangle((t0, l_deg - height / 2), t1 - t0, height,
                                   facecolor=colours.get(blk.get("kind"), _GREY),
                                   edgecolor="black", lw=0.5, zorder=3))
            ax.annotate(blk.get("name", ""), (0.5 * (t0 + t1), l_deg + height / 2),
                        xytext=(0, 2), textcoords="offset points", ha="center", va="bottom",
                        fontsize=7)
            last_l = l_deg
        if blk.get("alt_start_deg") is not None and blk.get("alt_end_deg") is not None:
            elev_t += [t0, t1]
            elev_v += [float(blk["alt_start_deg"]), float(blk["alt_end_deg"])]
    elev.plot(elev_t, elev_v, color=OKABE_ITO["vermillion"], lw=1.5)
    if site.get("elevation_min_deg") is not None:
        elev.axhline(float(site["elevation_min_deg"]), color=OKABE_ITO["vermillion"], ls=":",
                     lw=1.2)
    elev.set_ylim(0.0, 90.0)
    elev.set_ylabel("Elevation of the dish (deg)", color=OKABE_ITO["vermillion"])
    elev.tick_params(axis="y", colors=OKABE_ITO["vermillion"])

    t_first = mdates.date2num(parse_iso(blocks[0]["start_utc"])[0])
    t_last = mdates.date2num(parse_iso(blocks[-1]["end_utc"])[0])
    pad = 0.02 * (t_last - t_first)
    ax.set_xlim(t_first - pad, t_last + pad)
    if l_all.size:
        margin = max(5.0, 0.08 * span)
        ax.set_ylim(l_all.min() - margin, l_all.max() + margin + height)
    locator = mdates.AutoDateLocator(tz=tz)
    ax.xaxis.set_major_locator(locator)
    ax.xaxis.set_major_formatter(mdates.ConciseDateFormatter(locator, tz=tz))
    ax.set_xlabel(f"Local time ({site['timezone']})")
    ax.set_ylabel("Galactic longitude of the pointing l (deg)")
    ax.grid(True, color="0.85", lw=0.5)
    ax.set_axisbelow(True)
    start_local = blocks[0].get("start_local", blocks[0]["start_utc"])[:10]
    ax.set_title(f"Survey plan — {site.get('name', '')} — night of {start_local}")
    handles = [
        Patch(facecolor=OKABE_ITO["blue"], edgecolor="black", lw=0.5, label="target"),
        Patch(facecolor=OKABE_ITO["orange"], edgecolor="black", lw=0.5, label="reference"),
        Line2D([], [], color=_GREY, ls="--", lw=1.2, label="slew"),
        Line2D([], [], color=OKABE_ITO["vermillion"], lw=1.5, label="elevation (right axis)"),
        Line2D([], [], color=OKABE_ITO["vermillion"], ls=":", lw=1.2,
               label="minimum elevation"),
    ]
    if any(b.get("kind") == "stow" for b in blocks):
        handles.append(Patch(facecolor=OKABE_ITO["yellow"], alpha=0.35,
                             label="stowed, safe from the Sun"))
    fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), fontsize=9)
    return fig


def survey_sky(plan: dict) -> Figure:
    """The survey's visiting order on a galactic l-b map, numbered, with arrows.

    Targets (blue) and references (orange) in visiting order 1, 2, ...; an
    arrow joins each pointing to the next. A step across l = 0/360 is drawn
    the short way round, leaving one edge of the map and entering the other.
    The |b| <= b_max strip from the site is shaded. Okabe-Ito colours.
    """
    blocks = _survey_blocks(plan)
    site = plan["site"]
    pointed = [b for b in blocks
               if b.get("kind") not in ("slew", "stow") and b.get("l_deg") is not None]
    lon = np.array([b["l_deg"] for b in pointed], dtype=float) % 360.0
    lat = np.array([b["b_deg"] for b in pointed], dtype=float)
    b_max = float(site.get("b_max_deg", site.get("band_deg", 3.0)))  # band_deg: older plans

    fig = Figure(figsize=(11.0, 5.5), layout="constrained")
    ax = fig.subplots()
    ax.axhspan(-b_max, b_max, color=OKABE_ITO["sky_blue"], alpha=0.3, lw=0)
    for k in range(len(pointed) - 1):
        step = (lon[k + 1] - lon[k] + 180.0) % 360.0 - 180.0
        ends = [(lon[k], lon[k] + step)]
        if not 0.0 <= lon[k] + step < 360.0:  # leaves the map: draw the re-entering copy too
            shift = 360.0 if lon[k] + step < 0.0 else -360.0
            ends.append((lon[k] + shift, lon[k] + step + shift))
        for a, b in ends:
            ax.add_patch(FancyArrowPatch((a, lat[k]), (b, lat[k + 1]), arrowstyle="-|>",
                                         mutation_scale=12, color="0.35", lw=1.0,
                                         shrinkA=6, shrinkB=6, zorder=2))
    colours = [OKABE_ITO["orange"] if b.get("kind") == "reference" else OKABE_ITO["blue"]
               for b in pointed]
    ax.scatter(lon, lat, c=colours, s=50, edgecolors="black", linewidths=0.5, zorder=3)
    for k, blk in enumerate(pointed):
        ax.annotate(f"{k + 1}", (lon[k], lat[k]), xytext=(5, 5), textcoords="offset points",
                    fontsize=8, fontweight="bold", zorder=4)

    _longitude_axis(ax)
    b_lo = min(-b_max - 10.0, float(lat.min()) - 10.0) if lat.size else -20.0
    b_hi = max(b_max + 10.0, float(lat.max()) + 10.0) if lat.size else 20.0
    ax.set_ylim(max(-90.0, b_lo), min(90.0, b_hi))
    ax.set_ylabel("Galactic latitude b (deg)")
    ax.grid(True, color="0.85", lw=0.5)
    ax.set_axisbelow(True)
    ax.set_title(f"Survey visiting order — {site.get('name', '')}")
    handles = [
        Line2D([], [], ls="none", marker="o", color=OKABE_ITO["blue"], markeredgecolor="black",
               label="target"),
        Line2D([], [], ls="none", marker="o", color=OKABE_ITO["orange"],
               markeredgecolor="black", label="reference"),
        Line2D([], [], color="0.35", marker=">", label="next pointing (numbers: order)"),
        Patch(facecolor=OKABE_ITO["sky_blue"], alpha=0.3, label=f"|b| ≤ {b_max:g}° strip"),
    ]
    unscheduled = plan.get("unscheduled") or []
    if unscheduled:
        names = ", ".join(u.get("name", "?") for u in unscheduled)
        handles.append(Patch(facecolor="none", edgecolor="none", label=f"not scheduled: {names}"))
    fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), fontsize=9)
    return fig


# ---------------------------------------------------------------- expected HI spectrum

_CURVE_COLOURS = ("blue", "orange", "green", "purple", "vermillion", "sky_blue")


def expected_spectrum_chart(velocity_kms, curves, *, title: str = "", receiver: dict | None = None,
                            small: bool = False) -> Figure:
    """Expected brightness temperature against LSR velocity, one line per curve.

    ``curves``: dicts with ``label`` and ``tb_k`` (on ``velocity_kms``). ``receiver`` (the
    ``hiplan spectrum`` document's receiver object, optional): the usable band and the band
    edges are shaded, the centre spike marked and the line-free ranges underlined, all in LSR
    velocity. ``small``: the brief's thumbnail size. Okabe-Ito colours.
    """
    v = np.asarray(velocity_kms, dtype=float)
    fig = Figure(figsize=(4.6, 2.6) if small else (9.0, 4.8), layout="constrained")
    ax = fig.subplots()
    if receiver:
        lo, hi = sorted((receiver["usable_low_kms"], receiver["usable_high_kms"]))
        blo, bhi = sorted((receiver["band_low_kms"], receiver["band_high_kms"]))
        ax.axvspan(blo, bhi, color="0.93", lw=0, label="receiver band", gid="band")
        ax.axvspan(lo, hi, color="0.85", lw=0, label="usable band", gid="usable")
        ax.axvline(receiver["spike_v_lsr_kms"], color=OKABE_ITO["vermillion"], ls=":", lw=1.2,
                   label="centre spike", gid="spike")
        for a, b in receiver.get("line_free_kms", ()):
            ax.plot([a, b], [0, 0], color=OKABE_ITO["green"], lw=4, solid_capstyle="butt",
                    gid="line-free")
        ax.plot([], [], color=OKABE_ITO["green"], lw=4, label="line-free (baseline)")
    top = 1.0
    for k, curve in enumerate(curves):
        tb = np.asarray(curve["tb_k"], dtype=float)
        top = max(top, float(tb.max()) if tb.size else 0.0)
        ax.plot(v, tb, color=OKABE_ITO[_CURVE_COLOURS[k % len(_CURVE_COLOURS)]],
                lw=1.2 if small else 1.6, label=curve.get("label"), gid=f"curve-{k}")
    ax.set_ylim(-0.04 * top, 1.12 * top)
    ax.set_xlim(float(v.min()), float(v.max()))
    ax.set_xlabel("LSR velocity (km/s)", fontsize=8 if small else None)
    ax.set_ylabel("T_B (K)", fontsize=8 if small else None)
    ax.grid(True, color="0.88", lw=0.5)
    ax.set_axisbelow(True)
    if small:
        ax.tick_params(labelsize=7)
    if title:
        ax.set_title(title, fontsize=8 if small else None)
    ax.legend(fontsize=6 if small else 8, loc="upper right", frameon=False)
    return fig


# ---------------------------------------------------------------- tally against plan

def tally_chart(doc: dict) -> Figure:
    """Planned against recorded minutes: per local day (top) and per bin (bottom).

    From a tally document made with a plan (``hiplan.tally/1`` with ``per_day`` and
    ``per_bin``). Days: planned minutes as wide sky-blue bars, recorded as narrow blue
    bars on top, days with missed intervals marked by a vermillion triangle under the bar.
    Bins: the same bars on a longitude axis increasing to the left. Okabe-Ito colours.
    """
    if doc.get("schema") != "hiplan.tally/1" or "per_day" not in doc:
        raise UserError("the tally chart needs a tally made with --plan")
    days, bins = doc["per_day"], doc["per_bin"]
    width = float(doc["settings"].get("bin_width_deg", 1.0))
    fig = Figure(figsize=(11.0, 7.5), layout="constrained")
    ax_day, ax_bin = fig.subplots(2, 1, height_ratios=(1.0, 1.1))
    x = np.arange(len(days))
    planned = np.array([d["planned_min"] for d in days], dtype=float)
    recorded = np.array([d["recorded_min"] for d in days], dtype=float)
    ax_day.bar(x, planned, width=0.8, color=OKABE_ITO["sky_blue"], label="planned", gid="day-planned")
    ax_day.bar(x, recorded, width=0.4, color=OKABE_ITO["blue"], label="recorded (counted spectra)",
               gid="day-recorded")
    gaps = np.array([bool(d["missed"]) for d in days], dtype=bool)
    if gaps.any():
        ax_day.plot(x[gaps], np.zeros(int(gaps.sum())), ls="none", marker="^", ms=9,
                    color=OKABE_ITO["vermillion"], clip_on=False, label="planned time missed",
                    gid="day-missed")
    ax_day.set_xticks(x, [d["date"][5:] for d in days], rotation=90, fontsize=8)
    ax_day.set_xlim(-0.6, len(days) - 0.4)
    ax_day.set_ylabel("Minutes in the strip")
    ax_day.grid(True, axis="y", color="0.85", lw=0.5)
    ax_day.set_axisbelow(True)
    ax_day.legend(fontsize=8, loc="upper right", frameon=False)
    ag = doc["agreement"]
    ax_day.set_title(f"Planned against recorded — {doc['site'].get('name', '')}\n"
                     f"{ag['recorded_min']:,.0f} of {ag['planned_min']:,.0f} planned minutes "
                     f"recorded through {doc['plan']['through']}")
    starts = np.array([b["l_bin"] for b in bins], dtype=float)
    centres = starts + 0.5 * width
    bin_bars(ax_bin, centres, [b["planned_min"] for b in bins], width, "bin-planned", "planned",
             facecolor=OKABE_ITO["sky_blue"], edgecolor="white", lw=0.3)
    bin_bars(ax_bin, centres, [b["recorded_min"] for b in bins], 0.5 * width, "bin-recorded",
             "recorded", facecolor=OKABE_ITO["blue"], lw=0)
    if starts.size:
        lo, hi = float(starts.min()), float(starts.max() + width)
        pad = max(2.0, 0.03 * (hi - lo))
        ax_bin.set_xlim(hi + pad, lo - pad)
    else:
        ax_bin.set_xlim(360.0, 0.0)
    ax_bin.set_xlabel("Galactic longitude l of the bin (deg, increasing to the left)")
    ax_bin.set_ylabel("Minutes per bin")
    ax_bin.grid(True, axis="y", color="0.85", lw=0.5)
    ax_bin.set_axisbelow(True)
    ax_bin.legend(fontsize=8, loc="upper right", frameon=False)
    return fig


def expected_spectra_grid(velocity_kms, groups) -> Figure:
    """Small expected-spectrum panels, one per group (``label`` and ``curves`` with ``l_deg``,
    ``b_deg``, ``tb_k``), two to a row: the brief's plot per dish setting or target group."""
    v = np.asarray(velocity_kms, dtype=float)
    n = max(len(groups), 1)
    cols = 1 if n == 1 else 2
    rows = (n + cols - 1) // cols
    # Fixed margins, not constrained layout: the panels are alike and it is several times faster.
    fig = Figure(figsize=(4.6 * cols, 2.3 * rows + 0.3))
    fig.subplots_adjust(left=0.09 if cols == 2 else 0.14, right=0.98, bottom=0.5 / (2.3 * rows + 0.3),
                        top=1 - 0.35 / (2.3 * rows + 0.3), wspace=0.22, hspace=0.55)
    axes = np.atleast_1d(fig.subplots(rows, cols, squeeze=False)).ravel()
    for ax, group in zip(axes, groups):
        top = 1.0
        for k, curve in enumerate(group.get("curves") or ()):
            tb = np.asarray(curve["tb_k"], dtype=float)
            top = max(top, float(tb.max()) if tb.size else 0.0)
            label = f"l {curve['l_deg']:.1f}°" + (f", b {curve['b_deg']:+.1f}°" if curve.get("b_deg") else "")
            ax.plot(v, tb, color=OKABE_ITO[_CURVE_COLOURS[k % len(_CURVE_COLOURS)]], lw=1.1, label=label)
        ax.set_ylim(-0.04 * top, 1.15 * top)
        ax.set_xlim(float(v.min()), float(v.max()))
        ax.set_title(str(group.get("label", "")), fontsize=8)
        ax.tick_params(labelsize=7)
        ax.grid(True, color="0.88", lw=0.5)
        ax.legend(fontsize=6, loc="upper right", frameon=False)
        ax.set_xlabel("LSR velocity (km/s)", fontsize=7)
        ax.set_ylabel("T_B (K)", fontsize=7)
    for ax in axes[len(groups):]:
        ax.set_visible(False)
    return fig
