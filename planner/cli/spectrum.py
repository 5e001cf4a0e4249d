"""``hiplan spectrum``: the HI spectrum a receiver should show toward a position (a smooth model)."""
from __future__ import annotations

from pathlib import Path

from ..errors import UserError
from .common import (add_lsr_definition, add_output, add_rotation, add_site, check_outputs, emit,
                     figure_bytes, number)

NAME = "spectrum"
HELP = "the HI spectrum to expect toward a position (model), with the receiver's band"


def add_arguments(p) -> None:
    add_site(p)
    g = p.add_argument_group("where and when")
    g.add_argument("--l", type=number(float, "--l", 0, 360), help="galactic longitude (deg), with --b")
    g.add_argument("--b", type=number(float, "--b", -90, 90), help="galactic latitude (deg), with --l")
    g.add_argument("--time", help="instant, ISO 8601 with Z or an offset: adds the sky frequency, "
                                  "the receiver setting and its band (needs the site)")
    g.add_argument("--plan", type=Path, metavar="PLAN.json",
                   help="instead of --l/--b: every wanted bin of a drift plan (at b = 0) or every "
                        "target of a survey plan")
    p.add_argument("--beam", type=number(float, "--beam", 0, 60), metavar="DEG",
                   help="half-power beamwidth to average over (default: the site's dish; 0 = a "
                        "pencil beam)")
    p.add_argument("--centre", type=number(float, "--centre", 1000, 2000), metavar="MHZ",
                   help="receiver centre frequency (default: the tuning hiplan advises here)")
    p.add_argument("--snr", type=number(float, "--snr", 0, 1e4, lo_open=True), default=10.0,
                   help="signal-to-noise ratio on the peak for the integration time given (default 10)")
    p.add_argument("--plot", help="also draw the spectrum here (.png or .svg)")
    add_rotation(p, "rotation curve of the disc model")
    add_lsr_definition(p)
    add_output(p)
    p.epilog = ("A smooth model of the Galaxy's HI disc (circular rotation, an exponential disc "
                "that flares outward, one spin temperature), averaged over the beam: real spectra "
                "show clouds and absorption it leaves out.")


def _positions(args) -> tuple[list[float], list[float], list[str] | None]:
    if args.plan is not None:
        if args.l is not None or args.b is not None:
            raise UserError("give --plan or --l/--b, not both")
        from ..planfile import read_plan
        doc = read_plan(args.plan)
        if doc.get("kind") == "drift":
            width = float((doc.get("settings") or {}).get("bin_width_deg", 1.0))
            bins = sorted(float(b) for b in (doc.get("summary") or {}).get("depth_after_min", {}))
            if not bins:
                raise UserError(f"{args.plan}: the plan lists no wanted bins")
            return ([b + width / 2 for b in bins], [0.0] * len(bins),
                    [f"bin {b:g}–{b + width:g}°" for b in bins])
        seen: dict[str, tuple[float, float]] = {}
        for block in doc.get("blocks") or []:
            if block.get("kind") == "target" and block.get("l_deg") is not None:
                seen.setdefault(str(block.get("name")), (float(block["l_deg"]), float(block["b_deg"])))
        if not seen:
            raise UserError(f"{args.plan}: the plan has no target blocks")
        return [v[0] for v in seen.values()], [v[1] for v in seen.values()], list(seen)
    if args.l is None or args.b is None:
        raise UserError("give --l and --b (or --plan)")
    return [args.l], [args.b], None


def run(args, console) -> int:
    from ..expected import receiver_view
    from ..galaxy import model_from_name
    from ..hidisc import DiscModel, expected_spectra
    from ..report import SPECTRUM_FIELDS, spectrum_document, to_csv, to_json
    from ..site import load_site
    from ..timebase import parse_instant
    from .lsr import _require_offset
    site = load_site(args.site)
    plot_path = Path(args.plot) if args.plot else None
    if plot_path is not None and plot_path.suffix.lower() not in (".png", ".svg"):
        raise UserError(f"--plot: '{args.plot}' must end in .png or .svg")
    check_outputs(args, args.output, *([plot_path] if plot_path else []))
    l_deg, b_deg, labels = _positions(args)
    if args.time and args.plan:
        raise UserError("--time works with --l/--b (one position), not with --plan")
    if args.centre is not None and not args.time:
        raise UserError("--centre needs --time (the receiver view is for one instant)")
    mjd = None
    if args.time:
        _require_offset(args.time)
        mjd = parse_instant(args.time, "--time")
    rotation = model_from_name(args.rotation)
    beam = site.dish.beamwidth_deg if args.beam is None else args.beam
    spectrum = expected_spectra(l_deg, b_deg, beam, model=DiscModel(rotation=rotation))
    view = (receiver_view(site, spectrum, 0, mjd, args.lsr_def, args.centre, rotation)
            if mjd is not None else None)
    doc = spectrum_document(site, spectrum, args.rotation, args.lsr_def, mjd, view, args.snr, labels)
    also = []
    if plot_path is not None:
        from ..plots import expected_spectrum_chart
        curves = ([{"label": f"l {doc['position']['l_deg']:g}°, b {doc['position']['b_deg']:+g}°",
                    "tb_k": doc["tb_k"]}] if "tb_k" in doc else
                  [{"label": p.get("label"), "tb_k": p["tb_k"]} for p in doc["positions"][:6]])
        title = f"Expected HI spectrum, {site.name} (beam {beam:.1f}°, model)"
        fig = expected_spectrum_chart(doc["velocity_kms"], curves, title=title,
                                      receiver=doc.get("receiver"))
        also.append((plot_path, figure_bytes(fig, plot_path.suffix.lstrip(".").lower())))
    if args.format == "json":
        emit(args, console, to_json(doc), also=also)
    elif args.format == "csv":
        if "tb_k" not in doc:
            raise UserError("--format csv: one position only (use json for a plan)")
        rows = [{"velocity_kms": v, "tb_k": t,
                 "frequency_mhz": (doc["frequency_mhz"][i] if "frequency_mhz" in doc else None)}
                for i, (v, t) in enumerate(zip(doc["velocity_kms"], doc["tb_k"]))]
        emit(args, console, to_csv(rows, SPECTRUM_FIELDS), also=also)
    else:
        from ..render import spectrum_renderable
        emit(args, console, None, spectrum_renderable(doc), also=also)
    return 0
