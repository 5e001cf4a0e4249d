"""Which galactic longitudes a parked dish covers, for many declinations at once.

A parked beam sees the same sky every sidereal day, so its passages through
the |b| <= b_max strip recur at fixed Earth-rotation angles. The sweep finds
them once per declination on a one-sidereal-day *template* and maps every
template passage to each day of the period; Sun, daylight, operator windows
and LSR corrections are then evaluated only at those passages.

Steps, vectorized over all declinations together:

1. Template epochs every ``EPOCH_SPACING_DAYS`` (61 d) through the period, so
   the slow drift of the ICRS track (annual aberration +/-20 arcsec,
   precession 50 arcsec/yr) moves passage times by well under 2 s.
2. At each epoch, sample 1.5 days of the track for every declination every
   ``step_s`` (120 s); runs of in-strip samples that start within the first
   sidereal day are the template passages. Edges are refined by bisection
   to 0.05 s.
3. Each template passage is re-sampled every ``detail_step_s`` (20 s): the
   longitude bin, weight (seconds) and ICRS direction of each sub-interval.
4. Occurrence n of a passage starts at t0 + n x (one sidereal day in UT1),
   converted to UTC with the IERS UT1-UTC. Sun separation, Sun altitude,
   windows and the LSR correction are computed at the occurrences only.

Sidereal day: 86400 / 1.00273781191135448 s of UT1 (the ERA rate, IERS
Conventions 2010). Units: degrees, seconds, MJD (UTC).
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from .avoidance import separation_deg
from .doppler import velocity_corrections
from .errors import UserError
from .earth import earth_nodes, earth_state
from .galactic import ICRS_TO_GALACTIC
from .pointing import Pointing
from .site import Site
from .skytrack import FixedBeams, icrs_to_altaz_deg
from .timebase import SECONDS_PER_DAY, dut1_s
from .windows import inside

SIDEREAL_DAY_UT1_DAYS = 1.0 / 1.00273781191135448
# Work limits (memory grows with these products; beyond them the sweep is refused with
# a one-line error before anything is allocated). About 200 bytes per template sample
# (times, interpolated Earth state, vectors) and 120 bytes per passage occurrence
# (its figures), 8 bytes per (occurrence, bin) for per-occurrence plans: each limit
# keeps its part under about 1 GB. The defaults (half-beam steps, a year) use < 2 %.
MAX_TEMPLATE_SAMPLES = 5_000_000  # declinations x template samples per epoch
MAX_OCCURRENCES = 8_000_000  # declinations x passages in the period
MAX_OCCURRENCE_BINS = 100_000_000  # passages x longitude bins, per-occurrence sweeps
# A declination circle crosses the |b| strip at most twice a sidereal day (a great
# circle meets the plane twice); grazes split a passage at most into two more.
_PASSAGES_PER_DAY_BOUND = 4
EPOCH_SPACING_DAYS = 61.0
_TEMPLATE_SPAN_DAYS = 1.5  # one sidereal day plus room for the longest grazing passage


@dataclass(frozen=True)
class Occurrences:
    """Every passage of one declination in the period (arrays of length O)."""

    start_mjd: np.ndarray
    end_mjd: np.ndarray
    sun_sep_min_deg: np.ndarray
    sun_alt_max_deg: np.ndarray
    lsr_min_kms: np.ndarray
    lsr_max_kms: np.ndarray
    usable: np.ndarray  # bool: Sun far enough, and night if night-only
    template: np.ndarray  # index of the template passage it repeats
    l_start_deg: np.ndarray  # galactic longitude at strip entry and exit
    l_end_deg: np.ndarray
    bin_seconds: np.ndarray | None = None  # (O, B) seconds per bin inside period and windows


@dataclass(frozen=True)
class DeclinationCoverage:
    """Coverage of one parked declination over the period."""

    pointing: Pointing
    occurrences: Occurrences
    bin_total_s: np.ndarray  # (B,) seconds in each bin, all passages, inside the period
    bin_usable_s: np.ndarray  # (B,) the same, usable passages and inside windows only
    sun_lost_fraction: float  # passages lost to the Sun / all passages
    daylight_lost_fraction: float  # passages lost to daylight (night-only) / all passages
    window_lost_fraction: float  # in-strip time outside operator windows / all in-strip time
    lsr_corr_min_kms: float | None  # over usable passages (all passages if none usable)
    lsr_corr_max_kms: float | None


@dataclass(frozen=True)
class Sweep:
    """Coverage of a set of declinations over one period."""

    site: Site
    start_mjd: float
    end_mjd: float
    b_max_deg: float
    bin_width_deg: float
    night_only: bool
    rows: list[DeclinationCoverage]
    night_sun_alt_deg: float = 0.0  # night: the Sun's centre below this altitude
    nodes: object = None  # the EarthNodes used (reusable by later computations on the period)

    @property
    def bin_starts_deg(self) -> np.ndarray:
        return np.arange(0.0, 360.0, self.bin_width_deg)


@dataclass(frozen=True)
class _Templates:
    """Template passages at one epoch, for all declinations (P passages, S samples)."""

    row: np.ndarray  # (P,) declination index
    start_mjd: np.ndarray  # (P,) refined strip entry (UTC)
    end_mjd: np.ndarray  # (P,)
    sample_passage: np.ndarray  # (S,) passage index of each detail sample
    sample_offset_d: np.ndarray  # (S,) days from the passage start (sub-interval midpoint)
    sample_weight_s: np.ndarray  # (S,) seconds the sub-interval lasts
    sample_bin: np.ndarray  # (S,) longitude-bin index
    sample_vec: np.ndarray  # (S, 3) ICRS direction at the sub-interval midpoint


def _refine(beam: FixedBeams, lo, hi, row, b_max, rising: bool, tol_days: float) -> np.ndarray:
    """Bisection for |b| = b_max between lo (outside if rising) and hi."""
    lo, hi = lo.copy(), hi.copy()
    while lo.size and np.max(hi - lo) > tol_days:
        mid = 0.5 * (lo + hi)
        in_strip = np.abs(beam.b_deg(mid, row)) <= b_max
        move_hi = in_strip if rising else ~in_strip
        hi = np.where(move_hi, mid, hi)
        lo = np.where(move_hi, lo, mid)
    return 0.5 * (lo + hi)


def _templates(beam: FixedBeams, epoch_mjd: float, b_max: float, step_s: float,
               detail_step_s: float, bin_width: float) -> _Templates:
    """Template passages starting within one sidereal day of ``epoch_mjd``."""
    n_rows = beam.dec_deg.size
    step = step_s / SECONDS_PER_DAY
    grid = epoch_mjd + np.arange(int(np.ceil(_TEMPLATE_SPAN_DAYS / step)) + 1) * step
    m = grid.size
    in_strip = np.abs(beam.b_deg_grid(grid)) <= b_max  # (rows, samples), one Earth state

    # Run starts/ends per row; a run touching the grid's first sample is a repeat of one
    # that starts a sidereal day later, and a run must start within the first sidereal day.
    padded = np.zeros((n_rows, m + 2), dtype=np.int8)
    padded[:, 1:-1] = in_strip
    diff = np.diff(padded, axis=1)
    s_row, s_idx = np.nonzero(diff == 1)
    e_row, e_idx = np.nonzero(diff == -1)
    e_idx = e_idx - 1  # last in-strip sample of each run; runs pair up in row-major order
    day_end = epoch_mjd + SIDEREAL_DAY_UT1_DAYS
    keep = (s_idx > 0) & (e_idx < m - 1) & (grid[s_idx] < day_end)
    row, s_idx, e_idx = s_row[keep], s_idx[keep], e_idx[keep]
    tol = 0.05 / SECONDS_PER_DAY
    start = _refine(beam, grid[s_idx - 1], grid[s_idx], row, b_max, True, tol)
    end = _refine(beam, grid[e_idx], grid[e_idx + 1], row, b_max, False, tol)

    # Detail samples: midpoints of equal sub-intervals, each weighted by its length.
    dstep = detail_step_s / SECONDS_PER_DAY
    counts = np.maximum(np.ceil((end - start) / dstep).astype(int), 1)
    passage = np.repeat(np.arange(start.size), counts)
    k = np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    width = (end - start) / counts
    offset = (k + 0.5) * width[passage]
    vec = beam.locate(start[passage] + offset, row[passage])[1]
    l_deg = np.degrees(np.arctan2(vec @ ICRS_TO_GALACTIC[1], vec @ ICRS_TO_GALACTIC[0])) % 360.0
    n_bins = int(round(360.0 / bin_width))
    return _Templates(row=row, start_mjd=start, end_mjd=end, sample_passage=passage,
                      sample_offset_d=offset, sample_weight_s=width[passage] * SECONDS_PER_DAY,
                      sample_bin=np.floor(l_deg / bin_width).astype(int) % n_bins, sample_vec=vec)


def _ut1_minus_utc_days(mjd) -> np.ndarray:
    return dut1_s(np.asarray(mjd, dtype=float)) / SECONDS_PER_DAY


def _repeat_ranges(lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(owner, value) for every integer value in [lo_i, hi_i) of each i, vectorized."""
    counts = np.maximum(hi - lo, 0)
    owner = np.repeat(np.arange(lo.size), counts)
    value = np.repeat(lo, counts) + np.arange(counts.sum()) - np.repeat(np.cumsum(counts) - counts, counts)
    return owner, value


