"""Operator brief: content, escaping, self-containment, Markdown tables, CLI, real browser.

The plans are written by hand following docs/plan-format.md (invented sites and numbers); the
expected text is worked out from those inputs in the comments, never copied from our output.
"""
from __future__ import annotations

import argparse
import io
import json
import re
import shutil
import subprocess
import sys
import time
import types

import matplotlib
import numpy as np
import pytest
from markdown_it import MarkdownIt

from planner.brief import brief_html, brief_markdown
from planner.cli import brief as brief_cli
from planner.errors import UserError

matplotlib.use("Agg")
from matplotlib.figure import Figure
from matplotlib.image import imread

HOLLOWMERE_SITE = {
    "name": "Hollowmere Amateur Radio Astronomy Club", "latitude_deg": 53.42,
    "longitude_deg": -2.07, "height_m": 180, "timezone": "Europe/London", "mount": "transit",
    "diameter_m": 3.0, "beamwidth_deg": 4.93, "elevation_min_deg": 12, "elevation_max_deg": 90,
    "sun_min_sep_deg": 20, "b_max_deg": 3,
}


def _tuning(centre_mhz, fits=True, spike_clear=True, **extra):
    tuning = {"centre_mhz": centre_mhz, "line_low_mhz": centre_mhz + 0.05,
              "line_high_mhz": centre_mhz + 1.33, "fits": fits, "margin_mhz": 0.64 if fits else -0.21,
              "spike_clear": spike_clear, "channel_width_kms": 0.495,
              "v_lsr_min_kms": -133.1, "v_lsr_max_kms": 54.3,
              "lsr_corr_min_kms": -42.7, "lsr_corr_max_kms": 40.1}
    tuning.update(extra)
    return tuning


def _rec(start_utc, end_utc, start_local, end_local, l_start, l_end, sun, new_bins=()):
    return {"start_utc": start_utc, "end_utc": end_utc, "peak_utc": start_utc,
            "start_local": start_local, "end_local": end_local,
            "l_start_deg": l_start, "l_end_deg": l_end, "l_bins": [int(l_start), int(l_end)],
            "bin_minutes": [5.0, 5.0], "new_bins": list(new_bins), "sun_sep_min_deg": sun,
            "moon_sep_min_deg": 60.0, "night": True, "lsr_corr_min_kms": 30.0,
            "lsr_corr_max_kms": 31.0}


def _park(dec, alt, move, start_utc=None, end_utc=None, start_local=None, end_local=None):
    return {"dec_deg": dec, "alt_deg": alt, "az_deg": 180.0, "facing": "south", "move": move,
            "move_start_utc": start_utc, "move_end_utc": end_utc,
            "move_start_local": start_local, "move_end_local": end_local}


