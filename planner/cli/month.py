"""``hiplan month``: plan a period of drift scans to fill galactic-longitude gaps."""
from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from ..errors import UserError
from ..outputs import is_stdout, write_all
from .common import (DEFAULT_TARGET_MINUTES, add_alarm, add_b_max, add_log, add_lsr_definition,
                     add_night, add_rotation, add_site, check_outputs, current_setting, emit,
                     load_windows, night_setting, note, number, plan_chart_bytes, today_at)

NAME = "month"
HELP = "plan a month of drift scans: where to park each day, what to record"
MAX_PLAN_DAYS = 92


def add_arguments(p) -> None:
    add_site(p)
    g = p.add_argument_group("period")
    g.add_argument("--month", help="calendar month YYYY-MM (local days at the site)")
    g.add_argument("--start", help="first local day YYYY-MM-DD (instead of --month; with --keep the "
                                   "first day planned anew)")
    g.add_argument("--days", type=number(int, "--days", 1, MAX_PLAN_DAYS),
                   help="number of days with --start (default 30)")
    g.add_argument("--from-today", action="store_true",
                   help="plan from today at the site (instead of --start) to the end of the "
                        "period: --month's, the kept plan's, --days days, else this calendar month")
    g.add_argument("--keep", metavar="PLAN.json",
                   help="re-plan the rest of this earlier plan's period from --start DAY or "
                        "--from-today: its days before DAY are kept as they were, the dish starts "
                        "where it left it, its moves count toward --max-moves; give the logs of "
                        "what was recorded (--log, e.g. from 'hiplan tally')")
    p.add_argument("--want", help="wanted longitude ranges, e.g. 30-90,120-140 (default all)")
    depth = p.add_mutually_exclusive_group()
    depth.add_argument("--target-minutes", type=number(float, "--target-minutes", 0, 1e5, lo_open=True),
                       help=f"integration wanted per 1-degree bin (default {DEFAULT_TARGET_MINUTES:g} min)")
    depth.add_argument("--target-rms", type=number(float, "--target-rms", 0, 1e3, lo_open=True),
                       help="noise wanted per channel in each bin (K); sets the minutes")
    add_log(p)
    p.add_argument("--windows", help="operator availability (file or text): moves happen at the "
                                     "first window of a day")
    p.add_argument("--record-in-windows", action="store_true",
                   help="count recordings only inside the windows (someone must attend them)")
    add_night(p, "record only")
    p.add_argument("--repark-minutes", type=number(float, "--repark-minutes", 0, 600), default=15.0,
                   help="time a volunteer needs to move the dish (default 15)")
    p.add_argument("--min-days-between-moves", type=number(int, "--min-days-between-moves", 1, 92),
                   default=1, help="local days from one move to the next at least (default 1)")
    p.add_argument("--max-moves", type=number(int, "--max-moves", 0, 92), metavar="N",
                   help="move the dish at most N times in the period (default: no limit; an "
                        "unknown start setting makes the first setting a move)")
    p.add_argument("--optimize", type=number(float, "--optimize", 0, 3600), metavar="SECONDS",
                   help="also run the exact integer program (HiGHS) from the improved plan for "
                        "about SECONDS of search (counted in solver nodes, so every machine gets "
                        "the same plan): a better plan or a proof, and a tighter bound")
    p.add_argument("--tradeoff", action="store_true",
                   help="also plan with at most 0, 1, 2, 4, 8 and any number of moves and show "
                        "the wanted bins each reaches (a table, in JSON and in the brief)")
    p.add_argument("--start-dec", type=number(float, "--start-dec", -90, 90),
                   help="declination the dish is parked at now (default: the site's [pointing])")
    p.add_argument("--step", type=number(float, "--step", 0, 30, lo_open=True),
                   help="declination step (deg; default half the beamwidth)")
    add_b_max(p)
    p.add_argument("--allow-sun-hazard", action="store_true",
                   help="plan even settings and moves that bring the Sun within the site's "
                        "sun_hazard_deg of the feed (not advised): every such day then gets a "
                        "'cover the feed or move the dish' task, a calendar alarm and a warning")
    add_rotation(p)
    add_alarm(p)
    add_lsr_definition(p)
    o = p.add_argument_group("output")
    o.add_argument("--format", choices=("table", "json"), default="table",
                   help="what to print: table (default) or json (the plan, unless --output)")
    o.add_argument("--output", "-o", help="write the plan (JSON) to this file ('-': standard "
                                          "output, instead of the table)")
    o.add_argument("--ics", help="also write the calendar (.ics) here ('-': standard output)")
    o.add_argument("--chart", help="also write the month chart here (.png or .svg) and the "
                                   "per-bin depth chart beside it (<name>-depth.<ext>)")
    o.add_argument("--force", action="store_true", help="replace existing output files")


