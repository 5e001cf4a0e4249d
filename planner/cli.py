"""Command-line interface: ``hiplan <command> ...``.

The CLI parses options, calls the computation modules, and hands documents to
``report`` for rendering. User mistakes raise ``UserError`` and end as one
line on stderr with exit status 2; nothing is written in that case.
"""
from __future__ import annotations

import argparse
import logging
import sys
from datetime import date
from pathlib import Path

from rich.console import Console

from . import __version__
from .errors import UserError
from .outputs import check_writable, write_atomic
from .passages import search_passages_mjd
from .pointing import (Pointing, from_altaz, from_hadec, on_meridian_at_dec,
                       on_meridian_at_elevation, require_reachable)
from .report import PASSAGE_FIELDS, crossings_document, crossings_renderable, to_csv, to_json
from .site import Site, available_sites, load_site
from .timebase import local_day_span, parse_day

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


COMMANDS = {"crossings": cmd_crossings, "sites": cmd_sites}


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
