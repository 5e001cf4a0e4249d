"""Benchmark: tally of 100,000 spectra (read from CSV, beam located, judged, binned) against
astropy's AltAz -> Galactic transform of the same spectra.

One site (hollowmere), the demo plan's first setting (Dec +60.2 below the pole), a month of
back-to-back 26-second spectra in one CSV file without pointing columns. Ours: reading the
file, the beam's galactic position, Sun separation and LSR correction of every spectrum, the
strip and the minutes per bin (the work of ``hiplan tally``). Baseline: astropy's transform
of the mid-exposure pointings to Galactic alone. Both in CPU seconds, measured in the same run.

Run from the repository root: ``.venv/bin/python benchmarks/bench_tally.py``.
"""
from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import astropy.units as u  # noqa: E402
import numpy as np  # noqa: E402
from astropy.coordinates import AltAz, EarthLocation, Galactic, SkyCoord  # noqa: E402
from astropy.time import Time  # noqa: E402

from planner.pointing import below_pole_at_dec  # noqa: E402
from planner.recordings import read_recordings, recordings_csv  # noqa: E402
from planner.site import load_site  # noqa: E402
from planner.tally import Rules, Setting, tally  # noqa: E402

START_MJD_UTC = 61465.0  # 2027-03-01, inside the bundled IERS table
N = 100_000
EXPOSURE_S = 26.0
OURS_REPEATS = 3


def _ours(site, pointing, path):
    spectra = read_recordings([path])
    return tally(site, spectra, Rules.of_site(site), setting=Setting.fixed(pointing, len(spectra)))


def _astropy(site, pointing, mid):
    loc = EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                        height=site.height_m * u.m)
    frame = AltAz(obstime=Time(mid, format="mjd", scale="utc"), location=loc)
    coord = SkyCoord(alt=np.full(mid.size, pointing.alt_deg) * u.deg,
                     az=np.full(mid.size, pointing.az_deg) * u.deg, frame=frame)
    return coord.transform_to(Galactic())


def run() -> dict:
    """Time both paths (CPU); return {case, ours_s, baseline_s, ratio, agreement}."""
    site = load_site("hollowmere")
    pointing = below_pole_at_dec(site, 60.2052)
    start = START_MJD_UTC + np.arange(N) * EXPOSURE_S / 86400
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "spectra.csv"
        path.write_text(recordings_csv(start, EXPOSURE_S))
        _ours(site, pointing, path)  # warm-up: IERS table, imports
        times = []
        for _ in range(OURS_REPEATS):
            t0 = time.process_time()
            ours = _ours(site, pointing, path)
            times.append(time.process_time() - t0)
    ours_s = min(times)
    _astropy(site, pointing, ours.mid_mjd[:100])
    t0 = time.process_time()
    ref = _astropy(site, pointing, ours.mid_mjd)
    baseline_s = time.process_time() - t0
    sep = SkyCoord(ours.l_deg * u.deg, ours.b_deg * u.deg, frame="galactic").separation(ref)
    ref_bin = np.floor(ref.l.deg).astype(int) % 360
    in_strip = np.abs(ref.b.deg) <= site.rules.b_max_deg
    differ = (ref_bin != ours.l_bin) | (in_strip != ours.in_strip)
    edge_deg = np.minimum(np.abs(ref.l.deg - np.round(ref.l.deg)),
                          np.abs(np.abs(ref.b.deg) - site.rules.b_max_deg))[differ]
    ref_minutes = np.bincount(ref_bin, weights=in_strip * EXPOSURE_S / 60.0, minlength=360)
    worst_bin = float(np.max(np.abs(ref_minutes - ours.bin_minutes)))
    return {
        "case": f"Tally, {N:,} spectra from CSV (a month of {EXPOSURE_S:g} s spectra), vs astropy "
                "AltAz -> Galactic of the same spectra (CPU)",
        "ours_s": ours_s, "baseline_s": baseline_s, "ratio": baseline_s / ours_s,
        "agreement": f"beam within {sep.arcsec.max():.2f} arcsec (median {np.median(sep.arcsec):.2f}); "
                     f"{int(differ.sum())} spectra in another bin or strip verdict (each within "
                     f"{edge_deg.max(initial=0) * 3600:.2f} arcsec of the edge); per-bin minutes within "
                     f"{worst_bin:.2f} min ({int(ours.counted.sum()):,} counted)",
    }


if __name__ == "__main__":
    r = run()
    print(f"{r['case']}\n  ours {r['ours_s']:.2f} s, astropy {r['baseline_s']:.1f} s, "
          f"ratio {r['ratio']:.0f}x; {r['agreement']}")