def period_from(args, site, kept: dict | None = None) -> tuple[float, float, int, str]:
    """(start_mjd, end_mjd, days, label) from --month or --start/--days, --from-today, or
    the rest of a kept plan's period (``kept``: the plan --keep names)."""
    from ..timebase import check_supported, local_day_span, parse_day
    from_today = getattr(args, "from_today", False)
    if from_today and args.start:
        raise UserError("give --start or --from-today, not both")
    if kept is not None:
        from ..replan import period
        if args.month or args.days:
            raise UserError("--keep: the period is the kept plan's; leave out --month and --days")
        if not (from_today or args.start):
            raise UserError("--keep needs the first day to plan anew: --start DAY or --from-today")
        day = today_at(site) if from_today else parse_day(args.start, "--start")
        return period(kept, site, day, args.keep, "--from-today" if from_today else "--start")
    if args.month and (args.start or args.days):
        raise UserError("give --month, or --start with --days, not both")
    if from_today:
        today = today_at(site)
        if args.month:
            first = check_supported(parse_month(args.month), "--month")
            if not first <= today < _next_month(first):
                raise UserError(f"--from-today: today ({today.isoformat()}) is not in --month "
                                f"{args.month}")
            days = (_next_month(first) - today).days
        else:
            days = args.days or (_next_month(today) - today).days
        start_mjd, end_mjd = local_day_span(today, days, site.tz, "--from-today")
        return start_mjd, end_mjd, days, today.isoformat()
    if args.month:
        first = check_supported(parse_month(args.month), "--month")
        days = (_next_month(first) - first).days
    else:
        first = parse_day(args.start, "--start") if args.start else today_at(site)
        days = args.days or 30
    start_mjd, end_mjd = local_day_span(first, days, site.tz, "--month" if args.month else "--start/--days")
    return start_mjd, end_mjd, days, first.isoformat()


def parse_month(text: str) -> date:
    """The first day of a month given as YYYY-MM."""
    try:
        year, month = (int(x) for x in text.split("-"))
        return date(year, month, 1)
    except ValueError:
        raise UserError(f"--month: '{text}' is not a month of the form YYYY-MM") from None


def _next_month(day: date) -> date:
    return date(day.year + (day.month == 12), day.month % 12 + 1, 1)


def build_plan(args, site):
    """Everything from options to the plan document (shared with the demo)."""
    from ..monthsearch import best_plan, tradeoff
    problem = prepare(args, site)
    plan, report = best_plan(problem.sweep, problem.goal, problem.slots, problem.start_row,
                             args.repark_minutes, args.min_days_between_moves, problem.guard,
                             problem.max_moves, args.optimize)
    trade = (tradeoff(problem.sweep, problem.goal, problem.slots, problem.start_row,
                      args.repark_minutes, args.min_days_between_moves, problem.guard,
                      problem.moves_before) if args.tradeoff else None)
    return plan, plan_document(args, site, problem, plan, report, trade)


@dataclass(frozen=True)
class MonthProblem:
    """What the month options ask for, ready to plan (``prepare``)."""

    sweep: object  # coverage.SweepResult of the candidate settings, per passage
    goal: object  # month.Goal
    slots: list  # month.MoveSlot per local day
    start_row: int | None
    guard: object  # monthsafety.SunGuard
    max_moves: int | None  # left for this period (a re-plan's kept moves taken off)
    moves_before: int
    kept: dict | None
    first_day: date
    intervals: object  # operator windows as MJD intervals (or None)
    windows_text: list
    night: tuple  # (night_only, night_sun_alt_deg, night name)
    target_minutes: float


