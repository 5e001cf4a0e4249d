"""``hiplan tally``: what was recorded, from the station's own recordings.

Reads spectrum recordings (CSV, ECSV, FITS; planner/recordings.py), locates the beam
for every spectrum and adds up the minutes per longitude bin (planner/tally.py); with
``--plan`` also the plan against what was recorded (planner/plancheck.py). Writes
observation-log rows (``--log-out``) for ``month``/``park --log``; never touches the
recordings.
"""
from __future__ import annotations

import sys
from pathlib import Path

from ..errors import UserError
from .common import (add_b_max, add_lsr_definition, add_night, add_pointing, add_site,
                     check_outputs, night_setting, note, resolve_pointing)

NAME = "tally"
HELP = "tally recorded spectra: minutes per longitude bin, log rows, the plan against reality"
# As ``planner.tally.STAMPS`` (kept here so building the parser loads no computation;
# tests/test_tally.py checks they agree).
STAMPS = ("start", "middle", "end")
# Notes on the terminal name at most this many duplicates; the JSON lists more.
DUPLICATES_SHOWN = 5
# A progress bar from this many files on (a long run), on a terminal only.
PROGRESS_FROM_FILES = 20


def add_arguments(p) -> None:
    p.add_argument("recordings", nargs="*", metavar="RECORDING",
                   help="recording files (.csv, .ecsv, .fits), folders of them, or patterns "
                        "such as 'spectra/2027-03-*.fits' (quoted: hiplan expands them)")
    p.add_argument("--journal", action="append", metavar="JOURNAL.jsonl",
                   help="a 'hiplan drive' journal: count what it recorded (one-minute spectra "
                        "where the dish pointed; failed recordings left out); may be repeated, "
                        "and mixed with recording files")
    add_site(p)
    add_pointing(p, "pointing of the parked dish, for recordings that give none")
    p.add_argument("--plan", metavar="PLAN.json",
                   help="the drift plan the station followed ('hiplan month'): its dish setting "
                        "at each moment for recordings without a pointing, and the plan against "
                        "what was recorded (per day, missed intervals, bins at target, a chart)")
    p.add_argument("--stamp", choices=STAMPS, default="start",
                   help="what a spectrum's time stamp marks: the start (default), middle or end "
                        "of its exposure")
    add_b_max(p)
    add_night(p, "count only spectra")
    add_lsr_definition(p)
    o = p.add_argument_group("output")
    o.add_argument("--format", choices=("table", "json", "csv"), default="table",
                   help="table (default), json (the tally document) or csv (one row per "
                        "spectrum: beam l and b, bin, LSR correction, counted or why not)")
    o.add_argument("--output", "-o", help="write that to this file ('-': standard output)")
    o.add_argument("--log-out", metavar="FILE",
                   help="write the counted spectra as observation-log rows to this new file, "
                        "for 'month'/'park' --log (one row per recording and bin)")
    o.add_argument("--chart", help="with --plan: planned against recorded minutes per day and "
                                   "per bin, as .png or .svg")
    o.add_argument("--force", action="store_true",
                   help="replace existing output files (never a recording or the plan)")
    p.epilog = ("A recording is a table with one row per spectrum: time_utc (ISO 8601 with Z or "
                "an offset), exposure_s, and optionally ra_deg/dec_deg or alt_deg/az_deg; or a "
                "single-dish FITS table (DATE-OBS, EXPOSURE, CRVAL2/CRVAL3 or AZIMUTH/ELEVATIO "
                "per row), or FITS files whose header gives DATE-OBS and EXPTIME. See "
                "docs/recordings.md.")


def _pointing_given(args) -> bool:
    return any(getattr(args, name) is not None for name in ("dec", "ha", "elevation", "facing",
                                                            "alt", "az"))


def _chart_path(args) -> Path | None:
    from ..outputs import is_stdout
    if not args.chart:
        return None
    if not args.plan:
        raise UserError("--chart needs --plan: the chart sets the plan against the recordings")
    if is_stdout(args.chart):
        raise UserError("--chart: give a file name, not '-'")
    path = Path(args.chart)
    if path.suffix.lower() not in (".png", ".svg"):
        raise UserError(f"--chart: '{args.chart}' must end in .png or .svg")
    return path


def _progress(console, total: int):
    """(context, callback) of a progress bar on a terminal for a long run, else no-ops."""
    import contextlib
    if total < PROGRESS_FROM_FILES or console.file is not sys.stdout or not sys.stderr.isatty():
        return contextlib.nullcontext(), None
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
    bar = Progress(TextColumn("reading recordings"), BarColumn(), MofNCompleteColumn(),
                   TimeElapsedColumn(), console=Console(stderr=True), transient=True)
    task = bar.add_task("read", total=total)
    return bar, lambda done, _total: bar.update(task, completed=done)


