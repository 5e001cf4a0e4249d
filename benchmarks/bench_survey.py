"""Benchmark: pointed-survey scheduling, our dispatcher vs astroplan's PriorityScheduler.

One invented problem solved by both in the same run: 50 positions along the southern
Milky Way (l = 250..10 every 5 deg, b = -2 and +2), each wanting two 30-minute
integrations (priorities 1-3 in turn), five nights from Saltbush Ridge starting
2026-06-10. Constraints on both sides: elevation 15..88 deg, Sun at least 25 deg
away, Sun below the horizon (night). The site's horizon mask, Moon rule and cable
wrap are switched off for ours, since astroplan's scheduler has no equivalent.
Slews: astroplan's ``Transitioner`` at 1.5 deg/s on the great-circle separation
plus 10 s reconfiguration between different positions; ours uses the dish model
(per-axis rates 1.5/1.0 deg/s, 10 s settle).

astroplan counts priority 1 as the most important and schedules in increasing
priority number, so it gets ``4 - ours``. Both use 1-minute time resolution.
Both schedules are then re-checked with astropy's full AltAz transform at
1-minute steps, the same way ``tests/test_survey.py`` checks ours.

No downloads: ``planner`` sets astropy offline on import; astroplan uses the
builtin ephemeris and explicit times.

Run from the repository root: ``.venv/bin/python benchmarks/bench_survey.py``.
"""
from __future__ import annotations

import dataclasses
import sys
import time
import warnings
from datetime import date
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

import astropy.units as u  # noqa: E402
import numpy as np  # noqa: E402
from astropy.coordinates import GCRS, AltAz, EarthLocation, SkyCoord, get_sun  # noqa: E402
from astropy.time import Time  # noqa: E402

import planner  # noqa: E402,F401  (astropy offline before astroplan is imported)
from planner.earth import earth_state  # noqa: E402
from planner.site import load_site  # noqa: E402
from planner.survey import SurveySettings, plan_survey  # noqa: E402
from planner.targets import parse_grid  # noqa: E402
from planner.timebase import local_day_span  # noqa: E402

START = date(2026, 6, 10)
NIGHTS = 5
GRID = "l=250..10/5,b=-2..2/4"
MINUTES = 30.0
REPEATS = 4
EL_MIN, EL_MAX, SUN_SEP = 15.0, 88.0, 25.0
STEP_MIN = 1.0


def _problem():
    site = load_site("saltbush-ridge")
    dish = dataclasses.replace(site.dish, horizon_az_deg=(), horizon_el_deg=(),
                               azimuth_min_deg=-180.0, azimuth_max_deg=540.0)
    site = dataclasses.replace(site, dish=dish)
    targets = parse_grid(GRID, MINUTES, repeats=REPEATS)
    targets = [dataclasses.replace(t, priority=float(1 + i % 3)) for i, t in enumerate(targets)]
    start, end = local_day_span(START, NIGHTS, site.tz)
    return site, targets, start, end


def _ours(site, targets, start, end):
    settings = SurveySettings(start_mjd=start, end_mjd=end, sun_min_sep_deg=SUN_SEP,
                              moon_min_sep_deg=0.0, night_only=True, step_s=STEP_MIN * 60)
    plan = plan_survey(site, targets, settings)
    done = [(b.target, b.start_mjd, b.end_mjd) for b in plan.blocks if b.kind == "target"]
    slew_s = sum(b.minutes * 60 for b in plan.blocks if b.kind == "slew")
    return done, slew_s


