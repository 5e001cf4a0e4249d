"""Availability windows: syntax, DST arithmetic worked by hand, brute-force membership.

Expected UTC times are derived by hand from the published offsets, without zoneinfo:
Europe/London is UTC+0 (GMT) in winter and UTC+1 (BST) in summer; in 2027 the
clocks go forward on Sun 28 Mar at 01:00 UTC (01:00 GMT -> 02:00 BST) and back on
Sun 31 Oct at 01:00 UTC (02:00 BST -> 01:00 GMT). Australia/Adelaide is UTC+9:30
(ACST) in winter and UTC+10:30 (ACDT) in summer; in 2027 summer time ends on Sun
4 Apr at 03:00 ACDT (= 16:30 UTC on 3 Apr; clocks go back to 02:00) and starts on
Sun 3 Oct at 02:00 ACST (= 16:30 UTC on 2 Oct; clocks go on to 03:00). The change
rules (last Sundays of March/October at 01:00 UTC; first Sundays of April/October)
are from memory; the dates are those given in the task and checked to be Sundays below.
"""
import os
import time
from datetime import date, datetime, timezone
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from planner.errors import UserError
from planner.windows import (
    ALWAYS,
    RecurrenceWindow,
    WeeklyWindow,
    clip_to_windows,
    describe_window_texts,
    inside,
    never_occurs,
    parse_windows,
    read_windows,
    window_intervals_mjd,
)

LONDON = ZoneInfo("Europe/London")
ADELAIDE = ZoneInfo("Australia/Adelaide")
UTC = ZoneInfo("UTC")
EXAMPLE = Path(__file__).resolve().parent.parent / "examples" / "windows.txt"
# Edges are whole UTC seconds turned into float MJD by a different route than _mjd
# below; float64 at MJD ~6e4 resolves ~1e-11 d, so 1e-9 d (86 us) only absorbs rounding.
EDGE_TOL_D = 1e-9


def _mjd(y, m, d, hh=0, mm=0):
    """MJD (UTC) by hand: days since 1858-11-17 00:00 UTC, the MJD epoch."""
    return date(y, m, d).toordinal() - date(1858, 11, 17).toordinal() + (hh * 60 + mm) / 1440


def _intervals(text, start, end, tz):
    return window_intervals_mjd(parse_windows(text), start, end, tz)


def test_change_dates_are_sundays():
    for day in (date(2027, 3, 28), date(2027, 10, 31), date(2027, 4, 4), date(2027, 10, 3)):
        assert day.weekday() == 6


# ---------------------------------------------------------------- parsing

ALL = (0, 1, 2, 3, 4, 5, 6)


@pytest.mark.parametrize("text, days, start_min, end_min", [
    ("Mon-Fri 19:00-23:30", (0, 1, 2, 3, 4), 19 * 60, 23 * 60 + 30),
    ("fri-MON 08:00-12:00", (0, 4, 5, 6), 480, 720),        # wraps past Sunday
    ("Sat-Tue 08:00-09:00", (0, 1, 5, 6), 480, 540),
    ("Mon,Wed-Fri 7:05-9:00", (0, 2, 3, 4), 7 * 60 + 5, 540),
    ("Sat, Sun 09:00-10:00", (5, 6), 540, 600),
    ("Sun - Tue 19:00 - 20:00", (0, 1, 6), 1140, 1200),
    ("DAILY 00:00-24:00", ALL, 0, 1440),
    ("mon,daily 06:00-07:00", ALL, 360, 420),
    ("Sat 20:00-02:00", (5,), 1200, 120),                     # ends the next day
    ("Mon 19:00-24:00", (0,), 1140, 1440),
    ("Mon\u2013Fri 19:00\u201323:30", (0, 1, 2, 3, 4), 1140, 1410),  # en dashes
    ("Sun-Sun 10:00-11:00", (6,), 600, 660),
])
def test_parse_good_simple(text, days, start_min, end_min):
    (rule,) = parse_windows(text).rules
    assert isinstance(rule, WeeklyWindow)
    assert (rule.days, rule.start_min, rule.end_min) == (days, start_min, end_min)
    assert rule.text == text and rule.line == 1


