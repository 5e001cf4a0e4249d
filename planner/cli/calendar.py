"""``hiplan calendar``: a plan file as an iCalendar (.ics) file of volunteer tasks."""
from __future__ import annotations

from pathlib import Path


from ..errors import UserError
from ..outputs import is_stdout, write_atomic
from .common import add_alarm, check_outputs, note

NAME = "calendar"
HELP = "turn a plan file (hiplan month / survey JSON) into an iCalendar file"


def add_arguments(p) -> None:
    p.add_argument("plan", type=Path, metavar="PLAN.json",
                   help="drift plan (hiplan.plan/1) or survey plan (hiplan.survey/1)")
    p.add_argument("--output", "-o", type=Path, metavar="FILE.ics",
                   help="calendar file to write (default: the plan's path with .ics in place "
                        "of its suffix, e.g. plan.json -> plan.ics; '-': standard output)")
    add_alarm(p, default=None)
    p.add_argument("--force", action="store_true", help="replace an existing calendar file")


def output_path(args) -> Path:
    """The file to write: ``--output`` or the plan path with an .ics suffix."""
    out = args.output if args.output is not None else args.plan.with_suffix(".ics")
    if out.resolve() == args.plan.resolve():
        raise UserError(f"{out}: the calendar would replace the plan file itself; give -o")
    return out


def run(args, console) -> int:
    from ..ical import calendar_bytes, plan_calendar, plan_events, read_plan
    out = output_path(args)
    check_outputs(args, out)  # before any work: refuse early, write nothing
    doc = read_plan(args.plan)
    events = plan_events(doc, str(args.plan))
    if not events:
        raise UserError(f"{args.plan}: the plan has no recordings, re-park tasks or survey "
                        "blocks, so there is nothing to put in a calendar")
    cal = plan_calendar(doc, alarm_minutes=args.alarm)
    write_atomic(out, calendar_bytes(cal), args.force)
    counts = {}
    for event in events:
        counts[event.kind] = counts.get(event.kind, 0) + 1
    labels = {"recording": "recordings", "repark": "re-park tasks", "target": "target blocks",
              "reference": "reference blocks"}
    detail = ", ".join(f"{counts[k]} {label}" for k, label in labels.items() if k in counts)
    if is_stdout(out):  # the calendar is on standard output: the count goes to stderr
        note(console, f"wrote the calendar to standard output: {len(events)} events ({detail})")
    else:
        console.print(f"wrote {out}: {len(events)} events ({detail})", markup=False,
                      highlight=False)
    return 0
