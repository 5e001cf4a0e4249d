"""``hiplan demo``: the whole job on the bundled example sites, files in one folder."""
from __future__ import annotations

from pathlib import Path

from rich.console import Console

from ..errors import UserError
from .common import quiet_console

NAME = "demo"
HELP = "run the whole job on the bundled example sites"


def add_arguments(p) -> None:
    p.add_argument("--output-dir", type=Path, default=Path("demo-output"),
                   help="folder for the demo files (default ./demo-output)")
    p.add_argument("--force", action="store_true", help="replace existing demo files")


DEMO_START = "2027-03-01"  # a fixed month, across the UK clock change on 28 March
DEMO_DAYS = 31


def run(args, console: Console) -> int:
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
    from . import COMMANDS, build_parser  # the package imports this module first

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
            COMMANDS[sub_args.command](sub_args, quiet_console())
            written.append(target)
            progress.advance(task)
    console.print(f"[bold]Demo written to {out}/[/bold] (period from {DEMO_START}, {DEMO_DAYS} days):")
    for path in written:
        console.print(f"  {path}")
    return 0