@pytest.mark.parametrize("text, fragment", [
    ("Mon-Fry 19:00-20:00", "unknown day 'Fry' (did you mean 'Fri'?)"),
    ("Tues 19:00-20:00", "unknown day 'Tues' (did you mean 'Tue'?)"),
    ("Monday 19:00-20:00", "(did you mean 'Mon'?)"),
    ("dayly 19:00-20:00", "(did you mean 'daily'?)"),
    ("19:00-23:30", "no days given"),
    ("Mon,,Tue 10:00-11:00", "empty entry in the day list"),
    ("Mon- 10:00-11:00", "bad day range 'Mon-'"),
    ("Mon-daily 10:00-11:00", "'daily' cannot be part of a range"),
    ("Mon Tue", "missing the time range"),
    ("Mon 19:00", "bad time range '19:00'"),
    ("Mon 7pm-9pm", "bad time '7pm'"),
    ("Mon 19.00-20.00", "bad time '19.00'"),
    ("Mon 19:60-20:00", "bad time '19:60': minutes must be below 60"),
    ("Mon 19:00-20:75", "minutes must be below 60"),
    ("Mon 25:00-26:00", "bad time '25:00': hours must be at most 24"),
    ("Mon 23:00-24:30", "bad time '24:30': hours must be at most 24"),
    ("Mon 24:00-02:00", "24:00 is allowed only as an end time"),
    ("Mon 10:00-10:00", "zero-length window"),
    ("RRULE:FREQ=WEEKLY;BYDAY=TU for 0h", "zero-length window"),
    ("RRULE:FREQ=WEEKLY;BYDAY=TU for 3x", "bad duration '3x'"),
    ("RRULE:FREQ=WEEKLY;BYDAY=TU for 3 hours", "bad duration '3 hours'"),
    ("RRULE:FREQ=WEEKLY;BYDAY=TU for 200h", "bad duration '200h': longer than a week"),
    ("RRULE:FREQ=WEEKLY;BYDAY=TU", "an RRULE needs a duration"),
    ("RRULE:FREQ=WEEKLY;BYDAY=XX for 1h", "unparsable RRULE (invalid 'BYDAY': XX)"),
    ("RRULE:FREQ=WEEKLY;BYHOUR=25 for 1h", "unparsable RRULE (hour must be in 0..23)"),
    ("RRULE:FREQ=WEEKLY;FOO=1 for 1h", "unparsable RRULE (unknown parameter 'FOO')"),
    ("RRULE:FREQ=WEEKLY;BYDAY for 1h", "unparsable RRULE ('BYDAY' is not NAME=VALUE)"),
    ("RRULE:BYDAY=TU for 1h", "unparsable RRULE (FREQ is missing)"),
    ("RRULE:FREQ=FORTNIGHTLY for 1h", "unparsable RRULE (unknown FREQ 'FORTNIGHTLY')"),
    ("RRULE:FREQ=SECONDLY for 1h", "unsupported FREQ=SECONDLY"),
    ("RRULE:FREQ=HOURLY;BYMINUTE=0 for 1h", "unsupported FREQ=HOURLY"),
    ("RRULE:FREQ=WEEKLY;COUNT=3;UNTIL=20270401 for 1h", "COUNT and UNTIL cannot both"),
    ("RRULE:FREQ=WEEKLY;INTERVAL=0 for 1h", "INTERVAL must be a positive whole number"),
    ("RRULE:FREQ=WEEKLY;COUNT=-2 for 1h", "COUNT must be a positive whole number"),
    ("RRULE:FREQ=WEEKLY;UNTIL=2027 for 1h", "UNTIL '2027' is not YYYYMMDD"),
    ("RRULE:FREQ=WEEKLY;UNTIL=20270230 for 1h", "UNTIL '20270230'"),
])
def test_parse_bad_lines(text, fragment):
    with pytest.raises(UserError) as err:
        parse_windows(text)
    message = str(err.value)
    assert message.startswith(f"--windows: '{text}': ")
    assert fragment in message
    assert "\n" not in message


def test_unknown_day_without_a_close_match_gives_no_hint():
    with pytest.raises(UserError, match="unknown day 'Xyz'") as err:
        parse_windows("Xyz 10:00-11:00")
    assert "did you mean" not in str(err.value)


def test_file_errors_name_source_and_line():
    text = "# rota\n\nMon-Fri 19:00-23:00\nSat 09:00-12:00   # mornings\nTue 25:00-26:00\n"
    with pytest.raises(UserError, match=r"^rota\.txt:5: 'Tue 25:00-26:00': bad time '25:00'"):
        parse_windows(text, source="rota.txt")
    avail = parse_windows(text.replace("25:00-26:00", "10:00-11:00"), source="rota.txt")
    assert [r.line for r in avail.rules] == [3, 4, 5]
    assert avail.rules[1].text == "Sat 09:00-12:00"  # the comment is not part of the window


def test_empty_input_is_an_error():
    with pytest.raises(UserError, match=r"^rota\.txt: no availability windows given"):
        parse_windows("# only a comment\n\n", source="rota.txt")
    with pytest.raises(UserError, match=r"^--windows: no availability windows"):
        parse_windows(" ; ")


def test_command_line_split_keeps_rrule_parts_together():
    avail = parse_windows("Mon 19:00-20:00; RRULE:FREQ=WEEKLY;BYDAY=TU,TH;BYHOUR=20;"
                          "BYMINUTE=0 for 3h; Sat 09:00-12:00;")
    kinds = [type(r) for r in avail.rules]
    assert kinds == [WeeklyWindow, RecurrenceWindow, WeeklyWindow]
    rrule = avail.rules[1]
    assert rrule.rule == "FREQ=WEEKLY;BYDAY=TU,TH;BYHOUR=20;BYMINUTE=0"
    assert rrule.duration_min == 180 and rrule.until is None


@pytest.mark.parametrize("duration, minutes", [("3h", 180), ("90m", 90), ("2h30m", 150),
                                               ("2H05M", 125)])
