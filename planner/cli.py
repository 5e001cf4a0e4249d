"""Command-line interface: ``hiplan <command> ...``.

The CLI parses options, calls the computation modules, and hands documents to
``report`` for rendering. User mistakes raise ``UserError`` and end as one
line on stderr with exit status 2; nothing is written in that case.
"""
from __future__ import annotations

import argparse
import logging
import sys
from datetime import date, datetime, timezone
from pathlib import Path

import numpy as np

from rich.console import Console

from . import __version__
from .errors import UserError
from .outputs import check_writable, write_atomic
from .passages import search_passages_mjd
from .pointing import (Pointing, from_altaz, from_hadec, on_meridian_at_dec,
                       on_meridian_at_elevation, require_reachable)
from .report import PASSAGE_FIELDS, crossings_document, crossings_renderable, to_csv, to_json
from .site import Site, available_sites, load_site
from .doppler import velocity_corrections
from .galactic import galactic_to_icrs_deg, icrs_to_galactic_deg
from .galaxy import hi_velocity_envelope, model_from_name
from .report import LSR_FIELDS, lsr_document, lsr_renderable, tune_document, tune_renderable
from .sensitivity import days_to_reach, drift_time_s, radiometer_rms_k
from .skytrack import track_mjd
from .spectral import tuning_advice
from .timebase import datetime_to_mjd_utc, local_day_span, parse_day, parse_instant
from .tuning import LineSetup, drift_depth, line_setup

