"""``hiplan crossings``: galactic-plane passages of a parked beam."""
from __future__ import annotations


from .common import (add_b_max, add_output, add_period, add_pointing, add_site, check_outputs,
                     emit, period_span, resolve_pointing)

NAME = "crossings"
HELP = "when a parked beam crosses the galactic plane"


def add_arguments(p) -> None:
    add_site(p)
    add_pointing(p)
    add_period(p, default_days=7)
    add_b_max(p)
    add_output(p)


def run(args, console) -> int:
    from ..calpasses import calibrator_passes, expected_pass_peaks_k
    from ..passages import search_passages_mjd
    from ..report import PASSAGE_FIELDS, crossings_document, to_csv, to_json
    from ..render import crossings_renderable
    from ..site import load_site
    from ..sunsafety import sun_approaches
    site = load_site(args.site)
    check_outputs(args, args.output)
    pointing = resolve_pointing(args, site)
    start_mjd, end_mjd = period_span(args, site)
    search = search_passages_mjd(site, pointing, start_mjd, end_mjd, args.b_max)
    approaches = sun_approaches(site, [pointing], start_mjd, end_mjd)
    passes = calibrator_passes(site, [pointing], start_mjd, end_mjd)
    calibrators = (passes, expected_pass_peaks_k(site, [pointing], passes))
    if args.format == "table":
        emit(args, console, None, crossings_renderable(site, pointing, search, approaches,
                                                       calibrators))
    else:
        doc = crossings_document(site, pointing, search, approaches, calibrators)
        text = to_json(doc) if args.format == "json" else to_csv(doc["passages"], PASSAGE_FIELDS)
        emit(args, console, text)
    return 0


