"""iCalendar export of plans: RFC 5545 structure, local times across clock
changes, stable UIDs, alarms, survey slews, errors and the calendar command.

Plans are written by hand from docs/plan-format.md. Every ``*_local`` time
below is worked out by hand from its ``*_utc`` time and the published clock
rules, so the checks compare against the outside world, not our own output:

- UK: summer time (BST = UTC+1) begins at 01:00 UTC on the last Sunday of
  March and ends at 01:00 UTC on the last Sunday of October (Summer Time Order
  2002, following EU Directive 2000/84/EC). In 2027: 28 March, 31 October.
- South Australia: daylight time (ACDT = UTC+10:30) ends at 03:00 ACDT on the
  first Sunday of April and begins at 02:00 ACST (UTC+9:30) on the first
  Sunday of October (Daylight Saving Act 1971, from memory). In 2027: 4 April
  (16:30 UTC on 3 April) and 3 October (16:30 UTC on 2 October).

The raw-bytes checks are an RFC 5545 reader of our own (content lines,
folding, BEGIN/END nesting, VTIMEZONE onsets) independent of ``icalendar``.
"""
from __future__ import annotations

import argparse
import copy
import io
import json
import os
import re
import uuid
from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import icalendar
import pytest
from rich.console import Console

from planner import ical
from planner.cli import calendar as calendar_cli
from planner.cli.common import Parser
from planner.errors import UserError

UTC = timezone.utc
LONDON = ZoneInfo("Europe/London")
ADELAIDE = ZoneInfo("Australia/Adelaide")
STAMP = datetime(2027, 3, 1, 12, 0, tzinfo=UTC)

SAFETY_WORDS = ("Sun", "wind", "rain", "ice", "darkness", "thunder", "1400-1427 MHz",
                "local building and electrical codes")

# ------------------------------------------------------------------ plans

HOLLOWMERE_SITE = {
    "name": "Hollowmere Amateur Radio Astronomy Club", "latitude_deg": 53.42,
    "longitude_deg": -2.07, "height_m": 180, "timezone": "Europe/London", "mount": "transit",
    "diameter_m": 3.0, "beamwidth_deg": 4.93, "elevation_min_deg": 12, "elevation_max_deg": 90,
    "sun_min_sep_deg": 20, "b_max_deg": 3,
}

# Transit park for dec +20 on the south meridian at latitude 53.42:
# elevation = 90 - 53.42 + 20 = 56.58 deg; for dec 0: 90 - 53.42 = 36.58 deg.
PARK_DEC20 = {"dec_deg": 20.0, "alt_deg": 56.58, "az_deg": 180.0, "facing": "south"}
PARK_DEC0 = {"dec_deg": 0.0, "alt_deg": 36.58, "az_deg": 180.0, "facing": "south"}


def _rec(start_utc, end_utc, start_local, end_local, l0, l1, bins, new, lsr, sun, night):
    return {"start_utc": start_utc, "end_utc": end_utc, "peak_utc": start_utc,
            "start_local": start_local, "end_local": end_local,
            "l_start_deg": l0, "l_end_deg": l1, "l_bins": bins,
            "bin_minutes": [5.0] * len(bins), "new_bins": new,
            "sun_sep_min_deg": sun, "moon_sep_min_deg": 55.7, "night": night,
            "lsr_corr_min_kms": lsr[0], "lsr_corr_max_kms": lsr[1]}


def _tuning(centre_mhz):
    return {"centre_mhz": centre_mhz, "line_low_mhz": centre_mhz - 0.64,
            "line_high_mhz": centre_mhz + 0.64, "fits": True, "margin_mhz": 0.64,
            "spike_clear": False, "channel_width_kms": 0.495, "v_lsr_min_kms": -133.1,
            "v_lsr_max_kms": 54.3, "lsr_corr_min_kms": -42.7, "lsr_corr_max_kms": 40.1}


def drift_plan() -> dict:
    """Four days at Hollowmere around the 2027-03-28 clock change (UTC+0 -> UTC+1)."""
    return {
        "schema": "hiplan.plan/1", "kind": "drift", "site": dict(HOLLOWMERE_SITE),
        "period": {"start_utc": "2027-03-27T00:00:00Z", "end_utc": "2027-03-30T23:00:00Z",
                   "start_local": "2027-03-27T00:00:00+00:00",
                   "end_local": "2027-03-31T00:00:00+01:00", "days": 4},
        "settings": {"b_max_deg": 3.0, "bin_width_deg": 1.0, "want": [[30, 130], [350, 10]],
                     "target_minutes": 60.0, "target_rms_k": None, "night_only": False,
                     "windows": [], "max_reparks_per_day": 1, "repark_minutes": 15,
                     "sun_min_sep_deg": 20.0, "lsr_definition": "standard",
                     "rotation_model": "iau1985"},  # no alarm_minutes: default applies
        "days": [
            {"date": "2027-03-27",
             "park": {**PARK_DEC20, "move": True,
                      "move_start_utc": "2027-03-27T19:00:00Z",
                      "move_end_utc": "2027-03-27T19:15:00Z",
                      "move_start_local": "2027-03-27T19:00:00+00:00",
                      "move_end_local": "2027-03-27T19:15:00+00:00"},
             "recordings": [
                 _rec("2027-03-27T22:10:00Z", "2027-03-27T23:05:00Z",
                      "2027-03-27T22:10:00+00:00", "2027-03-27T23:05:00+00:00",
                      53.9, 57.2, [53, 54, 55, 56, 57], [55, 56], (31.2, 34.4), 52.0, True)],
             "skipped": [], "tuning": _tuning(1420.586)},
            {"date": "2027-03-28",
             "park": {**PARK_DEC20, "move": False, "move_start_utc": None, "move_end_utc": None,
                      "move_start_local": None, "move_end_local": None},
             "recordings": [
                 # Runs through the change: 00:40 GMT to 01:30 UTC = 02:30 BST.
                 _rec("2027-03-28T00:40:00Z", "2027-03-28T01:30:00Z",
                      "2027-03-28T00:40:00+00:00", "2027-03-28T02:30:00+01:00",
                      117.6, 120.9, [117, 118, 119, 120], [118], (8.1, 9.0), 95.0, True),
                 # The hour just after the change: 01:35 UTC = 02:35 BST.
                 _rec("2027-03-28T01:35:00Z", "2027-03-28T02:20:00Z",
                      "2027-03-28T02:35:00+01:00", "2027-03-28T03:20:00+01:00",
                      121.0, 123.8, [121, 122, 123], [], (7.5, 8.2), 97.0, True),
                 # Past local midnight: 22:06 UTC = 23:06 BST to 23:01 UTC = 00:01 BST.
                 _rec("2027-03-28T22:06:00Z", "2027-03-28T23:01:00Z",
                      "2027-03-28T23:06:00+01:00", "2027-03-29T00:01:00+01:00",
                      53.9, 57.2, [53, 54, 55, 56, 57], [57], (31.0, 34.2), 53.0, True)],
             "skipped": [], "tuning": _tuning(1420.586)},
            {"date": "2027-03-29",
             "park": {**PARK_DEC0, "move": True,
                      "move_start_utc": "2027-03-29T18:00:00Z",
                      "move_end_utc": "2027-03-29T18:15:00Z",
                      "move_start_local": "2027-03-29T19:00:00+01:00",
                      "move_end_local": "2027-03-29T19:15:00+01:00"},
             "recordings": [
                 # Through l = 0: 358.6 -> 1.4 deg.
                 _rec("2027-03-29T12:02:00Z", "2027-03-29T12:40:00Z",
                      "2027-03-29T13:02:00+01:00", "2027-03-29T13:40:00+01:00",
                      358.6, 1.4, [358, 359, 0, 1], [0], (-12.0, -11.1), 31.0, False),
                 _rec("2027-03-29T21:40:00Z", "2027-03-29T22:30:00Z",
                      "2027-03-29T22:40:00+01:00", "2027-03-29T23:30:00+01:00",
                      38.2, 41.7, [38, 39, 40, 41], [39, 40], (25.3, 27.9), 60.0, True)],
             "skipped": [], "tuning": _tuning(1420.650)},
            {"date": "2027-03-30",
             "park": {**PARK_DEC0, "move": False, "move_start_utc": None, "move_end_utc": None,
                      "move_start_local": None, "move_end_local": None},
             "recordings": [], "skipped": [], "tuning": None},
        ],
        "summary": {"wanted_bins": 120, "done_before": 0, "done_after": 9,
                    "depth_before_min": {}, "depth_after_min": {}, "gaps": []},
    }


