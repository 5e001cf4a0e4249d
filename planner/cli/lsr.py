"""``hiplan lsr``: LSR velocity corrections for a sky position or a parked beam."""
from __future__ import annotations

from datetime import datetime, timezone


from ..errors import UserError
from .common import (MAX_DAYS, add_lsr_definition, add_output, add_pointing, add_site, add_target,
                     check_outputs, emit, number, period_span, resolve_pointing, sky_target)

NAME = "lsr"
# Samples per run: about 1 KB of working memory each in the Doppler chain, so 1 GB at
# most; a year at one-minute steps is 525,601.
MAX_SAMPLES = 1_000_000
HELP = "LSR velocity correction for a position or a parked beam"


def add_arguments(p) -> None:
    add_site(p)
    add_target(p)
    add_pointing(p)
    p.add_argument("--time", help="one instant, ISO 8601 with Z for UTC or an offset, e.g. "
                                  "2027-03-01T21:00:00Z or 2027-03-01T21:00:00+10:30 (default now)")
    p.add_argument("--start", help="first local day YYYY-MM-DD of a range (with --days)")
    p.add_argument("--days", type=number(int, "--days", 1, MAX_DAYS), help="length of the range")
    p.add_argument("--step", type=number(float, "--step", 0, 1440, lo_open=True), default=60.0,
                     help="sample spacing in minutes for a range (default 60)")
    add_lsr_definition(p)
    add_output(p)


def run(args, console) -> int:
    import numpy as np
    from ..doppler import velocity_corrections
    from ..report import LSR_FIELDS, lsr_document, to_csv, to_json
    from ..render import lsr_renderable
    from ..site import load_site
    from ..skytrack import track_mjd
    from ..timebase import datetime_to_mjd_utc, parse_instant
    site = load_site(args.site)
    check_outputs(args, args.output)
    target = sky_target(args)
    if args.time and (args.start or args.days):
        raise UserError("give --time, or --start with --days, not both")
    if args.time:
        _require_offset(args.time)
        mjd = np.array([parse_instant(args.time, "--time")])
    elif args.start or args.days:
        args.days = args.days or 1
        start_mjd, end_mjd = period_span(args, site)
        count = (end_mjd - start_mjd) * 1440.0 / args.step + 1
        if count > MAX_SAMPLES:
            raise UserError(f"--step/--days: {count:,.0f} samples, more than the {MAX_SAMPLES:,} "
                            "hiplan computes at once; use a longer --step or fewer --days")
        mjd = np.arange(start_mjd, end_mjd + 1e-9, args.step / 1440.0)
    else:
        mjd = np.array([datetime_to_mjd_utc(datetime.now(timezone.utc))])
    if target is None:
        pointing = resolve_pointing(args, site)
        track = track_mjd(site, pointing, mjd)
        ra, dec = track.ra_deg, track.dec_deg
        what = f"parked beam: elevation {pointing.alt_deg:.2f} deg, azimuth {pointing.az_deg:.1f} deg"
    else:
        ra, dec = np.full(mjd.shape, target[0]), np.full(mjd.shape, target[1])
        what = f"ICRS RA {target[0]:.4f} deg, Dec {target[1]:+.4f} deg"
    corr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra, dec, mjd,
                                args.lsr_def)
    doc = lsr_document(site, what, args.lsr_def, mjd, ra, dec, corr.lsr_corr_kms, corr.bary_corr_kms)
    if args.format == "json":
        emit(args, console, to_json(doc))
    elif args.format == "csv":
        emit(args, console, to_csv(doc["samples"], LSR_FIELDS))
    else:
        emit(args, console, None, lsr_renderable(doc))
    return 0


def _require_offset(text: str) -> None:
    """UserError for a --time without Z or a UTC offset (a bare clock time is ambiguous: the
    site's local time or UTC?), as the observation log refuses one."""
    try:
        moment = datetime.fromisoformat(text.strip().replace("Z", "+00:00"))
    except ValueError:
        return  # parse_instant gives the error for text that is no time at all
    if moment.tzinfo is None:
        raise UserError(f"--time: '{text.strip()}' has no UTC offset; add Z for UTC "
                        "(2027-03-01T21:00:00Z) or an offset such as +01:00")