def hollowmere_plan() -> dict:
    """Four days, 26-29 Mar 2027, across the UK clock change (Sun 28 Mar 01:00 UTC -> BST)."""
    # Meridian elevation facing south = 90 - latitude + dec: dec 20 -> 56.58, dec 40 -> 76.58.
    days = [
        {"date": "2027-03-26",
         "park": _park(20.0, 56.58, True, "2027-03-26T18:30:00Z", "2027-03-26T18:45:00Z",
                       "2027-03-26T18:30:00+00:00", "2027-03-26T18:45:00+00:00"),
         "recordings": [
             _rec("2027-03-26T19:42:30Z", "2027-03-26T20:05:10Z", "2027-03-26T19:42:30+00:00",
                  "2027-03-26T20:05:10+00:00", 53.9, 57.2, 52.0, new_bins=[55, 56]),
             _rec("2027-03-26T21:55:40Z", "2027-03-26T22:20:00Z", "2027-03-26T21:55:40+00:00",
                  "2027-03-26T22:20:00+00:00", 61.0, 64.4, 75.0)],
         "skipped": [
             {"start_utc": "2027-03-26T11:02:00Z", "end_utc": "2027-03-26T11:25:00Z",
              "start_local": "2027-03-26T11:02:00+00:00", "end_local": "2027-03-26T11:25:00+00:00",
              "l_bins": [180, 181], "reason": "sun"},
             {"start_utc": "2027-03-26T07:30:00Z", "end_utc": "2027-03-26T07:52:00Z",
              "start_local": "2027-03-26T07:30:00+00:00", "end_local": "2027-03-26T07:52:00+00:00",
              "l_bins": [150, 151], "reason": "outside windows"}],
         "tuning": _tuning(1420.586)},
        {"date": "2027-03-27",
         "park": _park(20.0, 56.58, False),
         "recordings": [
             _rec("2027-03-27T19:38:34Z", "2027-03-27T20:01:14Z", "2027-03-27T19:38:34+00:00",
                  "2027-03-27T20:01:14+00:00", 53.9, 57.2, 51.0),
             _rec("2027-03-27T21:51:44Z", "2027-03-27T22:16:04Z", "2027-03-27T21:51:44+00:00",
                  "2027-03-27T22:16:04+00:00", 61.0, 64.4, 74.0)],
         "skipped": [],
         "tuning": _tuning(1420.586)},
        {"date": "2027-03-28",
         "park": _park(40.0, 76.58, True, "2027-03-28T19:00:00Z", "2027-03-28T19:15:00Z",
                       "2027-03-28T20:00:00+01:00", "2027-03-28T20:15:00+01:00"),
         "recordings": [
             # 20:14:20 UTC + 1 h (BST) = 21:14:20 local.
             _rec("2027-03-28T20:14:20Z", "2027-03-28T20:40:00Z", "2027-03-28T21:14:20+01:00",
                  "2027-03-28T21:40:00+01:00", 70.2, 74.9, 88.0),
             # 22:40 UTC = 23:40 BST; ends 23:05:30 UTC = 00:05:30 BST on the next local day.
             _rec("2027-03-28T22:40:00Z", "2027-03-28T23:05:30Z", "2027-03-28T23:40:00+01:00",
                  "2027-03-29T00:05:30+01:00", 125.0, 129.5, 101.0)],
         "skipped": [
             {"start_utc": "2027-03-28T12:00:00Z", "end_utc": "2027-03-28T12:20:00Z",
              "start_local": "2027-03-28T13:00:00+01:00", "end_local": "2027-03-28T13:20:00+01:00",
              "l_bins": [200], "reason": "sun"}],
         "tuning": _tuning(1420.612, fits=False, spike_clear=False,
                           spike_v_lsr_min_kms=-55.0, spike_v_lsr_max_kms=-52.5)},
        {"date": "2027-03-29", "park": _park(40.0, 76.58, False), "recordings": [],
         "skipped": [
             {"start_utc": "2027-03-29T09:00:00Z", "end_utc": "2027-03-29T09:20:00Z",
              "start_local": "2027-03-29T10:00:00+01:00", "end_local": "2027-03-29T10:20:00+01:00",
              "l_bins": [100], "reason": "not wanted"}],
         "tuning": None},
    ]
    # Wanted [30, 90) and [120, 140): 60 + 20 = 80 one-degree bins; 80 - 47 = 33 still short,
    # grouped as 30-52 (23 bins) and 130-139 (10 bins).
    gap_a, gap_b = list(range(30, 53)), list(range(130, 140))
    wanted = list(range(30, 90)) + list(range(120, 140))
    return {
        "schema": "hiplan.plan/1", "kind": "drift",
        "site": dict(HOLLOWMERE_SITE),
        "period": {"start_utc": "2027-03-26T00:00:00Z", "end_utc": "2027-03-29T23:00:00Z",
                   "start_local": "2027-03-26T00:00:00+00:00",
                   "end_local": "2027-03-30T00:00:00+01:00", "days": 3.9583},
        "settings": {"b_max_deg": 3.0, "bin_width_deg": 1.0, "want": [[30, 90], [120, 140]],
                     "target_minutes": 60.0, "target_rms_k": None, "night_only": False,
                     "windows": ["Mon–Fri 19:00–23:30", "Sat–Sun 10:00–23:59"],
                     "max_reparks_per_day": 1, "repark_minutes": 15, "sun_min_sep_deg": 20.0,
                     "lsr_definition": "standard", "rotation_model": "iau1985",
                     "alarm_minutes": 15},
        "days": days,
        "summary": {"wanted_bins": 80, "done_before": 12, "done_after": 47,
                    "depth_before_min": {str(b): 0.0 for b in wanted},
                    "depth_after_min": {str(b): (20.0 if b in gap_a else 35.2 if b in gap_b else 64.5)
                                        for b in wanted},
                    "gaps": [{"l_range": "30–52", "bins": gap_a,
                              "reason": "not enough time this period"},
                             {"l_range": "130–139", "bins": gap_b,
                              "reason": "only near the Sun this period"}]},
    }


def _block(kind, name, start_local, end_local, start_utc, end_utc, l_deg=None, tuning=None):
    return {"kind": kind, "name": name, "start_utc": start_utc, "end_utc": end_utc,
            "start_local": start_local, "end_local": end_local, "l_deg": l_deg, "b_deg": 0.0,
            "ra_deg": 200.0, "dec_deg": -60.0, "alt_start_deg": 40.1, "alt_end_deg": 42.3,
            "az_start_deg": 150.0, "az_end_deg": 152.5, "sun_sep_min_deg": 80.2,
            "lsr_corr_min_kms": -10.2, "lsr_corr_max_kms": -9.8, "tuning": tuning}


