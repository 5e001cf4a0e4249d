"""``hiplan survey``: schedule pointed integrations on a grid or list of targets (steerable dish)."""
from __future__ import annotations

from collections import defaultdict
from datetime import datetime


from ..errors import UserError
from ..targets import GRID_EXAMPLE
from .common import (add_alarm, add_log, add_lsr_definition, add_night, add_output, add_period,
                     add_rotation, add_site, check_outputs, emit, night_setting, note, number,
                     period_span)

NAME = "survey"
HELP = "schedule pointed integrations of a target grid or list (steerable dish)"


# As ``planner.calsurvey.DEFAULT_MINUTES`` (kept here so building the parser loads no
# computation; tests/test_calsurvey.py checks they agree).
CALIBRATE_DEFAULT_MIN = 5.0


def add_arguments(p) -> None:
    add_site(p)
    add_period(p, default_days=7)
    g = p.add_argument_group("targets (give --grid, --targets or both)")
    g.add_argument("--grid", help=f"galactic grid, inclusive ranges with steps, e.g. {GRID_EXAMPLE} "
                                  "(l may wrap: l=300..40/10)")
    g.add_argument("--targets", metavar="FILE",
                   help="target list, .csv or .toml (name, l/b or ra/dec, minutes, priority, repeats)")
    g.add_argument("--minutes", type=number(float, "--minutes", 0, 1440, lo_open=True), default=10.0,
                   help="integration per target in minutes when not given (default 10)")
    g.add_argument("--priority", type=number(float, "--priority", 0, 1e9, lo_open=True), default=1.0,
                   help="priority when not given; larger is more important (default 1)")
    g.add_argument("--repeats", type=number(int, "--repeats", 1, 1000), default=1,
                   help="integrations wanted per target when not given (default 1)")
    g.add_argument("--reference", help="reference (off) positions for position switching: 'high-b' "
                                       "(target l at b=+/-30..60) or a fixed 'l=..,b=..'")
    g.add_argument("--reference-minutes", type=number(float, "--reference-minutes", 0, 1440,
                                                       lo_open=True),
                   help="minutes on each reference (default: the target's minutes)")
    c = p.add_argument_group("constraints (defaults from the site file)")
    c.add_argument("--windows", help="operator availability: windows text ('Mon-Fri 19:00-23:30') "
                                     "or a file of them; slews and blocks stay inside")
    add_night(c, "observe only")
    add_log(c, "observation log: targets whose longitude bin already has their minutes "
               "count as done")
    c.add_argument("--sun-sep", type=number(float, "--sun-sep", 0, 180),
                   help="least distance from the Sun (deg)")
    c.add_argument("--moon-sep", type=number(float, "--moon-sep", 0, 180),
                   help="least distance from the Moon (deg; 0 = no Moon rule)")
    g.add_argument("--calibrate", nargs="?", const=CALIBRATE_DEFAULT_MIN, metavar="MINUTES",
                   type=number(float, "--calibrate", 1, 120),
                   help="add a calibration on an IAU standard HI region (S7, S8, S9: visible, "
                        "Sun-safe, nearest) at the start and end of each session, MINUTES long "
                        f"(default {CALIBRATE_DEFAULT_MIN:g}: the regions are bright); at a "
                        "session's edge it may take the time of up to two integrations")
    add_rotation(p)
    add_lsr_definition(p)
    add_alarm(p)
    add_output(p)


