"""Observation log: parsing, error reports, longitude bins and coverage sums."""
import csv
import io
import os
import re
from datetime import datetime, timedelta, timezone
from pathlib import Path

import numpy as np
import pytest
from astropy.coordinates import TETE, EarthLocation, SkyCoord
from astropy.time import Time
import astropy.units as u

from planner import obslog
from planner.errors import UserError
from planner.obslog import (LOG_COLUMNS, LogEntry, coverage_minutes, entry_bins, format_log,
                            parse_log_text, read_log)

EXAMPLE = Path(__file__).resolve().parent.parent / "examples" / "observation-log.csv"
HEADER = "start_utc,end_utc,dec_deg,l_from_deg,l_to_deg,minutes,quality,note"
ROW = "2027-03-02T19:26:10Z,2027-03-02T20:26:10Z,20,30,40,12,good,first"
ROW2 = "2027-03-03T19:26:10Z,2027-03-03T20:26:10Z,20,30,40,12,good,second"


def _log(*rows, header=HEADER):
    return "\n".join([header, *rows]) + "\n"


def _entry(l_from, l_to, minutes=10.0, quality="good", start=61466.0):
    return LogEntry(line=0, start_mjd=start, end_mjd=None, dec_deg=None, l_from_deg=l_from,
                    l_to_deg=l_to, minutes=minutes, quality=quality, note="")


# ------------------------------------------------------------------ reading

def test_fields_and_time_against_astropy():
    (entry,) = parse_log_text(_log(ROW), "t.csv")
    # 2027-03-02 by hand: MJD 51544 is 2000-01-01; 27 years with 7 leap days (2000..2024)
    # add 9862 days -> 61406 on 2027-01-01; +31 (Jan) +28 (Feb) +1 -> 61466.
    # 19:26:10 = 69970 s = 0.8098379630 day.
    # 1e-9 day (86 us): a float64 MJD near 6e4 resolves 0.6 us; the hand value has 10 digits.
    assert abs(entry.start_mjd - 61466.8098379630) < 1e-9
    # astropy's own UTC->MJD conversion; 1e-10 day (9 us) allows the float64 rounding on
    # both sides and nothing more.
    assert abs(entry.start_mjd - Time("2027-03-02T19:26:10", scale="utc").mjd) < 1e-10
    assert abs((entry.end_mjd - entry.start_mjd) * 86400.0 - 3600.0) < 1e-5  # 1e-5 s: float64 MJD
    assert (entry.dec_deg, entry.l_from_deg, entry.l_to_deg, entry.minutes) == (20, 30, 40, 12)
    assert (entry.quality, entry.note, entry.line) == ("good", "first", 2)


def test_offset_is_converted_to_utc():
    # 20:26:10+01:00 and 14:26:10-05:00 are both 19:26:10 UTC.
    utc, plus1, minus5 = (parse_log_text(_log(ROW.replace("2027-03-02T19:26:10Z", t, 1)), "t")
                          [0].start_mjd for t in ("2027-03-02T19:26:10Z",
                                                  "2027-03-02T20:26:10+01:00",
                                                  "2027-03-02T14:26:10-05:00"))
    assert utc == plus1 == minus5


def test_comments_blank_lines_order_and_spaces_tolerated():
    text = (
        "\n"
        "# a comment line\n"
        "   # an indented comment\n"
        "\n"
        " quality , minutes,l_to_deg , l_from_deg,start_utc \n"  # any order, spaces stripped
        "\n"
        "# between rows\n"
        "good, 12 ,40,30,2027-03-02T19:26:10Z\n"
        "   \t  \n"
        "bad,5,10,350,2027-03-03T19:26:10Z\n"
    )
    first, second = parse_log_text(text, "t")
    assert (first.line, second.line) == (8, 10)
    assert (first.l_from_deg, first.l_to_deg, first.minutes, first.quality) == (30, 40, 12, "good")
    assert first.end_mjd is None and first.dec_deg is None and first.note == ""
    assert second.quality == "bad" and not second.counted


def test_quoted_note_with_comma_and_quote():
    row = '2027-03-02T19:26:10Z,,,30,40,12,good,"RFI, then a ""spike"""'
    (entry,) = parse_log_text(_log(row), "t")
    assert entry.note == 'RFI, then a "spike"'