SALTBUSH_SITE = {
    "name": "Saltbush Ridge Secondary School", "latitude_deg": -34.93, "longitude_deg": 138.60,
    "height_m": 60, "timezone": "Australia/Adelaide", "mount": "altaz", "diameter_m": 2.0,
    "beamwidth_deg": 7.5, "elevation_min_deg": 15, "elevation_max_deg": 88,
    "sun_min_sep_deg": 25, "b_max_deg": 3,
}


def _block(kind, name, start_utc, end_utc, start_local, end_local, alt_az=(40.1, 190.4),
           l_deg=300.0):
    block = {"kind": kind, "name": name, "start_utc": start_utc, "end_utc": end_utc,
             "start_local": start_local, "end_local": end_local}
    if kind != "slew":
        # Positions and pointings are invented; they are only shown in the text.
        block.update({"l_deg": l_deg, "b_deg": 0.0, "ra_deg": 190.0, "dec_deg": -62.7,
                      "alt_start_deg": alt_az[0], "alt_end_deg": alt_az[0] + 2.2,
                      "az_start_deg": alt_az[1], "az_end_deg": alt_az[1] + 2.5,
                      "sun_sep_min_deg": 80.2, "lsr_corr_min_kms": -10.2,
                      "lsr_corr_max_kms": -9.8, "tuning": _tuning(1420.400)})
    else:
        block["tuning"] = None
    return block


def survey_plan() -> dict:
    """The night of 3-4 April 2027 at Saltbush Ridge, through the end of daylight time."""
    return {
        "schema": "hiplan.survey/1", "kind": "survey", "site": dict(SALTBUSH_SITE),
        "period": {"start_utc": "2027-04-03T13:30:00Z", "end_utc": "2027-04-04T14:30:00Z",
                   "start_local": "2027-04-04T00:00:00+10:30",
                   "end_local": "2027-04-05T00:00:00+09:30", "days": 1},
        "settings": {"night_only": False, "windows": [], "sun_min_sep_deg": 25.0,
                     "moon_min_sep_deg": 5.0, "alarm_minutes": 30,
                     "lsr_definition": "standard"},
        "blocks": [
            _block("slew", "slew", "2027-04-03T15:40:00Z", "2027-04-03T15:42:00Z",
                   "2027-04-04T02:10:00+10:30", "2027-04-04T02:12:00+10:30"),
            _block("target", "G300+0", "2027-04-03T15:42:00Z", "2027-04-03T16:12:00Z",
                   "2027-04-04T02:12:00+10:30", "2027-04-04T02:42:00+10:30",
                   alt_az=(48.6, 190.4)),
            _block("slew", "slew", "2027-04-03T16:12:00Z", "2027-04-03T16:14:00Z",
                   "2027-04-04T02:42:00+10:30", "2027-04-04T02:44:00+10:30"),
            _block("reference", "OFF-300", "2027-04-03T16:14:00Z", "2027-04-03T16:29:00Z",
                   "2027-04-04T02:44:00+10:30", "2027-04-04T02:59:00+10:30",
                   alt_az=(60.0, 200.0), l_deg=300.0),
            # The slew runs through 16:30 UTC, when 03:00 ACDT becomes 02:00 ACST.
            _block("slew", "slew", "2027-04-03T16:29:00Z", "2027-04-03T16:31:00Z",
                   "2027-04-04T02:59:00+10:30", "2027-04-04T02:01:00+09:30"),
            # 16:31 UTC = 02:01 ACST, the second 02:01 of the night (the first was
            # 15:31 UTC = 02:01 ACDT).
            _block("target", "G310+0", "2027-04-03T16:31:00Z", "2027-04-03T17:01:00Z",
                   "2027-04-04T02:01:00+09:30", "2027-04-04T02:31:00+09:30",
                   alt_az=(45.0, 180.0), l_deg=310.0),
            _block("slew", "slew", "2027-04-03T17:01:00Z", "2027-04-03T17:03:00Z",
                   "2027-04-04T02:31:00+09:30", "2027-04-04T02:33:00+09:30"),
            # Starts in the repeated hour (02:33 ACST, second occurrence), ends after
            # it (17:33 UTC = 03:03 ACST, which occurs once).
            _block("target", "G320+0", "2027-04-03T17:03:00Z", "2027-04-03T17:33:00Z",
                   "2027-04-04T02:33:00+09:30", "2027-04-04T03:03:00+09:30",
                   alt_az=(42.0, 175.0), l_deg=320.0),
            # Evening, standard time: 10:00 UTC = 19:30 ACST.
            _block("slew", "slew", "2027-04-04T09:58:00Z", "2027-04-04T10:00:00Z",
                   "2027-04-04T19:28:00+09:30", "2027-04-04T19:30:00+09:30"),
            _block("target", "G330+0", "2027-04-04T10:00:00Z", "2027-04-04T10:30:00Z",
                   "2027-04-04T19:30:00+09:30", "2027-04-04T20:00:00+09:30",
                   alt_az=(30.0, 160.0), l_deg=330.0),
            # Back to the stow position: leads to no block.
            _block("slew", "slew", "2027-04-04T10:30:00Z", "2027-04-04T10:32:00Z",
                   "2027-04-04T20:00:00+09:30", "2027-04-04T20:02:00+09:30"),
        ],
        "unscheduled": [{"name": "G120+0", "reason": "never rises above the elevation limit"}],
    }


