"""Plan documents: the one rounding rule for shown times, survey sessions, and the demo plans
read the same way by every output (brief, calendar, month table), one receiver setting per
parking."""
from __future__ import annotations

import io
import re
from datetime import datetime, timedelta, timezone
from zoneinfo import ZoneInfo

import icalendar
import pytest
from rich.console import Console

from planner import brief, ical
from planner.cli import main
from planner.cli.demo import steps
from planner.galaxy import model_from_name
from planner.planfile import SESSION_GAP_MIN, read_plan, shown_span, survey_sessions
from planner.render import month_renderable
from planner.tuning import line_setup

UTC = timezone.utc


# ------------------------------------------------------------------ the rule itself

def test_shown_span_hand_worked():
    t = datetime(2027, 3, 1, 8, 53, 30, tzinfo=UTC)
    u = datetime(2027, 3, 1, 9, 22, 35, tzinfo=UTC)
    # Outward: 08:53:30 -> 08:53, 09:22:35 -> 09:23 (covers the whole interval).
    assert shown_span(t, u) == (t.replace(second=0), u.replace(minute=23, second=0))
    # Inward: 08:54 and 09:22 (acting at those times stays inside).
    assert shown_span(t, u, outward=False) == (t.replace(minute=54, second=0), u.replace(second=0))
    # Whole minutes are kept as they are, both ways.
    whole = (t.replace(second=0), u.replace(second=0))
    assert shown_span(*whole) == whole == shown_span(*whole, outward=False)
    # Local times round the same way (whole-minute offsets): 23:59:01 BST ceils to 00:00 next day.
    bst = ZoneInfo("Europe/London")
    late = datetime(2027, 6, 1, 23, 59, 1, tzinfo=bst)
    assert shown_span(late - timedelta(minutes=5), late)[1] == datetime(2027, 6, 2, 0, 0, tzinfo=bst)


def test_survey_sessions_split_at_the_gap():
    def block(kind, start_min, end_min):
        base = datetime(2027, 3, 1, 10, 0, tzinfo=UTC)
        iso = lambda m: (base + timedelta(minutes=m)).isoformat().replace("+00:00", "Z")
        return {"kind": kind, "start_utc": iso(start_min), "end_utc": iso(end_min)}

    blocks = [block("slew", 0, 1), block("target", 1, 16),
              block("target", 16 + SESSION_GAP_MIN, 31 + SESSION_GAP_MIN),  # gap of exactly 2 h
              block("stow", 40 + SESSION_GAP_MIN, 600),                      # the dish rests
              block("target", 41 + 2 * SESSION_GAP_MIN, 56 + 2 * SESSION_GAP_MIN)]
    # 136 - 16 = 120 min exactly stays in the session; the stow ends its session on arrival
    # (minute 160), so the target at minute 281, 121 min later, starts a new one.
    assert [len(s) for s in survey_sessions(blocks)] == [4, 1]
    assert survey_sessions([]) == []


# ------------------------------------------------------------------ the demo plans

@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo's month plan (Hollowmere, March 2027) and survey plan (Saltbush Ridge)."""
    out = tmp_path_factory.mktemp("demo")
    wanted = {"month plan, calendar and charts", "survey schedule"}
    for what, argv, _files in steps(out):
        if what in wanted:
            if "--chart" in argv:  # the charts are not needed here (and slow)
                k = argv.index("--chart")
                argv = argv[:k] + argv[k + 2:]
            assert main(argv) == 0, what
    return read_plan(out / "plan-hollowmere.json"), read_plan(out / "survey-saltbush-ridge.json")


def _hhmm(moment: datetime) -> str:
    return f"{moment:%H:%M}"


def _calendar_spans(doc: dict) -> dict[str, tuple[str, str]]:
    """Local HH:MM of every calendar event, keyed by its start's UTC minute."""
    tz = ZoneInfo(doc["site"]["timezone"])
    cal = icalendar.Calendar.from_ical(ical.calendar_bytes(ical.plan_calendar(doc)))
    out = {}
    for event in cal.events:
        start, end = event.start.astimezone(tz), event.end.astimezone(tz)
        out[f"{event.start.astimezone(UTC):%Y-%m-%dT%H:%M}"] = (_hhmm(start), _hhmm(end))
    return out


