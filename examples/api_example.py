"""Using hiplan as a library: passages, LSR corrections and tuning for a parked dish.

Scenario (invented): the Hollowmere club has parked its 3 m dish on the meridian at
declination +35 and wants this week's plane crossings, their LSR corrections, and one
receiver setting that covers them all.

Run from the repository root:  .venv/bin/python examples/api_example.py
"""
import sys
from datetime import date
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from planner.galaxy import model_from_name  # noqa: E402
from planner.passages import search_passages_mjd  # noqa: E402
from planner.pointing import on_meridian_at_dec, require_reachable  # noqa: E402
from planner.site import load_site  # noqa: E402
from planner.timebase import iso_local, local_day_span  # noqa: E402
from planner.tuning import line_setup  # noqa: E402

site = load_site("hollowmere")
pointing = require_reachable(site, on_meridian_at_dec(site, 35.0))
start_mjd, end_mjd = local_day_span(date(2027, 3, 1), 7, site.tz)

search = search_passages_mjd(site, pointing, start_mjd, end_mjd)
print(f"{site.name}: dish at elevation {pointing.alt_deg:.1f} deg, facing "
      f"{'south' if pointing.az_deg == 180 else 'north'}")
for p in search.passages:
    flag = "" if p.sun_ok else "  (Sun too close)"
    print(f"  {iso_local(p.start_mjd, site.tz)[:16]}  {p.duration_min:5.1f} min  "
          f"l {p.l_start_deg:6.1f} -> {p.l_end_deg:6.1f}  "
          f"LSR corr {p.lsr_corr_min_kms:+6.2f} .. {p.lsr_corr_max_kms:+6.2f} km/s{flag}")

usable = [p for p in search.passages if p.sun_ok]
bins = sorted({b for p in usable for b in p.l_bins})
setup = line_setup(bins, site.rules.bin_width_deg, site.rules.b_max_deg,
                   min(p.lsr_corr_min_kms for p in usable), max(p.lsr_corr_max_kms for p in usable),
                   site.receiver, model_from_name("iau1985"))
print(f"Tune to {setup.advice.centre_mhz:.3f} MHz; line spans {setup.advice.line_span_mhz:.3f} MHz; "
      f"fits: {setup.advice.fits}")