def drift_expected(plan: dict) -> list[dict]:
    """The plan items that must become events, with their hand-worked times."""
    items = []
    for day in plan["days"]:
        park = day["park"]
        if park["move"]:
            items.append({"start_utc": park["move_start_utc"], "end_utc": park["move_end_utc"],
                          "start_local": park["move_start_local"],
                          "end_local": park["move_end_local"]})
        items.extend(day["recordings"])
    return items


def survey_expected(plan: dict) -> list[dict]:
    return [b for b in plan["blocks"] if b["kind"] in ("target", "reference")]


def export(plan, **kw) -> bytes:
    kw.setdefault("stamp_utc", STAMP)
    return ical.calendar_bytes(ical.plan_calendar(plan, **kw))


def utc(text: str) -> datetime:
    return datetime.fromisoformat(text).astimezone(UTC)


# ------------------------------------------------ an independent RFC 5545 reader

def physical_lines(raw: bytes) -> list[bytes]:
    """Lines of the octet stream; RFC 5545 section 3.1: CRLF ends, <= 75 octets."""
    assert raw.endswith(b"\r\n")
    lines = raw.split(b"\r\n")[:-1]
    for line in lines:
        assert b"\n" not in line and b"\r" not in line, line  # no bare LF or CR
        assert len(line) <= 75, (len(line), line)
    return lines


def content_lines(raw: bytes) -> list[tuple[str, dict, str]]:
    """Unfolded (NAME, params, value); a line starting with space or tab continues
    the previous one (RFC 5545 section 3.1)."""
    logical: list[bytes] = []
    for line in physical_lines(raw):
        if line[:1] in (b" ", b"\t"):
            logical[-1] += line[1:]
        else:
            logical.append(line)
    out = []
    for line in logical:
        text = line.decode("utf-8")
        m = re.fullmatch(r"([A-Za-z0-9-]+)((?:;[A-Za-z0-9-]+=[^;:]*)*):(.*)", text)
        assert m, text
        params = dict(p.split("=", 1) for p in m.group(2).split(";")[1:])
        out.append((m.group(1).upper(), params, m.group(3)))
    return out


def component_tree(raw: bytes) -> dict:
    """Nest components by BEGIN/END, checking that every BEGIN has its END."""
    root = {"name": None, "props": [], "children": []}
    stack = [root]
    for name, params, value in content_lines(raw):
        if name == "BEGIN":
            node = {"name": value.upper(), "props": [], "children": []}
            stack[-1]["children"].append(node)
            stack.append(node)
        elif name == "END":
            assert len(stack) > 1 and stack[-1]["name"] == value.upper(), (value, stack[-1]["name"])
            stack.pop()
        else:
            assert len(stack) > 1, f"property {name} outside any component"
            stack[-1]["props"].append((name, params, value))
    assert len(stack) == 1, f"{stack[-1]['name']} never ENDs"
    assert [c["name"] for c in root["children"]] == ["VCALENDAR"]
    return root["children"][0]


def props(node: dict, name: str) -> list[tuple[dict, str]]:
    return [(p, v) for n, p, v in node["props"] if n == name]


def one(node: dict, name: str) -> tuple[dict, str]:
    found = props(node, name)
    assert len(found) == 1, f"{node['name']} has {len(found)} {name}"
    return found[0]


def children(node: dict, name: str) -> list[dict]:
    return [c for c in node["children"] if c["name"] == name]


def parse_offset(text: str) -> timedelta:
    m = re.fullmatch(r"([+-])(\d\d)(\d\d)(\d\d)?", text)
    assert m, text
    size = timedelta(hours=int(m.group(2)), minutes=int(m.group(3)), seconds=int(m.group(4) or 0))
    return size if m.group(1) == "+" else -size


def parse_wall(text: str) -> datetime:
    return datetime.strptime(text, "%Y%m%dT%H%M%S")


def zone_onsets(vtimezone: dict) -> list[tuple[datetime, timedelta]]:
    """(onset UTC, offset after) of every observance: the onset is DTSTART read
    as a local time in TZOFFSETFROM (RFC 5545 section 3.6.5 and its examples)."""
    onsets = []
    for obs in vtimezone["children"]:
        assert obs["name"] in ("STANDARD", "DAYLIGHT")
        assert not props(obs, "RRULE"), "this reader does not expand RRULE"
        offset_from = parse_offset(one(obs, "TZOFFSETFROM")[1])
        offset_to = parse_offset(one(obs, "TZOFFSETTO")[1])
        walls = [parse_wall(one(obs, "DTSTART")[1])]
        for _, value in props(obs, "RDATE"):
            walls += [parse_wall(v) for v in value.split(",")]
        onsets += [((w - offset_from).replace(tzinfo=UTC), offset_to) for w in walls]
    return sorted(onsets)


def offset_in_force(onsets, moment_utc: datetime) -> timedelta:
    before = [off for onset, off in onsets if onset <= moment_utc]
    assert before, f"{moment_utc} is before the VTIMEZONE's first onset"
    return before[-1]


