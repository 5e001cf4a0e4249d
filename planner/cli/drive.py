"""``hiplan drive``: run a survey plan (or a drift plan's moves) on a dish through rotctld."""
from __future__ import annotations

import math
import shlex
import signal
from pathlib import Path

from ..errors import UserError
from .common import add_site, number

NAME = "drive"
HELP = "run a plan on a steerable dish through a rotator controller (rotctld), live or rehearsed"


def add_arguments(p) -> None:
    p.add_argument("plan", type=Path, metavar="PLAN.json",
                   help="plan file from 'hiplan survey' (hiplan.survey/1) or 'hiplan month' "
                        "(hiplan.plan/1, for a motorised elevation axis)")
    p.add_argument("--rotator", metavar="HOST:PORT",
                   help="the rotator controller (rotctld), e.g. 127.0.0.1:4533; required "
                        "unless --dry-run")
    add_site(p)
    p.add_argument("--record", metavar="COMMAND",
                   help="recording command run for each block, split into words (no shell), "
                        "with {name} {l_deg} {b_deg} {start_utc} {end_utc} {freq_mhz} {seconds}")
    p.add_argument("--journal", type=Path, metavar="FILE",
                   help="write every event as a JSON line to FILE (hiplan.journal/1)")
    p.add_argument("--force", action="store_true", help="replace an existing journal file")
    p.add_argument("--clock", metavar="CLOCK",
                   help="real (default) or simulated:ISO_TIME, a rehearsal starting then")
    p.add_argument("--speed", type=number(float, "--speed", 0, 1e6, lo_open=True),
                   help="with --clock simulated: plan time runs this many times faster while "
                        "waiting (the dish still moves in real time)")
    p.add_argument("--dry-run", action="store_true",
                   help="send nothing: print the commands that would be sent, without waiting "
                        "(the dish is taken to start at the park position)")
    p.add_argument("--arrival-timeout", type=number(float, "--arrival-timeout", 0, 3600,
                                                    lo_open=True), metavar="SECONDS",
                   help="give up on a move after this many seconds (default: 1.5 times the "
                        "move's time at the site's slew rates, plus 20 s)")
    p.epilog = ("A person must be able to stop the dish at any time, at the controller or its "
                "power switch: this command is not a safety system. It refuses to start if the "
                "first slew would pass the Sun. Ctrl-C stops the dish and parks it; a second "
                "Ctrl-C stops it where it is.")


def _site_for(doc: dict, site_arg: str | None):
    """The site file: --site, else the example site whose name is the plan's."""
    from ..site import available_sites, load_site, read_site_file
    if site_arg is not None:
        return load_site(site_arg)
    wanted = doc["site"].get("name")
    for path in available_sites().values():  # a handful of files
        try:
            site = read_site_file(path)
        except UserError:
            continue
        if site.name == wanted:
            return site
    raise UserError(f"--site: the plan is for {wanted!r}; give its site file with --site")


def _angles(event: dict, prefix: str) -> str:
    az, el = event.get(f"{prefix}az_deg"), event.get(f"{prefix}el_deg")
    return "" if az is None else f"az {az:8.2f}° el {el:6.2f}°"


def describe(event: dict) -> str:
    """One line for the terminal per journal event."""
    kind = event["event"]
    head = f"{event['time_utc'][:19]}Z  {kind:<12} {event.get('name') or '':<14} "
    if kind == "begin":
        return (f"{head}{event.get('plan')} on {event.get('rotator')} "
                f"({event.get('clock')} clock)")
    if kind == "end":
        return (f"{head}{event.get('status')}: {event.get('recorded')} recorded, "
                f"{event.get('failed')} failed, {event.get('skipped')} skipped"
                + (", parked" if event.get("parked") else ", NOT parked")
                + (f" ({event['reason']})" if event.get("reason") else ""))
    parts = []
    if event.get("az_deg") is not None:
        parts.append(f"to {_angles(event, '')}")
    if event.get("read_az_deg") is not None and kind in ("arrived", "track", "park", "slew"):
        parts.append(f"read {_angles(event, 'read_')}")
    if kind == "record_start" and event.get("command"):
        parts.append("runs " + shlex.join(event["command"]))
    if kind == "record_end":
        parts.append(f"{event.get('status')}"
                     + (f", exit {event['exit_status']}" if event.get("exit_status") is not None
                        else "")
                     + (f", files {', '.join(event['files'])}" if event.get("files") else ""))
    if event.get("via"):
        parts.append(f"({event['via']})")
    if event.get("reason"):
        parts.append(f"— {event['reason']}")
    return head + "  ".join(parts)


def run(args, console) -> int:
    from ..clocks import SimulatedClock, parse_clock
    from ..drive import DriveOptions, Executor
    from ..driveplan import park_position, plan_steps
    from ..journal import JOURNAL_SCHEMA, JournalWriter
    from ..planfile import read_plan
    from ..recordhook import parse_template
    from ..rotator import DryRunRotator, RotatorClient, parse_address
    from .common import check_outputs

    if args.rotator is None and not args.dry_run:
        raise UserError("--rotator HOST:PORT is required (or --dry-run to send nothing)")
    address = parse_address(args.rotator) if args.rotator is not None else None
    clock = parse_clock(args.clock, args.speed)
    template = parse_template(args.record) if args.record is not None else None
    check_outputs(args, args.journal)
    doc = read_plan(args.plan)
    site = _site_for(doc, args.site)
    steps = plan_steps(doc, site, str(args.plan))
    out = console.file

    def say(line: str) -> None:
        out.write(line + "\n")
        out.flush()

    if args.dry_run:
        # from the simulated start itself: the time spent reading the plan must not show in
        # the journal, so a rehearsal's journal is the same on every run
        clock = SimulatedClock(clock.start_mjd if clock.simulated else clock.now_mjd(), math.inf)
        rotator = DryRunRotator(*park_position(site), on_send=lambda line: say(f"  would send: "
                                                                                f"{line}"))
    else:
        rotator = RotatorClient(*address)
    journal = JournalWriter(args.journal, args.force) if args.journal is not None else None

    def emit(event: dict) -> None:
        if journal is not None:
            journal.write(event)
        say(describe(event))

    begin = {"schema": JOURNAL_SCHEMA, "plan": str(args.plan), "plan_kind": doc.get("kind"),
             "site": site.name, "clock": "simulated" if clock.simulated else "real",
             "speed": None if not clock.simulated or math.isinf(clock.speed) else clock.speed,
             "rotator": rotator.address, "dry_run": bool(args.dry_run),
             "record": list(template) if template else None,
             "tolerance_deg": site.dish.pointing_tolerance_deg}
    executor = Executor(site, steps, rotator, clock, emit, template,
                        DriveOptions(tolerance_deg=site.dish.pointing_tolerance_deg,
                                     arrival_timeout_s=args.arrival_timeout,
                                     dry_run=args.dry_run), begin=begin)

    def terminate(signum, frame):  # a service manager's stop: as Ctrl-C, stop and park
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, terminate)
    except ValueError:  # not the main thread (embedded use): no handler
        previous = None
    try:
        outcome = executor.run()
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)
        rotator.close()
        if journal is not None:
            journal.close()
    if outcome.status == "finished":
        return 0
    return 130 if outcome.status == "interrupted" else 1
