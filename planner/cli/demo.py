"""``hiplan demo``: the whole job on the bundled example sites, files in one folder.

The scenario is invented: the Hollowmere club plans March 2027 (across the UK
clock change) to fill longitudes 30-90 and 120-200, with its winter observation
log and volunteer rota from ``examples/``; the Saltbush Ridge school schedules
its steerable dish. Every file is written by the same commands a user runs.
"""
from __future__ import annotations

import json
import time
from pathlib import Path


from ..errors import UserError
from .common import quiet_console

NAME = "demo"
HELP = "run the whole job on the bundled example sites"

DEMO_MONTH = "2027-03"
DEMO_START = "2027-03-01"
DEMO_WANT = "30-90,120-200"
# Someone must climb to the jack for each move: the club allows four a month.
DEMO_MAX_MOVES = "4"
# The recordings stage: the station follows the plan until DEMO_REPLAN_DAY, two-minute
# spectra, except two nights the receiver was off; then the rest of March is re-planned.
DEMO_REPLAN_DAY = "2027-03-20"
DEMO_GAP = ("2027-03-05", "2027-03-06")
# The network stage: the club's want plus the southern plane only the other two can reach.
DEMO_NETWORK_WANT = "30-90,120-200,250-340"
NETWORK_FILES = ("network.json", "network.png") + tuple(
    f"{slug}{ext}" for slug in ("hollowmere-amateur-radio-astronomy-club",
                                "saltbush-ridge-secondary-school", "lantern-hill-science-club")
    for ext in (".json", ".ics", "-brief.html"))
DEMO_EXPOSURE_S = 120.0


def add_arguments(p) -> None:
    p.add_argument("--output-dir", type=Path, default=Path("demo-output"),
                   help="folder for the demo files (default ./demo-output)")
    p.add_argument("--force", action="store_true", help="replace existing demo files")


def _examples_dir() -> Path | None:
    here = Path(__file__).resolve().parents[2] / "examples"
    return here if here.is_dir() else None