def test_brief_calendar_and_table_give_the_same_times(demo):
    drift, survey = demo
    # Drift: every recording appears with the same start and end in all three outputs.
    events = _calendar_spans(drift)
    page = brief.brief_markdown(drift)
    console = Console(record=True, width=400, file=io.StringIO())
    console.print(month_renderable(drift))
    table = console.export_text()
    checked = 0
    for day in drift["days"]:
        for rec in day["recordings"]:
            start, end = shown_span(datetime.fromisoformat(rec["start_local"]),
                                    datetime.fromisoformat(rec["end_local"]))
            want = (_hhmm(start), _hhmm(end))
            utc_start = shown_span(datetime.fromisoformat(rec["start_utc"]),
                                   datetime.fromisoformat(rec["end_utc"]))[0]
            assert events[f"{utc_start:%Y-%m-%dT%H:%M}"] == want, rec
            assert re.search(rf"{want[0]}–{want[1]}( \(next day\))?, l ", page), want
            assert f"{want[0]}–{want[1]} l " in table, want
            checked += 1
        park = day["park"]
        if park and park["move"]:  # move windows: inward, in all three
            start, end = shown_span(datetime.fromisoformat(park["move_start_local"]),
                                    datetime.fromisoformat(park["move_end_local"]), outward=False)
            assert f"MOVE {_hhmm(start)}–{_hhmm(end)}" in page
            assert f"{_hhmm(start)}–{_hhmm(end)}" in table
    assert checked == sum(len(d["recordings"]) for d in drift["days"]) > 40
    # Survey: every target, reference and calibration block, brief against calendar.
    events = _calendar_spans(survey)
    page = brief.brief_markdown(survey)
    blocks = [b for b in survey["blocks"] if b["kind"] in ("target", "reference", "calibration")]
    for block in blocks:
        start, end = shown_span(datetime.fromisoformat(block["start_local"]),
                                datetime.fromisoformat(block["end_local"]))
        utc_start = shown_span(datetime.fromisoformat(block["start_utc"]),
                               datetime.fromisoformat(block["end_utc"]))[0]
        assert events[f"{utc_start:%Y-%m-%dT%H:%M}"] == (_hhmm(start), _hhmm(end))
        assert f"| {_hhmm(start)}–{_hhmm(end)}" in page
    assert len(blocks) == len(events) > 20


def _setting_runs(days: list[dict]) -> list[list[dict]]:
    """Consecutive days whose recordings were all made at one dish setting (a move day with a
    recording before the move uses two settings and belongs to neither run)."""
    runs: list[list[dict]] = []
    key_before = None
    for day in days:
        keys = {(r["dish"]["dec_deg"], r["dish"]["culmination"]) for r in day["recordings"]}
        if len(keys) != 1:
            key_before = None if keys else key_before
            continue
        (key,) = keys
        if key != key_before:
            runs.append([])
        runs[-1].append(day)
        key_before = key
    return runs


def _own_advice(drift: dict, day: dict, receiver):
    """The day's own tuning advice (what the plan gave before settings were shared)."""
    recs = day["recordings"]
    bins = sorted({int(b) for r in recs for b in r["l_bins"]})
    return line_setup(bins, drift["settings"]["bin_width_deg"], drift["settings"]["b_max_deg"],
                      min(r["lsr_corr_min_kms"] for r in recs), max(r["lsr_corr_max_kms"] for r in recs),
                      receiver, model_from_name(drift["settings"]["rotation_model"])).advice


def test_one_receiver_setting_per_parking(demo, club):
    """Within a parking the centre changes only where no one centre could serve the days
    since the last change and this one (the line would leave the band, or the spike land in
    it where the day's own advice kept it clear)."""
    from planner.spectral import shared_centre_mhz
    drift, _ = demo
    days = [d for d in drift["days"] if d["tuning"]]
    runs = _setting_runs(drift["days"])
    assert len(runs) >= 4
    for run in runs:
        since = []
        for day in run:
            own = _own_advice(drift, day, club.receiver)
            if since and day["tuning"]["retune"]:
                assert shared_centre_mhz(since + [own]) is None, day["date"]
                since = []
            since.append(own)
    # A retune is marked exactly where the centre changes (and on the first day).
    previous = None
    for day in days:
        assert day["tuning"]["retune"] is (day["tuning"]["centre_mhz"] != previous), day["date"]
        previous = day["tuning"]["centre_mhz"]
    retunes = sum(d["tuning"]["retune"] for d in days)
    # Every day's own advice (what the plan gave before settings were shared), recomputed here:
    # a line that fitted still fits and a spike clear of the line stays clear.
    model = model_from_name(drift["settings"]["rotation_model"])
    own_centres = []
    for day in days:
        recs = day["recordings"]
        bins = sorted({int(b) for r in recs for b in r["l_bins"]})
        own = line_setup(bins, drift["settings"]["bin_width_deg"], drift["settings"]["b_max_deg"],
                         min(r["lsr_corr_min_kms"] for r in recs),
                         max(r["lsr_corr_max_kms"] for r in recs), club.receiver, model).advice
        # The plan rounds its numbers to 4 decimals (0.1 kHz); lines are compared to that.
        assert day["tuning"]["line_low_mhz"] == pytest.approx(own.line_low_mhz, abs=1e-4)
        if own.fits:
            assert day["tuning"]["fits"], day["date"]
        if own.spike_clear:
            assert day["tuning"]["spike_clear"], day["date"]
        own_centres.append(round(own.centre_mhz, 4))
    own_changes = sum(a != b for a, b in zip(own_centres, own_centres[1:])) + 1
    print(f"receiver settings: {retunes} with sharing, {own_changes} day by day")
    assert retunes <= 6 < own_changes
