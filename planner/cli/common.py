"""Shared pieces of the command line: option groups, pointing/period resolution, output.

Every command module in this package has ``NAME``, ``HELP``, ``add_arguments(parser)``
and ``run(args, console) -> int``. User mistakes raise ``UserError``.
"""
from __future__ import annotations

import argparse
import io
import os
import sys
from datetime import date, datetime
from pathlib import Path

from ..errors import UserError
from ..galactic import galactic_to_icrs_deg
from ..outputs import check_writable, is_stdout, write_all
from ..pointing import (Pointing, from_altaz, from_hadec, on_meridian_at_dec,
                        on_meridian_at_elevation, require_reachable)
from ..site import Site
from ..timebase import local_day_span, parse_day

# The planner's default depth per bin (``park.DEFAULT_TARGET_MINUTES``), repeated here so
# that building the parser loads no computation; tests/test_cli.py checks they agree.
DEFAULT_TARGET_MINUTES = 60.0
MAX_ALARM_MINUTES = 7 * 24 * 60  # as ``ical.MAX_ALARM_MINUTES`` (a week), checked in the tests
MAX_DAYS = 731  # two years: longer plans are almost surely a typo and slow


class Parser(argparse.ArgumentParser):
    """argparse with one-line errors (no usage dump) and exit status 2."""

    def error(self, message: str):  # noqa: D401 - argparse API
        raise UserError(f"{message} (see '{self.prog} --help')")


def number(kind, name, lo=None, hi=None, lo_open=False, hi_open=False):
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


def add_site(p):
    p.add_argument("--site", help="site file path or name in sites/ (default: the bundled example)")


def add_output(p, formats=("table", "json", "csv")):
    p.add_argument("--format", choices=formats, default=formats[0],
                   help=f"output format: {', '.join(formats[:-1])} or {formats[-1]} "
                        f"(default {formats[0]})")
    p.add_argument("--output", "-o", type=Path,
                   help="write to this file instead of the terminal ('-': standard output)")
    p.add_argument("--force", action="store_true", help="replace an existing output file")


def add_period(p, default_days: int):
    p.add_argument("--start", help="first local day YYYY-MM-DD (default: today at the site)")
    p.add_argument("--days", type=number(int, "--days", 1, MAX_DAYS), default=default_days,
                   help=f"number of days (default {default_days})")


def add_pointing(p, title: str = "pointing (default: the site file's [pointing])"):
    g = p.add_argument_group(title)
    g.add_argument("--dec", type=number(float, "--dec", -90, 90),
                   help="declination of date (deg); on the meridian unless --ha is given")
    g.add_argument("--ha", type=number(float, "--ha", -180, 180),
                   help="hour angle (deg, west positive), with --dec")
    g.add_argument("--elevation", type=number(float, "--elevation", 0, 90),
                   help="elevation on the meridian (deg)")
    g.add_argument("--facing", choices=("north", "south"),
                   help="meridian side for --elevation: north or south (default: toward the "
                        "equator, or the site's facing)")
    g.add_argument("--alt", type=number(float, "--alt", 0, 90), help="elevation (deg), with --az")
    g.add_argument("--az", type=number(float, "--az", 0, 360, hi_open=True),
                   help="azimuth from north through east (deg), with --alt")


def add_target(p):
    g = p.add_argument_group("sky position (instead of a parked pointing)")
    g.add_argument("--ra", type=number(float, "--ra", 0, 360, hi_open=True),
                   help="ICRS right ascension (deg), with --dec; --dec alone means a parked beam")
    g.add_argument("--l", type=number(float, "--l", 0, 360), help="galactic longitude (deg), with --b")
    g.add_argument("--b", type=number(float, "--b", -90, 90), help="galactic latitude (deg), with --l")


def add_alarm(p, default: int | None = 15):
    """--alarm MINUTES: calendar reminder lead, the same option in every command."""
    tail = f"default {default}" if default is not None else "default: the plan's alarm_minutes, else 15"
    p.add_argument("--alarm", type=number(int, "--alarm", 0, MAX_ALARM_MINUTES), default=default,
                   metavar="MINUTES", help=f"calendar reminder this many minutes before each task "
                                           f"(0 = at the start; {tail})")


def add_rotation(p, what: str = "rotation model for the tuning advice"):
    from ..galaxy import PRESETS
    p.add_argument("--rotation", default="iau1985", metavar="MODEL",
                   help=f"{what}: {', '.join(PRESETS)} (default iau1985)")