def test_crlf_line_endings_accepted_and_lines_counted():
    lf = _log("# c", ROW, ROW2)
    crlf = lf.replace("\n", "\r\n")
    assert parse_log_text(crlf, "t") == parse_log_text(lf, "t")
    assert [e.line for e in parse_log_text(crlf, "t")] == [3, 4]
    assert parse_log_text(crlf, "t")[0].note == "first"  # no stray \r in the last field
    with pytest.raises(UserError, match=r"^t:3: "):
        parse_log_text(crlf.replace(",good,", ",gud,", 1), "t")


def test_bom_at_file_start_accepted(tmp_path):
    path = tmp_path / "bom.csv"
    path.write_bytes(b"\xef\xbb\xbf" + _log(ROW).encode("utf-8"))
    (entry,) = read_log(path)
    assert entry.l_from_deg == 30 and entry.line == 2
    assert parse_log_text("\ufeff" + _log(ROW), "t") == [entry]


def test_header_only_gives_no_entries():
    assert parse_log_text("# nothing yet\n" + HEADER + "\n", "t") == []


def test_example_file_reads():
    entries = read_log(EXAMPLE)
    assert 8 <= len(entries) <= 14
    assert sum(e.quality == "bad" for e in entries) == 1
    assert any(e.l_to_deg < e.l_from_deg for e in entries)  # a range through 360
    jan_1, mar_1 = Time("2027-01-01").mjd, Time("2027-03-01").mjd
    assert all(jan_1 <= e.start_mjd < mar_1 for e in entries)
    cover = coverage_minutes(entries)
    assert cover[30:60].any() and cover[180:200].any()


def test_example_rows_match_the_sky():
    # Outside-world check of the invented example: for a meridian transit dish at the
    # Hollowmere site, the beam at mid-recording points at apparent RA = local apparent
    # sidereal time, Dec = dec_deg (of date, hence the TETE frame). astropy's galactic
    # longitude of that point must fall inside the row's range, and |b| inside the 3 deg
    # band the minutes are credited for (each row was laid out around its band crossing).
    site = EarthLocation(lat=53.42 * u.deg, lon=-2.07 * u.deg, height=180 * u.m)
    rows = [e for e in read_log(EXAMPLE) if e.end_mjd is not None]
    mid = Time([(e.start_mjd + e.end_mjd) / 2 for e in rows], format="mjd", scale="utc")
    lst = mid.sidereal_time("apparent", longitude=site.lon)
    beam = SkyCoord(ra=lst, dec=[e.dec_deg for e in rows] * u.deg,
                    frame=TETE(obstime=mid)).galactic
    for e, l_deg, b_deg in zip(rows, beam.l.deg, beam.b.deg):
        inside = (l_deg - e.l_from_deg) % 360.0 <= (e.l_to_deg - e.l_from_deg) % 360.0
        assert inside and abs(b_deg) < 3.0, (e.line, l_deg, b_deg)


# ------------------------------------------------------------------- errors