def prepare(args, site, done_minutes=None) -> MonthProblem:
    """The month problem of ``args`` at ``site``: period, candidate settings and their
    passages, goal, move slots, the dish's start setting and the Sun's rules.
    ``done_minutes`` (per bin) replaces the depth read from ``--log``."""
    import numpy as np
    from ..coverage import sweep
    from ..month import Goal, minutes_for_rms, move_slots
    from ..monthsafety import sun_guard
    from ..obslog import coverage_minutes, read_logs
    from ..park import DEFAULT_TARGET_MINUTES, candidate_pointings, parse_want
    from ..planfile import read_plan
    kept = read_plan(args.keep) if getattr(args, "keep", None) else None
    start_mjd, end_mjd, days, label = period_from(args, site, kept)
    first_day = date.fromisoformat(label)
    bw = site.rules.bin_width_deg
    want = parse_want(args.want, bw)
    if done_minutes is not None:
        done = np.asarray(done_minutes, dtype=float)
    else:
        done = coverage_minutes(read_logs(args.log), bw) if args.log else np.zeros(want.size)
    target = (minutes_for_rms(site, args.target_rms) if args.target_rms
              else (args.target_minutes or DEFAULT_TARGET_MINUTES))
    avail, intervals = load_windows(args.windows, site, start_mjd, end_mjd)
    # As written (our window syntax), so the plan can be read back by the charts.
    windows_text = avail.normalised() if avail else []  # machine-readable (charts re-read it)
    current = _start_setting(site, args, kept, first_day)
    max_moves = args.max_moves
    moves_before = 0
    if kept is not None:
        from ..replan import kept_moves
        moves_before = kept_moves(kept, first_day)
    if max_moves is not None:
        max_moves = max(0, max_moves - moves_before)
    pointings = candidate_pointings(site, args.step, extra=(current,) if current else ())
    if not pointings:
        raise UserError(f"{site.source}: no declination is reachable with this dish's limits")
    night_only, night_alt, night_kind = night_setting(args)
    result = sweep(site, pointings, start_mjd, end_mjd, args.b_max, night_only,
                   intervals if args.record_in_windows else None, args.lsr_def, per_occurrence=True,
                   night_sun_alt_deg=night_alt)
    if not any(r.bin_usable_s.sum() > 0 for r in result.rows):
        raise UserError("nothing to plan because no passage is usable in this period "
                        "(every one is too close to the Sun" + (", in daylight" if night_only else "")
                        + (" or outside the windows" if args.record_in_windows else "") + ")")
    slots = move_slots(start_mjd, days, site.tz, intervals)
    if kept is not None:  # moves stay --min-days-between-moves apart across the re-plan day
        from ..replan import move_slots_after_kept
        slots = move_slots_after_kept(slots, kept, first_day, args.min_days_between_moves)
    if not slots:
        raise UserError("nothing to plan because no availability window falls on any day")
    start_row = _start_row(current, result)
    goal = Goal(want=want, target_minutes=target, done_minutes=done)
    guard = sun_guard(result, enforce=not args.allow_sun_hazard)
    if max_moves is not None and start_row is None and max_moves < 1:
        raise UserError(f"--max-moves {args.max_moves}: the dish's current setting is unknown, so "
                        "setting it is a move; give --start-dec or the site's [pointing], or "
                        "allow a move" + (" (the kept plan's moves count too)" if kept else ""))
    return MonthProblem(result, goal, slots, start_row, guard, max_moves, moves_before, kept,
                        first_day, intervals, windows_text, (night_only, night_alt, night_kind),
                        target)


def plan_document(args, site, problem: MonthProblem, plan, report, trade=None) -> dict:
    """The ``hiplan.plan/1`` document of a planned month (``prepare``'s problem)."""
    from ..galaxy import model_from_name
    from ..hidisc import DiscModel
    from ..planexpect import add_drift_calibrations, add_drift_expectations
    from ..planfile import drift_plan_document
    night_only, night_alt, night_kind = problem.night
    result = problem.sweep
    settings = {
        "b_max_deg": result.b_max_deg, "bin_width_deg": site.rules.bin_width_deg,
        "want": _want_ranges(args.want), "target_minutes": round(problem.target_minutes, 3),
        "target_rms_k": args.target_rms, "night_only": night_only,
        "night": night_kind if night_only else None,
        "record_in_windows": args.record_in_windows, "windows": problem.windows_text,
        "max_reparks_per_day": 1, "min_days_between_moves": args.min_days_between_moves,
        "repark_minutes": args.repark_minutes, "sun_min_sep_deg": site.rules.sun_min_sep_deg,
        "sun_hazard_deg": site.rules.sun_hazard_deg, "allow_sun_hazard": args.allow_sun_hazard,
        "lsr_definition": args.lsr_def, "rotation_model": args.rotation,
        "alarm_minutes": args.alarm, "log": list(args.log or []),
        "max_moves": args.max_moves, "optimize_seconds": args.optimize,
    }
    kept = problem.kept
    if kept is not None:
        settings["keep"] = args.keep
    doc = drift_plan_document(plan, settings, model_from_name(args.rotation), args.record_in_windows)
    # What the receiver should show: calibration passes as tasks, the expected spectra.
    intervals = problem.intervals if args.record_in_windows else None
    add_drift_calibrations(doc, plan, site, intervals)
    add_drift_expectations(doc, site, DiscModel(rotation=model_from_name(args.rotation)))
    doc["summary"]["upper_bound"] = report.upper_bound
    doc["summary"]["optimizer"] = report.record()
    if trade is not None:
        doc["summary"]["tradeoff"] = trade
    if kept is not None:
        from ..replan import merge
        doc = merge(kept, doc, problem.first_day, args.keep)
    return doc