def add_log(p, what: str = "observation log (CSV) of what is already covered"):
    p.add_argument("--log", action="append", metavar="FILE",
                   help=f"{what}; repeat for several logs (a recording in two counts once)")


def add_b_max(p):
    p.add_argument("--b-max", type=number(float, "--b-max", 0, 90, lo_open=True, hi_open=True),
                   metavar="DEG", help="half-width of the galactic-latitude strip |b| <= DEG that "
                                       "counts as a plane passage (default: the site's b_max_deg)")


def add_night(p, what: str = "count only passages"):
    """--night-only and --night KIND (which Sun altitude ends the day)."""
    from ..avoidance import DEFAULT_NIGHT, NIGHT_SUN_ALTITUDE_DEG
    p.add_argument("--night-only", action="store_true",
                   help=f"{what} with the Sun down (its centre below the horizon, or as --night says)")
    kinds = ", ".join(f"{k} {v:g}°" for k, v in NIGHT_SUN_ALTITUDE_DEG.items())
    p.add_argument("--night", choices=tuple(NIGHT_SUN_ALTITUDE_DEG), metavar="KIND",
                   help=f"what counts as night, implies --night-only: the Sun's centre below "
                        f"{kinds} (default {DEFAULT_NIGHT})")


def night_setting(args) -> tuple[bool, float, str]:
    """(night only?, Sun altitude limit in deg, its name) from --night-only / --night."""
    from ..avoidance import DEFAULT_NIGHT, NIGHT_SUN_ALTITUDE_DEG
    kind = args.night or DEFAULT_NIGHT
    return bool(args.night_only or args.night), NIGHT_SUN_ALTITUDE_DEG[kind], kind


def add_lsr_definition(p):
    p.add_argument("--lsr-def", default="standard", choices=("standard", "dynamical", "schoenrich2010"),
                   help="solar motion defining the LSR: standard (the kinematic LSR, 20 km/s toward "
                        "18h +30; default), dynamical (Delhaye 1965) or schoenrich2010 "
                        "(Schoenrich, Binney & Dehnen 2010)")


def resolve_pointing(args, site: Site) -> Pointing:
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


def current_setting(site: Site, start_dec: float | None = None) -> Pointing | None:
    """Where the dish is parked now: ``start_dec`` (meridian), else the site's [pointing], or None."""
    if start_dec is not None:
        return on_meridian_at_dec(site, start_dec)
    point = site.default_pointing
    if "alt_deg" in point:
        return from_altaz(site, point["alt_deg"], point["az_deg"])
    if "dec_deg" in point:
        return on_meridian_at_dec(site, point["dec_deg"])
    return None


def sky_target(args) -> tuple[float, float] | None:
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


def period_span(args, site: Site) -> tuple[float, float]:
    start = parse_day(args.start, "--start") if args.start else today_at(site)
    return local_day_span(start, args.days, site.tz)


def today_at(site: Site) -> date:
    return datetime.now(site.tz).date()


def emit(args, console, text: str | None, renderable=None, also=()) -> None:
    """Write ``text`` (or the renderable as plain text) to --output, or print it.

    ``also``: further (path, data) outputs (charts) written with it, all or none
    (``outputs.write_all``). ``-o -`` is standard output.
    """
    if args.output is not None:
        write_all([*also, (args.output, text if text is not None else plain_text(renderable))],
                  args.force)
        if not is_stdout(args.output):
            note(console, f"wrote {args.output}")
        return
    if also:
        write_all(also, args.force)
    if renderable is not None:
        console.print(renderable)
    else:
        sys.stdout.write(text)


# ----------------------------------------------------------------- inputs never overwritten

def input_files(args, extra=()) -> list[tuple[str, Path]]:
    """(what, path) of every input file the command's options name: site, windows, logs,
    targets, plan (``extra``: more pairs). Names that are not files are left out."""
    from ..site import site_file_path
    found = list(extra)
    if hasattr(args, "site"):  # None: the bundled default site
        try:
            found.append(("site file", site_file_path(args.site)))
        except UserError:
            pass  # an unknown site name is reported when the command loads it
    logs = getattr(args, "log", None)
    for path in ([logs] if isinstance(logs, (str, Path)) else logs or []):
        found.append(("observation log", Path(path)))
    for attr, what in (("windows", "windows file"), ("targets", "target file"), ("plan", "plan file"),
                       ("tally", "tally file")):
        value = getattr(args, attr, None)
        if value:
            found.append((what, Path(str(value).strip())))
    return found