def test_rrule_durations(duration, minutes):
    (rule,) = parse_windows(f"rrule:freq=daily;byhour=20 for {duration}").rules
    assert rule.duration_min == minutes
    assert rule.rule == "FREQ=DAILY;BYHOUR=20"  # normalised to upper case


def test_describe():
    avail = parse_windows("fri-mon 08:00-12:00; sat,sun 09:00-10:00; Mon,Wed-Fri 19:00-23:30;"
                          " daily 00:00-24:00; Sat 20:00-02:00;"
                          " RRULE:FREQ=WEEKLY;BYDAY=TU;UNTIL=20270831 for 150m")
    assert avail.describe() == [
        "Fri–Mon 08:00–12:00",
        "Sat, Sun 09:00–10:00",
        "Mon, Wed–Fri 19:00–23:30",
        "daily 00:00–24:00",
        "Sat 20:00–02:00 (next day)",
        # No BYHOUR: occurrences start at DTSTART's 00:00; a bare-date UNTIL includes the day.
        "every Tuesday 00:00 for 2 h 30 min, until Tue 31 Aug 2027 (the whole day)",
    ]
    assert ALWAYS.describe() == ["any time (no availability windows given)"]
    # The description of a same-day window parses back to the same days and times.
    again = parse_windows("; ".join(avail.describe()[:4]))
    assert [(r.days, r.start_min, r.end_min) for r in again.rules] == \
        [(r.days, r.start_min, r.end_min) for r in avail.rules[:4]]
    # The normalised form is machine-readable: every window parses back to itself.
    assert avail.normalised() == [
        "Fri-Mon 08:00-12:00", "Sat,Sun 09:00-10:00", "Mon,Wed-Fri 19:00-23:30",
        "daily 00:00-24:00", "Sat 20:00-02:00", "RRULE:FREQ=WEEKLY;BYDAY=TU;UNTIL=20270831 for 2h30m"]
    assert parse_windows("\n".join(avail.normalised())).normalised() == avail.normalised()
    assert ALWAYS.normalised() == []


@pytest.mark.parametrize("rule, words", [
    # Hand-worded from RFC 5545 section 3.3.10 semantics.
    ("RRULE:FREQ=WEEKLY;BYDAY=FR;BYHOUR=18;BYMINUTE=30 for 3h", "every Friday 18:30 for 3 h"),
    ("RRULE:FREQ=WEEKLY;BYDAY=TU,TH;BYHOUR=14;BYMINUTE=0;UNTIL=20270831 for 2h30m",
     "every Tuesday and Thursday 14:00 for 2 h 30 min, until Tue 31 Aug 2027 (the whole day)"),
    ("RRULE:FREQ=WEEKLY;INTERVAL=2;BYDAY=MO,WE,FR;BYHOUR=19 for 90m",
     "every other week on Monday, Wednesday and Friday 19:00 for 1 h 30 min"),
    ("RRULE:FREQ=DAILY;INTERVAL=3;BYHOUR=21;COUNT=4 for 45m",
     "every 3 days 21:00 for 45 min, 4 times from the start of the plan period"),
    ("RRULE:FREQ=MONTHLY;BYDAY=1MO;BYHOUR=20 for 2h", "the first Monday of every month 20:00 for 2 h"),
    ("RRULE:FREQ=MONTHLY;BYDAY=-1FR;BYHOUR=20 for 2h", "the last Friday of every month 20:00 for 2 h"),
    ("RRULE:FREQ=MONTHLY;BYMONTHDAY=15;BYHOUR=19 for 1h", "on day 15 of every month 19:00 for 1 h"),
    ("RRULE:FREQ=YEARLY;BYMONTH=3;BYMONTHDAY=21;BYHOUR=19 for 2h",
     "every year on 21 March 19:00 for 2 h"),
    ("RRULE:FREQ=DAILY;BYHOUR=21;UNTIL=20270401T200000Z for 1h",
     "every day 21:00 for 1 h, until Thu 1 Apr 2027 20:00 UTC"),
    ("RRULE:FREQ=WEEKLY;BYHOUR=20 for 1h",
     "every week 20:00 for 1 h, on the weekday the plan period starts"),
    # A part with no wording here: the whole rule is shown rather than half-translated.
    ("RRULE:FREQ=MONTHLY;BYDAY=MO,TU;BYSETPOS=-1;BYHOUR=20 for 1h",
     "by the rule FREQ=MONTHLY;BYDAY=MO,TU;BYSETPOS=-1;BYHOUR=20 for 1 h"),
])
def test_rrule_in_words(rule, words):
    (window,) = parse_windows(rule).rules
    assert window.describe() == words
    assert parse_windows(window.normalised()).rules[0].rule == window.rule


