"""``hiplan network``: month plans for several stations that share one survey of the plane."""
from __future__ import annotations

from pathlib import Path

from ..errors import UserError
from .common import add_alarm, add_log, add_night, check_outputs, note, number

NAME = "network"
HELP = "plan a month for several stations together: the most wanted bins filled between them"
NETWORK_SCHEMA = "hiplan.network/1"


def add_arguments(p) -> None:
    s = p.add_argument_group("stations (give --station several times, or --network)")
    s.add_argument("--station", action="append", metavar="SPEC",
                   help="SITE[,log=FILE][,windows=FILE][,max-moves=N][,start-dec=DEG]: a bundled "
                        "site or a site file, with its own logs, operator windows, move cap and "
                        "the setting its dish is parked at now")
    s.add_argument("--network", metavar="FILE.toml",
                   help="a network file: one [[station]] table per station (site, log, windows, "
                        "max_moves, start_dec); see docs/network.md")
    g = p.add_argument_group("period and goal (the same for every station, in its own local days)")
    g.add_argument("--month", help="calendar month YYYY-MM")
    g.add_argument("--start", help="first local day YYYY-MM-DD (with --days)")
    g.add_argument("--days", type=number(int, "--days", 1, 92), help="number of days (default 30)")
    p.add_argument("--want", help="wanted longitude ranges, e.g. 30-90,250-330 (default all)")
    p.add_argument("--target-minutes", type=number(float, "--target-minutes", 0, 1e5, lo_open=True),
                   help="integration wanted per bin from all stations together (default 60 min)")
    add_log(p, "observation log shared by the network (each station's own logs count too)")
    add_night(p, "record only")
    p.add_argument("--optimize", type=number(float, "--optimize", 0, 3600), metavar="SECONDS",
                   help="also run each station's exact integer program (HiGHS) once, the others "
                        "fixed, for about SECONDS in all")
    add_alarm(p)
    o = p.add_argument_group("output")
    o.add_argument("--output-dir", "-o", type=Path, required=True, metavar="DIR",
                   help="folder for the network summary (network.json), the combined chart "
                        "(network.png) and each station's plan, calendar and brief")
    o.add_argument("--charts", action="store_true",
                   help="draw each station's month, depth and spectrum charts into its brief "
                        "(slower; without it the briefs refer to network.png, and 'hiplan brief "
                        "PLAN.json' draws them for one station)")
    o.add_argument("--format", choices=("table", "json"), default="table",
                   help="what to print: table (default) or json (the network summary)")
    o.add_argument("--force", action="store_true", help="replace existing output files")


def _stations(args):
    from ..networkfile import MAX_STATIONS, parse_station_spec, read_network_file
    stations = [parse_station_spec(text) for text in args.station or ()]
    if args.network:
        stations += read_network_file(args.network)
    if len(stations) < 2:
        raise UserError("a network needs at least two stations: give --station twice or more, "
                        "or --network FILE")
    if len(stations) > MAX_STATIONS:
        raise UserError(f"{len(stations)} stations: at most {MAX_STATIONS} in one network")
    return stations


def _slug(name: str) -> str:
    import re
    return re.sub(r"[^a-z0-9]+", "-", name.lower()).strip("-")[:40] or "station"


def _month_args(args, station):
    """The ``month`` options of one station (its parser's defaults for the rest)."""
    import argparse

    from . import month as month_cli
    argv = ["--site", station.site]
    if args.month:
        argv += ["--month", args.month]
    if args.start:
        argv += ["--start", args.start]
    if args.days:
        argv += ["--days", str(args.days)]
    if args.want:
        argv += ["--want", args.want]
    if args.target_minutes:
        argv += ["--target-minutes", repr(args.target_minutes)]
    if station.windows:
        argv += ["--windows", station.windows]
    if station.max_moves is not None:
        argv += ["--max-moves", str(station.max_moves)]
    if station.start_dec is not None:
        argv += ["--start-dec", repr(station.start_dec)]
    if args.night_only:
        argv += ["--night-only"]
    if args.night:
        argv += ["--night", args.night]
    argv += ["--alarm", str(args.alarm)] if args.alarm is not None else []
    for log in [*station.logs]:
        argv += ["--log", log]
    parser = argparse.ArgumentParser(add_help=False)
    month_cli.add_arguments(parser)
    return parser.parse_args(argv)


def _check_outputs(args, stations, names):
    out = args.output_dir
    if out.exists() and not out.is_dir():
        raise UserError(f"--output-dir {out}: exists and is not a folder")
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UserError(f"--output-dir {out}: cannot create the folder ({exc.strerror})") from None
    inputs = []
    for st in stations:
        inputs += [("observation log", Path(x)) for x in st.logs]
        if st.windows and Path(st.windows).is_file():
            inputs.append(("windows file", Path(st.windows)))
    for path in args.log or ():
        inputs.append(("observation log", Path(path)))
    if args.network:
        inputs.append(("network file", Path(args.network)))
    check_outputs(args, *(out / n for n in names), inputs=inputs)