def saltbush_survey() -> dict:
    """Two evenings at Saltbush Ridge (Adelaide, UTC+10:30 in March: local - 10:30 = UTC)."""
    t = _tuning(1420.300)
    blocks = [
        _block("slew", "slew", "2027-03-02T20:00:00+10:30", "2027-03-02T20:01:30+10:30",
               "2027-03-02T09:30:00Z", "2027-03-02T09:31:30Z"),
        _block("target", "G300+0", "2027-03-02T20:01:30+10:30", "2027-03-02T20:21:30+10:30",
               "2027-03-02T09:31:30Z", "2027-03-02T09:51:30Z", 300.0, t),
        _block("slew", "slew", "2027-03-02T20:21:30+10:30", "2027-03-02T20:22:30+10:30",
               "2027-03-02T09:51:30Z", "2027-03-02T09:52:30Z"),
        _block("reference", "OFF300+20", "2027-03-02T20:22:30+10:30", "2027-03-02T20:32:30+10:30",
               "2027-03-02T09:52:30Z", "2027-03-02T10:02:30Z", 300.0, t),
        _block("target", "G330+0", "2027-03-03T20:30:00+10:30", "2027-03-03T20:50:00+10:30",
               "2027-03-03T10:00:00Z", "2027-03-03T10:20:00Z", 330.0, t),
    ]
    site = {"name": "Saltbush Ridge Secondary School", "latitude_deg": -34.93,
            "longitude_deg": 138.60, "height_m": 60, "timezone": "Australia/Adelaide",
            "mount": "altaz", "diameter_m": 2.0, "beamwidth_deg": 7.5, "elevation_min_deg": 15,
            "elevation_max_deg": 88, "sun_min_sep_deg": 25, "b_max_deg": 4}
    return {
        "schema": "hiplan.survey/1", "kind": "survey", "site": site,
        "period": {"start_utc": "2027-03-01T13:30:00Z", "end_utc": "2027-03-03T13:30:00Z",
                   "start_local": "2027-03-02T00:00:00+10:30", "end_local": "2027-03-04T00:00:00+10:30",
                   "days": 2},
        "settings": {"night_only": True, "windows": ["Tue–Wed 19:30–22:00"], "sun_min_sep_deg": 25.0,
                     "moon_min_sep_deg": 5.0, "alarm_minutes": 15, "lsr_definition": "standard"},
        "blocks": blocks,
        "unscheduled": [{"name": "G60+0", "reason": "never rises above the elevation limit"}],
    }


def _png(color="tab:blue") -> bytes:
    fig = Figure(figsize=(4, 2.5))
    ax = fig.add_subplot()
    ax.plot(np.arange(10), np.arange(10) ** 0.5, color=color)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=60)
    return buffer.getvalue()


def _visible_text(page: str) -> str:
    """Page text without tags, entities decoded (what a reader sees)."""
    import html
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page)).split())


def _day_table(page: str) -> str:
    match = re.search(r'<table id="day-table">.*?</table>', page, re.DOTALL)
    assert match, "the page has a day table"
    return match.group(0)


# ------------------------------------------------------------------ drift content

def test_drift_html_content():
    plan = hollowmere_plan()
    page = brief_html(plan)
    text = _visible_text(page)
    table = _visible_text(_day_table(page))
    assert "Hollowmere Amateur Radio Astronomy Club" in text
    # Period: 26 Mar (Fri) to 29 Mar (Mon) 2027; end_local is midnight after the last day.
    assert "Fri 26 Mar 2027 to Mon 29 Mar 2027 (4 days)" in text
    # Every recording's local start, floored to the minute (outward rounding: start early).
    for day in plan["days"]:
        for rec in day["recordings"]:
            assert rec["start_local"][11:16] in table
    # Ends rounded up: 20:05:10 -> 20:06, 22:20:00 stays 22:20; BST: 21:14:20 -> 21:14.
    assert "19:42–20:06" in table and "21:55–22:20" in table and "21:14–21:40" in table
    assert "23:40–00:06 (next day)" in table
    assert "UTC+00:00 then UTC+01:00" in text
    # Re-parks: 26 Mar 18:30-18:45 and 28 Mar 20:00-20:15 BST; 27 and 29 Mar the dish stays.
    assert "MOVE 18:30–18:45" in table and "MOVE 20:00–20:15" in table
    assert table.count("stays") == 2
    assert "elevation 76.6°" in table and "dec +40.0°" in table and "facing south" in table
    assert "completes 55–56°" in table
    assert "Sun 52°" in table
    assert "1420.586 MHz" in table and "1420.612 MHz" in table
    assert "nothing to record" in table  # 29 Mar
    # Skipped passages: 2 near the Sun (26, 28 Mar), 1 outside windows, 1 not wanted.
    assert "Passages not to record: 4" in text and "2 too near the Sun" in text
    # Site settings.
    for words in ("3 m diameter", "4.93°", "12.0° to 90.0°", "|b| ≤ 3.0°", "20° to the Sun",
                  "meridian transit mount"):
        assert words in text, words