def test_describe_window_texts_for_plans():
    # Stored plan lines (raw, normalised or from another version) come out in words.
    assert describe_window_texts(["Fri     18:30-23:30", "Sat 21:00-02:00",
                                  "RRULE:FREQ=WEEKLY;BYDAY=TU;BYHOUR=20 for 3h",
                                  "Sat 20:00–02:00 (next day)"]) == [
        "Fri 18:30–23:30", "Sat 21:00–02:00 (next day)", "every Tuesday 20:00 for 3 h",
        "Sat 20:00–02:00 (next day)"]  # the last one does not parse: shown as written
    assert describe_window_texts([]) == []


def test_read_windows_file_text_and_missing_file(tmp_path):
    path = tmp_path / "rota.txt"
    path.write_text("Mon 19:00-20:00\nTue 26:00-27:00\n", encoding="utf-8")
    with pytest.raises(UserError, match=rf"^{path}:2: "):
        read_windows(str(path))
    path.write_text("Mon 19:00-20:00\n", encoding="utf-8")
    assert read_windows(str(path)).source == str(path)
    assert read_windows("Mon 19:00-20:00").source == "--windows"
    with pytest.raises(UserError, match="--windows: file 'no-such-rota.txt' not found"):
        read_windows("no-such-rota.txt")


def test_example_file_parses():
    avail = read_windows(str(EXAMPLE))
    assert len(avail.rules) == 5
    assert any(isinstance(r, WeeklyWindow) and r.next_day_end for r in avail.rules)
    assert any(isinstance(r, RecurrenceWindow) for r in avail.rules)


# ---------------------------------------------------------------- simple windows, no DST


def test_wraparound_day_range_in_utc():
    # 2027-03-01 is a Monday; Fri-Mon picks Mon 1, Fri 5, Sat 6, Sun 7, Mon 8 (cut at 8th 00:00).
    got = _intervals("Fri-Mon 08:00-12:00", _mjd(2027, 3, 1), _mjd(2027, 3, 8), UTC)
    want = [[_mjd(2027, 3, d, 8), _mjd(2027, 3, d, 12)] for d in (1, 5, 6, 7)]
    np.testing.assert_allclose(got, want, rtol=0, atol=EDGE_TOL_D)


def test_across_midnight_carry_in_and_clip():
    # Period starts Sun 7 Mar 00:00: the Saturday 6th window still runs until 02:00 on the 7th;
    # the one starting Sat 13th 20:00 is cut at the period end, Sun 14th 00:00.
    got = _intervals("Sat 20:00-02:00", _mjd(2027, 3, 7), _mjd(2027, 3, 14), UTC)
    want = [[_mjd(2027, 3, 7, 0), _mjd(2027, 3, 7, 2)], [_mjd(2027, 3, 13, 20), _mjd(2027, 3, 14)]]
    np.testing.assert_allclose(got, want, rtol=0, atol=EDGE_TOL_D)


def test_merging_overlapping_and_touching_windows():
    # Mon 1 Mar: 19:00-24:00 touches Tue 00:00-02:00 and contains 20:00-21:00 -> one window;
    # Tue 02:30-03:00 is separate (30 min gap); Wed 10:00-12:00 and 11:00-13:00 overlap.
    text = ("Mon 19:00-24:00; Tue 00:00-02:00; Mon 20:00-21:00; Tue 02:30-03:00;"
            " Wed 10:00-12:00; Wed 11:00-13:00")
    got = _intervals(text, _mjd(2027, 3, 1), _mjd(2027, 3, 4), "UTC")
    want = [[_mjd(2027, 3, 1, 19), _mjd(2027, 3, 2, 2)],
            [_mjd(2027, 3, 2, 2, 30), _mjd(2027, 3, 2, 3)],
            [_mjd(2027, 3, 3, 10), _mjd(2027, 3, 3, 13)]]
    np.testing.assert_allclose(got, want, rtol=0, atol=EDGE_TOL_D)


def test_always_and_empty_period():
    np.testing.assert_array_equal(window_intervals_mjd(ALWAYS, 61000.0, 61002.5, LONDON),
                                  [[61000.0, 61002.5]])
    assert window_intervals_mjd(ALWAYS, 61002.0, 61002.0, LONDON).shape == (0, 2)
    assert not never_occurs(ALWAYS, 61000.0, 61001.0, LONDON)


# ---------------------------------------------------------------- DST, worked by hand


def test_london_spring_forward_evening_window():
    # Sat 27 Mar (GMT, +0): 19:00-23:30 local = 19:00-23:30 UTC.
    # Sun 28 Mar (BST, +1): 19:00-23:30 local = 18:00-22:30 UTC.
    got = _intervals("Sat,Sun 19:00-23:30", _mjd(2027, 3, 27), _mjd(2027, 3, 29), LONDON)
    want = [[_mjd(2027, 3, 27, 19), _mjd(2027, 3, 27, 23, 30)],
            [_mjd(2027, 3, 28, 18), _mjd(2027, 3, 28, 22, 30)]]
    np.testing.assert_allclose(got, want, rtol=0, atol=EDGE_TOL_D)