def run(args, console) -> int:
    import numpy as np

    from ..ical import calendar_bytes, plan_calendar
    from ..month import Goal, plan_from_parkings, plan_month
    from ..monthmodel import build_model, parkings_of_rows, rows_of_plan, score_of
    from ..monthsearch import OptimizeReport, best_plan
    from ..network import (bins_at_target, contribution, coordinate, network_depth,
                           network_score, one_after_another, prefixes, upper_bound)
    from ..obslog import coverage_minutes, read_logs
    from ..outputs import write_all
    from ..report import to_json
    from ..site import load_site
    from . import month as month_cli
    if args.month and (args.start or args.days):
        raise UserError("give --month, or --start with --days, not both")
    if not args.month and not args.start:
        raise UserError("give the period: --month YYYY-MM, or --start DAY with --days")
    stations = _stations(args)
    sites = [load_site(st.site) for st in stations]
    seen = {}
    for st, site in zip(stations, sites):
        key = site.source or site.name
        if key in seen or site.name in seen.values():
            raise UserError(f"{st.where}: the same station twice ({site.name}); give each "
                            "station once, with all its logs")
        seen[key] = site.name
    widths = {site.rules.bin_width_deg for site in sites}
    if len(widths) > 1:
        raise UserError("the stations' site files use different bin widths "
                        f"({', '.join(f'{w:g}°' for w in sorted(widths))}): one network counts "
                        "minutes in one set of bins")
    slugs = [_slug(site.name) for site in sites]
    names = ["network.json", "network.png"] + [f"{s}{ext}" for s in slugs
                                               for ext in (".json", ".ics", "-brief.html")]
    _check_outputs(args, stations, names)

    # One depth for the network: the shared logs and every station's own.
    all_logs = [*(args.log or ())] + [x for st in stations for x in st.logs]
    bw = sites[0].rules.bin_width_deg
    done = coverage_minutes(read_logs(all_logs), bw) if all_logs else None
    station_args = [_month_args(args, st) for st in stations]
    problems = []
    for st, site, ns in zip(stations, sites, station_args):  # a few stations
        try:
            problem = month_cli.prepare(ns, site, done_minutes=done)
        except UserError as exc:
            raise UserError(f"{st.where}: {exc}") from None
        problems.append(problem)
    if done is None:
        done = problems[0].goal.done_minutes
    models = [build_model(p.sweep, p.goal, p.slots, p.start_row, ns.repark_minutes,
                          ns.min_days_between_moves, p.max_moves, p.guard)
              for p, ns in zip(problems, station_args)]
    for st, site, m in zip(stations, sites, models):
        reach = (m.hold + m.span).sum(axis=(0, 1))
        if not np.any(reach[m.want] > 0):
            raise UserError(f"{st.where}: {site.name} reaches no wanted bin in the period "
                            "(no usable passage of any setting crosses one); leave it out or "
                            "widen --want")

    # Baseline: each station alone. Second start: one after another, each counting those
    # before it. Then the joint search.
    alone_rows, alone_reports = [], []
    for p, m, ns in zip(problems, models, station_args):
        plan, report = best_plan(p.sweep, p.goal, p.slots, p.start_row, ns.repark_minutes,
                                 ns.min_days_between_moves, p.guard, p.max_moves, model=m)
        alone_rows.append(rows_of_plan(m, plan.parkings))
        alone_reports.append(report)

    def greedy(s, done_min):
        p, ns = problems[s], station_args[s]
        goal = Goal(want=p.goal.want, target_minutes=p.goal.target_minutes, done_minutes=done_min)
        plan = plan_month(p.sweep, goal, p.slots, p.start_row, ns.repark_minutes,
                          ns.min_days_between_moves, p.guard, p.max_moves)
        return rows_of_plan(models[s], plan.parkings)

    seq_rows = one_after_another(models, greedy)
    ps = prefixes(models)
    joint = coordinate(models, alone_rows, seq_rows, args.optimize, ps=ps)
    alone, after = network_score(models, alone_rows, ps), network_score(models, joint, ps)
    bound = upper_bound(models, after.bins)
    depth_alone = network_depth(models, alone_rows, ps)
    depth_after = network_depth(models, joint, ps)
    target = models[0].target
    done_bins = set(int(b) for b in bins_at_target(models[0], depth_after))

    summary_stations, per_station_min = [], []
    for k, (site, m, rows, slug, p) in enumerate(zip(sites, models, joint, slugs, ps)):
        minutes = contribution(m, rows, p)
        per_station_min.append(minutes)
        helped = sorted(b for b in done_bins if minutes[b] > 0)
        summary_stations.append({
            "name": site.name, "site": site.summary(), "plan_file": f"{slug}.json",
            "calendar_file": f"{slug}.ics", "brief_file": f"{slug}-brief.html",
            "done_bins_contributed": len(helped),
            "moves": score_of(m, m.done, rows).moves,
            "minutes": round(float(minutes[m.want].sum()), 1),
            "bins_contributed": [int(b) * bw for b in helped],
            "alone": {"moves": score_of(m, m.done, alone_rows[k]).moves,
                      "bins_alone": alone_reports[k].bins},
        })
    want_idx = np.flatnonzero(models[0].want)
    summary = {
        "schema": NETWORK_SCHEMA,
        "period": {"month": args.month, "start": args.start, "days": args.days},
        "want": args.want or "0-360", "target_minutes": target, "bin_width_deg": bw,
        "wanted_bins": int(want_idx.size),
        "done_before": int(np.count_nonzero(done[want_idx] >= target - 1e-9)),
        "done_alone": alone.bins, "done_after": after.bins, "upper_bound": bound,
        "moves_alone": alone.moves, "moves_after": after.moves,
        "stations": summary_stations,
        "bins": [{"l_bin": float(b * bw), "logged_min": round(float(done[b]), 2),
                  "alone_min": round(float(depth_alone[b]), 2),
                  "after_min": round(float(depth_after[b]), 2),
                  "by_station_min": [round(float(x[b]), 2) for x in per_station_min]}
                 for b in want_idx],
    }

    files = []
    from ..brief import brief_html
    from ..networkchart import network_chart
    from .brief import chart_pngs, with_expected
    from .common import figure_bytes
    files.append((args.output_dir / "network.png", figure_bytes(network_chart(summary), "png")))
    for k, (st, site, p, m, rows, ns, slug) in enumerate(zip(stations, sites, problems, models,
                                                             joint, station_args, slugs)):
        plan = plan_from_parkings(p.sweep, p.goal, parkings_of_rows(m, rows), p.guard,
                                  ns.repark_minutes)
        own = score_of(m, m.done + per_station_min[k], rows)  # this station's plan alone
        report = OptimizeReport(
            greedy_bins=alone_reports[k].greedy_bins, bins=own.bins, moves=own.moves,
            # the station's own bound: the same model as its plan alone
            upper_bound=max(alone_reports[k].upper_bound, own.bins),
            bound_source=alone_reports[k].bound_source,
            method=f"network: planned with {len(stations) - 1} other station"
                   f"{'s' if len(stations) > 2 else ''} (local search, each against the others)",
            seconds=0.0)
        doc = month_cli.plan_document(ns, site, p, plan, report)
        doc["network"] = _network_record(summary, k)
        files.append((args.output_dir / f"{slug}.json", to_json(doc)))
        files.append((args.output_dir / f"{slug}.ics",
                      calendar_bytes(plan_calendar(doc, args.alarm))))
        full = with_expected(doc)
        files.append((args.output_dir / f"{slug}-brief.html",
                      brief_html(full, chart_pngs(full) if args.charts else {})))
    files.insert(0, (args.output_dir / "network.json", to_json(summary)))
    write_all(files, args.force)
    if args.format == "json":
        console.file.write(to_json(summary))
    else:
        console.print(network_renderable(summary))
    note(console, f"wrote {len(files)} files in {args.output_dir}")
    return 0