def test_drift_tuning_and_coverage():
    text = _visible_text(brief_html(hollowmere_plan()))
    assert "changes between 1420.586 and 1420.612 MHz" in text
    assert "0.495 km/s" in text
    assert "−42.7 to +40.1 km/s" in text
    # 28 Mar does not fit (margin -0.21 MHz) and has the spike inside the line at -55.0..-52.5.
    assert "No on Sun 28 Mar: short by up to 0.210 MHz" in text
    assert "inside the line at LSR velocities −55.0 to −52.5 km/s on Sun 28 Mar" in text
    assert "12 of 80" in text and "47 of 80" in text
    assert "30–52°" in text and "not enough time this period" in text
    assert "only near the Sun this period" in text
    assert "130–139° 10 35 only near the Sun" in text  # 10 bins, each 35.2 min -> "35"


def test_spike_position_computed_when_missing():
    plan = hollowmere_plan()
    day = plan["days"][2]
    del day["tuning"]["spike_v_lsr_min_kms"], day["tuning"]["spike_v_lsr_max_kms"]
    # Centre at the rest frequency: topocentric velocity 0, so the spike sits at the LSR
    # correction itself, -42.7 .. +40.1 km/s.
    day["tuning"]["centre_mhz"] = 1420.405751768
    text = _visible_text(brief_html(plan))
    assert "inside the line at LSR velocities −42.7 to +40.1 km/s" in text


def test_safety_and_goes_wrong():
    for plan in (hollowmere_plan(), saltbush_survey()):
        text = _visible_text(brief_html(plan))
        for words in ("Sun", "feed", "1400–1427 MHz", "never transmit", "Lightning", "Wind",
                      "Mains power", "second person", "local building, electrical and radio codes",
                      "If something goes wrong", "LNA has power", "interference",
                      "do not climb up alone", "Stow the dish"):
            assert words in text, words
    assert "missed re-park" in _visible_text(brief_html(hollowmere_plan()))


# ------------------------------------------------------------------ survey content

def test_survey_html_content():
    page = brief_html(saltbush_survey())
    text = _visible_text(page)
    table = _visible_text(_day_table(page))
    assert "Saltbush Ridge Secondary School" in text
    assert "Tue 2 Mar 2027 to Wed 3 Mar 2027 (2 days)" in text
    # Blocks rounded outward (start down, end up): 20:01:30 -> 20:01, 20:21:30 -> 20:22;
    # the reference 20:22:30-20:32:30 -> 20:22-20:33.
    assert "20:01–20:22" in table and "20:22–20:33" in table and "20:30–20:50" in table
    assert "G300+0" in table and "OFF300+20" in table and "G330+0" in table
    # The two evenings are a day apart (> 2 h): two sessions; the first holds 2 slews,
    # 1.5 + 1.0 = 2.5 min, summarised in its heading rather than listed.
    assert "Session 1: Tue 2 Mar 2027, 20:00 to 20:33 (2 slews, 2.5 min, not listed)" in table
    assert "Session 2: Wed 3 Mar 2027, 20:30 to 20:50" in table
    assert "az 150.0°→152.5°" in table and "el 40.1°→42.3°" in table
    assert "20.0" in table  # minutes of G300+0
    assert "1420.300 MHz, the same for the whole plan" in text
    assert "G60+0" in text and "never rises above the elevation limit" in text
    assert "G300+0: 20.0 min" in text
    assert "motorised alt-az mount" in text


def test_wrong_schema_rejected():
    plan = hollowmere_plan()
    plan["schema"] = "hiplan.crossings/1"
    with pytest.raises(UserError, match="hiplan.crossings/1"):
        brief_html(plan)


# ------------------------------------------------------------------ escaping, self-containment

HOSTILE = 'Evil <script>alert("x")</script> & <img src=x onerror=alert(1)> Club'