def steps(out: Path) -> list[tuple[str, list, list[Path]]]:
    """(what, hiplan arguments, files written) for each stage of the demo; a stage of a few
    steps lists them (argument lists, or a callable taking --force)."""
    ex = _examples_dir()
    goals = ["--want", DEMO_WANT]
    if ex is not None:
        goals += ["--log", str(ex / "observation-log.csv")]
    rota = ["--windows", str(ex / "windows.txt")] if ex is not None else []
    club, school = ["--site", "hollowmere"], ["--site", "saltbush-ridge"]
    plan = out / "plan-hollowmere.json"
    stages = [
        ("declination advice", ["park", *club, "--start", DEMO_START, "--days", "31", *goals,
                                "-o", str(out / "park-hollowmere.txt"), "--plot", str(out / "atlas-hollowmere.png")],
         [out / "park-hollowmere.txt", out / "atlas-hollowmere.png", out / "atlas-hollowmere-sky.png"]),
        ("declination advice (JSON)", ["park", *club, "--start", DEMO_START, "--days", "31", *goals,
                                       "--format", "json", "-o", str(out / "park-hollowmere.json")],
         [out / "park-hollowmere.json"]),
        ("month plan, calendar and charts",
         ["month", *club, "--month", DEMO_MONTH, *goals, *rota, "--max-moves", DEMO_MAX_MOVES,
          "--output", str(plan),
          "--ics", str(out / "plan-hollowmere.ics"), "--chart", str(out / "month-hollowmere.png")],
         [plan, out / "plan-hollowmere.ics", out / "month-hollowmere.png", out / "month-hollowmere-depth.png"]),
        ("operator brief (HTML)", ["brief", str(plan), "-o", str(out / "brief-hollowmere.html")],
         [out / "brief-hollowmere.html"]),
        ("operator brief (Markdown)", ["brief", str(plan), "-o", str(out / "brief-hollowmere.md")],
         [out / "brief-hollowmere.md", out / "brief-hollowmere-month.png", out / "brief-hollowmere-depth.png"]),
        ("receiver tuning", ["tune", *club, "--start", DEMO_START, "--days", "31", "--target-rms", "0.05",
                             "-o", str(out / "tune-hollowmere.txt")], [out / "tune-hollowmere.txt"]),
        ("plane crossings", ["crossings", *club, "--start", DEMO_START, "--days", "7", "--format", "csv",
                             "-o", str(out / "crossings-hollowmere.csv")], [out / "crossings-hollowmere.csv"]),
        ("survey schedule", ["survey", *school, "--grid", "l=240..340/10,b=-4..4/4", "--start", DEMO_START,
                             "--days", "3", "--minutes", "15", "--night-only", "--calibrate", "--format", "json",
                             "-o", str(out / "survey-saltbush-ridge.json")],
         [out / "survey-saltbush-ridge.json"]),
        ("survey calendar", ["calendar", str(out / "survey-saltbush-ridge.json"),
                             "-o", str(out / "survey-saltbush-ridge.ics")], [out / "survey-saltbush-ridge.ics"]),
        ("survey brief", ["brief", str(out / "survey-saltbush-ridge.json"),
                          "-o", str(out / "brief-saltbush-ridge.html")], [out / "brief-saltbush-ridge.html"]),
        ("survey rehearsal on the rotator (dry run, nothing sent)",
         ["drive", str(out / "survey-saltbush-ridge.json"), "--dry-run",
          "--clock", "simulated:2027-02-28T13:00:00Z", "--journal", str(out / "drive-saltbush-ridge.jsonl")],
         [out / "drive-saltbush-ridge.jsonl"]),
        ("LSR corrections", ["lsr", *school, "--start", DEMO_START, "--days", "1", "--step", "30",
                             "--format", "csv", "-o", str(out / "lsr-saltbush-ridge.csv")],
         [out / "lsr-saltbush-ridge.csv"]),
        ("expected spectrum (calibration region S7)",
         ["spectrum", *club, "--l", "132", "--b", "-1", "--time", "2027-03-02T03:37:00Z",
          "-o", str(out / "spectrum-hollowmere.txt"), "--plot", str(out / "spectrum-hollowmere.png")],
         [out / "spectrum-hollowmere.txt", out / "spectrum-hollowmere.png"]),
        ("three stations planned together (network)",
         ["network", "--station", f"hollowmere,max-moves={DEMO_MAX_MOVES}" + (
             f",log={ex / 'observation-log.csv'},windows={ex / 'windows.txt'}" if ex is not None else ""),
          "--station", f"saltbush-ridge,max-moves={DEMO_MAX_MOVES}",
          "--station", f"lantern-hill,max-moves={DEMO_MAX_MOVES}",
          "--start", DEMO_START, "--days", "14", "--want", DEMO_NETWORK_WANT,
          "--output-dir", str(out / "network")],
         [out / "network" / name for name in NETWORK_FILES]),
        ("recordings tallied, rest of the month re-planned",
         [lambda force: _recordings(plan, out / "recordings-hollowmere.csv", force),
          ["tally", str(out / "recordings-hollowmere.csv"), *club, "--plan", str(plan),
           "--format", "json", "-o", str(out / "tally-hollowmere.json"),
           "--log-out", str(out / "tally-hollowmere-log.csv")],
          ["month", *club, "--keep", str(plan), "--start", DEMO_REPLAN_DAY, *goals,
           "--log", str(out / "tally-hollowmere-log.csv"), *rota, "--max-moves", DEMO_MAX_MOVES,
           "--output", str(out / "replan-hollowmere.json")],
          ["brief", str(out / "replan-hollowmere.json"), "--tally", str(out / "tally-hollowmere.json"),
           "--no-charts", "-o", str(out / "brief-hollowmere-replan.md")]],
         [out / "recordings-hollowmere.csv", out / "tally-hollowmere.json", out / "tally-hollowmere-log.csv",
          out / "replan-hollowmere.json", out / "brief-hollowmere-replan.md"]),
    ]
    return stages


def _recordings(plan: Path, path: Path, force: bool) -> None:
    """Synthetic recordings of the plan up to DEMO_REPLAN_DAY, the DEMO_GAP nights left out."""
    from datetime import date
    from zoneinfo import ZoneInfo

    from ..outputs import write_atomic
    from ..planfile import read_plan
    from ..recordings import planned_spectra, recordings_csv
    from ..timebase import local_midnight_mjd
    doc = read_plan(plan)
    times = planned_spectra(doc, DEMO_EXPOSURE_S, DEMO_GAP)
    until = local_midnight_mjd(date.fromisoformat(DEMO_REPLAN_DAY), ZoneInfo(doc["site"]["timezone"]))
    times = times[times + DEMO_EXPOSURE_S / 86400.0 <= until]
    write_atomic(path, recordings_csv(times, DEMO_EXPOSURE_S), force)


