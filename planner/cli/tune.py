"""``hiplan tune``: where to tune the receiver, whether the line fits, expected noise."""
from __future__ import annotations


from ..errors import UserError
from .common import (add_b_max, add_lsr_definition, add_output, add_period, add_pointing,
                     add_rotation, add_site, add_target, check_outputs, emit, number, period_span,
                     resolve_pointing, sky_target)

NAME = "tune"
HELP = "receiver centre frequency, band fit and expected noise"


def add_arguments(p) -> None:
    add_site(p)
    add_target(p)
    add_pointing(p)
    add_period(p, default_days=30)
    add_b_max(p)
    add_rotation(p, "rotation model")
    p.add_argument("--dispersion", type=number(float, "--dispersion", 0, 100),
                   help="velocity margin added to the envelope (km/s; default 10)")
    p.add_argument("--disc-radius", type=number(float, "--disc-radius", 0, 100, lo_open=True),
                   help="outer radius of the HI disc (kpc; default 25)")
    p.add_argument("--minutes", type=number(float, "--minutes", 0, 1e5, lo_open=True),
                   help="pointed integration time per position (minutes)")
    p.add_argument("--target-rms", type=number(float, "--target-rms", 0, 1e3, lo_open=True),
                   help="noise level wanted per channel (K): report the days needed")
    p.add_argument("--switched", action="store_true",
                   help="frequency/position switching: noise factor 2 instead of 1")
    p.add_argument("--passage", type=number(int, "--passage", 1, 100000),
                   help="tune for the N-th passage of the period only (parked beam)")
    p.add_argument("--plan", help="tune once for a whole plan file (hiplan month or survey)")
    add_lsr_definition(p)
    add_output(p, formats=("table", "json"))


def run(args, console) -> int:
    import numpy as np
    from ..doppler import velocity_corrections
    from ..galactic import icrs_to_galactic_deg
    from ..galaxy import hi_velocity_envelope, model_from_name
    from ..passages import search_passages_mjd
    from ..report import to_json, tune_document
    from ..render import tune_renderable
    from ..sensitivity import days_to_reach, drift_time_s, radiometer_rms_k
    from ..site import load_site
    from ..spectral import tuning_advice
    from ..tuning import LineSetup, drift_depth, line_setup
    site = load_site(args.site)
    # Without --site, --plan looks its site up among every known site file: all are inputs.
    from ..site import available_sites
    known = available_sites().values() if args.plan and not args.site else ()
    check_outputs(args, args.output, inputs=[("site file", path) for path in known])
    overrides = {k: v for k, v in (("dispersion_kms", args.dispersion),
                                   ("disc_radius_kpc", args.disc_radius)) if v is not None}
    model = model_from_name(args.rotation, **overrides)
    if args.plan:
        return _run_plan(args, console, model)
    start_mjd, end_mjd = period_span(args, site)
    b_max = site.rules.b_max_deg if args.b_max is None else args.b_max
    target = sky_target(args)
    factor = 2.0 if args.switched else 1.0
    if target is None:
        pointing = resolve_pointing(args, site)
        search = search_passages_mjd(site, pointing, start_mjd, end_mjd, b_max,
                                     solar_motion=args.lsr_def)
        usable = [p for p in search.passages if p.sun_ok]
        if args.passage is not None:
            if args.passage > len(search.passages):
                raise UserError(f"--passage: there are only {len(search.passages)} passages in "
                                "this period")
            chosen = search.passages[args.passage - 1]
            if not chosen.sun_ok:
                raise UserError(f"--passage: passage {args.passage} is too close to the Sun "
                                f"({chosen.sun_sep_min_deg:.0f}°)")
            usable = [chosen]
        if not usable:
            why = ("the beam never comes within the b_max of the plane" if not search.passages
                   else "every passage is too close to the Sun")
            raise UserError(f"nothing to tune for: {why} in this period")
        bins = sorted({b for p in usable for b in p.l_bins})
        setup = line_setup(bins, site.rules.bin_width_deg, b_max,
                           min(p.lsr_corr_min_kms for p in usable),
                           max(p.lsr_corr_max_kms for p in usable), site.receiver, model)
        depth = drift_depth(usable, end_mjd - start_mjd, site.receiver, args.target_rms, factor)
        doc = tune_document(site, setup, model, args.lsr_def, start_mjd, end_mjd,
                            pointing=pointing, b_max_deg=b_max, l_bins=bins, depth=depth,
                            drift_s=float(drift_time_s(site.dish.beamwidth_deg, pointing.dec_deg)),
                            passage=(None if args.passage is None else
                                     (args.passage, len(search.passages), usable[0])))
    else:
        ra, dec = target
        mjd = np.arange(start_mjd, end_mjd + 1e-9, 1.0 / 144)  # every 10 minutes
        corr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m,
                                    ra, dec, mjd, args.lsr_def).lsr_corr_kms
        l_deg, b_deg = icrs_to_galactic_deg(ra, dec)
        env = hi_velocity_envelope(l_deg, b_deg, model)
        advice = tuning_advice(float(env.v_min_kms), float(env.v_max_kms), float(corr.min()),
                               float(corr.max()), site.receiver)
        setup = LineSetup(float(env.v_min_kms), float(env.v_max_kms), float(corr.min()),
                          float(corr.max()), advice)
        pointed = None
        if args.minutes:
            rms = float(radiometer_rms_k(site.receiver.tsys_k, site.receiver.channel_width_khz * 1e3,
                                         args.minutes * 60.0, factor))
            pointed = {"minutes": args.minutes, "rms_k": rms,
                       "repeats_to_target": (int(np.ceil(days_to_reach(rms, args.target_rms)))
                                             if args.target_rms else None)}
        doc = tune_document(site, setup, model, args.lsr_def, start_mjd, end_mjd,
                            target=(ra, dec, float(l_deg), float(b_deg)), pointed=pointed)
    if args.format == "json":
        emit(args, console, to_json(doc))
    else:
        emit(args, console, None, tune_renderable(doc))
    return 0