def test_html_escapes_plan_strings():
    plan = hollowmere_plan()
    plan["site"]["name"] = HOSTILE
    plan["summary"]["gaps"][0]["reason"] = "<b>bold</b>"
    plan["days"][0]["skipped"][0]["reason"] = "<i>odd</i>"
    page = brief_html(plan)
    assert "<script" not in page and "<img src=x" not in page and "<b>bold" not in page
    assert "<i>odd" not in page
    assert "&lt;script&gt;alert(&quot;x&quot;)&lt;/script&gt; &amp;" in page
    # A reader still sees the name as written.
    assert HOSTILE in _visible_text(page)

    survey = saltbush_survey()
    survey["blocks"][1]["name"] = "<script>x</script>"
    survey["unscheduled"][0]["name"] = "<svg onload=1>"
    page = brief_html(survey)
    assert "<script" not in page and "<svg" not in page


def test_page_is_self_contained():
    charts = {"month": _png(), "depth": _png("tab:orange")}
    for plan in (hollowmere_plan(), saltbush_survey()):
        page = brief_html(plan, charts)
        for ref in ("http://", "https://", 'src="/', "<link", "<script", "@import", "url("):
            assert ref not in page, ref
        # Every src is an embedded image.
        assert re.findall(r'src="([^"]*)"', page)
        assert all(s.startswith("data:image/png;base64,") for s in re.findall(r'src="([^"]*)"', page))
        assert page.count('id="day-table"') == 1
        assert "@media print" in page and "break-before: page" in page
    page = brief_html(hollowmere_plan(), charts)
    assert page.index('id="chart-month"') < page.index('id="chart-depth"')
    with pytest.raises(ValueError, match="month"):
        brief_html(hollowmere_plan(), {"month": b"GIF89a..."})


def test_no_chart_section_without_charts():
    assert 'id="charts"' not in brief_html(hollowmere_plan())
    assert "## Charts" not in brief_markdown(hollowmere_plan())


# ------------------------------------------------------------------ Markdown

def _md_tables(markdown: str):
    """Rendered with markdown-it (CommonMark + GFM tables): list of tables as rows of cells."""
    rendered = MarkdownIt("commonmark").enable("table").render(markdown)
    tables = []
    for table in re.findall(r"<table>.*?</table>", rendered, re.DOTALL):
        rows = re.findall(r"<tr>(.*?)</tr>", table, re.DOTALL)
        tables.append([re.findall(r"<t[hd][^>]*>(.*?)</t[hd]>", row, re.DOTALL) for row in rows])
    return rendered, tables


def test_markdown_drift():
    plan = hollowmere_plan()
    markdown = brief_markdown(plan, {"month": "brief-month.png"})
    rendered, tables = _md_tables(markdown)
    day_table = tables[0]
    # Header + one row per day, every row with the header's 7 columns.
    assert len(day_table) == 1 + len(plan["days"])
    assert {len(row) for row in day_table} == {7}
    assert day_table[1][0] == "Fri 26 Mar"
    for day, row in zip(plan["days"], day_table[1:]):
        for rec in day["recordings"]:
            assert rec["start_local"][11:16] in row[3]
    assert "<strong>MOVE 18:30–18:45</strong>" in day_table[1][2]
    # Gap table: 2 gaps, 4 columns.
    assert len(tables[1]) == 3 and {len(r) for r in tables[1]} == {4}
    assert '<img src="brief-month.png" alt="month chart"' in rendered
    assert "1420.586" in markdown and "1400–1427 MHz" in markdown
    assert "## If something goes wrong" in markdown
    assert markdown.startswith("# Operator brief: Hollowmere Amateur Radio Astronomy Club\n")


def test_markdown_survey_and_escaping():
    survey = saltbush_survey()
    survey["site"]["name"] = HOSTILE
    survey["blocks"][1]["name"] = "G300|0 *x*"
    markdown = brief_markdown(survey)
    rendered, tables = _md_tables(markdown)
    assert "<script" not in rendered and "<img" not in rendered
    assert HOSTILE.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;").replace(
        '"', "&quot;") in rendered
    # One table per session: session 1 has target + reference (slews folded), session 2 one.
    assert [len(t) - 1 for t in tables[:2]] == [2, 1]
    assert {len(r) for t in tables[:2] for r in t} == {8}
    # The pipe in the name stays inside its cell, the asterisks stay literal.
    assert tables[0][1][2].startswith("G300|0 *x*")
    assert "Session 1: Tue 2 Mar 2027" in rendered


# ------------------------------------------------------------------ command line

