"""``hiplan brief``: a printable operator brief (HTML or Markdown) from a plan file."""
from __future__ import annotations

import sys
from pathlib import Path


from ..errors import UserError
from ..outputs import write_all
from .common import check_outputs, plan_chart_bytes

NAME = "brief"
HELP = "a printable operator brief (HTML or Markdown) from a plan file"

MARKDOWN_SUFFIXES = (".md", ".markdown")
HTML_SUFFIXES = (".html", ".htm")
# Chart functions of planner.plots drawn for each plan kind, with their names in the brief.
CHARTS = {"drift": (("month", "month_chart"), ("depth", "depth_chart")),
          "survey": (("survey", "survey_chart"), ("sky", "survey_sky"))}


def add_arguments(p) -> None:
    p.add_argument("plan", type=Path, metavar="PLAN.json",
                   help="plan file from 'hiplan month' (hiplan.plan/1) or 'hiplan survey' "
                        "(hiplan.survey/1)")
    p.add_argument("--output", "-o", type=Path,
                   help="write here: a .md/.markdown name gives Markdown, anything else HTML; "
                        "'-' prints to standard output (default: PLAN-brief.html beside the plan, "
                        "or PLAN-brief.md with --markdown, e.g. plan.json -> plan-brief.html)")
    p.add_argument("--markdown", action="store_true",
                   help="Markdown instead of HTML (needed with '-o -' to print Markdown)")
    p.add_argument("--tally", type=Path, metavar="TALLY.json",
                   help="add \"What was recorded\": a tally of this plan's recordings "
                        "('hiplan tally ... --plan PLAN.json --format json')")
    p.add_argument("--no-charts", action="store_true", help="leave the charts out")
    p.add_argument("--force", action="store_true", help="replace existing output files")
    p.epilog = ("Without -o the brief is written beside the plan (plan.json -> plan-brief.html); "
                "an existing file is kept unless --force. HTML is one self-contained page (charts "
                "embedded, a few hundred KB) to print or open offline; '-o -' prints it instead. "
                "Markdown refers to its charts as PNG files written beside it "
                "(<name>-month.png, <name>-depth.png).")


def read_plan(path: Path) -> dict:
    """Read a plan file: ``planfile.read_plan`` (one-line errors naming the file)."""
    from ..planfile import read_plan as read_plan_file
    return read_plan_file(path)


def read_tally(path: Path, plan: dict) -> dict:
    """A tally document made with this plan (``hiplan.tally/1`` with per-day figures);
    one-line errors naming the file."""
    import json
    from ..briefloop import TALLY_SCHEMA
    from ..inputs import read_input
    from ..planfile import MAX_PLAN_BYTES
    try:
        doc = json.loads(read_input(path, "tally file", MAX_PLAN_BYTES).decode("utf-8-sig"))
    except UnicodeDecodeError:
        raise UserError(f"{path}: not UTF-8 text, so not a tally file") from None
    except json.JSONDecodeError as exc:
        raise UserError(f"{path}:{exc.lineno}: not valid JSON ({exc.msg}, column {exc.colno})") from None
    except RecursionError:
        raise UserError(f"{path}: not a tally file (its JSON is nested too deeply)") from None
    if not isinstance(doc, dict) or doc.get("schema") != TALLY_SCHEMA:
        raise UserError(f"{path}: not a tally file (expected schema {TALLY_SCHEMA!r}, "
                        "from 'hiplan tally --format json')")
    if not isinstance(doc.get("per_day"), list) or not isinstance(doc.get("plan"), dict):
        raise UserError(f"{path}: this tally was made without --plan, so it has nothing to "
                        "compare with the plan; tally again with --plan")
    site, plan_site = (doc.get("site") or {}).get("name"), (plan.get("site") or {}).get("name")
    if site != plan_site:
        raise UserError(f"{path}: a tally for site {site!r}, but the plan is for {plan_site!r}")
    period = plan.get("period") or {}
    first, last = doc["plan"].get("first_day"), doc["plan"].get("last_day")
    if (first, last) != (period.get("first_day_local"), period.get("last_day_local")):
        raise UserError(f"{path}: a tally against a plan for {first} to {last}, but this plan "
                        f"covers {period.get('first_day_local')} to {period.get('last_day_local')}")
    return doc


STDOUT = Path("-")


def output_path(plan: Path, output: Path | None, markdown: bool) -> Path | None:
    """The file to write: ``--output``, else ``<plan stem>-brief.html`` (``.md`` with
    --markdown) beside the plan; None for ``-o -`` (standard output)."""
    if output == STDOUT:
        return None
    if output is None:
        output = plan.with_name(f"{plan.stem}-brief{'.md' if markdown else '.html'}")
    if output.resolve() == plan.resolve():
        raise UserError(f"{output}: the brief would replace the plan file itself; give -o")
    return output