def _occurrence_starts(tpl: _Templates, seg_lo: float, seg_hi: float,
                       take_running: bool) -> tuple[np.ndarray, np.ndarray]:
    """(template passage index, UTC start) of every repeat starting in [seg_lo, seg_hi).

    With ``take_running`` a repeat already under way at ``seg_lo`` is kept too.
    Repeats are spaced by one sidereal day of UT1 and converted to UTC.
    """
    start_ut1 = tpl.start_mjd + _ut1_minus_utc_days(tpl.start_mjd)
    n_lo = np.floor((seg_lo - 1.0 - tpl.start_mjd) / SIDEREAL_DAY_UT1_DAYS).astype(int)
    n_hi = np.ceil((seg_hi - tpl.start_mjd) / SIDEREAL_DAY_UT1_DAYS).astype(int) + 1
    which, n = _repeat_ranges(n_lo, n_hi)
    s_ut1 = start_ut1[which] + n * SIDEREAL_DAY_UT1_DAYS
    s_utc = s_ut1 - _ut1_minus_utc_days(s_ut1)
    e_utc = s_utc + (tpl.end_mjd - tpl.start_mjd)[which]
    keep = (s_utc < seg_hi) & ((s_utc >= seg_lo) | (take_running & (e_utc > seg_lo)))
    order = np.argsort(s_utc[keep], kind="stable")
    return which[keep][order], s_utc[keep][order]