def test_london_fall_back_evening_window():
    # Sat 30 Oct (BST, +1): 19:00-23:30 local = 18:00-22:30 UTC.
    # Sun 31 Oct (GMT, +0): 19:00-23:30 local = 19:00-23:30 UTC.
    got = _intervals("Sat,Sun 19:00-23:30", _mjd(2027, 10, 30), _mjd(2027, 11, 1), LONDON)
    want = [[_mjd(2027, 10, 30, 18), _mjd(2027, 10, 30, 22, 30)],
            [_mjd(2027, 10, 31, 19), _mjd(2027, 10, 31, 23, 30)]]
    np.testing.assert_allclose(got, want, rtol=0, atol=EDGE_TOL_D)


def test_london_overnight_windows_across_the_changes():
    # Spring: Sat 27 Mar 20:00 GMT = 20:00 UTC; Sun 02:00 BST = 01:00 UTC (5 h elapsed).
    got = _intervals("Sat 20:00-02:00", _mjd(2027, 3, 27), _mjd(2027, 3, 29), LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 3, 27, 20), _mjd(2027, 3, 28, 1)]],
                               rtol=0, atol=EDGE_TOL_D)
    # Autumn: Sat 30 Oct 20:00 BST = 19:00 UTC; Sun 02:00 GMT = 02:00 UTC (7 h elapsed).
    got = _intervals("Sat 20:00-02:00", _mjd(2027, 10, 30), _mjd(2027, 11, 1), LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 10, 30, 19), _mjd(2027, 10, 31, 2)]],
                               rtol=0, atol=EDGE_TOL_D)


def test_london_window_starting_in_the_spring_gap():
    # 01:30 on 28 Mar does not exist (01:00 GMT jumps to 02:00 BST at 01:00 UTC): the start
    # moves to 02:00 BST = 01:00 UTC; the end 02:30 BST = 01:30 UTC.
    got = _intervals("Sun 01:30-02:30", _mjd(2027, 3, 28), _mjd(2027, 3, 29), LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 3, 28, 1), _mjd(2027, 3, 28, 1, 30)]],
                               rtol=0, atol=EDGE_TOL_D)


def test_london_window_wholly_inside_the_gap_never_occurs_that_day():
    # 01:10 and 01:50 both move to 01:00 UTC: zero length, dropped. A week later it exists:
    # Sun 4 Apr 01:10-01:50 BST = 00:10-00:50 UTC.
    one_day = (_mjd(2027, 3, 28), _mjd(2027, 3, 29))
    assert never_occurs(parse_windows("Sun 01:10-01:50"), *one_day, LONDON)
    got = _intervals("Sun 01:10-01:50", _mjd(2027, 3, 28), _mjd(2027, 4, 5), LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 4, 4, 0, 10), _mjd(2027, 4, 4, 0, 50)]],
                               rtol=0, atol=EDGE_TOL_D)


def test_london_ambiguous_times_take_the_first_occurrence():
    # 31 Oct: 01:00-02:00 local happens twice (BST then GMT). Start 01:30 -> first, BST:
    # 00:30 UTC; end 03:00 GMT = 03:00 UTC.
    got = _intervals("Sun 01:30-03:00", _mjd(2027, 10, 31), _mjd(2027, 11, 1), LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 10, 31, 0, 30), _mjd(2027, 10, 31, 3)]],
                               rtol=0, atol=EDGE_TOL_D)
    # An end in the repeated hour is its first occurrence too: 00:30 BST = 23:30 UTC on the
    # 30th, 01:30 BST = 00:30 UTC.
    got = _intervals("Sun 00:30-01:30", _mjd(2027, 10, 30), _mjd(2027, 11, 1), LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 10, 30, 23, 30), _mjd(2027, 10, 31, 0, 30)]],
                               rtol=0, atol=EDGE_TOL_D)


def test_adelaide_april_change():
    # Sat 3 Apr (ACDT, +10:30): 19:00 -> 08:30 UTC, 23:30 -> 13:00 UTC.
    # Sun 4 Apr (ACST, +9:30): 19:00 -> 09:30 UTC, 23:30 -> 14:00 UTC.
    got = _intervals("Sat,Sun 19:00-23:30", _mjd(2027, 4, 3), _mjd(2027, 4, 5), ADELAIDE)
    want = [[_mjd(2027, 4, 3, 8, 30), _mjd(2027, 4, 3, 13)],
            [_mjd(2027, 4, 4, 9, 30), _mjd(2027, 4, 4, 14)]]
    np.testing.assert_allclose(got, want, rtol=0, atol=EDGE_TOL_D)


def test_adelaide_october_change():
    # Sat 2 Oct (ACST, +9:30): 19:00 -> 09:30 UTC, 23:30 -> 14:00 UTC.
    # Sun 3 Oct (ACDT, +10:30): 19:00 -> 08:30 UTC, 23:30 -> 13:00 UTC.
    got = _intervals("Sat,Sun 19:00-23:30", _mjd(2027, 10, 2), _mjd(2027, 10, 4), ADELAIDE)
    want = [[_mjd(2027, 10, 2, 9, 30), _mjd(2027, 10, 2, 14)],
            [_mjd(2027, 10, 3, 8, 30), _mjd(2027, 10, 3, 13)]]
    np.testing.assert_allclose(got, want, rtol=0, atol=EDGE_TOL_D)


