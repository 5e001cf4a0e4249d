"""Benchmark: a year-long declination sweep vs the straightforward 1-minute approach.

Ours: ``coverage.sweep`` for every reachable declination at 1 deg steps over 365
days at the bundled northern site. Baseline: astropy AltAz -> Galactic at
1-minute sampling for the same declinations; it would take hours, so it is run on
a subset (3 declinations x 5 days) and its time per sample is scaled to the full
problem. Agreement on the subset: covered bins, and strip-entry times (astropy's
entries interpolated linearly between the 1-minute samples).

Run from the repository root: ``.venv/bin/python benchmarks/bench_park.py``.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import astropy.units as u  # noqa: E402
import numpy as np  # noqa: E402
from astropy.coordinates import AltAz, EarthLocation, Galactic, SkyCoord  # noqa: E402
from astropy.time import Time  # noqa: E402

from planner.coverage import sweep  # noqa: E402
from planner.park import candidate_pointings  # noqa: E402
from planner.site import load_site  # noqa: E402

START = 61465.0  # 2027-03-01
DAYS = 365
SUBSET_DECS = (0.0, 30.0, 55.0)
SUBSET_DAYS = 5


def _astropy_subset(site, pointing, b_max):
    mjd = START + np.arange(SUBSET_DAYS * 1440) / 1440.0
    loc = EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                        height=site.height_m * u.m)
    frame = AltAz(obstime=Time(mjd, format="mjd"), location=loc)
    gal = SkyCoord(alt=np.full(mjd.size, pointing.alt_deg) * u.deg,
                   az=np.full(mjd.size, pointing.az_deg) * u.deg, frame=frame).transform_to(Galactic())
    excess = np.abs(gal.b.deg) - b_max
    inside = excess <= 0
    bins = set(np.floor(gal.l.deg[inside]).astype(int) % 360)
    i = np.flatnonzero(inside[1:] & ~inside[:-1])
    frac = excess[i] / (excess[i] - excess[i + 1])  # linear interpolation to |b| = b_max
    entries = mjd[i] + frac / 1440.0
    return bins, entries, mjd.size


def run() -> dict:
    site = load_site("hollowmere")
    pointings = candidate_pointings(site, 1.0)
    sweep(site, pointings[:3], START, START + 2)  # warm-up: IERS table read
    t0 = time.perf_counter()
    full = sweep(site, pointings, START, START + DAYS)
    ours_s = time.perf_counter() - t0

    b_max = site.rules.b_max_deg
    by_dec = {round(r.pointing.dec_deg, 6): r for r in full.rows}
    t0 = time.perf_counter()
    worst_s, bins_ok, n_samples = 0.0, True, 0
    for dec in SUBSET_DECS:
        row = by_dec[dec]
        ref_bins, ref_entries, n = _astropy_subset(site, row.pointing, b_max)
        n_samples += n
        starts = np.sort(row.occurrences.start_mjd)
        starts = starts[(starts > START) & (starts < START + SUBSET_DAYS)]
        worst_s = max(worst_s, float(np.max(np.abs(starts - ref_entries)) * 86400))
        sub = sweep(site, [row.pointing], START, START + SUBSET_DAYS).rows[0]
        ours_bins = set(np.flatnonzero(sub.bin_total_s > 0))
        # Bins touched for under a minute can escape 1-minute sampling.
        bins_ok &= (ours_bins ^ ref_bins) <= {b for b in ours_bins if sub.bin_total_s[b] < 60}
    per_sample = (time.perf_counter() - t0) / n_samples
    baseline_s = per_sample * len(pointings) * DAYS * 1440
    return {
        "case": f"Park sweep, {len(pointings)} declinations x {DAYS} d (1 deg steps)",
        "ours_s": ours_s, "baseline_s": baseline_s, "ratio": baseline_s / ours_s,
        "agreement": (f"bins {'agree' if bins_ok else 'DIFFER'}; strip entries within "
                      f"{worst_s:.1f} s (astropy on {len(SUBSET_DECS)} decs x {SUBSET_DAYS} d, "
                      "scaled)"),
    }


if __name__ == "__main__":
    r = run()
    print(f"{r['case']}\n  ours {r['ours_s']:.2f} s, astropy 1-min (scaled) {r['baseline_s']:.0f} s, "
          f"ratio {r['ratio']:.0f}x; {r['agreement']}")