def _network_record(summary: dict, k: int) -> dict:
    """What a station's plan says of the network: the totals and what each other station
    brings (for its brief)."""
    others = [{"name": s["name"], "bins_contributed": s["bins_contributed"],
               "minutes": s["minutes"], "moves": s["moves"]}
              for j, s in enumerate(summary["stations"]) if j != k]
    me = summary["stations"][k]
    return {"schema": NETWORK_SCHEMA, "station": me["name"], "stations": len(summary["stations"]),
            "this_station_bins": me["bins_contributed"], "others": others,
            "done_after": summary["done_after"], "done_alone": summary["done_alone"],
            "upper_bound": summary["upper_bound"], "wanted_bins": summary["wanted_bins"]}


def network_renderable(summary: dict):
    """The network summary for the terminal: totals, then a row per station."""
    from rich import box
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text
    head = Text()
    head.append(f"Network of {len(summary['stations'])} stations", style="bold")
    period = summary["period"]
    when = period["month"] or f"{period['start']}, {period['days'] or 30} days"
    head.append(f"  {when} (each station's local days), wanted l {summary['want']}, "
                f"target {summary['target_minutes']:g} min per {summary['bin_width_deg']:g}° bin\n")
    head.append(f"Wanted bins at target: {summary['done_after']} planned together, "
                f"{summary['done_alone']} with each station planning alone, of "
                f"{summary['wanted_bins']} ({summary['done_before']} already logged); no joint "
                f"plan reaches more than {summary['upper_bound']}.", style="bold")
    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False)
    for name, just in (("Station", "left"), ("Bins helped", "right"), ("Min on wanted", "right"),
                       ("Moves", "right"), ("Alone: bins", "right"), ("Alone: moves", "right"),
                       ("Plan file", "left")):
        table.add_column(name, justify=just)
    for s in summary["stations"]:
        table.add_row(s["name"], str(s["done_bins_contributed"]), f"{s['minutes']:.0f}",
                      str(s["moves"]), str(s["alone"]["bins_alone"]), str(s["alone"]["moves"]),
                      s["plan_file"])
    foot = Text("Bins helped: bins at target that get minutes from the station. Alone: what "
                "the station's own plan for the whole want would reach by itself.", style="dim")
    return Group(head, table, foot)