def run(args, console) -> int:
    from ..galaxy import model_from_name
    from ..obslog import read_logs
    from ..report import period_summary, to_csv, to_json
    from ..site import load_site
    from ..slew import slew_model
    from ..survey import (BLOCK_FIELDS, SurveySettings, plan_survey, repeats_done_from_log,
                          survey_document)
    from ..targets import GRID_EXAMPLE, check_unique, parse_grid, parse_reference, read_targets
    from ..windows import ALWAYS, read_windows
    site = load_site(args.site)
    slew_model(site)  # a clear error for transit or fixed mounts before any work
    check_outputs(args, args.output)
    targets = []
    if args.grid is not None:
        targets += parse_grid(args.grid, args.minutes, args.priority, args.repeats)
    if args.targets is not None:
        targets += read_targets(args.targets, args.minutes, args.priority, args.repeats)
    if not targets:
        raise UserError(f"no targets: give --grid (e.g. --grid {GRID_EXAMPLE}) or --targets FILE")
    check_unique(targets)
    reference = parse_reference(args.reference) if args.reference else None
    if args.reference_minutes is not None and reference is None:
        raise UserError("--reference-minutes needs --reference")
    availability = read_windows(args.windows) if args.windows else ALWAYS
    model = model_from_name(args.rotation)
    start_mjd, end_mjd = period_span(args, site)
    done = None
    if args.log is not None:
        done = repeats_done_from_log(targets, read_logs(args.log), site.rules.bin_width_deg)
    night_only, night_alt, night_kind = night_setting(args)
    settings = SurveySettings(
        start_mjd=start_mjd, end_mjd=end_mjd,
        sun_min_sep_deg=site.rules.sun_min_sep_deg if args.sun_sep is None else args.sun_sep,
        moon_min_sep_deg=site.rules.moon_min_sep_deg if args.moon_sep is None else args.moon_sep,
        night_only=night_only, night_sun_alt_deg=night_alt, night=night_kind,
        sun_hazard_deg=site.rules.sun_hazard_deg, availability=availability, reference=reference,
        reference_minutes=args.reference_minutes, lsr_definition=args.lsr_def, rotation=model,
        rotation_name=args.rotation.strip().lower(), alarm_minutes=args.alarm,
        calibrate_minutes=args.calibrate)
    plan = plan_survey(site, targets, settings, done)
    for line in plan.calibration_missing:
        note(console, f"--calibrate: {line}")
    doc = survey_document(plan, period_summary(start_mjd, end_mjd, site.tz))
    if args.format == "json":
        emit(args, console, to_json(doc))
    elif args.format == "csv":
        emit(args, console, to_csv(block_rows(doc), BLOCK_FIELDS))
    else:
        emit(args, console, None, survey_renderable(doc))
    return 0


def block_rows(doc: dict) -> list[dict]:
    """Blocks flattened for CSV: the tuning object becomes its centre frequency."""
    rows = []
    for b in doc["blocks"]:
        row = {k: v for k, v in b.items() if k != "tuning"}
        row["tuning_centre_mhz"] = None if b["tuning"] is None else b["tuning"]["centre_mhz"]
        rows.append(row)
    return rows


def _local(iso_local: str) -> str:
    return iso_local[11:16]


def _shown(block: dict) -> tuple[str, str]:
    """Local HH:MM start and end of a block, rounded as every output rounds them (outward)."""
    from ..planfile import shown_span
    start, end = shown_span(*(datetime.fromisoformat(block[k]) for k in ("start_local", "end_local")))
    return f"{start:%H:%M}", f"{end:%H:%M}"