_BAD_ROWS = [
    # (what, text, line, message pattern)
    ("no header at all", "", 1, r"missing header"),
    ("comments only", "# one\n\n# three\n", 3, r"missing header"),
    ("data before header", "# log\n" + ROW + "\n", 2, r"missing header"),
    ("unknown column", HEADER.replace("minutes", "minute") + "\n", 1,
     r"unknown column 'minute' \(did you mean 'minutes'\?\)"),
    ("empty column name", HEADER + ",\n", 1, r"empty column name"),
    ("repeated column", HEADER + ",note\n", 1, r"column 'note' appears twice"),
    ("missing required column", "# c\n" + HEADER.replace(",quality", "") + "\n", 2,
     r"missing required column 'quality'"),
    ("too few fields", _log(ROW, "2027-03-03T19:26:10Z,,,30,40,12,good"), 3,
     r"row has 7 fields but the header has 8 columns"),
    ("unquoted comma in note", _log(ROW.replace("first", "RFI, wind")), 2,
     r"9 fields.*double quotes"),
    ("unbalanced quote", _log(ROW.replace("first", '"first')), 2, r"check the double quotes"),
    ("bad timestamp", _log(ROW.replace("2027-03-02T19", "2027-13-02T19", 1)), 2,
     r"start_utc '2027-13-02T19:26:10Z' is not an ISO 8601 time"),
    ("naive start", _log(ROW.replace("19:26:10Z", "19:26:10", 1)), 2,
     r"start_utc '2027-03-02T19:26:10' has no UTC offset; add Z"),
    ("naive end", _log("# c", ROW.replace("20:26:10Z", "20:26:10")), 3,
     r"end_utc '2027-03-02T20:26:10' has no UTC offset; add Z"),
    ("end before start", _log(ROW.replace("T20:26", "T18:26")), 2,
     r"end_utc 2027-03-02T18:26:10Z is not after start_utc"),
    ("end equals start", _log(ROW.replace("T20:26", "T19:26")), 2, r"is not after start_utc"),
    ("l_from above 360", _log(ROW.replace(",30,40,", ",361,40,")), 2,
     r"l_from_deg = 361 is outside \[0, 360\]"),
    ("l_to negative", _log(ROW.replace(",30,40,", ",30,-1,")), 2,
     r"l_to_deg = -1 is outside \[0, 360\]"),
    ("dec beyond pole", _log(ROW.replace(",20,30,", ",90.5,30,")), 2,
     r"dec_deg = 90.5 is outside \[-90, 90\]"),
    ("zero minutes", _log(ROW.replace(",12,good", ",0,good")), 2,
     r"minutes = 0 is outside \(0, 1440\]"),
    ("over a day of minutes", _log(ROW.replace(",12,good", ",1441,good")), 2,
     r"minutes = 1441 is outside \(0, 1440\]"),
    ("non-numeric", _log(ROW.replace(",30,40,", ",thirty,40,")), 2,
     r"l_from_deg 'thirty' is not a number"),
    ("not finite", _log(ROW.replace(",12,good", ",nan,good")), 2,
     r"minutes 'nan' must be a finite number"),
    ("unknown quality", _log(ROW.replace(",good,", ",gud,")), 2,
     r"quality 'gud' must be good, fair or bad \(did you mean 'good'\?\)"),
    ("capitalised quality", _log(ROW.replace(",good,", ",Fair,")), 2,
     r"quality 'Fair' .*did you mean 'fair'"),
    ("empty required value", _log(ROW.replace(",12,good", ",,good")), 2,
     r"minutes is empty but required"),
    ("exact duplicate", _log(ROW, "# again", ROW.replace("first", "second")), 4,
     r"duplicate of line 2 \(same start_utc, l_from_deg and l_to_deg\)"),
    ("duplicate written differently", _log(ROW, ROW.replace("19:26:10Z", "20:26:10+01:00", 1)
                                           .replace(",30,40,", ",30.0,40,")), 3,
     r"duplicate of line 2"),
]


@pytest.mark.parametrize("text, line, pattern", [r[1:] for r in _BAD_ROWS],
                         ids=[r[0] for r in _BAD_ROWS])
def test_errors_name_file_line_and_problem(text, line, pattern):
    with pytest.raises(UserError) as info:
        parse_log_text(text, "survey.csv")
    message = str(info.value)
    assert "\n" not in message  # one line for the CLI
    assert message.startswith(f"survey.csv:{line}: "), message
    assert re.search(pattern, message), message


def test_error_line_numbers_count_comments_and_blank_lines():
    text = "# a\n\n# b\n" + HEADER + "\n\n\n" + ROW.replace(",good,", ",gud,") + "\n"
    with pytest.raises(UserError, match=r"^t:7: "):
        parse_log_text(text, "t")


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(UserError, match=r"nope\.csv:1: observation log not found$"):
        read_log(tmp_path / "nope.csv")
    with pytest.raises(UserError, match=r":1: cannot read observation log"):
        read_log(tmp_path)


def test_non_utf8_bytes_reported_at_their_line(tmp_path):
    path = tmp_path / "latin1.csv"
    text = _log(ROW, ROW2.replace("second", "café"))
    path.write_bytes(text.encode("latin-1"))  # é is the single byte 0xE9
    with pytest.raises(UserError, match=r"latin1\.csv:3: not UTF-8 text \(byte 0xE9\)"):
        read_log(path)


def test_row_limit(monkeypatch):
    assert obslog.MAX_DATA_ROWS == 200_000  # the documented limit
    monkeypatch.setattr(obslog, "MAX_DATA_ROWS", 3)
    rows = [ROW.replace("19:26", f"{h}:26") for h in (10, 11, 12, 13)]
    assert len(parse_log_text(_log("# c", *rows[:3]), "t")) == 3
    with pytest.raises(UserError, match=r"^t:6: more than 3 data rows"):
        parse_log_text(_log("# c", *rows), "t")


