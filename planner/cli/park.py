"""``hiplan park``: at which declination to park a dish, and what it will deliver."""
from __future__ import annotations


from ..errors import UserError
from .common import (DEFAULT_TARGET_MINUTES, add_b_max, add_log, add_lsr_definition, add_night,
                     add_output, add_period, add_site, check_outputs, current_setting, emit,
                     figure_bytes, load_windows, night_setting, number, period_span)

NAME = "park"
HELP = "which declination to park a dish at, ranked for your goals"


def add_arguments(p) -> None:
    add_site(p)
    add_period(p, default_days=30)
    p.add_argument("--step", type=number(float, "--step", 0, 30, lo_open=True),
                   help="declination step (deg; default half the beamwidth)")
    add_b_max(p)
    p.add_argument("--want", help="wanted longitude ranges, e.g. 30-90,120-140 (default all)")
    add_log(p)
    p.add_argument("--target-minutes", type=number(float, "--target-minutes", 0, 1e5, lo_open=True),
                   default=DEFAULT_TARGET_MINUTES,
                   help=f"integration wanted per bin (minutes; default {DEFAULT_TARGET_MINUTES:g})")
    add_night(p)
    p.add_argument("--windows", help="operator availability: a file or text like 'Mon-Fri 19:00-23:30'")
    p.add_argument("--top", type=number(int, "--top", 1, 1000), default=8,
                   help="declinations shown in the table (default 8; JSON/CSV list all)")
    p.add_argument("--plot", help="write the coverage atlas here (.png or .svg) and the sky track "
                                  "of the best declination beside it (<name>-sky.<ext>)")
    add_lsr_definition(p)
    add_output(p)


def run(args, console) -> int:
    import numpy as np
    from ..calpasses import calibrator_passes, expected_pass_peaks_k
    from ..coverage import sweep
    from ..obslog import coverage_minutes, read_logs
    from ..park import advise, candidate_pointings, parse_want
    from ..report import PARK_FIELDS, park_document, to_csv, to_json
    from ..render import park_renderable
    from ..site import load_site
    from ..sunsafety import sun_approaches
    site = load_site(args.site)
    plot_paths = _plot_paths(args.plot, args.force) if args.plot else None
    check_outputs(args, args.output, *(plot_paths or ()))
    start_mjd, end_mjd = period_span(args, site)
    bw = site.rules.bin_width_deg
    want = parse_want(args.want, bw)
    done = np.zeros(want.size)
    if args.log:
        done = coverage_minutes(read_logs(args.log), bw)
    avail, intervals = load_windows(args.windows, site, start_mjd, end_mjd)
    windows_text = avail.normalised() if avail else []
    current = current_setting(site)
    pointings = candidate_pointings(site, args.step, extra=(current,) if current else ())
    if not pointings:
        raise UserError(f"{site.source}: no declination is reachable with this dish's elevation "
                        "limits and horizon mask")
    night_only, night_alt, night_kind = night_setting(args)
    result = sweep(site, pointings, start_mjd, end_mjd, args.b_max, night_only, intervals,
                   args.lsr_def, night_sun_alt_deg=night_alt)
    approaches = sun_approaches(site, pointings, start_mjd, end_mjd, nodes=result.nodes)
    advice = advise(result, want, done, args.target_minutes, approaches)
    passes = calibrator_passes(site, pointings, start_mjd, end_mjd, nodes=result.nodes)
    peaks = expected_pass_peaks_k(site, pointings, passes, nodes=result.nodes)
    doc = park_document(result, advice, args.want, args.target_minutes, args.log, windows_text,
                        night_kind if night_only else None, (passes, peaks))
    # Charts and the main output are built first and written together: all or none.
    plots = _plot_files(plot_paths, result, advice, want, done, args, site) if plot_paths else []
    if args.format == "json":
        emit(args, console, to_json(doc), also=plots)
    elif args.format == "csv":
        emit(args, console, to_csv(doc["declinations"], PARK_FIELDS), also=plots)
    else:
        emit(args, console, None, park_renderable(doc, args.top), also=plots)
    return 0