def output_format(output: Path | None, markdown: bool) -> str:
    """"markdown" or "html" from the output suffix and --markdown."""
    suffix = output.suffix.lower() if output is not None else ""
    if markdown and suffix in HTML_SUFFIXES:
        raise UserError(f"--markdown: the output file {output} ends in {suffix}; "
                        "use a .md name or drop --markdown")
    return "markdown" if markdown or suffix in MARKDOWN_SUFFIXES else "html"


def chart_pngs(doc: dict) -> dict[str, bytes]:
    """PNG bytes of the plan's charts and expected spectra; empty while planner.plots is not
    available."""
    try:
        from .. import plots
    except ImportError:
        return {}
    out = {key: plan_chart_bytes(doc, func_name) for key, func_name in CHARTS.get(doc.get("kind"), ())
           if getattr(plots, func_name, None) is not None}
    if isinstance(doc.get("recorded"), dict):
        from ..briefloop import RECORDED_FIGURE
        from .common import figure_bytes
        out[RECORDED_FIGURE] = figure_bytes(plots.tally_chart(doc["recorded"]), "png")
    if getattr(plots, "expected_spectra_grid", None) is not None:
        out.update(spectrum_pngs(doc, plots.expected_spectra_grid))
    return out


def spectrum_pngs(doc: dict, grid) -> dict[str, bytes]:
    """The brief's expected-spectrum panels (one per group of ``doc["expected"]``), one image."""
    from ..briefline import FIGURE_KEY
    from .common import figure_bytes
    import hashlib
    import json
    expected = doc.get("expected") or {}
    if not expected.get("groups"):
        return {}
    # Drawn once per process for the same spectra (the demo's HTML and Markdown briefs).
    key = hashlib.sha256(json.dumps(expected, sort_keys=True).encode()).hexdigest()
    if key not in _SPECTRA_CACHE:
        _SPECTRA_CACHE[key] = figure_bytes(grid(expected["velocity_kms"], expected["groups"]), "png")
    return {FIGURE_KEY: _SPECTRA_CACHE[key]}


_SPECTRA_CACHE: dict[str, bytes] = {}


def with_expected(doc: dict) -> dict:
    """The plan with its ``expected`` spectra, computed from the plan's site and rotation model
    when the plan does not carry them (older plans, survey plans)."""
    if isinstance(doc.get("expected"), dict) or not isinstance(doc.get("site"), dict):
        return doc
    from ..galaxy import PRESETS, model_from_name
    from ..hidisc import DiscModel
    from ..planexpect import expected_from_document
    name = (doc.get("settings") or {}).get("rotation_model") or "iau1985"
    rotation = model_from_name(name if name in PRESETS else "iau1985")
    try:
        expected = expected_from_document(doc, DiscModel(rotation=rotation))
    except (KeyError, TypeError, ValueError, UserError):
        return doc  # a plan too incomplete for spectra: the brief goes without them
    return {**doc, "expected": expected}


def chart_path(output: Path, key: str) -> Path:
    return output.with_name(f"{output.stem}-{key}.png")


def run(args, console) -> int:
    from ..brief import brief_html, brief_markdown
    from rich.console import Console
    args.output = output_path(args.plan, args.output, args.markdown)
    check_outputs(args, args.output)  # before any work: refuse early, write nothing
    doc = with_expected(read_plan(args.plan))
    if args.tally is not None:
        doc = {**doc, "recorded": read_tally(args.tally, doc)}
    fmt = output_format(args.output, args.markdown)
    pngs = {} if args.no_charts else None
    if args.output is not None and fmt == "markdown":
        pngs = pngs if pngs is not None else chart_pngs(doc)
        check_outputs(args, args.output, *(chart_path(args.output, key) for key in pngs))
    if fmt == "html":
        text = brief_html(doc, pngs if pngs is not None else chart_pngs(doc))
    elif args.output is None:
        text = brief_markdown(doc)           # no file to put chart images beside
    else:
        # relative names: the images sit beside the Markdown
        written = {key: chart_path(args.output, key).name for key in pngs}
        text = brief_markdown(doc, written)
    if args.output is None:
        sys.stdout.write(text)
        return 0
    # The charts and the Markdown that names them are written together: all or none.
    charts = ([(chart_path(args.output, key), data) for key, data in pngs.items()]
              if fmt == "markdown" and pngs else [])
    write_all([*charts, (args.output, text)], args.force)
    if console.file is sys.stdout:
        Console(stderr=True).print(f"wrote {args.output}", markup=False, highlight=False)
    return 0