def test_adelaide_gap_and_repeated_hour():
    # 3 Oct: 02:00-03:00 local does not exist; 02:15 moves to 03:00 ACDT = 16:30 UTC on the
    # 2nd (= 02:00 ACST); end 04:00 ACDT = 17:30 UTC on the 2nd.
    got = _intervals("Sun 02:15-04:00", _mjd(2027, 10, 2), _mjd(2027, 10, 4), ADELAIDE)
    np.testing.assert_allclose(got, [[_mjd(2027, 10, 2, 16, 30), _mjd(2027, 10, 2, 17, 30)]],
                               rtol=0, atol=EDGE_TOL_D)
    # 4 Apr: 02:00-03:00 local happens twice; 02:30 -> first (ACDT): 16:00 UTC on the 3rd;
    # end 04:00 ACST = 18:30 UTC on the 3rd.
    got = _intervals("Sun 02:30-04:00", _mjd(2027, 4, 3), _mjd(2027, 4, 5), ADELAIDE)
    np.testing.assert_allclose(got, [[_mjd(2027, 4, 3, 16), _mjd(2027, 4, 3, 18, 30)]],
                               rtol=0, atol=EDGE_TOL_D)


def test_tz_name_equals_zoneinfo():
    args = (parse_windows("Mon-Fri 19:00-23:30"), _mjd(2027, 3, 20), _mjd(2027, 4, 3))
    np.testing.assert_array_equal(window_intervals_mjd(*args, "Europe/London"),
                                  window_intervals_mjd(*args, LONDON))


# ---------------------------------------------------------------- brute force


def _unix_to_mjd(unix_s):
    return np.asarray(unix_s) / 86400.0 + 40587.0


def _wall_inside(wall, windows):
    """Brute force: is a local wall time inside any (days, start_min, end_min) window?"""
    wd, m = wall.weekday(), wall.hour * 60 + wall.minute
    for days, start, end in windows:
        if end > start:
            if wd in days and start <= m < end:
                return True
        elif (wd in days and m >= start) or ((wd - 1) % 7 in days and m < end):
            return True
    return False


@pytest.mark.parametrize("tz, first_day", [(LONDON, date(2027, 3, 10)), (LONDON, date(2027, 10, 15)),
                                           (ADELAIDE, date(2027, 3, 20)),
                                           (ADELAIDE, date(2027, 9, 20))])
def test_windows_match_wall_clock_reading_every_minute(tz, first_day):
    # UTC -> local (forward, zoneinfo) per minute vs our local -> UTC edges. Window edges
    # avoid times that fall inside a repeated hour, where the two readings legitimately differ.
    text = "Mon-Fri 19:00-23:30; Sat 20:00-02:00; Sat,Sun 08:00-12:00; Wed 23:00-24:00; Thu 00:00-00:30"
    windows = [(r.days, r.start_min, r.end_min) for r in parse_windows(text).rules]
    start_s = int(datetime.combine(first_day, datetime.min.time(), timezone.utc).timestamp())
    unix_s = np.arange(start_s, start_s + 28 * 86400, 60)
    mjd = _unix_to_mjd(unix_s)
    intervals = window_intervals_mjd(parse_windows(text), mjd[0], mjd[-1] + 1 / 1440, tz)
    brute = np.array([_wall_inside(datetime.fromtimestamp(int(s), tz), windows) for s in unix_s])
    np.testing.assert_array_equal(inside(mjd, intervals), brute)


def test_inside_matches_loop_on_random_times(rng):
    edges = np.sort(rng.uniform(61000, 61030, 40))
    intervals = edges.reshape(-1, 2)
    times = np.concatenate([rng.uniform(60999, 61031, 5000), edges])  # include exact edges
    brute = np.array([any(a <= t < b for a, b in intervals) for t in times])
    np.testing.assert_array_equal(inside(times, intervals), brute)
    assert inside(np.array([61000.0]), np.empty((0, 2))).tolist() == [False]
    assert inside(np.zeros((2, 3)), intervals).shape == (2, 3)


def test_clip_to_windows():
    intervals = np.array([[1.0, 2.0], [3.0, 4.0], [5.0, 6.0]])
    np.testing.assert_array_equal(clip_to_windows(1.5, 5.5, intervals),
                                  [[1.5, 2.0], [3.0, 4.0], [5.0, 5.5]])
    assert clip_to_windows(2.0, 3.0, intervals).shape == (0, 2)  # touches only edges


_day_sets = st.sets(st.integers(0, 6), min_size=1).map(lambda s: ",".join(
    ("Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun")[d] for d in sorted(s)))
_clock = st.integers(0, 24 * 4 - 1).map(lambda q: f"{q * 15 // 60:02d}:{q * 15 % 60:02d}")


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(_day_sets, _clock, _clock).filter(lambda w: w[1] != w[2]),
                min_size=1, max_size=5),
       st.sampled_from(["Europe/London", "Australia/Adelaide", "America/New_York"]),
       st.floats(61400, 61800), st.floats(0.2, 20))