def _plot_paths(plot: str, force: bool):
    from pathlib import Path
    atlas = Path(plot)
    if atlas.suffix.lower() not in (".png", ".svg"):
        raise UserError(f"--plot: '{plot}' must end in .png or .svg")
    sky = atlas.with_name(f"{atlas.stem}-sky{atlas.suffix}")
    return atlas, sky


def _plot_files(paths, result, advice, want, done, args, site) -> list:
    """(path, bytes) of the atlas and the best declination's sky track, for ``emit``."""
    from ..park import recommended
    from ..plots import coverage_atlas, sky_track_map
    atlas_path, sky_path = paths
    figures = [(atlas_figure(result, want, done, args.target_minutes, coverage_atlas), atlas_path),
               (sky_figure(result, (recommended(advice) or advice)[0], sky_track_map), sky_path)]
    return [(path, figure_bytes(fig, path.suffix.lstrip(".").lower())) for fig, path in figures]


def atlas_figure(result, want, done, target_minutes, coverage_atlas):
    """The coverage atlas of a sweep: usable hours per declination and bin."""
    import numpy as np
    from ..report import period_days_text, period_summary
    bw = result.bin_width_deg
    # Meridian settings only (the dish's current setting may be anywhere), by culmination.
    upper = [r for r in result.rows if r.pointing.culmination == "upper" and r.pointing.facing in
             ("north", "south", "zenith")]
    lower = [r for r in result.rows if r.pointing.culmination == "lower" and r.pointing.facing in
             ("north", "south")]
    decs = np.array([r.pointing.dec_deg for r in upper])
    hours = np.array([r.bin_usable_s / 3600.0 for r in upper]).reshape(len(upper), -1)
    period = period_summary(result.start_mjd, result.end_mjd, result.site.tz)
    return coverage_atlas(
        decs, result.bin_starts_deg, hours, reachable_dec=(decs.min(), decs.max()),
        lower_dec_deg=[r.pointing.dec_deg for r in lower],
        lower_hours=np.array([r.bin_usable_s / 3600.0 for r in lower]).reshape(len(lower), -1),
        wanted_bins=result.bin_starts_deg[want], covered_bins=result.bin_starts_deg[done >= target_minutes],
        covered_fraction=np.minimum(done / target_minutes, 1.0),
        site_name=result.site.name, period_text=period_days_text(period),
        b_max_deg=result.b_max_deg, bin_width_deg=bw)


def sky_figure(result, best, sky_track_map):
    """The beam track of the best declination over one sidereal day, with the Sun."""
    import numpy as np
    from ..avoidance import sun_galactic_deg
    from ..coverage import SIDEREAL_DAY_UT1_DAYS
    from ..skytrack import track_mjd
    site = result.site
    mjd = result.start_mjd + np.linspace(0.0, SIDEREAL_DAY_UT1_DAYS, 1441)
    track = track_mjd(site, best.pointing, mjd)
    occ = best.coverage.occurrences
    # A sample is in a usable passage when its longitude bin gets usable time.
    bins = (np.floor(track.l_deg / result.bin_width_deg).astype(int)) % best.coverage.bin_usable_s.size
    in_passage = (np.abs(track.b_deg) <= result.b_max_deg) & (best.coverage.bin_usable_s[bins] > 0)
    days = np.arange(result.start_mjd, result.end_mjd + 1e-9, 1.0)
    sun_l, sun_b = sun_galactic_deg(days)
    p = best.pointing
    title = (f"{site.name}: Dec {p.dec_deg:+.1f}° (elevation {p.alt_deg:.1f}°), "
             f"{len(occ.start_mjd)} passages")
    return sky_track_map(track.l_deg, track.b_deg, b_max_deg=result.b_max_deg, in_passage=in_passage,
                         sun_l_deg=sun_l, sun_b_deg=sun_b, sun_radius_deg=site.rules.sun_min_sep_deg,
                         title=title)
