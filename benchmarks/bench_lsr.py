"""Benchmark: LSR velocity correction, fast path vs astropy, 30 days at 1-minute steps.

One site (the bundled hollowmere example), one fixed RA/Dec, 43,200 samples.
Ours includes computing the EarthState. The astropy reference is
``SkyCoord.radial_velocity_correction(kind="barycentric")`` plus astropy's
LSRK solar-motion vector projected on the pointing.

Run from the repository root: ``.venv/bin/python benchmarks/bench_lsr.py``.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import astropy.units as u  # noqa: E402
import numpy as np  # noqa: E402
from astropy.coordinates import EarthLocation, SkyCoord  # noqa: E402
from astropy.coordinates.builtin_frames.lsr import V_OFFSET_LSRK  # noqa: E402

from planner.doppler import velocity_corrections  # noqa: E402
from planner.earth import earth_state  # noqa: E402
from planner.site import load_site  # noqa: E402
from planner.timebase import from_mjd_utc  # noqa: E402

START_MJD_UTC = 61000.0  # 2025-11-28, inside the bundled IERS table
DAYS = 30
STEP_MIN = 1.0
RA_DEG, DEC_DEG = 83.8, 22.0
# astropy is timed on the whole grid unless one pass would take longer than this;
# then it is timed on every k-th sample and the time scaled up linearly.
ASTROPY_TIME_LIMIT_S = 40.0
OURS_REPEATS = 5


def _ours(site, mjd):
    state = earth_state(mjd)
    return velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m,
                                RA_DEG, DEC_DEG, mjd, state=state).lsr_corr_kms


def _astropy(site, mjd):
    loc = EarthLocation.from_geodetic(site.longitude_deg * u.deg, site.latitude_deg * u.deg,
                                      site.height_m * u.m)
    coord = SkyCoord(RA_DEG * u.deg, DEC_DEG * u.deg, frame="icrs")
    bary = coord.radial_velocity_correction(
        kind="barycentric", obstime=from_mjd_utc(mjd), location=loc).to_value(u.km / u.s)
    return bary + coord.cartesian.xyz.value @ V_OFFSET_LSRK.d_xyz.to_value(u.km / u.s)


RANDOM_PAIRS = 10_000


def run_random() -> dict:
    """10,000 random (time, position) pairs over a year: the nodes cost counts here."""
    site = load_site("hollowmere")
    rng = np.random.default_rng(2027)
    mjd = np.sort(rng.uniform(START_MJD_UTC, START_MJD_UTC + 365.0, RANDOM_PAIRS))
    ra = rng.uniform(0.0, 360.0, RANDOM_PAIRS)
    dec = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, RANDOM_PAIRS)))
    velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra[:10], dec[:10],
                         mjd[:10])  # warm: the Earth-orientation table read
    ours_s = np.inf
    for _ in range(OURS_REPEATS):
        t0 = time.perf_counter()
        ours = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra, dec,
                                    mjd).lsr_corr_kms
        ours_s = min(ours_s, time.perf_counter() - t0)
    loc = EarthLocation.from_geodetic(site.longitude_deg * u.deg, site.latitude_deg * u.deg,
                                      site.height_m * u.m)
    coord = SkyCoord(ra * u.deg, dec * u.deg, frame="icrs")
    t0 = time.perf_counter()
    bary = coord.radial_velocity_correction(kind="barycentric", obstime=from_mjd_utc(mjd),
                                            location=loc).to_value(u.km / u.s)
    ref = bary + coord.cartesian.xyz.value.T @ V_OFFSET_LSRK.d_xyz.to_value(u.km / u.s)
    baseline_s = time.perf_counter() - t0
    return {
        "case": f"LSR correction, {RANDOM_PAIRS} random (time, position) pairs over a year",
        "ours_s": ours_s, "baseline_s": baseline_s, "ratio": baseline_s / ours_s,
        "agreement": f"max |ours - astropy| = {np.max(np.abs(ours - ref)) * 1e3:.2f} m/s "
                     "(target ratio >= 100x)",
    }


def run() -> list[dict]:
    return [run_grid(), run_random()]


def run_grid() -> dict:
    """Time both paths; return {case, ours_s, baseline_s, ratio, agreement}."""
    site = load_site("hollowmere")
    n = int(round(DAYS * 24 * 60 / STEP_MIN))
    mjd = START_MJD_UTC + np.arange(n) * (STEP_MIN / 1440.0)

    # Warm both paths (IERS table reads, astropy frame-graph set-up) before timing.
    _ours(site, mjd[:100])
    t0 = time.perf_counter()
    _astropy(site, mjd[:1000])
    probe_s = (time.perf_counter() - t0) * n / 1000.0

    ours_s = np.inf
    for _ in range(OURS_REPEATS):
        t0 = time.perf_counter()
        ours = _ours(site, mjd)
        ours_s = min(ours_s, time.perf_counter() - t0)

    stride = max(1, int(np.ceil(probe_s / ASTROPY_TIME_LIMIT_S)))
    subset = slice(None, None, stride)
    t0 = time.perf_counter()
    ref = _astropy(site, mjd[subset])
    baseline_s = (time.perf_counter() - t0) * stride
    diff_kms = float(np.max(np.abs(ours[subset] - ref)))

    note = "full grid" if stride == 1 else (
        f"astropy timed on every {stride}th sample ({len(ref)}), time scaled x{stride}")
    return {
        "case": f"LSR correction, {n} samples (30 d at 1 min), one site, one RA/Dec",
        "ours_s": ours_s,
        "baseline_s": baseline_s,
        "ratio": baseline_s / ours_s,
        "agreement": f"max |ours - astropy| = {diff_kms * 1e3:.2f} m/s over {len(ref)} samples"
                     f" ({note})",
    }


if __name__ == "__main__":
    random_case = run_random()
    print(f"{random_case['case']}: ours {random_case['ours_s'] * 1e3:.1f} ms, astropy "
          f"{random_case['baseline_s'] * 1e3:.0f} ms, {random_case['ratio']:.0f}x; "
          f"{random_case['agreement']}")
    result = run_grid()
    print(result["case"])
    print(f"  ours (incl. EarthState): {result['ours_s'] * 1e3:8.1f} ms (best of {OURS_REPEATS})")
    print(f"  astropy reference:       {result['baseline_s'] * 1e3:8.1f} ms")
    print(f"  speed-up:                {result['ratio']:8.1f} x  (target >= 20 x)")
    print(f"  {result['agreement']}")