MAX_DAYS = 731  # two years: longer plans are almost surely a typo and slow


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors (no usage dump) and exit status 2."""

    def error(self, message: str):  # noqa: D401 - argparse API
        raise UserError(f"{message} (see '{self.prog} --help')")


def _number(kind, name, lo=None, hi=None, lo_open=False, hi_open=False):
    """argparse type: a number within a range, with an error naming the option."""
    def convert(text: str):
        try:
            value = kind(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{name}: '{text}' is not a number") from None
        if value != value or value in (float("inf"), float("-inf")):
            raise argparse.ArgumentTypeError(f"{name}: '{text}' is not a finite number")
        bad_lo = lo is not None and (value <= lo if lo_open else value < lo)
        bad_hi = hi is not None and (value >= hi if hi_open else value > hi)
        if bad_lo or bad_hi:
            left = "(" if lo_open else "["
            right = ")" if hi_open else "]"
            raise argparse.ArgumentTypeError(f"{name}: {value} is outside {left}{lo}, {hi}{right}")
        return value
    return convert


def _add_site(p):
    p.add_argument("--site", help="site file path or name in sites/ (default: the bundled example)")


def _add_output(p, formats=("table", "json", "csv")):
    p.add_argument("--format", choices=formats, default=formats[0], help="output format")
    p.add_argument("--output", "-o", type=Path, help="write to this file instead of the terminal")
    p.add_argument("--force", action="store_true", help="replace an existing output file")


def _add_period(p, default_days: int):
    p.add_argument("--start", help="first local day YYYY-MM-DD (default: today at the site)")
    p.add_argument("--days", type=_number(int, "--days", 1, MAX_DAYS), default=default_days,
                   help=f"number of days (default {default_days})")


def _add_pointing(p):
    g = p.add_argument_group("pointing (default: the site file's [pointing])")
    g.add_argument("--dec", type=_number(float, "--dec", -90, 90),
                   help="declination of date (deg); on the meridian unless --ha is given")
    g.add_argument("--ha", type=_number(float, "--ha", -180, 180),
                   help="hour angle (deg, west positive), with --dec")
    g.add_argument("--elevation", type=_number(float, "--elevation", 0, 90),
                   help="elevation on the meridian (deg)")
    g.add_argument("--facing", choices=("north", "south"), help="meridian side for --elevation")
    g.add_argument("--alt", type=_number(float, "--alt", 0, 90), help="elevation (deg), with --az")
    g.add_argument("--az", type=_number(float, "--az", 0, 360, hi_open=True),
                   help="azimuth from north through east (deg), with --alt")


def _add_target(p):
    g = p.add_argument_group("sky position (instead of a parked pointing)")
    g.add_argument("--ra", type=_number(float, "--ra", 0, 360, hi_open=True),
                   help="ICRS right ascension (deg), with --dec; --dec alone means a parked beam")
    g.add_argument("--l", type=_number(float, "--l", 0, 360), help="galactic longitude (deg), with --b")
    g.add_argument("--b", type=_number(float, "--b", -90, 90), help="galactic latitude (deg), with --l")


def _add_lsr_definition(p):
    p.add_argument("--lsr-def", default="standard", choices=("standard", "dynamical", "schoenrich2010"),
                   help="solar motion defining the LSR (default: standard kinematic LSR)")


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="hiplan", description="Plan 21-cm HI observations for small radio telescopes.")
    parser.add_argument("--version", action="version", version=f"hiplan {__version__}")
    parser.add_argument("--verbose", "-v", action="store_true", help="log notes (e.g. IERS table end)")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    c = sub.add_parser("crossings", help="when a parked beam crosses the galactic plane")
    _add_site(c)
    _add_pointing(c)
    _add_period(c, default_days=7)
    c.add_argument("--band", type=_number(float, "--band", 0, 90, lo_open=True, hi_open=True),
                   help="half-width of the |b| strip (deg; default from the site rules)")
    _add_output(c)

    lsr = sub.add_parser("lsr", help="LSR velocity correction for a position or a parked beam")
    _add_site(lsr)
    _add_target(lsr)
    _add_pointing(lsr)
    lsr.add_argument("--time", help="one instant, ISO 8601 (UTC unless an offset is given; default now)")
    lsr.add_argument("--start", help="first local day YYYY-MM-DD of a range (with --days)")
    lsr.add_argument("--days", type=_number(int, "--days", 1, MAX_DAYS), help="length of the range")
    lsr.add_argument("--step", type=_number(float, "--step", 0, 1440, lo_open=True), default=60.0,
                     help="sample spacing in minutes for a range (default 60)")
    _add_lsr_definition(lsr)
    _add_output(lsr)

    t = sub.add_parser("tune", help="receiver centre frequency, band fit and expected noise")
    _add_site(t)
    _add_target(t)
    _add_pointing(t)
    _add_period(t, default_days=30)
    t.add_argument("--band", type=_number(float, "--band", 0, 90, lo_open=True, hi_open=True),
                   help="half-width of the |b| strip (deg; default from the site rules)")
    t.add_argument("--rotation", default="iau1985",
                   help="rotation model: iau1985 (default), reid2014, reid2019, brand-blitz1993")
    t.add_argument("--dispersion", type=_number(float, "--dispersion", 0, 100),
                   help="velocity margin added to the envelope (km/s; default 10)")
    t.add_argument("--disc-radius", type=_number(float, "--disc-radius", 0, 100, lo_open=True),
                   help="outer radius of the HI disc (kpc; default 25)")
    t.add_argument("--minutes", type=_number(float, "--minutes", 0, 1e5, lo_open=True),
                   help="pointed integration time per position (minutes)")
    t.add_argument("--target-rms", type=_number(float, "--target-rms", 0, 1e3, lo_open=True),
                   help="noise level wanted per channel (K): report the days needed")
    t.add_argument("--switched", action="store_true",
                   help="frequency/position switching: noise factor 2 instead of 1")
    _add_lsr_definition(t)
    _add_output(t, formats=("table", "json"))

    d = sub.add_parser("demo", help="run the whole job on the bundled example sites")
    d.add_argument("--output-dir", type=Path, default=Path("demo-output"),
                   help="folder for the demo files (default ./demo-output)")
    d.add_argument("--force", action="store_true", help="replace existing demo files")

    s = sub.add_parser("sites", help="list the site files hiplan can find")
    _add_output(s, formats=("table", "json"))
    return parser


# ------------------------------------------------------------------ helpers

def _pointing(args, site: Site) -> Pointing:
    """Resolve the pointing options (or the site default) into a reachable Pointing."""
    alt_az = args.alt is not None or args.az is not None
    if alt_az and (args.alt is None or args.az is None):
        raise UserError("--alt and --az must be given together")
    given = [name for name, on in (("--dec", args.dec is not None), ("--elevation", args.elevation is not None),
                                   ("--alt/--az", alt_az)) if on]
    if len(given) > 1:
        raise UserError(f"give one pointing, not {' and '.join(given)}")
    if args.ha is not None and args.dec is None:
        raise UserError("--ha needs --dec")
    if args.facing and args.elevation is None:
        raise UserError("--facing only goes with --elevation")
    if args.dec is not None:
        pointing = (from_hadec(site, args.ha, args.dec) if args.ha is not None
                    else on_meridian_at_dec(site, args.dec))
    elif args.elevation is not None:
        pointing = on_meridian_at_elevation(site, args.elevation, args.facing)
    elif alt_az:
        pointing = from_altaz(site, args.alt, args.az)
    elif "alt_deg" in site.default_pointing:
        pointing = from_altaz(site, site.default_pointing["alt_deg"], site.default_pointing["az_deg"])
    elif "dec_deg" in site.default_pointing:
        pointing = on_meridian_at_dec(site, site.default_pointing["dec_deg"])
    else:
        raise UserError(f"no pointing: give --dec, --elevation or --alt/--az "
                        f"(or add [pointing] to {site.source})")
    return require_reachable(site, pointing)


def _sky_target(args) -> tuple[float, float] | None:
    """(ra, dec) ICRS in degrees from --ra/--dec or --l/--b, or None for a parked beam."""
    if (args.l is None) != (args.b is None):
        raise UserError("--l and --b must be given together")
    if args.ra is not None and args.dec is None:
        raise UserError("--ra needs --dec")
    if args.l is not None:
        if args.ra is not None:
            raise UserError("give --ra/--dec or --l/--b, not both")
        ra, dec = galactic_to_icrs_deg(args.l, args.b)
        return float(ra), float(dec)
    if args.ra is not None:
        return float(args.ra), float(args.dec)
    return None


def _period(args, site: Site) -> tuple[float, float]:
    start = parse_day(args.start, "--start") if args.start else _today(site)
    return local_day_span(start, args.days, site.tz)


def _today(site: Site) -> date:
    from datetime import datetime
    return datetime.now(site.tz).date()


def _emit(args, console: Console, text: str | None, renderable=None) -> None:
    """Write ``text`` to --output atomically, or print it / the rich renderable."""
    if args.output is not None:
        write_atomic(args.output, text if text is not None else _plain(renderable), args.force)
        if console.file is sys.stdout:
            Console(stderr=True).print(f"wrote {args.output}")
    elif renderable is not None:
        console.print(renderable)
    else:
        sys.stdout.write(text)


def _plain(renderable) -> str:
    cap = Console(width=160, record=True, file=open("/dev/null", "w"), color_system=None)
    cap.print(renderable)
    return cap.export_text()


# ----------------------------------------------------------------- commands

def cmd_crossings(args, console: Console) -> int:
    site = load_site(args.site)
    if args.output is not None:
        check_writable(args.output, args.force)
    pointing = _pointing(args, site)
    start_mjd, end_mjd = _period(args, site)
    search = search_passages_mjd(site, pointing, start_mjd, end_mjd, args.band)
    if args.format == "table":
        _emit(args, console, None, crossings_renderable(site, pointing, search))
    else:
        doc = crossings_document(site, pointing, search)
        text = to_json(doc) if args.format == "json" else to_csv(doc["passages"], PASSAGE_FIELDS)
        _emit(args, console, text)
    return 0


def cmd_sites(args, console: Console) -> int:
    rows = []
    for stem, path in available_sites().items():
        site = load_site(str(path))
        rows.append({"id": stem, "path": str(path), **site.summary()})
    if args.format == "json":
        _emit(args, console, to_json({"schema": "hiplan.sites/1", "sites": rows}))
        return 0
    from rich.table import Table
    table = Table(title="Sites")
    for col in ("id", "name", "latitude_deg", "longitude_deg", "timezone", "mount", "diameter_m"):
        table.add_column(col)
    for r in rows:
        table.add_row(*(str(r[c]) for c in ("id", "name", "latitude_deg", "longitude_deg",
                                             "timezone", "mount", "diameter_m")))
    _emit(args, console, None, table)
    return 0


def cmd_lsr(args, console: Console) -> int:
    site = load_site(args.site)
    if args.output is not None:
        check_writable(args.output, args.force)
    target = _sky_target(args)
    if args.time and (args.start or args.days):
        raise UserError("give --time, or --start with --days, not both")
    if args.time:
        mjd = np.array([parse_instant(args.time, "--time")])
    elif args.start or args.days:
        args.days = args.days or 1
        start_mjd, end_mjd = _period(args, site)
        mjd = np.arange(start_mjd, end_mjd + 1e-9, args.step / 1440.0)
    else:
        mjd = np.array([datetime_to_mjd_utc(datetime.now(timezone.utc))])
    if target is None:
        pointing = _pointing(args, site)
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
        _emit(args, console, to_json(doc))
    elif args.format == "csv":
        _emit(args, console, to_csv(doc["samples"], LSR_FIELDS))
    else:
        _emit(args, console, None, lsr_renderable(doc))
    return 0


def cmd_tune(args, console: Console) -> int:
    site = load_site(args.site)
    if args.output is not None:
        check_writable(args.output, args.force)
    overrides = {k: v for k, v in (("dispersion_kms", args.dispersion),
                                   ("disc_radius_kpc", args.disc_radius)) if v is not None}
    model = model_from_name(args.rotation, **overrides)
    start_mjd, end_mjd = _period(args, site)
    band = site.rules.band_deg if args.band is None else args.band
    target = _sky_target(args)
    factor = 2.0 if args.switched else 1.0
    if target is None:
        pointing = _pointing(args, site)
        search = search_passages_mjd(site, pointing, start_mjd, end_mjd, band,
                                     solar_motion=args.lsr_def)
        usable = [p for p in search.passages if p.sun_ok]
        if not usable:
            why = ("the beam never comes within the band of the plane" if not search.passages
                   else "every passage is too close to the Sun")
            raise UserError(f"nothing to tune for: {why} in this period")
        bins = sorted({b for p in usable for b in p.l_bins})
        setup = line_setup(bins, site.rules.bin_width_deg, band,
                           min(p.lsr_corr_min_kms for p in usable),
                           max(p.lsr_corr_max_kms for p in usable), site.receiver, model)
        depth = drift_depth(usable, end_mjd - start_mjd, site.receiver, args.target_rms, factor)
        doc = tune_document(site, setup, model, args.lsr_def, start_mjd, end_mjd,
                            pointing=pointing, band_deg=band, l_bins=bins, depth=depth,
                            drift_s=float(drift_time_s(site.dish.beamwidth_deg, pointing.dec_deg)))
    else:
        ra, dec = target
        mjd = np.arange(start_mjd, end_mjd + 1e-9, 1.0 / 144)  # every 10 minutes
        corr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m,
                                    ra, dec, mjd, args.lsr_def).lsr_corr_kms
        l_deg, b_deg = icrs_to_galactic_deg(ra, dec)
        env = hi_velocity_envelope(l_deg, b_deg, model)
        advice = tuning_advice(float(env.v_min_kms), float(env.v_max_kms), float(corr.min()),
                               float(corr.max()), site.receiver)
        setup = LineSetup(float(env.v_min_kms), float(env.v_max_kms), float(corr.min()),
                          float(corr.max()), advice)
        pointed = None
        if args.minutes:
            rms = float(radiometer_rms_k(site.receiver.tsys_k, site.receiver.channel_width_khz * 1e3,
                                         args.minutes * 60.0, factor))
            pointed = {"minutes": args.minutes, "rms_k": rms,
                       "repeats_to_target": (int(np.ceil(days_to_reach(rms, args.target_rms)))
                                             if args.target_rms else None)}
        doc = tune_document(site, setup, model, args.lsr_def, start_mjd, end_mjd,
                            target=(ra, dec, float(l_deg), float(b_deg)), pointed=pointed)
    if args.format == "json":
        _emit(args, console, to_json(doc))
    else:
        _emit(args, console, None, tune_renderable(doc))
    return 0


DEMO_START = "2027-03-01"  # a fixed month, across the UK clock change on 28 March
DEMO_DAYS = 31


def cmd_demo(args, console: Console) -> int:
    """Run each job on the example sites and write the results under --output-dir."""
    from rich.progress import Progress, SpinnerColumn, TextColumn
    out = args.output_dir
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UserError(f"--output-dir {out}: cannot create folder ({exc.strerror})") from None
    steps = [
        ("crossings-hollowmere.json", ["crossings", "--site", "hollowmere", "--format", "json"]),
        ("crossings-hollowmere.csv", ["crossings", "--site", "hollowmere", "--format", "csv"]),
        ("crossings-hollowmere.txt", ["crossings", "--site", "hollowmere"]),
        ("tune-hollowmere.json", ["tune", "--site", "hollowmere", "--format", "json",
                                  "--target-rms", "0.05"]),
        ("tune-hollowmere.txt", ["tune", "--site", "hollowmere", "--target-rms", "0.05"]),
        ("crossings-saltbush-ridge.json", ["crossings", "--site", "saltbush-ridge", "--format", "json"]),
        ("lsr-saltbush-ridge.csv", ["lsr", "--site", "saltbush-ridge", "--format", "csv",
                                    "--days", "1", "--step", "30"]),
    ]
    parser = build_parser()
    written = []
    with Progress(SpinnerColumn(), TextColumn("{task.description}"), console=Console(stderr=True),
                  transient=True) as progress:
        task = progress.add_task("demo", total=len(steps))
        for name, argv in steps:
            progress.update(task, description=f"writing {name}")
            target = out / name
            sub_args = parser.parse_args(argv + ["--start", DEMO_START, "--days", str(DEMO_DAYS)]
                                         if "--days" not in argv else argv + ["--start", DEMO_START])
            sub_args.output, sub_args.force = target, args.force
            COMMANDS[sub_args.command](sub_args, _quiet_console())
            written.append(target)
            progress.advance(task)
    console.print(f"[bold]Demo written to {out}/[/bold] (period from {DEMO_START}, {DEMO_DAYS} days):")
    for path in written:
        console.print(f"  {path}")
    return 0


def _quiet_console() -> Console:
    return Console(file=open("/dev/null", "w"), width=120)


COMMANDS = {"demo": cmd_demo, "crossings": cmd_crossings, "lsr": cmd_lsr, "tune": cmd_tune, "sites": cmd_sites}


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``hiplan`` console script; returns the exit status."""
    # Piped output gets a fixed width so tables are not squeezed to 80 columns.
    console = Console() if sys.stdout.isatty() else Console(width=120)
    err = Console(stderr=True)
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                            format="hiplan: note: %(message)s")
        if not args.command:
            parser.print_help()
            return 2
        return COMMANDS[args.command](args, console)
    except UserError as exc:
        err.print(f"hiplan: error: {exc}", markup=False, highlight=False, soft_wrap=True)
        return 2
    except KeyboardInterrupt:
        err.print("hiplan: interrupted", markup=False)
        return 130


if __name__ == "__main__":
    sys.exit(main())
