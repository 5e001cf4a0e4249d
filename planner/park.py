"""Declination advice for a parked dish: which declination serves the survey best.

Candidates are meridian pointings at every declination the dish can reach: at
upper culmination and, where the mount can face the pole, below the pole
(lower culmination, 12 h later), on a grid of half the beamwidth by default,
plus the exact ends of each reachable range and the dish's current setting.
A parked beam sees the same declination circle every day whatever its hour
angle; the two culminations differ in the time of day, which decides night,
windows and the Sun.

Feed safety first: a setting the Sun approaches within the site's
``sun_hazard_deg`` during the period (``sunsafety``) is marked unsafe, ranked
below every safe one and never recommended.

Ranking (``score``): for each wanted longitude bin that still needs
integration, the fraction of the missing minutes this declination delivers
in usable passages over the period, capped at 1, summed over bins. A score
of 12.5 means "worth twelve and a half bins brought to the target depth".
Ties go to more usable hours, then upper culmination, then the lower
declination (deterministic).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .coverage import DeclinationCoverage, Sweep
from .errors import UserError
from .pointing import (Pointing, below_pole_at_dec, meridian_dec_ranges, on_meridian_at_dec,
                       reachability_problem)
from .sensitivity import radiometer_rms_k
from .sunsafety import SunApproaches
from .site import Site
from .timebase import mjd_to_datetime_utc

DEFAULT_TARGET_MINUTES = 60.0
# Candidate declinations at most: a 0.1 deg step over every reachable range. Finer
# steps than that are far below any small dish's beam and only cost time.
MAX_CANDIDATES = 3000


def parse_want(text: str | None, bin_width_deg: float = 1.0, option: str = "--want") -> np.ndarray:
    """Wanted bins as a bool mask from ``"30-90,120-140"`` (deg, [from, to), may wrap 350-10).

    None or empty text means every longitude.
    """
    n_bins = int(round(360.0 / bin_width_deg))
    if not text or not text.strip():
        return np.ones(n_bins, bool)
    mask = np.zeros(n_bins, bool)
    for part in text.split(","):
        item = part.strip()
        pieces = item.split("-")
        try:
            if len(pieces) != 2:
                raise ValueError
            lo, hi = float(pieces[0]), float(pieces[1])
        except ValueError:
            raise UserError(f"{option}: {item!r} is not a longitude range like 30-90") from None
        if not (0 <= lo <= 360 and 0 <= hi <= 360) or lo == hi:
            raise UserError(f"{option}: {item!r} must have two different longitudes in 0..360")
        first = int(np.floor(lo / bin_width_deg + 1e-9))
        last = int(np.ceil(hi / bin_width_deg - 1e-9))  # exclusive
        if hi > lo:
            mask[first:last] = True
        else:  # wraps through 360
            mask[first:] = True
            mask[:last] = True
    return mask


def candidate_pointings(site: Site, step_deg: float | None = None,
                        extra: tuple[Pointing, ...] = ()) -> list[Pointing]:
    """Reachable meridian pointings, upper culmination first, then below the pole.

    Declinations on the grid -90 + k * ``step_deg`` (default HPBW/2) inside each
    reachable range (``pointing.meridian_dec_ranges``), plus the exact ends of every
    range, plus ``extra`` pointings (the dish's current setting) when reachable.
    """
    step = site.dish.beamwidth_deg / 2.0 if step_deg is None else float(step_deg)
    if not step > 0:
        raise UserError(f"--step: {step_deg} must be positive")
    ranges = meridian_dec_ranges(site)
    count = sum((r.hi_deg - r.lo_deg) / step + 3 for r in ranges)
    if count > MAX_CANDIDATES:
        raise UserError(f"--step: {step:g}° gives about {count:,.0f} declinations, more than the "
                        f"{MAX_CANDIDATES:,} hiplan allows; use a coarser --step (the default is "
                        f"half the beamwidth, {site.dish.beamwidth_deg / 2:.2f}°)")
    out: list[Pointing] = []
    for rng in ranges:  # at most three ranges
        k_lo = int(np.ceil((rng.lo_deg + 90.0) / step - 1e-9))
        k_hi = int(np.floor((rng.hi_deg + 90.0) / step + 1e-9))
        grid = -90.0 + step * np.arange(k_lo, k_hi + 1)
        decs = np.unique(np.round(np.concatenate([[rng.lo_deg], grid, [rng.hi_deg]]), 6))
        make = on_meridian_at_dec if rng.culmination == "upper" else below_pole_at_dec
        for dec in decs:  # ~100 declinations, each a cheap closed-form check
            if rng.culmination == "lower" and abs(dec) >= 90.0 - 1e-9:
                continue  # the pole itself is the upper range's end
            p = make(site, float(dec))
            if reachability_problem(site, p) is None:
                out.append(p)
    for p in extra:
        if reachability_problem(site, p) is None and not any(_same(p, q) for q in out):
            out.append(p)
    return sorted(out, key=lambda p: (p.culmination != "upper", p.dec_deg, p.ha_deg))


def _same(a: Pointing, b: Pointing) -> bool:
    return abs(a.dec_deg - b.dec_deg) < 1e-6 and abs(a.ha_deg - b.ha_deg) < 1e-6


@dataclass(frozen=True)
class Advice:
    """One declination's summary and its place in the ranking."""

    coverage: DeclinationCoverage
    usable_bins: np.ndarray  # bin indices with usable time
    passages_per_day: float
    duration_min: float  # mean passage duration
    times_first_day: tuple[str, ...]  # local HH:MM starts on the first day with passages
    times_last_day: tuple[str, ...]
    usable_hours: float
    rms_per_bin_day_k: float | None  # median over bins with usable time
    needed_bins_served: int
    score: float
    sun_safe: bool = True  # the Sun never comes within sun_hazard_deg of the parked beam
    sun_closest_deg: float = float("inf")  # least Sun distance over the period
    sun_closest_mjd: float = float("nan")
    hazard_dates: tuple[str, ...] = ()  # local dates with a Sun hazard
    reason: str = ""

    @property
    def pointing(self) -> Pointing:
        return self.coverage.pointing


def _facing(p: Pointing) -> str:
    return p.facing


def _local_times(starts: np.ndarray, site: Site, which: str) -> tuple[str, ...]:
    """Local HH:MM of the passages on the first (or last) local day with any (starts sorted)."""
    if starts.size == 0:
        return ()
    tz = site.tz
    # Only the first/last 1.5 days can hold that local day (offsets are under 15 h).
    starts = starts[starts < starts[0] + 1.5] if which == "first" else starts[starts > starts[-1] - 1.5]
    days = np.array([mjd_to_datetime_utc(t).astimezone(tz).date().toordinal() for t in starts])
    pick = days == (days.min() if which == "first" else days.max())
    return tuple(mjd_to_datetime_utc(t).astimezone(tz).strftime("%H:%M") for t in starts[pick])


def compact_bins(bins, bin_width_deg: float = 1.0) -> str:
    """Bin indices as compact longitude ranges, e.g. '28–41, 187–196'."""
    nums = sorted({int(b) for b in bins})
    if not nums:
        return "none"
    parts, lo, prev = [], nums[0], nums[0]
    for v in nums[1:] + [None]:
        if v is not None and v == prev + 1:
            prev = v
            continue
        a, b = lo * bin_width_deg, prev * bin_width_deg
        parts.append(f"{a:g}" if lo == prev else f"{a:g}–{b:g}")
        if v is not None:
            lo = prev = v
    return ", ".join(parts)


def advise(sweep: Sweep, want: np.ndarray, done_minutes: np.ndarray,
           target_minutes: float = DEFAULT_TARGET_MINUTES,
           approaches: SunApproaches | None = None) -> list[Advice]:
    """Rank the sweep's declinations for the wanted, still-uncovered bins (best first).

    ``approaches`` (``sunsafety.sun_approaches`` for the sweep's pointings over its
    period): a setting the Sun makes unsafe for the feed is never ranked above a
    safe one.
    """
    site = sweep.site
    days = sweep.end_mjd - sweep.start_mjd
    need_min = np.where(want, np.maximum(target_minutes - done_minutes, 0.0), 0.0)
    width_hz = site.receiver.channel_width_khz * 1e3
    n_rows = len(sweep.rows)
    closest_deg, closest_mjd = (approaches.closest_per_row(n_rows) if approaches is not None
                                else (np.full(n_rows, np.inf), np.full(n_rows, np.nan)))
    advice = []
    for r, row in enumerate(sweep.rows):  # one per declination
        occ = row.occurrences
        usable_min = row.bin_usable_s / 60.0
        served = np.where(need_min > 0, np.minimum(usable_min / np.where(need_min > 0, need_min, 1), 1), 0)
        usable_bins = np.flatnonzero(row.bin_usable_s > 0)
        per_day_s = row.bin_usable_s[usable_bins] / days
        rms = (float(np.median(radiometer_rms_k(site.receiver.tsys_k, width_hz, per_day_s)))
               if usable_bins.size else None)
        starts = np.sort(occ.start_mjd)
        hazards = (np.flatnonzero(approaches.hazard & (approaches.row == r))
                   if approaches is not None else np.zeros(0, int))
        advice.append(Advice(
            coverage=row, usable_bins=usable_bins,
            passages_per_day=occ.start_mjd.size / days,
            duration_min=float(np.mean(occ.end_mjd - occ.start_mjd) * 1440) if occ.start_mjd.size else 0.0,
            times_first_day=_local_times(starts, site, "first"),
            times_last_day=_local_times(starts, site, "last"),
            usable_hours=float(row.bin_usable_s.sum() / 3600.0), rms_per_bin_day_k=rms,
            needed_bins_served=int(np.count_nonzero((usable_min > 0) & (need_min > 0))),
            score=float(served.sum()), sun_safe=hazards.size == 0,
            sun_closest_deg=float(closest_deg[r]), sun_closest_mjd=float(closest_mjd[r]),
            hazard_dates=_local_dates(approaches.closest_mjd[hazards], site) if hazards.size else (),
        ))
    advice.sort(key=lambda a: (not a.sun_safe, -round(a.score, 6), -round(a.usable_hours, 6),
                               a.pointing.culmination != "upper", a.pointing.dec_deg))
    return [_with_reason(a, sweep, need_min) for a in advice]


def recommended(advice: list[Advice]) -> list[Advice]:
    """The settings worth recommending: Sun-safe and serving some still-needed bin (best first)."""
    return [a for a in advice if a.sun_safe and a.score > 0]


def _local_dates(mjd: np.ndarray, site: Site) -> tuple[str, ...]:
    tz = site.tz
    return tuple(sorted({mjd_to_datetime_utc(t).astimezone(tz).date().isoformat() for t in mjd}))


def date_ranges(dates: tuple[str, ...]) -> str:
    """ISO dates as compact runs, e.g. '2027-06-10 – 06-16, 06-20'."""
    from datetime import date as _date
    days = sorted(_date.fromisoformat(d) for d in dates)
    runs: list[list] = []
    for d in days:
        if runs and (d - runs[-1][1]).days == 1:
            runs[-1][1] = d
        else:
            runs.append([d, d])
    parts = []
    for i, (a, b) in enumerate(runs):
        first = a.isoformat() if i == 0 else a.strftime("%m-%d")
        parts.append(first if a == b else f"{first} – {b.strftime('%m-%d')}")
    return ", ".join(parts)


def _with_reason(a: Advice, sweep: Sweep, need_min: np.ndarray) -> Advice:
    """Attach a one-sentence explanation."""
    from dataclasses import replace
    p, row = a.pointing, a.coverage
    below = ", below the pole" if p.culmination == "lower" else ""
    head = f"Dec {p.dec_deg:+.1f}° (elevation {p.alt_deg:.1f}° {_facing(p)}{below})"
    if not a.sun_safe:
        return replace(a, reason=(
            f"{head}: UNSAFE, the Sun passes {a.sun_closest_deg:.1f}° from the beam "
            f"(limit {sweep.site.rules.sun_hazard_deg:g}°) on {date_ranges(a.hazard_dates)}; "
            "do not park here then."))
    if row.occurrences.start_mjd.size == 0:
        return replace(a, reason=f"{head}: the beam never comes within {sweep.b_max_deg:g}° of the plane.")
    if a.usable_bins.size == 0:
        lost = ("the Sun" if row.sun_lost_fraction >= 0.999 else
                "daylight" if sweep.night_only and row.daylight_lost_fraction > 0 else "the windows")
        return replace(a, reason=f"{head}: every passage is lost to {lost} this period.")
    needed = np.flatnonzero((row.bin_usable_s > 0) & (need_min > 0))
    what = (f"serves {needed.size} still-needed bins ({compact_bins(needed, sweep.bin_width_deg)}), "
            f"worth {a.score:.1f} bins at target depth" if needed.size else
            f"covers {compact_bins(a.usable_bins, sweep.bin_width_deg)} but none still needed")
    times = ", ".join(a.times_first_day)
    drift = f" (→ {', '.join(a.times_last_day)} by the end)" if a.times_last_day != a.times_first_day else ""
    sun = f"; {row.sun_lost_fraction:.0%} of passages lost to the Sun" if row.sun_lost_fraction > 0 else ""
    rms = f"; about {a.rms_per_bin_day_k:.2f} K rms per bin per day" if a.rms_per_bin_day_k else ""
    return replace(a, reason=f"{head} {what}; {a.passages_per_day:.1f} passages a day starting "
                             f"{times}{drift}{sun}{rms}.")