def resolve(params: dict, value: str, zones: dict) -> datetime:
    """UTC instant of a DATE-TIME value: Z form, or a TZID local time, which
    means its first occurrence when repeated (RFC 5545 section 3.3.5)."""
    if value.endswith("Z"):
        assert "TZID" not in params
        return parse_wall(value[:-1]).replace(tzinfo=UTC)
    assert "TZID" in params, "floating time: the plan's times are absolute"
    onsets = zones[params["TZID"]]
    wall = parse_wall(value)
    fits = [(wall - off).replace(tzinfo=UTC) for off in {o for _, o in onsets}
            if offset_in_force(onsets, (wall - off).replace(tzinfo=UTC)) == off]
    assert fits, f"{value} does not exist in {params['TZID']} (skipped by a clock change)"
    return min(fits)


def check_rfc5545(raw: bytes) -> tuple[dict, dict]:
    """Structural RFC 5545 checks on the octets; returns the tree and the zones."""
    cal = component_tree(raw)
    assert one(cal, "VERSION")[1] == "2.0"
    one(cal, "PRODID")
    zones = {one(z, "TZID")[1]: zone_onsets(z) for z in children(cal, "VTIMEZONE")}
    for event in children(cal, "VEVENT"):
        for name in ("UID", "DTSTAMP", "DTSTART", "DTEND", "SUMMARY", "DESCRIPTION"):
            one(event, name)
        assert re.fullmatch(r"\d{8}T\d{6}Z", one(event, "DTSTAMP")[1])  # UTC (section 3.8.7.2)
        start, end = (resolve(*one(event, n), zones) for n in ("DTSTART", "DTEND"))
        assert end > start  # section 3.8.2.2
        for alarm in children(event, "VALARM"):
            assert one(alarm, "ACTION")[1] == "DISPLAY"
            one(alarm, "TRIGGER")
            one(alarm, "DESCRIPTION")  # required for DISPLAY (section 3.6.6)
        for _, params, _ in event["props"]:
            if "TZID" in params:
                assert params["TZID"] in zones, f"no VTIMEZONE for {params['TZID']}"
    return cal, zones


# ------------------------------------------------------------------ structure

@pytest.mark.parametrize("make", [drift_plan, survey_plan])
def test_output_follows_rfc5545(make):
    raw = export(make())
    cal, zones = check_rfc5545(raw)
    assert one(cal, "PRODID")[1] == "-//hiplan//hiplan 0.1//EN"
    assert one(cal, "CALSCALE")[1] == "GREGORIAN"
    assert make()["site"]["name"] in one(cal, "X-WR-CALNAME")[1]
    assert list(zones) == [make()["site"]["timezone"]]
    # The library reads it back too, with the same events.
    parsed = icalendar.Calendar.from_ical(raw)
    assert len(parsed.events) == len(children(cal, "VEVENT")) > 0
    assert not parsed.get_missing_tzids()


def test_lines_fold_at_75_octets_with_multibyte_text():
    plan = drift_plan()
    # A long name full of two- and three-octet characters forces folds mid-text.
    plan["site"]["name"] = "Høllowmere – Ærial Øbservatory " * 4
    raw = export(plan)
    assert any(line.startswith(b" ") for line in physical_lines(raw))
    check_rfc5545(raw)
    parsed = icalendar.Calendar.from_ical(raw)
    assert all(str(e["LOCATION"]) == plan["site"]["name"].strip() for e in parsed.events)


def test_vtimezone_onsets_are_the_published_clock_changes():
    # UK 2027: BST from 01:00 GMT on 28 March; written as 01:00 in the offset
    # before the change, like the RFC 5545 example "DTSTART:19870405T020000 /
    # TZOFFSETFROM:-0500" for US daylight time from 02:00 EST.
    cal, _ = check_rfc5545(export(drift_plan()))
    (london,) = children(cal, "VTIMEZONE")
    observances = {(o["name"], one(o, "DTSTART")[1], one(o, "TZOFFSETFROM")[1],
                    one(o, "TZOFFSETTO")[1]) for o in london["children"]}
    assert ("DAYLIGHT", "20270328T010000", "+0000", "+0100") in observances
    assert ("STANDARD", "20271031T020000", "+0100", "+0000") in observances
    # South Australia 2027: ACST from 03:00 ACDT on 4 April, ACDT from 02:00
    # ACST on 3 October.
    cal, _ = check_rfc5545(export(survey_plan()))
    (adelaide,) = children(cal, "VTIMEZONE")
    observances = {(o["name"], one(o, "DTSTART")[1], one(o, "TZOFFSETFROM")[1],
                    one(o, "TZOFFSETTO")[1]) for o in adelaide["children"]}
    assert ("STANDARD", "20270404T030000", "+1030", "+0930") in observances
    assert ("DAYLIGHT", "20271003T020000", "+0930", "+1030") in observances


@pytest.mark.parametrize("make, tz", [(drift_plan, LONDON), (survey_plan, ADELAIDE)])
def test_vtimezone_agrees_with_zoneinfo_all_year(make, tz):
    _, zones = check_rfc5545(export(make()))
    onsets = zones[tz.key]
    # Every quarter hour of 2027: Adelaide changes on the half hour in UTC.
    t = datetime(2027, 1, 1, tzinfo=tz).astimezone(UTC)
    end = datetime(2028, 1, 1, tzinfo=tz).astimezone(UTC)
    while t < end:
        assert offset_in_force(onsets, t) == t.astimezone(tz).utcoffset(), t
        t += timedelta(minutes=15)


# ------------------------------------------------------------------ times

@pytest.mark.parametrize("make, expected, tz", [(drift_plan, drift_expected, LONDON),
                                                (survey_plan, survey_expected, ADELAIDE)])
def test_event_times_match_the_plan_across_the_clock_change(make, expected, tz):
    plan = make()
    raw = export(plan)
    cal, zones = check_rfc5545(raw)
    events = children(cal, "VEVENT")
    items = expected(plan)
    assert len(events) == len(items)
    by_start = {utc(item["start_utc"]): item for item in items}
    for event in events:
        for prop, suffix in (("DTSTART", "start"), ("DTEND", "end")):
            params, value = one(event, prop)
            instant = resolve(params, value, zones)
            item = by_start[resolve(*one(event, "DTSTART"), zones)]
            assert instant == utc(item[f"{suffix}_utc"])
            local = datetime.fromisoformat(item[f"{suffix}_local"])
            if "TZID" in params:
                # Wall clock as the volunteer's watch shows it.
                assert params["TZID"] == tz.key
                assert value == f"{local:%Y%m%dT%H%M%S}"
            else:
                # Only the second run of a repeated hour is written in UTC: the
                # same wall clock an hour earlier (before the clocks went back)
                # is another instant with a larger offset.
                earlier = (local.replace(tzinfo=None) - local.utcoffset()
                           - timedelta(hours=1)).replace(tzinfo=UTC).astimezone(tz)
                assert f"{earlier:%H:%M}" == f"{local:%H:%M}"
    # The library's reading gives the plan's local times (offset included).
    for event in icalendar.Calendar.from_ical(raw).events:
        start = event.start.astimezone(tz)
        assert start.isoformat() == by_start[start.astimezone(UTC)]["start_local"]