def _pick_samples(tpl: _Templates, which: np.ndarray, fractions) -> np.ndarray:
    """Sample indices at given fractions (0..1) of each listed template passage: (O, F)."""
    first = np.searchsorted(tpl.sample_passage, np.arange(tpl.row.size), side="left")
    last = np.searchsorted(tpl.sample_passage, np.arange(tpl.row.size), side="right") - 1
    f = np.asarray(fractions)[None, :]
    return np.rint(first[which][:, None] + f * (last - first)[which][:, None]).astype(int)


def sweep(site: Site, pointings: list[Pointing], start_mjd: float, end_mjd: float,
          b_max_deg: float | None = None, night_only: bool = False, window_intervals=None,
          solar_motion: str = "standard", step_s: float = 120.0,
          detail_step_s: float = 20.0, per_occurrence: bool = False,
          night_sun_alt_deg: float = 0.0) -> Sweep:
    """Coverage of each parked pointing over [start_mjd, end_mjd] (UTC).

    With ``per_occurrence`` every occurrence also carries its seconds per bin
    (``Occurrences.bin_seconds``, dense (O, B): meant for periods of weeks).

    ``window_intervals``: (K, 2) UTC MJD intervals when recording is possible
    (``windows.window_intervals_mjd``), or None for any time. A passage is usable
    when its least Sun separation meets the site rule and, with ``night_only``,
    the Sun stays below ``night_sun_alt_deg`` (0: the horizon); its bins count only
    while inside a window
    and inside the period.
    """
    b_max = site.rules.b_max_deg if b_max_deg is None else float(b_max_deg)
    bw = site.rules.bin_width_deg
    n_bins = int(round(360.0 / bw))
    n_rows = len(pointings)
    check_work(n_rows, end_mjd - start_mjd, n_bins, step_s, per_occurrence)
    beam = FixedBeams(site, pointings, earth_nodes(start_mjd - 1.5, end_mjd + 1.5))

    n_seg = max(1, int(np.ceil((end_mjd - start_mjd) / EPOCH_SPACING_DAYS)))
    edges = np.linspace(start_mjd, end_mjd, n_seg + 1)
    total = np.zeros((n_rows, n_bins))
    usable_s = np.zeros((n_rows, n_bins))
    in_band_s = np.zeros(n_rows)
    in_window_s = np.zeros(n_rows)
    parts = []
    n_done = 0
    for k, (lo, hi) in enumerate(zip(edges[:-1], edges[1:])):  # a few epochs, not samples
        epoch = 0.5 * (lo + hi) - 0.5 * SIDEREAL_DAY_UT1_DAYS
        tpl = _templates(beam, epoch, b_max, step_s, detail_step_s, bw)
        if tpl.row.size == 0:
            continue
        which, start = _occurrence_starts(tpl, lo, hi, take_running=(k == 0))
        occ = _judge(site, beam, tpl, which, start, night_only, solar_motion, night_sun_alt_deg)
        occ["id"] = n_done + np.arange(which.size)
        n_done += which.size
        occ["bins"] = [] if per_occurrence else None
        parts.append(occ)
        _accumulate(tpl, occ, start_mjd, end_mjd, window_intervals, total, usable_s,
                    in_band_s, in_window_s)

    result = _assemble(site, pointings, parts, total, usable_s, in_band_s, in_window_s,
                       start_mjd, end_mjd, b_max, bw, night_only, window_intervals is not None)
    return replace(result, night_sun_alt_deg=float(night_sun_alt_deg), nodes=beam.nodes)