def run(args, console) -> int:
    from .. import plancheck, tally
    from ..outputs import is_stdout
    from ..planfile import read_plan
    from ..recordings import find_recordings, read_recordings
    from ..site import load_site
    site = load_site(args.site)
    if not args.recordings and not args.journal:
        raise UserError("give recording files or folders, or --journal JOURNAL.jsonl")
    files = find_recordings(args.recordings) if args.recordings else []
    journals = [Path(j) for j in args.journal or ()]
    chart = _chart_path(args)
    check_outputs(args, args.output, args.log_out, chart,
                  inputs=[("recording", path) for path in files]
                  + [("drive journal", path) for path in journals])
    if is_stdout(args.log_out) and not args.output and args.format != "table":
        raise UserError(f"--log-out -: standard output gets the tally (--format {args.format}); "
                        "give the log a file name, or the tally -o FILE")
    if args.plan and _pointing_given(args):
        raise UserError("give --plan or a pointing (--dec, --elevation, --alt/--az), not both: "
                        "with --plan the dish was where the plan had it")
    plan = None
    if args.plan:
        plan = read_plan(args.plan)
        plancheck.check_drift_plan(plan, site, args.plan)
    pointing = resolve_pointing(args, site) if _pointing_given(args) else None
    context, progress = _progress(console, len(files))
    with context:
        spectra = read_recordings(files, progress) if files else None
    failed = ()
    if journals:
        spectra, failed = _with_journals(spectra, journals, args.stamp)
    mid = tally.mid_mjd(spectra, args.stamp)
    setting = None
    if plan is not None:
        timeline = plancheck.timeline(plan, site, args.plan)
        _refuse_outside(spectra, mid, timeline, plan, args.plan)
        setting = plancheck.setting_at(timeline, mid)
    elif pointing is not None:
        setting = tally.Setting.fixed(pointing, len(spectra))
    night_only, night_alt, night_kind = night_setting(args)
    rules = tally.Rules.of_site(site, args.b_max, night_only, night_alt, args.lsr_def)
    result = tally.tally(site, spectra, rules, args.stamp, setting)
    comparison = plancheck.compare(plan, site, result, args.plan) if plan is not None else None
    settings = {
        "b_max_deg": rules.b_max_deg, "bin_width_deg": rules.bin_width_deg,
        "sun_min_sep_deg": rules.sun_min_sep_deg, "night_only": night_only,
        "night": night_kind if night_only else None,
        "night_sun_alt_deg": night_alt if night_only else None,
        "lsr_definition": args.lsr_def, "stamp": args.stamp, "plan": args.plan,
        "pointing": (pointing.summary(site.dish.beamwidth_deg, rules.b_max_deg)
                     if pointing is not None else None),
    }
    doc = tally.tally_document(site, [*files, *journals], spectra, result, settings, comparison)
    if journals:
        doc["journal_failed"] = [{"journal": src, "recording": rec.recording, "block": rec.block,
                                  "name": rec.name, "minutes": round(rec.minutes, 3),
                                  "exit_status": rec.exit_status} for src, rec in failed]
        if failed:
            note(console, f"{len(failed)} failed recording{'s' if len(failed) != 1 else ''} in the "
                          f"journal not counted ({round(sum(r.minutes for _, r in failed), 1)} min)")
    _write(args, console, doc, result, spectra, chart)
    _notes(console, doc, result, spectra)
    return 0


def _with_journals(spectra, journals, stamp):
    """The recordings plus the journals' pseudo-spectra, their stamps moved to ``stamp``'s
    convention (the journal's mark the start of each exposure); and the failed recordings."""
    from ..journaltally import join, journal_spectra
    got = journal_spectra(journals)
    extra = got.spectra
    shift = {"start": 0.0, "middle": 0.5, "end": 1.0}[stamp]
    if shift:
        from dataclasses import replace
        extra = replace(extra, time_mjd=extra.time_mjd + shift * extra.exposure_s / 86400.0)
    return (extra if spectra is None else join(spectra, extra)), got.failed


def _refuse_outside(spectra, mid, timeline, plan, src) -> None:
    import numpy as np

    from ..plancheck import outside
    from ..timebase import iso_utc
    bad = np.flatnonzero(outside(timeline, mid))
    if bad.size:
        i = int(bad[0])
        more = f" (and {bad.size - 1} more)" if bad.size > 1 else ""
        raise UserError(f"{spectra.where(i)}: the spectrum at {iso_utc(float(mid[i]))} is outside "
                        f"the period of {src} ({plan['period'].get('first_day_local')} to "
                        f"{plan['period'].get('last_day_local')}){more}; leave its file out, or "
                        "tally it without --plan")


def _write(args, console, doc, result, spectra, chart) -> None:
    from ..outputs import is_stdout, write_all
    from ..report import to_json
    outputs = []
    if args.log_out:
        from ..obslog import format_log
        from ..tally import log_rows
        rows = log_rows(result)
        if not rows:
            raise UserError(f"--log-out {args.log_out}: no spectrum counts, so there are no log "
                            "rows to write (see the rejected spectra)")
        outputs.append((args.log_out, format_log(rows)))
    if chart is not None:
        from .. import plots
        from .common import figure_bytes
        outputs.append((chart, figure_bytes(plots.tally_chart(doc), chart.suffix[1:].lower())))
    text = None
    if args.format == "json":
        text = to_json(doc)
    elif args.format == "csv":
        from ..tally import spectra_csv
        text = spectra_csv(result, spectra)
    if args.output:
        if text is None:
            from .common import plain_text
            from ..render import tally_renderable
            text = plain_text(tally_renderable(doc))
        outputs.append((args.output, text))
    write_all(outputs, args.force)
    for path, _ in outputs:
        if not is_stdout(path):
            note(console, f"wrote {path}")
    if args.output:
        return
    if text is not None:
        sys.stdout.write(text)
    elif not any(is_stdout(path) for path, _ in outputs):
        from ..render import tally_renderable
        console.print(tally_renderable(doc))


def _notes(console, doc, result, spectra) -> None:
    listed = doc["duplicates"]
    total = doc["rejected"]["duplicate"]["spectra"]
    for item in listed[:DUPLICATES_SHOWN]:
        note(console, f"{item['spectrum']}: the same time as {item['same_as']} "
                      f"({item['time_utc']}): counted once")
    if total > DUPLICATES_SHOWN:
        note(console, f"{total} duplicate spectra in all, each counted once")