def test_repeated_hour_is_written_in_utc():
    raw = export(survey_plan()).decode()
    # G310+0 at 02:01 ACST (second occurrence) and G320+0 at 02:33 ACST.
    assert "DTSTART:20270403T163100Z\r\n" in raw
    assert "DTSTART:20270403T170300Z\r\n" in raw
    # G320+0 ends at 03:03 ACST, which happens once: local form.
    assert "DTEND;TZID=Australia/Adelaide:20270404T030300\r\n" in raw
    # G300+0 at 02:12 ACDT is the first occurrence: local form.
    assert "DTSTART;TZID=Australia/Adelaide:20270404T021200\r\n" in raw


# ------------------------------------------------------------------ content

def test_drift_events_one_per_recording_and_repark():
    plan = drift_plan()
    summaries = [str(e["SUMMARY"]) for e in icalendar.Calendar.from_ical(export(plan)).events]
    # 6 recordings + 2 days with move = true (hand count of the plan above).
    assert len(summaries) == 8
    # 56.58 -> "56.6"; l 53.9 -> 54, 57.2 -> 57; 358.6 -> 359, 1.4 -> 1.
    assert {"Move dish to elevation 56.6° facing south",
            "Move dish to elevation 36.6° facing south",
            "HI recording l 54–57° (dish 56.6° S)",
            "HI recording l 118–121° (dish 56.6° S)",
            "HI recording l 121–124° (dish 56.6° S)",
            "HI recording l 359–1° (dish 36.6° S)",
            "HI recording l 38–42° (dish 36.6° S)"} == set(summaries)


def test_drift_descriptions_give_the_instructions():
    plan = drift_plan()
    raw = export(plan)
    events = list(icalendar.Calendar.from_ical(raw).events)
    first = next(e for e in events if e.start.astimezone(UTC) == utc("2027-03-27T22:10:00Z"))
    text = str(first["DESCRIPTION"])
    for needed in ("elevation 56.6°", "azimuth 180.0°", "facing south", "declination +20.0°",
                   "1420.586 MHz", "+31.2 to +34.4 km/s", "l 53.9° → 57.2°", "53–57",
                   "Bins 55–56", "Sun at least 52°", "22:10–23:05 GMT", "at night"):
        assert needed in text, needed
    for word in SAFETY_WORDS:
        assert word in text, word
    repark = next(e for e in events if str(e["SUMMARY"]).startswith("Move dish to elevation 36"))
    text = str(repark["DESCRIPTION"])
    assert "19:00 and 19:15 BST" in text and "1420.650 MHz" in text
    assert "13:02–13:40 BST (l 359–1°)" in text and "22:40–23:30 BST (l 38–42°)" in text
    through = next(e for e in events if e.start.astimezone(UTC) == utc("2027-03-28T00:40:00Z"))
    assert "00:40 GMT – 02:30 BST" in str(through["DESCRIPTION"])
    late = next(e for e in events if e.start.astimezone(UTC) == utc("2027-03-28T22:06:00Z"))
    assert "Sun 28 Mar 23:06–Mon 29 Mar 00:01 BST" in str(late["DESCRIPTION"])
    for event in events:
        assert str(event["LOCATION"]) == HOLLOWMERE_SITE["name"]
        assert (event["GEO"].latitude, event["GEO"].longitude) == (53.42, -2.07)


def test_survey_blocks_are_events_and_slews_are_not():
    plan = survey_plan()
    raw = export(plan)
    events = list(icalendar.Calendar.from_ical(raw).events)
    summaries = [str(e["SUMMARY"]) for e in sorted(events, key=lambda e: e.start)]
    # az 190.4 -> 190, el 48.6 -> 49 (whole degrees at a glance).
    assert summaries == ["Point dish at G300+0 (az 190°, el 49°)",
                         "Point dish at reference OFF-300 (az 200°, el 60°)",
                         "Point dish at G310+0 (az 180°, el 45°)",
                         "Point dish at G320+0 (az 175°, el 42°)",
                         "Point dish at G330+0 (az 160°, el 30°)"]
    slew_starts = {utc(b["start_utc"]) for b in plan["blocks"] if b["kind"] == "slew"}
    assert not slew_starts & {e.start.astimezone(UTC) for e in events}
    g300 = next(e for e in events if "G300+0" in str(e["SUMMARY"]))
    text = str(g300["DESCRIPTION"])
    assert "slews into position, 02:10–02:12 ACDT (2 min)" in text
    assert "1420.400 MHz" in text and "-10.2 to -9.8 km/s" in text
    # Start 190.4/48.6; end 190.4 + 2.5 = 192.9 and 48.6 + 2.2 = 50.8 (see _block).
    assert "azimuth 190.4°, elevation 48.6°" in text
    assert "azimuth 192.9°, elevation 50.8°" in text
    for word in SAFETY_WORDS:
        assert word in text, word
    g310 = next(e for e in events if "G310+0" in str(e["SUMMARY"]))
    assert "02:59 ACDT – 02:01 ACST" in str(g310["DESCRIPTION"])  # the slew through the change
    g320 = next(e for e in events if "G320+0" in str(e["SUMMARY"]))
    assert "02:31–02:33 ACST" in str(g320["DESCRIPTION"])
    # The final slew (to stow) leads to no block and appears nowhere.
    assert not any("20:00–20:02" in str(e["DESCRIPTION"]) for e in events)
    g330 = next(e for e in events if "G330+0" in str(e["SUMMARY"]))
    assert str(g330["DESCRIPTION"]).count("slews") == 1


# ------------------------------------------------------------------ UIDs

def _uids(raw: bytes) -> list[str]:
    return [one(e, "UID")[1] for e in children(component_tree(raw), "VEVENT")]