def test_row_limit_on_a_real_file(tmp_path, monkeypatch):
    # Just over a lowered limit, built in tmp_path (the real limit is tested above).
    monkeypatch.setattr(obslog, "MAX_DATA_ROWS", 1000)
    start = datetime(2027, 1, 1, tzinfo=timezone.utc)
    rows = [f"{(start + timedelta(minutes=k)).isoformat()},,,10,20,5,good,"
            for k in range(1001)]
    path = tmp_path / "big.csv"
    path.write_text(_log(*rows))
    with pytest.raises(UserError, match=r"big\.csv:1002: more than 1000 data rows"):
        read_log(path)


def test_file_size_limit(tmp_path, monkeypatch):
    assert obslog.MAX_FILE_BYTES == 50_000_000  # the documented 50 MB
    path = tmp_path / "log.csv"
    path.write_text(_log(ROW))
    monkeypatch.setattr(obslog, "MAX_FILE_BYTES", path.stat().st_size)
    assert len(read_log(path)) == 1  # exactly at the limit is allowed
    monkeypatch.setattr(obslog, "MAX_FILE_BYTES", path.stat().st_size - 1)
    with pytest.raises(UserError, match=r"log\.csv:1: file is .* MB, larger than the .* MB limit"):
        read_log(path)


def test_file_is_not_modified(tmp_path):
    good = tmp_path / "good.csv"
    bad = tmp_path / "bad.csv"
    good.write_bytes(_log(ROW).replace("\n", "\r\n").encode())
    bad.write_bytes(_log(ROW.replace(",good,", ",gud,")).encode())
    before = {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in (good, bad)}
    read_log(good)
    with pytest.raises(UserError):
        read_log(bad)
    assert {p: (p.read_bytes(), p.stat().st_mtime_ns) for p in (good, bad)} == before


# --------------------------------------------------------------- round trip

def test_round_trip_of_the_example():
    entries = read_log(EXAMPLE)
    text = format_log(entries)
    again = parse_log_text(text, "formatted")
    assert again == entries
    assert format_log(again) == text
    lines = text.splitlines()
    assert lines[0].startswith("#") and "observation log" in lines[0]
    assert lines[1] == ",".join(LOG_COLUMNS)


def test_round_trip_of_awkward_values():
    text = _log(
        '2027-03-02T19:26:10.25Z,2027-03-02T22:00:00.001+01:00,-12.345678901234567,359.9,0.1,'
        '0.1,fair,"comma, ""quotes"" and # hash"',
        "2027-03-02T19:26:10Z,,,0,360,1440,bad,",
        "2027-03-02T19:26:10.999Z,,90,360,360,1e-3,good,ünïcode ☃",
    )
    entries = parse_log_text(text, "t")
    assert parse_log_text(format_log(entries), "t2") == entries


def test_format_from_dicts():
    start = datetime(2027, 3, 2, 20, 26, 10, tzinfo=timezone(timedelta(hours=1)))
    text = format_log([
        {"start_utc": start, "l_from_deg": 350, "l_to_deg": 10.5, "minutes": 12,
         "quality": "good", "note": "wrap"},
        {"start_utc": "2027-03-03T19:00:00Z", "end_utc": None, "l_from_deg": "30",
         "l_to_deg": 40.0, "minutes": 3.5, "quality": "bad"},
    ])
    first, second = parse_log_text(text, "t")
    assert first.start_mjd == parse_log_text(_log(ROW), "t")[0].start_mjd  # 19:26:10 UTC
    assert (first.l_from_deg, first.l_to_deg, first.note) == (350, 10.5, "wrap")
    assert second.end_mjd is None and second.quality == "bad" and second.minutes == 3.5


def test_format_rounds_times_to_the_millisecond():
    mjd = 61466.123456789012
    (entry,) = parse_log_text(format_log([_entry(1, 2, start=mjd)]), "t")
    # 0.5 ms rounding plus float64 MJD resolution (0.6 us).
    assert abs(entry.start_mjd - mjd) * 86400.0 <= 0.5e-3 + 1e-6


@pytest.mark.parametrize("item, pattern", [
    ({"start_utc": "2027-03-02T19:26:10Z", "l_from_deg": 1, "l_to_deg": 2, "minute": 3,
      "quality": "good"}, r"format_log item 1: unknown column 'minute' \(did you mean"),
    ({"start_utc": datetime(2027, 3, 2), "l_from_deg": 1, "l_to_deg": 2, "minutes": 3,
      "quality": "good"}, r"format_log item 1: start_utc .* has no UTC offset"),
    ({"start_utc": "2027-03-02T19:26:10Z", "l_from_deg": 1, "l_to_deg": 2, "minutes": 3,
      "quality": "good", "note": "two\nlines"}, r"format_log item 1: note contains a line break"),
    ({"start_utc": "2027-03-02T19:26:10Z", "l_from_deg": 1, "l_to_deg": 2, "minutes": 3},
     r"format_log item 1: quality is empty but required"),
])
def test_format_rejects_what_could_not_be_read_back(item, pattern):
    with pytest.raises(UserError, match=pattern):
        format_log([item])