def _run_plan(args, console, model) -> int:
    """One receiver setting that covers every recording (or target) of a plan file."""
    import numpy as np
    from ..report import to_json, tune_document
    from ..render import tune_renderable
    from ..site import load_site
    from ..timebase import parse_instant
    from ..tuning import line_setup
    from ..planfile import read_plan
    doc = read_plan(args.plan)
    site = load_site(args.site) if args.site else _site_from_plan(doc, args.plan)
    bw = doc["settings"].get("bin_width_deg", 1.0)
    if doc["kind"] == "drift":
        items = [r for d in doc["days"] for r in d["recordings"]]
        bins = sorted({int(round(b / bw)) for r in items for b in r["l_bins"]})
    else:
        items = [b for b in doc["blocks"] if b["kind"] == "target"]
        bins = sorted({int(np.floor(b["l_deg"] / bw)) % int(round(360 / bw)) for b in items})
    if not items:
        raise UserError(f"{args.plan}: the plan has nothing to record, so nothing to tune for")
    receiver = site.receiver
    setup = line_setup(bins, bw, doc["site"].get("b_max_deg", doc["site"].get("band_deg", 3.0)),
                       min(r["lsr_corr_min_kms"] for r in items),
                       max(r["lsr_corr_max_kms"] for r in items), receiver, model)
    start_mjd, end_mjd = (parse_instant(doc["period"][k], f"{args.plan} period") for k in
                          ("start_utc", "end_utc"))
    out = tune_document(site, setup, model, args.lsr_def,
                        start_mjd, end_mjd, plan_source=(str(args.plan), len(items), bins, bw))
    if args.format == "json":
        emit(args, console, to_json(out))
    else:
        emit(args, console, None, tune_renderable(out))
    return 0


def _site_from_plan(doc: dict, source: str):
    """The plan's site, loaded by name from the known site files (for its receiver)."""
    from ..site import available_sites, read_site_file
    for path in available_sites().values():
        candidate = read_site_file(path)
        if candidate.name == doc["site"]["name"]:
            return candidate
    raise UserError(f"{source}: site '{doc['site']['name']}' is not among the known site files; "
                    "give it with --site")