def survey_renderable(doc: dict):
    """Header, one table row per block in local time, totals and the unscheduled targets."""
    from ..windows import describe_window_texts
    from rich import box
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text
    site, period, settings, summary = doc["site"], doc["period"], doc["settings"], doc["summary"]
    head = Text()
    head.append(site["name"], style="bold")
    head.append(f"  ({site['latitude_deg']:+.3f}°, {site['longitude_deg']:+.3f}°, "
                f"{site['timezone']})\n")
    head.append(f"Period {period['start_local'][:16].replace('T', ' ')} – "
                f"{period['end_local'][:16].replace('T', ' ')} local ({period['days']:g} "
                f"day{'' if period['days'] == 1 else 's'}); "
                f"Sun ≥ {settings['sun_min_sep_deg']:g}° (feed safety "
                f"{settings['sun_hazard_deg']:g}°, slews and rests too), "
                f"Moon ≥ {settings['moon_min_sep_deg']:g}°, "
                f"elevation {site['elevation_min_deg']:g}–{site['elevation_max_deg']:g}° and mask")
    if settings["night_only"]:
        head.append(f", night only ({settings.get('night') or 'horizon'})")
    head.append("\nWindows: " + ("; ".join(describe_window_texts(settings["windows"]))
                                  if settings["windows"] else "any time"))
    if settings["reference"]:
        head.append(f"\nReferences: {settings['reference']}")
    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False)
    for name, justify in [("Date", "left"), ("Start", "right"), ("End", "right"), ("Kind", "left"),
                          ("Name", "left"), ("l, b °", "right"),
                          ("El °", "right"), ("Drive az °", "right"), ("Sun°", "right"),
                          ("LSR km/s", "right"), ("MHz", "right")]:
        table.add_column(name, justify=justify, no_wrap=True)
    last_date = None
    for b in doc["blocks"]:
        date = b["start_local"][:10]
        day = _date_label(b["start_local"]) if date != last_date else ""
        last_date = date
        if b["kind"] == "stow":
            table.add_row(day, *_shown(b), "stow",
                          "safe from the Sun", "",
                          f"{b['alt_start_deg']:.0f}", f"{b['drive_az_start_deg']:.0f}",
                          "" if b["sun_sep_min_deg"] is None else f"{b['sun_sep_min_deg']:.0f}",
                          "", "", style="dim")
            continue
        if b["kind"] == "slew":
            table.add_row(day, *_shown(b), "slew",
                          f"→ {b['name']} ({b['minutes'] * 60:.0f} s)", "",
                          f"{b['alt_start_deg']:.0f}→{b['alt_end_deg']:.0f}",
                          f"{b['drive_az_start_deg']:.0f}→{b['drive_az_end_deg']:.0f}", "", "", "",
                          style="dim")
            continue
        tuning = b["tuning"]
        table.add_row(
            day, *_shown(b), {"target": "on", "reference": "off"}.get(b["kind"], b["kind"]), b["name"],
            f"{b['l_deg']:.1f}, {b['b_deg']:+.1f}",
            f"{b['alt_start_deg']:.0f}→{b['alt_end_deg']:.0f}",
            f"{b['drive_az_start_deg']:.0f}→{b['drive_az_end_deg']:.0f}",
            f"{b['sun_sep_min_deg']:.0f}",
            f"{b['lsr_corr_min_kms']:+.1f}…{b['lsr_corr_max_kms']:+.1f}",
            "" if tuning is None else f"{tuning['centre_mhz']:.3f}")
    foot = Text(f"{summary['integrations_scheduled']} of {summary['integrations_wanted']} "
                f"integrations scheduled ({summary['targets_complete']} of {summary['targets']} "
                f"targets complete); {summary['integration_minutes']:.0f} min on targets, "
                f"{summary['reference_minutes']:.0f} min on references, "
                f"{summary['slew_minutes']:.1f} min slewing"
                + (f", {summary['stows']} stow{'s' if summary['stows'] != 1 else ''} "
                   "(safe from the Sun)." if summary.get("stows") else "."))
    if summary["done_before"]:
        foot.append(f" {summary['done_before']} integrations already in the log.")
    if settings.get("calibrate_minutes"):
        foot.append(f"\n{summary['calibrations']} calibration{'s' if summary['calibrations'] != 1 else ''} "
                    f"on standard regions ({summary['calibration_minutes']:.0f} min)"
                    + (f"; {len(summary['calibration_missing'])} session ends without one."
                       if summary["calibration_missing"] else "."))
    if settings.get("azimuth_min_deg") is not None:
        foot.append(f"\nDrive az: the angle to set on the azimuth drive, on the cable wrap "
                    f"{settings['azimuth_min_deg']:g}…{settings['azimuth_max_deg']:g}°; the sky "
                    "azimuth (north through east) is the same angle taken modulo 360°.", style="dim")
    by_reason = defaultdict(list)
    for u in doc["unscheduled"]:
        by_reason[u["reason"]].append(u["name"])
    for reason, names in by_reason.items():
        shown = ", ".join(names[:12]) + (f" and {len(names) - 12} more" if len(names) > 12 else "")
        foot.append(f"\nNot scheduled, {reason}: {shown}", style="yellow")
    if not doc["blocks"]:
        return Group(head, Text("\nNothing could be scheduled.", style="yellow"), foot)
    return Group(head, table, foot)


def _date_label(iso_local: str) -> str:
    """'Wed 10 Jun' from a local ISO time."""
    return datetime.fromisoformat(iso_local).strftime("%a %d %b")