def _args(argv):
    parser = argparse.ArgumentParser()
    brief_cli.add_arguments(parser)
    return parser.parse_args(argv)


class _Console:
    file = None  # not stdout: the CLI stays quiet


def _write_plan(tmp_path, plan, name="plan.json"):
    path = tmp_path / name
    path.write_text(json.dumps(plan, indent=2), encoding="utf-8")
    return path


def test_cli_read_errors(tmp_path):
    with pytest.raises(UserError, match=r"missing\.json: plan file not found"):
        brief_cli.read_plan(tmp_path / "missing.json")
    bad = tmp_path / "bad.json"
    bad.write_text('{\n  "schema": "hiplan.plan/1",\n  "kind": drift\n}\n', encoding="utf-8")
    # The unquoted word is on line 3 of the file.
    with pytest.raises(UserError, match=r"bad\.json:3: not valid JSON"):
        brief_cli.read_plan(bad)
    other = _write_plan(tmp_path, {"schema": "hiplan.crossings/1"}, "other.json")
    with pytest.raises(UserError, match=r"other\.json: schema 'hiplan.crossings/1' is not a plan"):
        brief_cli.read_plan(other)
    for problem in (bad, other, tmp_path / "missing.json"):
        with pytest.raises(UserError) as info:
            brief_cli.read_plan(problem)
        assert "\n" not in str(info.value)


def test_cli_writes_html_and_markdown(tmp_path, monkeypatch):
    # Stand-in for planner.plots (written separately): the CLI must render its Figures to PNG.
    fake = types.ModuleType("planner.plots")
    calls = []

    def chart(doc, color="tab:blue"):
        calls.append(doc["schema"])
        fig = Figure(figsize=(3, 2))
        fig.add_subplot().plot([0, 1], [1, 0], color=color)
        return fig

    fake.month_chart = chart
    fake.depth_chart = lambda doc: chart(doc, "tab:orange")
    monkeypatch.setitem(sys.modules, "planner.plots", fake)
    import planner
    monkeypatch.setattr(planner, "plots", fake, raising=False)

    plan_path = _write_plan(tmp_path, hollowmere_plan())
    out = tmp_path / "brief.html"
    assert brief_cli.run(_args([str(plan_path), "-o", str(out)]), _Console()) == 0
    page = out.read_text(encoding="utf-8")
    assert page.count("data:image/png;base64,") == 2 and len(calls) == 2
    # Existing file kept without --force.
    with pytest.raises(UserError, match="already exists"):
        brief_cli.run(_args([str(plan_path), "-o", str(out)]), _Console())
    assert brief_cli.run(_args([str(plan_path), "-o", str(out), "--force", "--no-charts"]),
                         _Console()) == 0
    assert "data:image" not in out.read_text(encoding="utf-8")

    md = tmp_path / "brief.md"
    assert brief_cli.run(_args([str(plan_path), "-o", str(md)]), _Console()) == 0
    markdown = md.read_text(encoding="utf-8")
    assert markdown.startswith("# Operator brief")
    assert "![month chart](brief-month.png)" in markdown
    assert (tmp_path / "brief-month.png").read_bytes()[:4] == b"\x89PNG"
    assert (tmp_path / "brief-depth.png").exists()

    with pytest.raises(UserError, match="--markdown"):
        brief_cli.run(_args([str(plan_path), "-o", str(tmp_path / "x.html"), "--markdown"]),
                      _Console())
    # Any other suffix gives HTML unless --markdown is given.
    assert brief_cli.output_format(tmp_path / "brief.txt", False) == "html"
    assert brief_cli.output_format(tmp_path / "brief.txt", True) == "markdown"
    assert brief_cli.output_format(None, True) == "markdown"


def test_cli_without_plots_module(tmp_path, monkeypatch, capsys):
    # If the charts cannot be drawn (matplotlib broken or missing), the brief still comes out.
    import planner
    monkeypatch.setitem(sys.modules, "planner.plots", None)  # makes the import fail
    monkeypatch.delattr(planner, "plots", raising=False)  # even after an earlier import
    plan_path = _write_plan(tmp_path, saltbush_survey())
    assert brief_cli.run(_args([str(plan_path), "-o", "-"]), _Console()) == 0
    page = capsys.readouterr().out
    assert page.startswith("<!DOCTYPE html>") and "data:image" not in page


# ------------------------------------------------------------------ real browser

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
BROWSER_TIMEOUT_S = 90  # first start after installing took 18 s here, later starts 1-3 s