def _astroplan(site, targets, start, end):
    from astroplan import FixedTarget, Observer
    from astroplan.constraints import (AltitudeConstraint, AtNightConstraint,
                                       SunSeparationConstraint)
    from astroplan.scheduling import (ObservingBlock, PriorityScheduler, Schedule,
                                      Transitioner)
    location = EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                             height=site.height_m * u.m)
    observer = Observer(location=location, name=site.name)
    constraints = [AltitudeConstraint(min=EL_MIN * u.deg, max=EL_MAX * u.deg),
                   SunSeparationConstraint(min=SUN_SEP * u.deg),
                   AtNightConstraint(max_solar_altitude=0 * u.deg)]
    blocks = []
    for i, t in enumerate(targets):
        fixed = FixedTarget(SkyCoord(t.ra_deg * u.deg, t.dec_deg * u.deg), name=str(i))
        for _ in range(t.repeats):
            blocks.append(ObservingBlock(fixed, MINUTES * u.min, 4 - int(t.priority),
                                         configuration={"position": t.name}))
    transitioner = Transitioner(slew_rate=site.dish.slew_az_deg_s * u.deg / u.s,
                                instrument_reconfig_times={
                                    "position": {"default": site.dish.settle_s * u.s}})
    scheduler = PriorityScheduler(constraints=constraints, observer=observer,
                                  transitioner=transitioner, time_resolution=STEP_MIN * u.min)
    schedule = Schedule(Time(start, format="mjd"), Time(end, format="mjd"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        scheduler(blocks, schedule)
    done, slew_s = [], 0.0
    for b in schedule.scheduled_blocks:
        if isinstance(b, ObservingBlock):
            done.append((int(b.target.name), b.start_time.mjd, b.end_time.mjd))
        else:
            slew_s += b.duration.to_value(u.s)
    return done, slew_s


def _violations(site, targets, done) -> int:
    """Blocks failing elevation, Sun distance or night at any 1-minute sample (astropy)."""
    if not done:
        return 0
    mjd, ra, dec, owner = [], [], [], []
    for j, (i, s, e) in enumerate(done):
        times = np.append(s + np.arange(0, (e - s) * 1440 - 1e-6, STEP_MIN) / 1440, e)
        mjd.append(times)
        ra.append(np.full(times.size, targets[i].ra_deg))
        dec.append(np.full(times.size, targets[i].dec_deg))
        owner.append(np.full(times.size, j))
    mjd, ra, dec, owner = map(np.concatenate, (mjd, ra, dec, owner))
    loc = EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg,
                        height=site.height_m * u.m)
    times = Time(mjd, format="mjd")
    frame = AltAz(obstime=times, location=loc)
    coord = SkyCoord(ra * u.deg, dec * u.deg)
    alt = coord.transform_to(frame).alt.deg
    sun = get_sun(times)
    sun_sep = sun.separation(coord.transform_to(GCRS(obstime=times))).deg
    sun_alt = sun.transform_to(frame).alt.deg
    # 0.02 deg: the two schedulers work on 1-minute grids; a limit crossed between samples
    # by less than this is rounding, not a broken constraint.
    bad = (alt < EL_MIN - 0.02) | (alt > EL_MAX + 0.02) | (sun_sep < SUN_SEP - 0.02) | (sun_alt > 0.02)
    return int(np.unique(owner[bad]).size)


def _figures(targets, done, slew_s):
    completed = len(done)
    weighted = sum(targets[i].priority for i, _, _ in done)
    minutes = sum((e - s) * 1440 for _, s, e in done)
    full = sum(1 for i in range(len(targets)) if sum(1 for j, _, _ in done if j == i)
               == targets[i].repeats)
    return completed, weighted, minutes, slew_s, full


def run() -> dict:
    """Solve the problem with both schedulers; return {case, ours_s, baseline_s, ratio, agreement}."""
    site, targets, start, end = _problem()
    # Warm both: IERS tables, astropy's frame graph, the builtin ephemeris.
    earth_state(np.array([start, end]))
    get_sun(Time(start, format="mjd")).transform_to(
        AltAz(obstime=Time(start, format="mjd"),
              location=EarthLocation(lat=site.latitude_deg * u.deg, lon=site.longitude_deg * u.deg)))
    t0 = time.perf_counter()
    ours = _ours(site, targets, start, end)
    ours_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    theirs = _astroplan(site, targets, start, end)
    baseline_s = time.perf_counter() - t0
    a = _figures(targets, *ours)
    b = _figures(targets, *theirs)
    bad_a = _violations(site, targets, ours[0])
    bad_b = _violations(site, targets, theirs[0])
    wanted = sum(t.repeats for t in targets)
    agreement = (f"integrations done ours {a[0]}/{wanted} vs astroplan {b[0]}/{wanted} "
                 f"(priority-weighted {a[1]:.0f} vs {b[1]:.0f}; targets complete {a[4]} vs {b[4]}); "
                 f"slewing {a[3] / 60:.1f} vs {b[3] / 60:.1f} min; "
                 f"blocks failing an astropy re-check: {bad_a} vs {bad_b}")
    return {
        "case": f"survey schedule, {len(targets)} targets x {REPEATS} x {MINUTES:g} min, "
                f"{NIGHTS} nights, 1-min grid",
        "ours_s": ours_s,
        "baseline_s": baseline_s,
        "ratio": baseline_s / ours_s,
        "agreement": agreement,
        "details": {"ours": a, "astroplan": b, "violations": (bad_a, bad_b), "wanted": wanted},
    }


if __name__ == "__main__":
    r = run()
    d = r["details"]
    print(r["case"])
    print(f"  {'':12s}{'done':>6s}{'weighted':>10s}{'complete':>10s}{'integr. min':>13s}"
          f"{'slew min':>10s}{'run s':>9s}{'bad':>5s}")
    for name, f, secs, bad in (("ours", d["ours"], r["ours_s"], d["violations"][0]),
                               ("astroplan", d["astroplan"], r["baseline_s"], d["violations"][1])):
        print(f"  {name:12s}{f[0]:6d}{f[1]:10.0f}{f[4]:10d}{f[2]:13.0f}{f[3] / 60:10.1f}"
              f"{secs:9.2f}{bad:5d}")
    print(f"  speed-up: {r['ratio']:.1f} x  (goal >= 10 x, and at least as many integrations)")
    print(f"  {r['agreement']}")
