"""``hiplan demo``: the whole job on the bundled example sites, files in one folder.

The scenario is invented: the Hollowmere club plans March 2027 (across the UK
clock change) to fill longitudes 30-90 and 120-200, with its winter observation
log and volunteer rota from ``examples/``; the Saltbush Ridge school schedules
its steerable dish. Every file is written by the same commands a user runs.
"""
from __future__ import annotations

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


def add_arguments(p) -> None:
    p.add_argument("--output-dir", type=Path, default=Path("demo-output"),
                   help="folder for the demo files (default ./demo-output)")
    p.add_argument("--force", action="store_true", help="replace existing demo files")


def _examples_dir() -> Path | None:
    here = Path(__file__).resolve().parents[2] / "examples"
    return here if here.is_dir() else None


def steps(out: Path) -> list[tuple[str, list[str], list[Path]]]:
    """(what, hiplan arguments, files written) for each stage of the demo."""
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
                             "--days", "3", "--minutes", "15", "--night-only", "--format", "json",
                             "-o", str(out / "survey-saltbush-ridge.json")],
         [out / "survey-saltbush-ridge.json"]),
        ("survey calendar", ["calendar", str(out / "survey-saltbush-ridge.json"),
                             "-o", str(out / "survey-saltbush-ridge.ics")], [out / "survey-saltbush-ridge.ics"]),
        ("survey brief", ["brief", str(out / "survey-saltbush-ridge.json"),
                          "-o", str(out / "brief-saltbush-ridge.html")], [out / "brief-saltbush-ridge.html"]),
        ("LSR corrections", ["lsr", *school, "--start", DEMO_START, "--days", "1", "--step", "30",
                             "--format", "csv", "-o", str(out / "lsr-saltbush-ridge.csv")],
         [out / "lsr-saltbush-ridge.csv"]),
    ]
    return stages


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
            sub_args = parser.parse_args(argv + (["--force"] if args.force else []))
            started = time.perf_counter()
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
    console.print(f"Open {out / 'brief-hollowmere.html'} in a browser, or import "
                  f"{out / 'plan-hollowmere.ics'} into a calendar.")
    return 0