@pytest.mark.parametrize("make", [drift_plan, survey_plan])
def test_uids_are_stable_unique_and_carry_no_host(make):
    first = export(make(), stamp_utc=datetime(2027, 3, 1, tzinfo=UTC))
    second = export(make(), stamp_utc=datetime(2027, 3, 20, 8, 30, tzinfo=UTC))
    assert _uids(first) == _uids(second)
    assert len(set(_uids(first))) == len(_uids(first))
    for uid in _uids(first):
        assert uuid.UUID(uid).version == 5 and str(uuid.UUID(uid)) == uid
    # Same input, same stamp: the same octets.
    assert export(make()) == export(make())
    assert b"DTSTAMP:20270320T083000Z\r\n" in second


def test_updated_plan_keeps_uids_of_unchanged_tasks():
    plan = drift_plan()
    base = _uids(export(plan))
    moved = copy.deepcopy(plan)
    # A recomputed plan: times a few seconds different, same task.
    moved["days"][0]["recordings"][0]["start_utc"] = "2027-03-27T22:10:20Z"
    moved["days"][0]["recordings"][0]["l_start_deg"] = 53.93
    assert _uids(export(moved)) == base
    # A different stretch of sky at that time is a different task.
    changed = copy.deepcopy(plan)
    changed["days"][0]["recordings"][0]["l_bins"] = [54, 55, 56, 57]
    new = _uids(export(changed))
    assert len(set(new) ^ set(base)) == 2  # exactly one UID replaced
    # A re-park moved to another elevation at the same time updates the event.
    repointed = copy.deepcopy(plan)
    repointed["days"][0]["park"]["alt_deg"] = 60.0
    assert _uids(export(repointed)) == base


# ------------------------------------------------------------------ alarms

def _triggers(raw: bytes) -> set[str]:
    cal = component_tree(raw)
    out = set()
    for event in children(cal, "VEVENT"):
        for alarm in children(event, "VALARM"):  # survey blocks: only a session's first
            out.add(one(alarm, "TRIGGER")[1])
    return out


def test_alarm_lead_default_setting_and_override():
    # No settings.alarm_minutes in the drift plan: 15 minutes before the start.
    assert _triggers(export(drift_plan())) == {"-PT15M"}
    # The survey plan says 30.
    assert _triggers(export(survey_plan())) == {"-PT30M"}
    # An explicit lead wins over the plan's setting.
    assert _triggers(export(survey_plan(), alarm_minutes=90)) == {"-PT1H30M"}
    parsed = icalendar.Calendar.from_ical(export(drift_plan()))
    for event in parsed.events:
        (alarm,) = event.walk("VALARM")
        assert alarm["TRIGGER"].dt == timedelta(minutes=-15)
        assert str(alarm["ACTION"]) == "DISPLAY"
        assert str(event["SUMMARY"]) in str(alarm["DESCRIPTION"])
    with pytest.raises(UserError, match="alarm_minutes"):
        ical.plan_calendar(drift_plan(), alarm_minutes=-5)


def test_survey_reminds_once_per_session_and_tells_safety_once_a_day():
    plan = survey_plan()
    events = sorted(icalendar.Calendar.from_ical(export(plan)).events, key=lambda e: e.start)
    names = [str(e["SUMMARY"]).split(" (")[0].split()[-1] for e in events]
    assert names == ["G300+0", "OFF-300", "G310+0", "G320+0", "G330+0"]
    # Two sessions: 15:40-17:33 UTC (slews 2 min apart at most), then 09:58 UTC the next
    # evening, 16 h 25 min later (> 2 h): a reminder on G300+0 and on G330+0 only.
    alarmed = [n for n, e in zip(names, events) if e.walk("VALARM")]
    assert alarmed == ["G300+0", "G330+0"]
    texts = [str(e["DESCRIPTION"]) for e in events]
    # Every event is on local day Sun 4 Apr; the safety text comes with each session's first.
    assert [("Safety:" in t) for t in texts] == [True, False, False, False, True]
    assert texts[0].startswith("Session start: 4 blocks, 02:12 ACDT – 03:03 ACST")
    assert texts[4].startswith("Session start: 1 block, 19:30–20:00 ACST")
    # The safety text stays whole and the stow note (none here) cannot have displaced it.
    for word in SAFETY_WORDS:
        assert word in texts[0], word


def test_survey_events_give_the_drive_azimuth():
    plan = survey_plan()
    # Cable wrap -170..350 deg: sky 190.4 deg driven as 190.4 - 360 = -169.6 deg; the track
    # ends at sky 192.9 = drive -167.1. G310+0 is driven at its sky azimuth.
    plan["settings"].update({"azimuth_min_deg": -170, "azimuth_max_deg": 350})
    plan["blocks"][1].update({"drive_az_start_deg": -169.6, "drive_az_end_deg": -167.1})
    plan["blocks"][5].update({"drive_az_start_deg": 180.0, "drive_az_end_deg": 182.5})
    cal = icalendar.Calendar.from_ical(export(plan))
    events = {str(e["SUMMARY"]).split(" (")[0]: e for e in cal.events}
    g300 = events["Point dish at G300+0"]
    assert str(g300["SUMMARY"]) == "Point dish at G300+0 (drive az -170°, el 49°)"
    text = str(g300["DESCRIPTION"])
    assert ("Set the drive to azimuth -169.6° (sky 190.4°), elevation 48.6°; the mount tracks to "
            "drive azimuth -167.1° (sky 192.9°), elevation 50.8° by the end.") in text
    g310 = str(events["Point dish at G310+0"]["DESCRIPTION"])
    assert "Set the drive to azimuth 180.0°, elevation 45.0°" in g310 and "(sky" not in g310
    # The wrap is explained in the calendar's own description, with the mount's range, and
    # with each session's first event, not with every block.
    described = str(cal["DESCRIPTION"])
    assert "runs from -170° to 350°" in described and "cable wrap" in described
    assert sum("cable wrap" in str(e["DESCRIPTION"]) for e in cal.events) == 2