def check_work(n_rows: int, days: float, n_bins: int, step_s: float = 120.0,
               per_occurrence: bool = False) -> None:
    """Refuse (UserError) a sweep whose estimated work exceeds the documented limits."""
    template = n_rows * (int(np.ceil(_TEMPLATE_SPAN_DAYS * SECONDS_PER_DAY / step_s)) + 1)
    occurrences = n_rows * _PASSAGES_PER_DAY_BOUND * (days + 1.0)
    cells = occurrences * n_bins if per_occurrence else 0
    for amount, limit, what in ((template, MAX_TEMPLATE_SAMPLES, "track samples"),
                                (occurrences, MAX_OCCURRENCES, "passages"),
                                (cells, MAX_OCCURRENCE_BINS, "passage-bins")):
        if amount > limit:
            raise UserError(f"--step/--days: {n_rows} declinations over {days:g} days means about "
                            f"{amount:,.0f} {what}, more than the {limit:,} hiplan allows; use a "
                            "coarser --step (the default is half the beamwidth) or fewer days")


def _judge(site: Site, beam: FixedBeams, tpl: _Templates, which: np.ndarray, start: np.ndarray,
           night_only: bool, solar_motion: str, night_sun_alt_deg: float = 0.0) -> dict:
    """Sun separation, Sun altitude, LSR range and usability of each occurrence."""
    duration = (tpl.end_mjd - tpl.start_mjd)[which]
    # Sun: it moves < 0.2 deg during a passage, so one position per occurrence (at its
    # middle) against 9 points along the passage track bounds the least separation.
    along = _pick_samples(tpl, which, np.linspace(0.0, 1.0, 9))
    mid_state = earth_state(start + 0.5 * duration, beam.nodes)
    sun = mid_state.sun_from_earth_au / np.linalg.norm(mid_state.sun_from_earth_au, axis=1)[:, None]
    sep = separation_deg(tpl.sample_vec[along], sun[:, None, :]).min(axis=1)
    # Sun altitude at start, middle and end; LSR correction at the same three points.
    three = _pick_samples(tpl, which, (0.0, 0.5, 1.0))
    t3 = (start[:, None] + tpl.sample_offset_d[three]).ravel()
    state3 = earth_state(t3, beam.nodes)
    sun3 = state3.sun_from_earth_au / np.linalg.norm(state3.sun_from_earth_au, axis=1)[:, None]
    sun_alt, _ = icrs_to_altaz_deg(site, sun3, state3)
    sun_alt_max = sun_alt.reshape(-1, 3).max(axis=1)
    vec3 = tpl.sample_vec[three].reshape(-1, 3)
    ra = np.degrees(np.arctan2(vec3[:, 1], vec3[:, 0])) % 360.0
    dec = np.degrees(np.arcsin(np.clip(vec3[:, 2], -1, 1)))
    lsr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra, dec, t3,
                               solar_motion, state3).lsr_corr_kms.reshape(-1, 3)
    gal3 = vec3 @ ICRS_TO_GALACTIC.T
    l3 = (np.degrees(np.arctan2(gal3[:, 1], gal3[:, 0])) % 360.0).reshape(-1, 3)
    sun_ok = sep >= site.rules.sun_min_sep_deg
    dark = sun_alt_max < night_sun_alt_deg
    usable = sun_ok & (dark | (not night_only))
    return {"row": tpl.row[which], "which": which, "start": start, "end": start + duration,
            "sun_sep": sep, "sun_alt_max": sun_alt_max, "lsr_min": lsr.min(axis=1),
            "lsr_max": lsr.max(axis=1), "sun_ok": sun_ok, "dark": dark, "usable": usable,
            "l_start": l3[:, 0], "l_end": l3[:, 2]}


