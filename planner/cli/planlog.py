"""``hiplan plan-log``: turn a plan into observation-log rows, to edit after observing."""
from __future__ import annotations


from ..errors import UserError
from ..obslog import QUALITIES
from ..outputs import is_stdout, write_atomic
from .common import check_outputs, note

NAME = "plan-log"
HELP = "write a plan's recordings as observation-log rows (CSV)"


def add_arguments(p) -> None:
    p.add_argument("plan", metavar="PLAN.json", help="plan file from 'hiplan month' or 'hiplan survey'")
    p.add_argument("--output", "-o", help="log file to write (default, or '-': print)")
    p.add_argument("--quality", default="good", choices=QUALITIES,
                   help="quality for every row: good, fair or bad (default good; mark failures "
                        "after observing)")
    p.add_argument("--force", action="store_true", help="replace an existing output file")


def run(args, console) -> int:
    from ..obslog import format_log
    from ..planfile import plan_log_rows, read_plan
    check_outputs(args, args.output)
    doc = read_plan(args.plan)
    rows = plan_log_rows(doc, args.quality)
    if not rows:
        raise UserError(f"{args.plan}: the plan records nothing, so there is no log to write")
    text = format_log(rows)
    if args.output:
        write_atomic(args.output, text, args.force)  # '-': standard output
        if not is_stdout(args.output):
            note(console, f"wrote {args.output}: {len(rows)} rows")
    else:
        console.file.write(text)
    return 0