def test_event_times_follow_the_one_rounding_rule():
    plan = drift_plan()
    # A recording 22:10:40-23:05:10 UTC: shown (and put in the calendar) as 22:10-23:06, so
    # following the calendar covers the whole passage; a re-park 19:00:20-19:15:50 is shown
    # inward, 19:01-19:15, so acting at the times shown stays inside the window.
    rec = plan["days"][0]["recordings"][0]
    rec.update({"start_utc": "2027-03-27T22:10:40Z", "end_utc": "2027-03-27T23:05:10Z",
                "start_local": "2027-03-27T22:10:40+00:00", "end_local": "2027-03-27T23:05:10+00:00"})
    park = plan["days"][0]["park"]
    park.update({"move_start_utc": "2027-03-27T19:00:20Z", "move_end_utc": "2027-03-27T19:15:50Z"})
    events = list(icalendar.Calendar.from_ical(export(plan)).events)
    recording = next(e for e in events if e.start.astimezone(UTC) == utc("2027-03-27T22:10:00Z"))
    assert recording.end.astimezone(UTC) == utc("2027-03-27T23:06:00Z")
    assert "22:10–23:06 GMT (56 min" in str(recording["DESCRIPTION"])
    move = next(e for e in events if str(e["SUMMARY"]).startswith("Move dish to elevation 56"))
    assert (move.start.astimezone(UTC), move.end.astimezone(UTC)) == (
        utc("2027-03-27T19:01:00Z"), utc("2027-03-27T19:15:00Z"))
    # The UID keeps the minute the recording started in, as before rounding.
    assert ical.event_uid(f"{HOLLOWMERE_SITE['name']}|recording|2027-03-27T22:10Z|53..57") == \
        str(recording["UID"])


def test_drift_calendar_says_when_to_retune():
    plan = drift_plan()
    plan["days"][0]["tuning"]["retune"] = True
    plan["days"][1]["tuning"]["retune"] = False
    plan["days"][2]["tuning"]["retune"] = True
    events = list(icalendar.Calendar.from_ical(export(plan)).events)

    def text(start):
        return str(next(e for e in events if e.start.astimezone(UTC) == utc(start))["DESCRIPTION"])

    assert "Receiver: RETUNE today to centre frequency 1420.586 MHz" in text("2027-03-27T22:10:00Z")
    kept = text("2027-03-28T00:40:00Z")
    assert "Receiver: centre frequency 1420.586 MHz" in kept and "RETUNE" not in kept
    assert "set the centre frequency to 1420.650 MHz" in text("2027-03-29T18:00:00Z")


# ------------------------------------------------------------------ errors

def _write(tmp_path, doc, name="plan.json") -> str:
    path = tmp_path / name
    path.write_text(doc if isinstance(doc, str) else json.dumps(doc), encoding="utf-8")
    return str(path)


def _error(func, *args) -> str:
    with pytest.raises(UserError) as info:
        func(*args)
    message = str(info.value)
    assert "\n" not in message
    return message


def test_wrong_schema_is_a_one_line_error_naming_the_file(tmp_path):
    crossings = {"schema": "hiplan.crossings/1", "site": HOLLOWMERE_SITE, "passages": []}
    path = _write(tmp_path, crossings)
    message = _error(ical.read_plan, path)
    assert message.startswith(f"{path}: ") and "'hiplan.crossings/1'" in message
    future = {**drift_plan(), "schema": "hiplan.plan/2"}
    assert "another hiplan version" in _error(ical.read_plan, _write(tmp_path, future, "f.json"))
    no_schema = {k: v for k, v in drift_plan().items() if k != "schema"}
    assert "no 'schema'" in _error(ical.check_plan, no_schema, "x.json")
    mixed = {**survey_plan(), "kind": "drift"}
    assert "does not match" in _error(ical.check_plan, mixed, "x.json")
    assert "is a list" in _error(ical.check_plan, [1, 2], "x.json")
    # The pure entry point refuses the same documents.
    _error(ical.plan_calendar, crossings)


def test_bad_plan_files_name_file_and_field(tmp_path):
    path = _write(tmp_path, '{"schema": "hiplan.plan/1", ')
    assert _error(ical.read_plan, path).startswith(f"{path}:1: not valid JSON")
    assert "not found" in _error(ical.read_plan, str(tmp_path / "missing.json"))
    plan = drift_plan()
    del plan["days"][1]["recordings"][2]["start_utc"]
    assert "days[1].recordings[2].start_utc is missing" in _error(ical.check_plan, plan, "p")
    plan = drift_plan()
    plan["days"][0]["park"]["move_end_utc"] = "2027-03-27T18:59:00Z"
    assert "days[0].park.move_end_utc is not after" in _error(ical.check_plan, plan, "p")
    plan = drift_plan()
    plan["days"][2]["recordings"][0]["end_utc"] = "2027-03-29 12:40"
    assert "no Z or UTC offset" in _error(ical.check_plan, plan, "p")
    plan = drift_plan()
    plan["site"]["timezone"] = "Europe/Hollowmere"
    assert "site.timezone 'Europe/Hollowmere'" in _error(ical.check_plan, plan, "p")
    plan = survey_plan()
    plan["blocks"][1]["alt_start_deg"] = "high"
    assert "blocks[1].alt_start_deg must be a number" in _error(ical.check_plan, plan, "p")
    plan = survey_plan()
    plan["settings"]["alarm_minutes"] = 2.5
    assert "settings.alarm_minutes" in _error(ical.check_plan, plan, "p")


# ------------------------------------------------------------------ command

def _args(*argv):
    parser = Parser(prog="hiplan calendar")
    calendar_cli.add_arguments(parser)
    return parser.parse_args([str(a) for a in argv])


def _run(*argv) -> str:
    out = io.StringIO()
    assert calendar_cli.run(_args(*argv), Console(file=out, width=200)) == 0
    return out.getvalue()


def test_command_writes_and_refuses_to_overwrite(tmp_path):
    plan_path = _write(tmp_path, drift_plan())
    target = tmp_path / "club.ics"
    said = _run(plan_path, "-o", target)
    assert "8 events (6 recordings, 2 re-park tasks)" in said
    first = target.read_bytes()
    check_rfc5545(first)
    assert _triggers(first) == {"-PT15M"}
    message = _error(calendar_cli.run, _args(plan_path, "-o", target, "--alarm", "5"),
                     Console(file=io.StringIO()))
    assert "already exists" in message and "--force" in message
    assert target.read_bytes() == first
    _run(plan_path, "-o", target, "--alarm", "5", "--force")
    assert _triggers(target.read_bytes()) == {"-PT5M"}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["club.ics", "plan.json"]


def test_command_default_output_and_early_refusal(tmp_path):
    plan_path = _write(tmp_path, survey_plan(), "night.json")
    _run(plan_path)
    assert (tmp_path / "night.ics").is_file()  # default: the plan's name with .ics
    # The output check comes before any work: an existing file is reported even
    # when the plan is missing.
    (tmp_path / "gone.ics").write_text("old")
    message = _error(calendar_cli.run, _args(tmp_path / "gone.json"), Console(file=io.StringIO()))
    assert "already exists" in message
    assert "replace the plan file" in _error(calendar_cli.run, _args(plan_path, "-o", plan_path),
                                             Console(file=io.StringIO()))
    with pytest.raises(UserError, match="--alarm"):
        _args(plan_path, "--alarm", "-1")