def test_intervals_sorted_disjoint_inside_period(windows, zone, start, days):
    text = "; ".join(f"{d} {a}-{b}" for d, a, b in windows)
    got = _intervals(text, start, start + days, ZoneInfo(zone))
    assert got.shape[1] == 2
    assert np.all(got[:, 1] > got[:, 0])
    assert np.all(got[1:, 0] > got[:-1, 1])  # touching windows were merged
    assert got.size == 0 or (got[0, 0] >= start and got[-1, 1] <= start + days)


# ---------------------------------------------------------------- RRULE


@pytest.mark.parametrize("rrule, simple, first, last", [
    # Feb 2027 has no clock change in London; March has one (28th) that evenings do not touch.
    ("RRULE:FREQ=WEEKLY;BYDAY=TU,TH;BYHOUR=20;BYMINUTE=0 for 3h", "Tue,Thu 20:00-23:00",
     date(2027, 2, 1), date(2027, 3, 1)),
    ("RRULE:FREQ=WEEKLY;BYDAY=TU,TH;BYHOUR=20;BYMINUTE=0 for 3h", "Tue,Thu 20:00-23:00",
     date(2027, 3, 1), date(2027, 4, 1)),
    ("RRULE:FREQ=DAILY;BYHOUR=19;BYMINUTE=30 for 2h30m", "daily 19:30-22:00",
     date(2027, 3, 1), date(2027, 4, 1)),
    ("RRULE:FREQ=WEEKLY;BYDAY=SA;BYHOUR=22 for 4h", "Sat 22:00-02:00",
     date(2027, 2, 1), date(2027, 3, 1)),
])
def test_rrule_equals_simple_syntax_over_a_month(rrule, simple, first, last):
    start = datetime.combine(first, datetime.min.time(), LONDON).timestamp()
    end = datetime.combine(last, datetime.min.time(), LONDON).timestamp()
    span = _unix_to_mjd(start), _unix_to_mjd(end)
    got = _intervals(rrule, *span, LONDON)
    want = _intervals(simple, *span, LONDON)
    assert got.shape[0] >= 4
    np.testing.assert_array_equal(got, want)  # both built from the same whole seconds


def test_rrule_duration_is_elapsed_time_across_the_change():
    # Sat 27 Mar 22:00 GMT = 22:00 UTC; 4 h elapsed -> 02:00 UTC (03:00 BST on the clock),
    # while the simple window ends at 02:00 BST = 01:00 UTC.
    span = (_mjd(2027, 3, 27), _mjd(2027, 3, 29))
    got = _intervals("RRULE:FREQ=WEEKLY;BYDAY=SA;BYHOUR=22 for 4h", *span, LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 3, 27, 22), _mjd(2027, 3, 28, 2)]],
                               rtol=0, atol=EDGE_TOL_D)
    got = _intervals("Sat 22:00-02:00", *span, LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 3, 27, 22), _mjd(2027, 3, 28, 1)]],
                               rtol=0, atol=EDGE_TOL_D)
    # An occurrence at 01:30 on the 28th (in the gap) starts at 02:00 BST = 01:00 UTC.
    got = _intervals("RRULE:FREQ=DAILY;BYHOUR=1;BYMINUTE=30 for 1h", _mjd(2027, 3, 28),
                     _mjd(2027, 3, 29), LONDON)
    np.testing.assert_allclose(got, [[_mjd(2027, 3, 28, 1), _mjd(2027, 3, 28, 2)]],
                               rtol=0, atol=EDGE_TOL_D)


def _starts(text, first, last, tz=UTC):
    # Rounded to 1e-6 d (0.09 s): starts are whole minutes, so this only hides float noise.
    got = _intervals(text, _mjd(*first), _mjd(*last), tz)
    return [round(float(s), 6) for s in got[:, 0]]


def test_rrule_interval_count_until():
    feb = ((2027, 2, 1), (2027, 3, 1))  # 1 Feb 2027 is a Monday: DTSTART = 1 Feb 00:00
    # INTERVAL=2 counts weeks from DTSTART's week: Mondays 1 and 15 Feb.
    assert _starts("RRULE:FREQ=WEEKLY;INTERVAL=2;BYDAY=MO;BYHOUR=19 for 1h", *feb) == \
        [round(_mjd(2027, 2, d, 19), 6) for d in (1, 15)]
    # COUNT=3 from DTSTART: 1, 2, 3 Feb.
    assert _starts("RRULE:FREQ=DAILY;BYHOUR=19;COUNT=3 for 1h", *feb) == \
        [round(_mjd(2027, 2, d, 19), 6) for d in (1, 2, 3)]
    # A bare-date UNTIL includes that day; a local date-time UNTIL is inclusive of itself.
    assert _starts("RRULE:FREQ=DAILY;BYHOUR=19;UNTIL=20270203 for 1h", *feb) == \
        [round(_mjd(2027, 2, d, 19), 6) for d in (1, 2, 3)]
    assert _starts("RRULE:FREQ=DAILY;BYHOUR=19;UNTIL=20270203T185959 for 1h", *feb) == \
        [round(_mjd(2027, 2, d, 19), 6) for d in (1, 2)]