def run(args, console) -> int:
    """Run each stage on the example sites and write the results under --output-dir."""
    from rich.console import Console
    from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

    from . import COMMANDS, build_parser  # the package imports this module first

    out = args.output_dir
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UserError(f"--output-dir {out}: cannot create folder ({exc.strerror})") from None
    stages = steps(out)
    if not args.force:
        existing = [p for _, _, files in stages for p in files if p.exists()]
        if existing:
            raise UserError(f"{existing[0]}: already exists (use --force to replace the demo files)")
    parser = build_parser()
    written = []
    with Progress(SpinnerColumn(), TextColumn("{task.description}"), BarColumn(), TimeElapsedColumn(),
                  console=Console(stderr=True), transient=True) as progress:
        task = progress.add_task("demo", total=len(stages))
        for what, argv, files in stages:  # a handful of stages
            progress.update(task, description=what)
            started = time.perf_counter()
            for step in (argv if not isinstance(argv[0], str) else [argv]):  # a stage: one or a few
                if callable(step):
                    step(args.force)
                    continue
                sub_args = parser.parse_args(step + (["--force"] if args.force else []))
                COMMANDS[sub_args.command](sub_args, quiet_console())
            written.append((what, files, time.perf_counter() - started))
            progress.advance(task)
    console.print(f"[bold]hiplan demo[/bold]: invented scenario, Hollowmere club, {DEMO_MONTH}, "
                  f"wanted longitudes {DEMO_WANT}. Files in {out}/:")
    for what, files, seconds in written:
        console.print(f"  {what} ({seconds:.1f} s)")
        for path in files:
            console.print(f"    {path}")
    from ..planfile import read_plan
    summary = read_plan(out / "plan-hollowmere.json")["summary"]
    console.print(f"Plan: {summary['done_before']} → {summary['done_after']} of {summary['wanted_bins']} "
                  f"wanted 1° bins at {summary['target_minutes']:g} min depth, {summary['moves']} re-parks.")
    _tally_note(console, out)
    net = json.loads((out / "network" / "network.json").read_text(encoding="utf-8"))
    console.print(f"Network (three invented stations, 14 days, l {DEMO_NETWORK_WANT}): "
                  f"{net['done_after']} wanted bins at target planned together against "
                  f"{net['done_alone']} with each station alone (bound {net['upper_bound']}, "
                  f"of {net['wanted_bins']}); see {out / 'network' / 'network.png'}.")
    console.print(f"Open {out / 'brief-hollowmere.html'} in a browser, or import "
                  f"{out / 'plan-hollowmere.ics'} into a calendar.")
    return 0


def _tally_note(console, out: Path) -> None:
    """The recordings stage in figures: the plan against the tally, and the re-plan."""

    from ..planfile import read_plan
    doc = json.loads((out / "tally-hollowmere.json").read_text(encoding="utf-8"))
    ag, at = doc["agreement"], doc["at_target"]
    replan = read_plan(out / "replan-hollowmere.json")["summary"]
    target = at["target_minutes"]
    promised = {str(b["l_bin"]) for b in doc["per_bin"] if b["planned_min"] >= target}
    short = (promised - {str(b) for b in at["bins"]}) & set(replan["depth_after_min"])
    filled = {b for b in short if replan["depth_after_min"][b] >= target}
    console.print(f"Recordings (synthetic, {DEMO_EXPOSURE_S:g} s spectra, the nights of "
                  f"{' and '.join(DEMO_GAP)} left out): {doc['spectra']['read']} spectra, "
                  f"{ag['recorded_min']:.0f} of {ag['planned_min']:.0f} planned minutes recorded, "
                  f"{ag['missed_min']:.0f} min missed on {', '.join(ag['days_with_missed'])}; on the "
                  f"{ag['days_complete']} days recorded in full, recorded and planned minutes agree "
                  f"within {ag['max_day_difference_min']:.1f} min. Bins at target: {at['now']} "
                  f"(the plan foresaw {at['planned_so_far']} by {doc['plan']['through']}).")
    console.print(f"Re-plan from {DEMO_REPLAN_DAY}: {replan['done_before']} → {replan['done_after']} "
                  f"wanted bins at target, {replan['moves']} re-park{'s' if replan['moves'] != 1 else ''}; "
                  f"it brings {len(filled)} of the {len(short)} bins the gap left short to target.")
