"""``hiplan lsr``: LSR velocity corrections for a sky position or a parked beam."""
from __future__ import annotations

from datetime import datetime, timezone

import numpy as np
from rich.console import Console

from ..doppler import velocity_corrections
from ..errors import UserError
from ..outputs import check_writable
from ..report import LSR_FIELDS, lsr_document, lsr_renderable, to_csv, to_json
from ..site import load_site
from ..skytrack import track_mjd
from ..timebase import datetime_to_mjd_utc, parse_instant
from .common import (MAX_DAYS, add_lsr_definition, add_output, add_pointing, add_site, add_target,
                     emit, number, period_span, resolve_pointing, sky_target)

NAME = "lsr"
HELP = "LSR velocity correction for a position or a parked beam"


def add_arguments(p) -> None:
    add_site(p)
    add_target(p)
    add_pointing(p)
    p.add_argument("--time", help="one instant, ISO 8601 (UTC unless an offset is given; default now)")
    p.add_argument("--start", help="first local day YYYY-MM-DD of a range (with --days)")
    p.add_argument("--days", type=number(int, "--days", 1, MAX_DAYS), help="length of the range")
    p.add_argument("--step", type=number(float, "--step", 0, 1440, lo_open=True), default=60.0,
                     help="sample spacing in minutes for a range (default 60)")
    add_lsr_definition(p)
    add_output(p)


def run(args, console: Console) -> int:
    site = load_site(args.site)
    if args.output is not None:
        check_writable(args.output, args.force)
    target = sky_target(args)
    if args.time and (args.start or args.days):
        raise UserError("give --time, or --start with --days, not both")
    if args.time:
        mjd = np.array([parse_instant(args.time, "--time")])
    elif args.start or args.days:
        args.days = args.days or 1
        start_mjd, end_mjd = period_span(args, site)
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