def test_format_rejects_duplicates():
    with pytest.raises(UserError, match=r"format_log item 2: duplicate of item 1"):
        format_log([_entry(30, 40), _entry(30, 40, minutes=5)])


# --------------------------------------------------------------------- bins

def test_wrap_around_bins():
    # 350 -> 10 runs upward through 360: bins 350..359 then 0..10 (21 one-degree bins).
    bins = entry_bins(_entry(350, 10))
    assert np.array_equal(bins, np.r_[350:360, 0:11].astype(float))


@pytest.mark.parametrize("l_from, l_to, width, expected", [
    (30, 40, 1.0, np.arange(30, 41)),            # both ends inclusive: 11 bins
    (30.5, 30.5, 1.0, [30]),                     # equal values: one point, one bin
    (0, 360, 1.0, np.arange(360)),               # the whole circle, each bin once
    (360, 360, 1.0, [0]),                        # 360 is 0
    (360, 2, 1.0, [0, 1, 2]),                    # from 360 (= 0) up to 2
    (0.5, 0.2, 1.0, np.r_[0:360]),               # wraps all the way: every bin
    (359.2, 0.7, 0.5, [359.0, 359.5, 0.0, 0.5]),  # floor(l / 0.5) * 0.5 at each end
    (0.3, 0.6, 0.1, [0.3, 0.4, 0.5, 0.6]),       # 0.3/0.1 is 2.9999999999999996 in floats
    (10, 35, 10.0, [10, 20, 30]),
])
def test_bins_by_hand(l_from, l_to, width, expected):
    assert np.allclose(entry_bins(_entry(l_from, l_to), width), expected, atol=1e-9, rtol=0)
    # atol 1e-9: bin starts are index * width, exact up to float rounding of width.


@pytest.mark.parametrize("width", [7.0, 0.0, -1.0, float("nan")])
def test_bin_width_must_divide_360(width):
    with pytest.raises(UserError, match="bin_width_deg"):
        coverage_minutes([], width)


# ----------------------------------------------------------------- coverage

def test_coverage_sums_by_hand():
    entries = [
        _entry(30, 32, 7.0, "good"),            # bins 30, 31, 32: +7
        _entry(31.5, 33, 2.5, "fair"),          # bins 31, 32, 33: +2.5
        _entry(30, 40, 100.0, "bad"),           # never counted
        _entry(359, 1, 4.0, "good"),            # bins 359, 0, 1: +4
        _entry(200, 200, 0.1, "good"),          # bin 200 twice: 0.1 + 0.2
        _entry(200.9, 200.9, 0.2, "good", start=61467.0),
    ]
    cover = coverage_minutes(entries)
    assert cover.shape == (360,)
    expected = np.zeros(360)
    expected[[30, 31, 32, 33]] = [7.0, 9.5, 9.5, 2.5]
    expected[[359, 0, 1]] = 4.0
    expected[200] = 0.1 + 0.2  # same left-to-right sum as the rows
    assert np.array_equal(cover, expected)
    # At 2 deg bins (index i = bin starting at 2i): 30-32 -> 30,32; 31.5-33 -> 30,32;
    # 359-1 -> 358,0; 200 and 200.9 -> 200.
    cover2 = coverage_minutes(entries, 2.0)
    expected2 = np.zeros(180)
    expected2[[15, 16]] = 9.5
    expected2[[179, 0]] = 4.0
    expected2[100] = 0.1 + 0.2
    assert np.array_equal(cover2, expected2)


def test_bad_rows_never_count():
    entries = parse_log_text(_log(ROW.replace(",good,", ",bad,"),
                                  ROW2.replace(",good,", ",bad,")), "t")
    assert len(entries) == 2  # read...
    assert not coverage_minutes(entries).any()  # ...but add nothing
    assert not coverage_minutes([]).any()