def _accumulate(tpl, occ, start_mjd, end_mjd, window_intervals, total, usable_s,
                in_band_s, in_window_s) -> None:
    """Add each occurrence's seconds per bin (inside the period and the windows)."""
    which, start, end = occ["which"], occ["start"], occ["end"]
    whole = (start >= start_mjd) & (end <= end_mjd)
    collect = occ.get("bins") is not None
    if window_intervals is None and not collect:
        # Whole occurrences repeat their template's bins exactly: count per template passage.
        n_all = np.bincount(which[whole], minlength=tpl.row.size)
        n_use = np.bincount(which[whole & occ["usable"]], minlength=tpl.row.size)
        p = tpl.sample_passage
        np.add.at(total, (tpl.row[p], tpl.sample_bin), tpl.sample_weight_s * n_all[p])
        np.add.at(usable_s, (tpl.row[p], tpl.sample_bin), tpl.sample_weight_s * n_use[p])
        np.add.at(in_band_s, tpl.row[p], tpl.sample_weight_s * n_all[p])
        np.add.at(in_window_s, tpl.row[p], tpl.sample_weight_s * n_all[p])
        subset = np.flatnonzero(~whole)
    else:
        subset = np.arange(which.size)
    # Sample by sample for the rest (edge occurrences, or every one when windows apply),
    # in chunks so a year of passages never builds one huge array.
    first = np.searchsorted(tpl.sample_passage, np.arange(tpl.row.size), side="left")
    count = np.bincount(tpl.sample_passage, minlength=tpl.row.size)
    for chunk in np.array_split(subset, max(1, subset.size // 4000)):
        if chunk.size == 0:
            continue
        occ_i, s_idx = _repeat_ranges(first[which[chunk]], first[which[chunk]] + count[which[chunk]])
        o = chunk[occ_i]
        t = start[o] + tpl.sample_offset_d[s_idx]
        w = tpl.sample_weight_s[s_idx] * ((t >= start_mjd) & (t < end_mjd))
        row, b = tpl.row[tpl.sample_passage[s_idx]], tpl.sample_bin[s_idx]
        win = w if window_intervals is None else w * inside(t, window_intervals)
        np.add.at(total, (row, b), w)
        np.add.at(usable_s, (row, b), win * occ["usable"][o])
        np.add.at(in_band_s, row, w)
        np.add.at(in_window_s, row, win)
        if collect:
            occ["bins"].append((occ["id"][o], b, win))


def _assemble(site, pointings, parts, total, usable_s, in_band_s, in_window_s, start_mjd,
              end_mjd, b_max, bw, night_only, have_windows) -> Sweep:
    keys = ("row", "which", "start", "end", "sun_sep", "sun_alt_max", "lsr_min", "lsr_max",
            "sun_ok", "dark", "usable", "l_start", "l_end")
    occ = {k: np.concatenate([p[k] for p in parts]) if parts else np.zeros(0) for k in keys}
    dense = None
    if parts and parts[0]["bins"] is not None:
        n_bins = total.shape[1]
        dense = np.zeros((occ["row"].size, n_bins))
        for p in parts:  # one entry per chunk of occurrences
            for ids, b, w in p["bins"]:
                np.add.at(dense, (ids, b), w)
    rows = []
    for r, pointing in enumerate(pointings):  # one entry per declination
        sel = np.flatnonzero(occ["row"] == r) if parts else np.zeros(0, int)
        o = {k: v[sel] for k, v in occ.items()}
        n = sel.size
        use = o["usable"].astype(bool)
        lsr_from = use if use.any() else np.ones(n, bool)
        rows.append(DeclinationCoverage(
            pointing=pointing,
            occurrences=Occurrences(
                start_mjd=o["start"], end_mjd=o["end"], sun_sep_min_deg=o["sun_sep"],
                sun_alt_max_deg=o["sun_alt_max"], lsr_min_kms=o["lsr_min"],
                lsr_max_kms=o["lsr_max"], usable=use, template=o["which"].astype(int),
                l_start_deg=o["l_start"], l_end_deg=o["l_end"],
                bin_seconds=None if dense is None else dense[sel]),
            bin_total_s=total[r], bin_usable_s=usable_s[r],
            sun_lost_fraction=float((~o["sun_ok"].astype(bool)).sum() / n) if n else 0.0,
            daylight_lost_fraction=(float((o["sun_ok"].astype(bool) & ~o["dark"].astype(bool)).sum() / n)
                                    if n and night_only else 0.0),
            window_lost_fraction=(float(1.0 - in_window_s[r] / in_band_s[r])
                                  if have_windows and in_band_s[r] > 0 else 0.0),
            lsr_corr_min_kms=float(o["lsr_min"][lsr_from].min()) if n else None,
            lsr_corr_max_kms=float(o["lsr_max"][lsr_from].max()) if n else None,
        ))
    return Sweep(site=site, start_mjd=start_mjd, end_mjd=end_mjd, b_max_deg=b_max,
                 bin_width_deg=bw, night_only=night_only, rows=rows)