def test_rrule_until_in_utc_is_converted_to_local_time():
    # London in June is BST (+1): the 3 Jun occurrence at 19:00 BST is 18:00 UTC.
    june = ((2027, 6, 1), (2027, 6, 10))
    kept = _starts("RRULE:FREQ=DAILY;BYHOUR=19;UNTIL=20270603T180000Z for 1h", *june, LONDON)
    assert kept == [round(_mjd(2027, 6, d, 18), 6) for d in (1, 2, 3)]
    dropped = _starts("RRULE:FREQ=DAILY;BYHOUR=19;UNTIL=20270603T175959Z for 1h", *june, LONDON)
    assert dropped == [round(_mjd(2027, 6, d, 18), 6) for d in (1, 2)]


def test_never_occurs():
    year = (_mjd(2027, 1, 1), _mjd(2028, 1, 1))
    assert never_occurs(parse_windows("RRULE:FREQ=WEEKLY;BYDAY=TU;UNTIL=20261231 for 3h"),
                        *year, LONDON)
    assert not never_occurs(parse_windows("RRULE:FREQ=WEEKLY;BYDAY=TU;UNTIL=20270105 for 3h"),
                            *year, LONDON)
    # Weekend-only windows in a Mon-Thu period (1-5 Mar 2027, ending Fri 00:00).
    assert never_occurs(parse_windows("Sat,Sun 09:00-12:00"), _mjd(2027, 3, 1), _mjd(2027, 3, 5),
                        LONDON)
    assert not never_occurs(parse_windows("Mon-Fri 19:00-23:30"), *year, LONDON)


def test_a_year_of_windows_is_fast():
    avail = read_windows(str(EXAMPLE))
    t0 = time.perf_counter()
    got = window_intervals_mjd(avail, _mjd(2027, 1, 1), _mjd(2028, 1, 1), LONDON)
    elapsed = time.perf_counter() - t0
    assert got.shape[0] > 300
    assert elapsed < 1.0  # measured ~0.01 s; 1 s allows a slow CI machine


# ---------------------------------------------------------------- hostile input


@pytest.mark.parametrize("ch", ["\r", "\x0b", "\x0c", "\x85", "\u2028", "\u2029", "\x1b", "\x00"])
def test_control_characters_in_windows_are_refused(tmp_path, ch):
    """Window texts are echoed into plans, briefs and calendars: a control character is
    refused, not taken as a line break, naming the option or the file and line."""
    with pytest.raises(UserError, match=rf"^--windows: window text contains a control "
                                        rf"character, U\+{ord(ch):04X}"):
        parse_windows(f"Mon 19:00-20:00{ch}SUMMARY:forged")
    path = tmp_path / "rota.txt"
    path.write_bytes(f"# rota\nTue 19:00-20:00\nMon 19:00-20:00{ch}X\n".encode())
    with pytest.raises(UserError, match=rf"^{path}:3: window text contains a control character"):
        read_windows(str(path))


def test_tabs_crlf_and_a_bom_are_fine(tmp_path):
    assert len(parse_windows("Mon\t19:00-20:00").rules) == 1
    path = tmp_path / "rota.txt"
    path.write_bytes(b"\xef\xbb\xbfMon 19:00-20:00\r\nTue 19:00-20:00\r\n")
    avail = read_windows(str(path))
    assert [r.text for r in avail.rules] == ["Mon 19:00-20:00", "Tue 19:00-20:00"]


def test_devices_and_pipes_are_refused_unread(tmp_path):
    with pytest.raises(UserError, match=r"^/dev/zero: cannot read windows file: it is a device"):
        read_windows("/dev/zero")
    fifo = tmp_path / "rota.txt"
    os.mkfifo(fifo)
    with pytest.raises(UserError, match=r"rota\.txt: cannot read windows file: it is a pipe"):
        read_windows(str(fifo))


def test_window_edges_on_a_leap_second_day():
    """2016-12-31 ends with a leap second (86,401 s): window edges on that day are placed
    as astropy's UTC scale places them, and a window across the leap second lasts 1 s longer
    than its wall-clock span."""
    from astropy.time import Time
    start = Time("2016-12-31T00:00:00", scale="utc").mjd
    got = window_intervals_mjd(parse_windows("Sat 12:00-13:00; Sat 23:30-24:00"), start,
                               start + 1.0, UTC)  # an MJD day is one day however long
    want = Time(["2016-12-31T12:00:00", "2016-12-31T13:00:00", "2016-12-31T23:30:00",
                 "2017-01-01T00:00:00"], scale="utc").mjd.reshape(2, 2)
    # 1e-9 d (86 us): float MJD rounding; the error fixed here was up to 1 s (1.2e-5 d).
    assert np.allclose(got, want, rtol=0, atol=EDGE_TOL_D)
    assert round((got[1, 1] - got[1, 0]) * 86401) == 1801  # 30 min and the leap second