def test_coverage_blocks_match_one_pass(monkeypatch, rng):
    # Many random ranges summed in small blocks equal a plain per-row hand sum.
    n = 400
    l_from = rng.uniform(0, 360, n).round(1)
    l_to = rng.uniform(0, 360, n).round(1)
    minutes = rng.uniform(0.5, 30, n).round(1)
    entries = [_entry(a, b, m, start=61000.0 + k) for k, (a, b, m)
               in enumerate(zip(l_from, l_to, minutes))]
    expected = np.zeros(360)
    for e in entries:  # reference: walk each range with Python integers
        first = int(e.l_from_deg // 1)
        last = int(e.l_to_deg // 1) + (360 if e.l_to_deg < e.l_from_deg else 0)
        for k in range(first, min(last, first + 359) + 1):
            expected[k % 360] += e.minutes
    monkeypatch.setattr(obslog, "_PAIRS_PER_BLOCK", 1000)  # 2 rows per block
    # 1e-9 minutes: the same numbers are summed, but block partial sums group them
    # differently from the running reference sum, so the last bits may differ.
    assert np.allclose(coverage_minutes(entries), expected, rtol=0, atol=1e-9)


def test_several_logs_merge_and_count_a_recording_once(tmp_path):
    """Two logs sharing one recording: the union, with the shared row counted once."""
    head = "start_utc,end_utc,dec_deg,l_from_deg,l_to_deg,minutes,quality,note\n"
    shared = "2027-01-05T21:00:00Z,2027-01-05T21:30:00Z,20,50,52,10,good,both\n"
    a = tmp_path / "a.csv"
    b = tmp_path / "b.csv"
    a.write_text(head + shared + "2027-01-06T21:00:00Z,,20,60,60,5,good,only a\n")
    b.write_text(head + "2027-01-05T21:00:00+00:00,,20,50.0,52,10,good,same recording\n"
                 + "2027-01-07T21:00:00Z,,20,70,70,7,good,only b\n")
    merged = obslog.read_logs([a, b])
    assert len(merged) == 3
    depth = obslog.coverage_minutes(merged)
    # 50, 51, 52 from the shared recording once (10 min, not 20); 60 and 70 from each file.
    assert depth[50] == depth[51] == depth[52] == 10.0 and depth[60] == 5.0 and depth[70] == 7.0
    assert depth.sum() == 3 * 10.0 + 5.0 + 7.0


def test_notes_starting_like_formulas_are_guarded_and_read_back():
    """A note such as =HYPERLINK(..) would run as a formula in a spreadsheet: it is written
    with a leading apostrophe and read back as it was; numbers are never touched."""
    notes = ["=HYPERLINK(\"http://x\",\"click\")", "+1 dB", "-RFI", "@x", "'=already quoted",
             "plain, with a comma", ""]
    rows = [{"start_utc": f"2027-03-0{k + 1}T20:00:00Z", "dec_deg": -2.5, "l_from_deg": 10,
             "l_to_deg": 12, "minutes": 5, "quality": "good", "note": note}
            for k, note in enumerate(notes)]
    text = format_log(rows)
    cells = list(csv.reader(io.StringIO(text)))[2:]  # what a spreadsheet would see in each cell
    assert [c[7] for c in cells[:5]] == ["'=HYPERLINK(\"http://x\",\"click\")", "'+1 dB", "'-RFI",
                                         "'@x", "''=already quoted"]
    assert all(c[2] == "-2.5" for c in cells)  # a negative number stays a number
    assert [e.note for e in parse_log_text(text, "t")] == notes


def test_leap_second_times_and_non_regular_files(tmp_path):
    row = "2016-12-31T23:59:60.5Z,2017-01-01T00:10:00Z,20,30,40,10,good,leap"
    (entry,) = parse_log_text(_log(row), "t.csv")
    # 1e-10 d (9 us): float MJD rounding, far below the 0.5 s second 60 stands for.
    assert abs(entry.start_mjd - Time("2016-12-31T23:59:60.5", scale="utc").mjd) < 1e-10
    assert format_log([entry]).splitlines()[2].startswith("2016-12-31T23:59:60.500Z,")
    with pytest.raises(UserError, match=r"^t\.csv:2: start_utc '2027-03-01T23:59:60Z' has second "
                                        r"60, which exists only as a leap second"):
        parse_log_text(_log(row.replace("2016-12-31T23:59:60.5Z", "2027-03-01T23:59:60Z")), "t.csv")
    fifo = tmp_path / "log.csv"
    os.mkfifo(fifo)
    with pytest.raises(UserError, match=r"log\.csv:1: cannot read observation log: it is a pipe"):
        read_log(fifo)