def test_command_writes_nothing_on_bad_input(tmp_path):
    wrong = _write(tmp_path, {"schema": "hiplan.tune/1"}, "tune.json")
    message = _error(calendar_cli.run, _args(wrong), Console(file=io.StringIO()))
    assert wrong in message
    empty = drift_plan()
    for day in empty["days"]:
        day["recordings"], day["park"]["move"] = [], False
    empty_path = _write(tmp_path, empty, "empty.json")
    assert "nothing to put in a calendar" in _error(calendar_cli.run, _args(empty_path),
                                                     Console(file=io.StringIO()))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["empty.json", "tune.json"]


def test_command_write_is_atomic(tmp_path, monkeypatch):
    plan_path = _write(tmp_path, drift_plan())
    target = tmp_path / "club.ics"
    target.write_bytes(b"old calendar")

    def interrupted(fd):
        raise KeyboardInterrupt  # as if the user pressed Ctrl-C mid-write

    monkeypatch.setattr(os, "fsync", interrupted)
    with pytest.raises(KeyboardInterrupt):
        calendar_cli.run(_args(plan_path, "-o", target, "--force"), Console(file=io.StringIO()))
    assert target.read_bytes() == b"old calendar"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["club.ics", "plan.json"]


def test_command_is_shaped_like_the_others():
    assert calendar_cli.NAME == "calendar" and calendar_cli.HELP
    parser = argparse.ArgumentParser()
    calendar_cli.add_arguments(parser)
    args = parser.parse_args(["p.json"])
    assert args.output is None and args.alarm is None and args.force is False


# ------------------------------------------------------------------ hostile plans

INJECTION = "END:VEVENT\r\nBEGIN:VEVENT\r\nUID:forged\r\nSUMMARY:pwned\r\nDTSTART:20270301T000000Z"


@pytest.mark.parametrize("sep", ["\r", "\r\n", "\n", "\x0b", "\x0c", "\x85", "\u2028", "\u2029"])
def test_control_characters_in_plan_texts_are_refused(tmp_path, sep):
    """A hand-edited plan with a line break in a text field used to forge events (bare CR)
    or die inside icalendar's assert (CRLF): it is one line naming the plan field."""
    plan = drift_plan()
    plan["site"]["name"] = "Evil" + INJECTION.replace("\r\n", sep)
    path = _write(tmp_path, plan)
    message = _error(ical.read_plan, path)
    assert message.startswith(f"{path}: site.name contains a control character, U+{ord(sep[0]):04X}")
    assert "site.name contains a control" in _error(ical.plan_calendar, plan)
    survey = survey_plan()
    survey["blocks"][1]["name"] = f"G120{sep}+0"
    assert "blocks[1].name contains a control character" in _error(ical.check_plan, survey, "p")
    warned = {**drift_plan(), "warnings": [f"SUN HAZARD{sep}BEGIN:VALARM"]}
    assert "p: warnings[0] contains a control character" in _error(ical.check_plan, warned, "p")


def test_refusal_does_not_rely_on_asserts(tmp_path):
    """Under python -O (asserts removed) the forged plan is still refused and nothing written."""
    import subprocess
    import sys
    for sep in ("\r", "\r\n"):
        plan = drift_plan()
        plan["site"]["name"] = "Evil" + INJECTION.replace("\r\n", sep)
        path = _write(tmp_path, plan)
        proc = subprocess.run([sys.executable, "-O", "-m", "planner.cli", "calendar", path,
                               "-o", str(tmp_path / "out.ics")],
                              capture_output=True, text=True, timeout=120)
        assert proc.returncode == 2, proc.stderr
        assert proc.stderr.count("\n") == 1 and "site.name contains a control character" in proc.stderr
        assert not (tmp_path / "out.ics").exists()


def _unescape(value: str) -> str:
    """TEXT value per RFC 5545 section 3.3.11: \\\\ \\; \\, \\n (or \\N) are escapes."""
    return re.sub(r"\\([\\;,nN])", lambda m: "\n" if m.group(1) in "nN" else m.group(1), value)


def test_text_values_escape_commas_and_semicolons():
    """NAME and X-WR-CALNAME were written with bare commas and semicolons, which RFC 5545
    TEXT reserves (a list separator and a parameter delimiter); every TEXT value is escaped."""
    plan = drift_plan()
    name = "Hollowmere Radio Club; Astronomy, Section \\ North"
    plan["site"]["name"] = name
    raw = export(plan)
    escaped = "Hollowmere Radio Club\\; Astronomy\\, Section \\\\ North"
    cal = component_tree(raw)
    for prop in ("NAME", "X-WR-CALNAME"):
        _, value = one(cal, prop)
        assert value == f"HI plan - {escaped}"  # the bytes as written
        assert _unescape(value) == f"HI plan - {name}"  # an independent reader gets the name back
    for event in children(cal, "VEVENT"):
        _, location = one(event, "LOCATION")
        assert location == escaped and _unescape(location) == name
        for prop in ("SUMMARY", "DESCRIPTION"):
            _, value = one(event, prop)
            assert re.search(r"(?<!\\)[,;]", value) is None, (prop, value)
    # icalendar reads the TEXT properties it knows back to the name; NAME and X-WR-CALNAME,
    # which it reads as unknown, come back as written, and unescape to the name.
    parsed = icalendar.Calendar.from_ical(raw)
    assert {str(e["LOCATION"]) for e in parsed.walk("VEVENT")} == {name}
    assert _unescape(parsed["X-WR-CALNAME"].to_ical().decode()) == f"HI plan - {name}"
    assert _unescape(parsed["NAME"].to_ical().decode()) == f"HI plan - {name}"


def test_plan_times_outside_the_supported_dates_or_with_a_false_second_60(tmp_path):
    plan = drift_plan()
    plan["days"][0]["recordings"][0]["start_utc"] = "9999-12-31T00:00:00Z"
    assert "days[0].recordings[0].start_utc: 9999-12-31 is outside the dates hiplan supports" \
        in _error(ical.check_plan, plan, "p")
    plan = drift_plan()
    plan["days"][0]["recordings"][0]["end_utc"] = "2027-03-27T23:59:60Z"
    assert "has second 60, which exists only as a leap second" in _error(ical.check_plan, plan, "p")