def _same_file(a: Path, b: Path) -> bool:
    """True when writing ``a`` would replace ``b``: the same resolved path, or (both existing)
    the same file through a symbolic or hard link."""
    try:
        if Path(a).resolve() == Path(b).resolve():
            return True
        return Path(a).exists() and Path(b).exists() and os.path.samefile(a, b)
    except (OSError, ValueError):  # a windows text is not a path
        return False


def check_outputs(args, *paths, inputs=()) -> None:
    """Refuse early, before any work: each output must be writable (``check_writable``),
    different from the others, and none of the command's inputs (``input_files``).

    --force replaces an existing output, never an input of the same command.
    At most one output may be ``-`` (standard output).
    """
    outs = [p for p in paths if p is not None]
    if sum(is_stdout(p) for p in outs) > 1:
        raise UserError("only one output can go to standard output (-)")
    files = [Path(p) for p in outs if not is_stdout(p)]
    sources = input_files(args, inputs)
    for out in files:
        for what, source in sources:
            if _same_file(out, source):
                raise UserError(f"{out}: the output would replace the {what} this command reads "
                                f"({source}); --force never replaces an input, so write elsewhere")
        check_writable(out, getattr(args, "force", False))
    for i, out in enumerate(files):
        if any(_same_file(out, other) for other in files[:i]):
            raise UserError(f"{out}: given for two outputs; each output needs its own file")


def plain_text(renderable) -> str:
    from rich.console import Console
    cap = Console(width=160, record=True, file=io.StringIO(), color_system=None)
    cap.print(renderable)
    return cap.export_text()


# ----------------------------------------------------------------- commands



class TerminalConsole:
    """Standard output as a console: rich is loaded only when a table is printed.

    Has what commands use of a rich ``Console``: ``print`` and ``file``. Piped
    output gets a fixed width so tables are not squeezed to 80 columns.
    """

    def __init__(self):
        self.file = sys.stdout
        self._rich = None

    def print(self, *objects, **kwargs) -> None:
        if self._rich is None:
            from rich.console import Console
            self._rich = Console() if sys.stdout.isatty() else Console(width=120)
        self._rich.print(*objects, **kwargs)


def quiet_console():
    """A console that discards output (for commands run inside the demo)."""
    from rich.console import Console
    return Console(file=io.StringIO(), width=120)


CHART_DPI = 110
_chart_cache: dict[tuple, bytes] = {}


def figure_bytes(fig, fmt: str) -> bytes:
    """A matplotlib figure rendered to PNG or SVG bytes (written by the caller)."""
    from io import BytesIO
    buf = BytesIO()
    # Figures use constrained layout: no "tight" pass. PNG at zlib level 1: a quarter
    # faster to write than the default level 6, files about 15 % larger.
    extra = {"pil_kwargs": {"compress_level": 1}} if fmt == "png" else {}
    fig.savefig(buf, format=fmt, dpi=CHART_DPI, **extra)
    return buf.getvalue()


def plan_chart_bytes(doc: dict, chart: str, fmt: str = "png") -> bytes:
    """A plan's chart (``planner.plots.<chart>(doc)``) as bytes, drawn once per process:
    the month command and the briefs made from the same plan in one run (the demo)
    share it."""
    import hashlib
    import json
    key = (hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest(), chart, fmt)
    if key not in _chart_cache:
        from .. import plots
        _chart_cache[key] = figure_bytes(getattr(plots, chart)(doc), fmt)
    return _chart_cache[key]


def note(console, text: str) -> None:
    """A progress note on stderr, unless the command runs inside another (quiet console)."""
    if console.file is sys.stdout:
        sys.stderr.write(text + "\n")


def load_windows(text: str | None, site: Site, start_mjd: float, end_mjd: float):
    """(Availability, UTC intervals) from --windows, or (None, None) without it.

    A rota with no window in the period is an error: there is nothing to plan.
    """
    from ..windows import never_occurs, read_windows, window_intervals_mjd
    if not text:
        return None, None
    avail = read_windows(text)
    if never_occurs(avail, start_mjd, end_mjd, site.tz):
        days = round(end_mjd - start_mjd)
        raise UserError(f"nothing to plan because the windows never occur in the {days} days of "
                        "the period (--windows)")
    return avail, window_intervals_mjd(avail, start_mjd, end_mjd, site.tz)
