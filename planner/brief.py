"""Operator brief: a printable page for a volunteer, made from a drift or survey plan.

What the brief says is built once (``planner.briefcontent``); this module lays it out as one
self-contained HTML page or as Markdown, through the Jinja2 templates in
``planner/templates/`` (``brief.html.j2``, ``brief.md.j2``, ``brief.css``). Pure: the
functions return strings and never touch files.

Escaping is on by default in both templates: every value a template prints is escaped for its
format (HTML entities, quotes included; Markdown: HTML entities first, then a backslash before
Markdown punctuation), so a hostile site or target name cannot inject markup. Only what the
templates' own macros and filters build (already escaped) is passed through.
"""
from __future__ import annotations

import base64
import html
import re
from functools import lru_cache
from pathlib import Path
from urllib.parse import quote

from .briefcontent import (Brief, Charts, Figure, Row, Table, build_brief,  # noqa: F401
                           chart_caption, chart_order)

TEMPLATES = Path(__file__).resolve().parent / "templates"
_PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
_MD_SPECIAL = re.compile(r"([\\`*_\[\]|#])")


def _md(text: str) -> str:
    """Escape text for Markdown: HTML entities first, then Markdown punctuation."""
    return _MD_SPECIAL.sub(r"\\\1", html.escape(text, quote=False))


@lru_cache(maxsize=None)
def _environment(fmt: str):
    """The Jinja2 environment of one output format ("html" or "markdown"), autoescaping."""
    import jinja2  # on use: building the CLI parser stays light
    from markupsafe import Markup

    if fmt == "html":
        def finalize(value):
            return value if isinstance(value, Markup) else Markup(html.escape(str(value), quote=True))
    else:
        def finalize(value):
            return value if isinstance(value, Markup) else Markup(_md(str(value)))
    env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(TEMPLATES)), autoescape=True,
                             finalize=finalize, keep_trailing_newline=True,
                             undefined=jinja2.StrictUndefined)
    env.filters["urlpath"] = lambda path: Markup(quote(str(path)))
    env.filters["caption"] = chart_caption
    env.filters["table_parts"] = _table_parts
    return env


def _section_views(brief: Brief, images: dict) -> list[dict]:
    """Sections to show: a charts section only when there are charts it would show."""
    out = []
    for section in brief.sections:
        if isinstance(section.blocks[0], Charts) and not images:
            continue
        classes = " ".join(c for c in (section.style, "new-page" if section.new_page else "") if c)
        out.append({"section_id": section.section_id, "title": section.title, "classes": classes,
                    "blocks": section.blocks})
    return out


def _figure_keys(brief: Brief) -> set[str]:
    return {b.key for s in brief.sections for b in s.blocks if isinstance(b, Figure)}


def _table_parts(table: Table) -> list[dict]:
    """Markdown has no row spanning a table: group rows (one-cell headings) split the table."""
    parts: list[dict] = []
    pending: list[Row] = []
    for row in table.rows + (Row(((),), "group"),):
        if row.style == "group":
            if pending:
                parts.append({"heading": None, "rows": pending})
                pending = []
            if row.cells[0]:
                parts.append({"heading": row.cells[0], "rows": []})
        else:
            pending.append(row)
    return parts


def brief_html(doc: dict, charts: dict[str, bytes] | None = None) -> str:
    """The operator brief as one self-contained HTML page.

    ``charts`` maps an image name ("month", "depth", or a ``Figure`` block's key such as an
    expected spectrum) to PNG bytes; each is embedded as a base64 ``data:`` URI, so the page
    references nothing outside itself (inline CSS, no scripts, fonts or links). Print CSS
    starts the big sections on new pages; the layout fits A4 and US Letter.
    """
    brief = build_brief(doc)
    images = {}
    for key, data in dict(charts or {}).items():
        if not isinstance(data, (bytes, bytearray)) or not bytes(data).startswith(_PNG_MAGIC):
            raise ValueError(f"chart {key!r} is not PNG bytes")
        images[key] = base64.b64encode(bytes(data)).decode("ascii")
    figures = {key: {"key": key, "alt": f"{key} chart", "base64": data, "caption": caption}
               for key, data, caption in ((b.key, images.get(b.key), b.caption)
                                          for s in brief.sections for b in s.blocks
                                          if isinstance(b, Figure)) if data is not None}
    own = _figure_keys(brief)
    chart_keys = chart_order([k for k in images if k not in own])
    charts_view = [{"key": k, "alt": f"{k} chart", "base64": images[k], "caption": chart_caption(k)}
                   for k in chart_keys]
    return _environment("html").get_template("brief.html.j2").render(
        brief=brief, sections=_section_views(brief, charts_view), charts=charts_view,
        figures=figures)


def brief_markdown(doc: dict, chart_paths: dict[str, str] | None = None) -> str:
    """The operator brief as Markdown (GitHub-style pipe tables).

    ``chart_paths`` maps an image name to an image path (relative to the Markdown file), shown
    as an image link; without charts the chart section is left out.
    """
    brief = build_brief(doc)
    paths = dict(chart_paths or {})
    own = _figure_keys(brief)
    charts = [(k, paths[k]) for k in chart_order([k for k in paths if k not in own])]
    figures = {k: paths[k] for k in own if k in paths}
    return _environment("markdown").get_template("brief.md.j2").render(
        brief=brief, sections=_section_views(brief, charts), charts=charts, figures=figures)