def _want_ranges(text):
    if not text:
        return [[0, 360]]
    out = []
    for part in text.split(","):
        lo, hi = part.split("-")
        out.append([float(lo), float(hi)])
    return out


def _start_setting(site, args, kept=None, first_day=None):
    """Where the dish is parked when the period starts: --start-dec, else where a kept plan
    left it, else the site's [pointing]."""
    from ..pointing import reachability_problem
    current = None
    if kept is not None and args.start_dec is None:
        from ..replan import kept_setting
        current = kept_setting(kept, site, first_day)
    if current is None:
        current = current_setting(site, args.start_dec)
    if current is None:
        return None
    problem = reachability_problem(site, current)
    if problem is not None:
        what = "--start-dec" if args.start_dec is not None else f"{site.source}: [pointing]"
        raise UserError(f"{what}: the dish cannot be parked there ({problem})")
    return current


def _start_row(current, result):
    """Sweep row of the dish's current setting, or None."""
    if current is None:
        return None
    for r, row in enumerate(result.rows):
        p = row.pointing
        if abs(p.dec_deg - current.dec_deg) < 1e-6 and abs(p.ha_deg - current.ha_deg) < 1e-6:
            return r
    return None


def _chart_paths(chart: str):
    from pathlib import Path
    path = Path(chart)
    if is_stdout(chart):
        raise UserError("--chart: give a file name, not '-': the month chart and the depth chart "
                        "are two files")
    if path.suffix.lower() not in (".png", ".svg"):
        raise UserError(f"--chart: '{chart}' must end in .png or .svg")
    return [path, path.with_name(f"{path.stem}-depth{path.suffix}")]


def run(args, console) -> int:
    from pathlib import Path

    from ..report import to_json
    from ..render import month_renderable
    from ..site import load_site
    site = load_site(args.site)
    charts = _chart_paths(args.chart) if args.chart else []
    outputs = [p for p in (args.output, args.ics) if p] + [str(c) for c in charts]
    if len(set(outputs)) != len(outputs):
        raise UserError("--output, --ics and --chart must be different files")
    if args.format == "json" and not args.output and is_stdout(args.ics):
        raise UserError("--ics: '-' would put the calendar on standard output with the JSON plan "
                        "(--format json); give --ics a file name, or the plan -o FILE")
    check_outputs(args, *outputs, inputs=[("plan file", Path(args.keep))] if args.keep else ())
    _, doc = build_plan(args, site)
    # Every output is built in memory first and then written together (all or none), so a
    # failure in the calendar or a chart leaves no plan file behind.
    files = []
    if charts:
        for chart, path in (("month_chart", charts[0]), ("depth_chart", charts[1])):
            files.append((path, plan_chart_bytes(doc, chart, path.suffix[1:].lower())))
    if args.output:
        files.append((args.output, to_json(doc)))
    if args.ics:
        from ..ical import calendar_bytes, plan_calendar
        files.append((args.ics, calendar_bytes(plan_calendar(doc, args.alarm))))
    write_all(files, args.force)
    to_stdout = any(is_stdout(p) for p in outputs)  # '-': standard output holds that file only
    if args.format == "json" and not args.output:
        emit(args, console, to_json(doc))
    elif args.format == "table" and not to_stdout:
        console.print(month_renderable(doc))
    for path in outputs:
        if not is_stdout(path):
            note(console, f"wrote {path}")
    return 0