# Appended to a copy of the page: measures the day table after layout and writes the numbers
# into the DOM, which --dump-dom then prints.
_MEASURE = """<script>
const t = document.getElementById("day-table");
t.scrollIntoView();
const r = t.getBoundingClientRect();
const s = getComputedStyle(t);
const hit = document.elementFromPoint(r.left + r.width / 2, r.top + Math.min(r.height, innerHeight) / 2);
document.body.setAttribute("data-measure", JSON.stringify({
  w: r.width, h: r.height, left: r.left, right: r.right, vw: innerWidth,
  scrollw: document.documentElement.scrollWidth, display: s.display, visibility: s.visibility,
  rows: t.rows.length, inside: !!hit && t.contains(hit)}));
</script>"""


def _chromium(tmp_path, *extra):
    profile = tmp_path / "profile"
    return subprocess.Popen(
        [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
         "--no-first-run", "--disable-background-networking", "--disable-component-update",
         "--disable-sync", f"--user-data-dir={profile}", "--window-size=1200,1600", *extra],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


@pytest.mark.skipif(CHROMIUM is None, reason="chromium (or chromium-browser) is not on PATH; "
                                             "install it to run the real-browser check")
def test_real_browser_renders_page(tmp_path):
    """Render the page in headless Chromium: the screenshot is not blank and the day table is
    laid out, visible and inside the window.

    Method: (1) a screenshot of the page, read back with matplotlib, must show many distinct
    colours and a reasonable inked fraction (a blank or CSS-broken page fails both); (2) a copy
    of the page with a small script that measures ``#day-table`` after layout
    (getBoundingClientRect, computed style, elementFromPoint at its centre) and stores the result
    in the DOM, read back with --dump-dom. This checks layout, not just presence in the DOM.
    """
    plan = hollowmere_plan()
    page = brief_html(plan, {"month": _png(), "depth": _png("tab:orange")})
    (tmp_path / "brief.html").write_text(page, encoding="utf-8")
    (tmp_path / "measure.html").write_text(page.replace("</body>", _MEASURE + "</body>"),
                                           encoding="utf-8")
    shot = tmp_path / "shot.png"
    began = time.perf_counter()
    # Two profiles so both browsers can run at once.
    shot_run = _chromium(tmp_path / "a", f"--screenshot={shot}", f"file://{tmp_path}/brief.html")
    dom_run = _chromium(tmp_path / "b", "--dump-dom", f"file://{tmp_path}/measure.html")
    try:
        _, shot_err = shot_run.communicate(timeout=BROWSER_TIMEOUT_S)
        dom, dom_err = dom_run.communicate(timeout=BROWSER_TIMEOUT_S)
    finally:
        for proc in (shot_run, dom_run):
            if proc.poll() is None:
                proc.kill()
                proc.communicate()
    elapsed_s = time.perf_counter() - began
    print(f"chromium took {elapsed_s:.1f} s")
    assert shot_run.returncode == 0 and shot.exists(), shot_err[-2000:]
    assert dom_run.returncode == 0, dom_err[-2000:]

    rgba = imread(shot)
    assert rgba.shape[:2] == (1600, 1200)
    rgb = rgba[..., :3]
    # Inked: clearly darker than white in some channel (anti-aliased text edges count too).
    inked = np.mean(np.any(rgb < 0.85, axis=-1))
    rgb8 = (rgb * 255).round().astype(np.uint32)
    distinct = np.unique(rgb8[..., 0] << 16 | rgb8[..., 1] << 8 | rgb8[..., 2]).size
    # A blank page gives inked = 0 and 1 colour; this page (text, tables, tinted boxes) gives
    # roughly 15-25 % inked and hundreds of colours. Limits sit far below that yet far above blank.
    print(f"screenshot: {inked:.1%} inked, {distinct} colours")
    assert inked > 0.03, inked
    assert distinct > 50, distinct

    found = re.search(r'data-measure="([^"]*)"', dom)
    assert found, "the measuring script ran"
    import html
    measure = json.loads(html.unescape(found.group(1)))
    assert measure["display"] == "table" and measure["visibility"] == "visible"
    assert measure["w"] > 600 and measure["h"] > 100, measure
    # Header row plus one row per day.
    assert measure["rows"] == 1 + len(plan["days"])
    # Nothing overflows the window sideways, and the table is not covered by anything.
    assert measure["right"] <= measure["vw"] + 0.5 and measure["scrollw"] <= measure["vw"], measure
    assert measure["inside"], measure


# ------------------------------------------------------------------ drive angle, retunes, windows

def test_survey_shows_the_drive_azimuth_and_explains_the_wrap_once():
    survey = saltbush_survey()
    # A cable wrap of -170..350 deg (the Saltbush Ridge site file): sky 350.0 deg is driven as
    # 350 - 360 = -10.0 deg when the schedule comes from the west side of the wrap.
    survey["settings"].update({"azimuth_min_deg": -170.0, "azimuth_max_deg": 350.0})
    survey["blocks"][1].update({"az_start_deg": 350.0, "az_end_deg": 347.5,
                                "drive_az_start_deg": -10.0, "drive_az_end_deg": -12.5})
    survey["blocks"][3].update({"drive_az_start_deg": 150.0, "drive_az_end_deg": 152.5})
    page = brief_html(survey)
    table = _visible_text(_day_table(page))
    assert "Drive az / El" in table
    assert "drive az −10.0°→−12.5° (sky 350.0°→347.5°)" in table
    # Drive and sky azimuth equal: no bracket.
    assert "drive az 150.0°→152.5° el" in table
    # The wrap is explained once, above the table, with the mount's range.
    text = _visible_text(page)
    assert text.count("cable wrap") == 1
    assert "runs from −170° to 350°, more than one turn (the cable wrap)" in text
    # A plan without drive angles (written by an older version) still shows the sky azimuth.
    assert "sky az 150.0°→152.5°" in _visible_text(_day_table(brief_html(saltbush_survey())))


def test_drift_marks_retune_days():
    plan = hollowmere_plan()
    flags = [True, False, True, None]  # 26 Mar set, 27 Mar kept, 28 Mar new setting, 29 Mar idle
    for day, flag in zip(plan["days"], flags):
        if day["tuning"] is not None:
            day["tuning"]["retune"] = flag
    page = brief_html(plan)
    rows = re.findall(r"<tr[^>]*>.*?</tr>", _day_table(page), re.DOTALL)[1:]
    assert "RETUNE to 1420.586 MHz" in _visible_text(rows[0])
    assert "RETUNE" not in _visible_text(rows[1]) and "1420.586 MHz" in _visible_text(rows[1])
    assert "RETUNE to 1420.612 MHz" in _visible_text(rows[2])
    text = _visible_text(page)
    assert ("2 settings, each kept until the next: 1420.586 MHz from Fri 26 Mar; "
            "1420.612 MHz from Sun 28 Mar") in text


def test_windows_are_shown_in_words():
    plan = hollowmere_plan()
    plan["settings"]["windows"] = ["Fri     18:30-23:30", "Sat 21:00-02:00",
                                   "RRULE:FREQ=WEEKLY;BYDAY=FR;BYHOUR=18;BYMINUTE=30 for 3h"]
    for page in (brief_html(plan), brief_markdown(plan)):
        text = _visible_text(page) if page.startswith("<!") else page
        assert ("Fri 18:30–23:30; Sat 21:00–02:00 (next day); every Friday 18:30 for 3 h."
                in text), text[:3000]
        assert "RRULE" not in text and "Fri     18" not in text


def test_cli_writes_beside_the_plan_by_default(tmp_path, monkeypatch, capsys):
    import planner
    monkeypatch.setitem(sys.modules, "planner.plots", None)  # no charts: fast
    monkeypatch.delattr(planner, "plots", raising=False)
    plan_path = _write_plan(tmp_path, hollowmere_plan(), "march.json")
    assert brief_cli.run(_args([str(plan_path)]), _Console()) == 0
    assert capsys.readouterr().out == ""  # nothing dumped on the terminal
    written = tmp_path / "march-brief.html"
    assert written.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    # Kept without --force, replaced with it.
    with pytest.raises(UserError, match=r"march-brief\.html: already exists"):
        brief_cli.run(_args([str(plan_path)]), _Console())
    assert brief_cli.run(_args([str(plan_path), "--force"]), _Console()) == 0
    # --markdown picks the .md name; "-o -" prints instead of writing.
    assert brief_cli.run(_args([str(plan_path), "--markdown"]), _Console()) == 0
    assert (tmp_path / "march-brief.md").read_text(encoding="utf-8").startswith("# Operator brief")
    assert brief_cli.run(_args([str(plan_path), "-o", "-", "--markdown"]), _Console()) == 0
    assert capsys.readouterr().out.startswith("# Operator brief")
    with pytest.raises(UserError, match="would replace the plan file"):
        brief_cli.run(_args([str(plan_path), "-o", str(plan_path)]), _Console())
    # The help says where the brief goes.
    parser = argparse.ArgumentParser()
    brief_cli.add_arguments(parser)
    assert "plan.json->plan-brief.html" in re.sub(r"\s+", "", parser.format_help())
