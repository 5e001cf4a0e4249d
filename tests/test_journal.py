"""The drive journal: events written line by line, read back as the recorded intervals."""
import json

import pytest

from planner.errors import UserError
from planner.journal import JOURNAL_SCHEMA, JournalWriter, make_event, read_journal
from planner.timebase import parse_instant

T0 = parse_instant("2027-03-01T12:00:00Z", "test")
MIN = 1.0 / 1440.0


def _start(t, number, name, start, end, **extra):
    return make_event(t, "record_start", 3, name, (20.0, 30.0), (20.01, 29.99),
                      recording=number, kind="target", l_deg=300.0, b_deg=-4.0,
                      l_from_deg=300.0, l_to_deg=300.0, ra_deg=200.0, dec_deg=-60.0,
                      start_utc=start, end_utc=end, freq_mhz=1420.5, command=["rec"], **extra)


def _end(t, number, status="ok", exit_status=0, files=()):
    return make_event(t, "record_end", 3, "T0", (20.0, 30.0), (20.0, 30.0), recording=number,
                      status=status, exit_status=exit_status, files=list(files))


def _write(path, events, force=False):
    writer = JournalWriter(path, force)
    for e in events:
        writer.write(e)
    writer.close()


def test_event_fields_in_order():
    e = make_event(T0, "skip", 4, "G300+0", reason="the clock is already past this block")
    assert list(e)[:9] == ["time_utc", "event", "block", "name", "az_deg", "el_deg",
                           "read_az_deg", "read_el_deg", "reason"]
    assert e["time_utc"] == "2027-03-01T12:00:00Z" and e["az_deg"] is None
    with pytest.raises(ValueError):
        make_event(T0, "teleport")


def test_written_and_read_back(tmp_path):
    path = tmp_path / "j.jsonl"
    _write(path, [make_event(T0, "begin", schema=JOURNAL_SCHEMA, dry_run=False),
                  _start(T0 + MIN, 1, "T0", "2027-03-01T12:01:00Z", "2027-03-01T12:11:00Z"),
                  _end(T0 + 11 * MIN, 1, files=["T0.dat"]),
                  _start(T0 + 12 * MIN, 2, "T1", "2027-03-01T12:12:00Z", "2027-03-01T12:22:00Z"),
                  _end(T0 + 15 * MIN, 2, status="interrupted", exit_status=None),
                  make_event(T0 + 16 * MIN, "end", status="interrupted")])
    lines = path.read_text().splitlines()
    assert all(json.loads(line) for line in lines) and len(lines) == 6
    first, second = read_journal(path)
    assert (first.name, first.status, first.files, first.ok) == ("T0", "ok", ("T0.dat",), True)
    assert first.minutes == pytest.approx(10.0, abs=1e-6)  # 1e-6 min: MJD round-off
    assert (first.l_deg, first.b_deg, first.az_deg, first.read_el_deg) == (300.0, -4.0, 20.0, 29.99)
    # Interrupted after 3 of its 10 minutes: the interval ends when the recording ended.
    assert (second.status, second.ok) == ("interrupted", False)
    assert second.minutes == pytest.approx(3.0, abs=1e-6)


def test_killed_run_leaves_an_unfinished_recording_and_maybe_a_torn_line(tmp_path):
    path = tmp_path / "j.jsonl"
    _write(path, [make_event(T0, "begin", schema=JOURNAL_SCHEMA),
                  _start(T0, 1, "T0", "2027-03-01T12:00:00Z", "2027-03-01T12:10:00Z"),
                  make_event(T0 + 4 * MIN, "track", 3, "T0", (20, 31), (20, 31))])
    with open(path, "a", encoding="utf-8") as f:
        f.write('{"time_utc": "2027-03-01T12:0')  # the power went off mid-line
    (only,) = read_journal(path)
    assert only.status == "unfinished" and only.minutes == pytest.approx(4.0, abs=1e-6)


def test_dry_run_journal_is_marked(tmp_path):
    path = tmp_path / "j.jsonl"
    _write(path, [make_event(T0, "begin", schema=JOURNAL_SCHEMA, dry_run=True),
                  _start(T0, 1, "T0", "2027-03-01T12:00:00Z", "2027-03-01T12:10:00Z"),
                  _end(T0 + 10 * MIN, 1, exit_status=None)])
    (only,) = read_journal(path)
    assert only.dry_run and only.status == "ok" and not only.ok


def test_writer_never_replaces_without_force(tmp_path):
    path = tmp_path / "j.jsonl"
    path.write_text("old")
    with pytest.raises(UserError, match="already exists"):
        JournalWriter(path)
    assert path.read_text() == "old"
    _write(path, [make_event(T0, "begin", schema=JOURNAL_SCHEMA)], force=True)
    assert json.loads(path.read_text())["event"] == "begin"


@pytest.mark.parametrize("lines, message", [
    ([], "empty journal"),
    (['{"event": "slew", "time_utc": "2027-03-01T12:00:00Z"}'], "not a hiplan drive journal"),
    (['{"event": "begin", "schema": "hiplan.journal/9", "time_utc": "2027-03-01T12:00:00Z"}'],
     "not a hiplan drive journal"),
    (["[1, 2]", "{}"], ":1: not a JSON object"),
    (["BEGIN", "{}"], ":1: not a JSON object"),
    (['{"event": "begin", "schema": "hiplan.journal/1", "time_utc": "yesterday"}'],
     "time_utc: 'yesterday' is not an ISO 8601 time"),
    (['{"event": "begin", "schema": "hiplan.journal/1", "time_utc": "2027-03-01T12:00:00Z"}',
      '{"event": "record_end", "recording": 1, "time_utc": "2027-03-01T12:00:00Z"}'],
     ":2: record_end of recording 1 before its record_start"),
    (['{"event": "begin", "schema": "hiplan.journal/1", "time_utc": "2027-03-01T12:00:00Z"}',
      '{"event": "dance", "time_utc": "2027-03-01T12:00:00Z"}', "{}"], ":2: unknown event 'dance'"),
])
def test_bad_journals_are_one_line_errors(tmp_path, lines, message):
    path = tmp_path / "j.jsonl"
    path.write_text("\n".join(lines) + ("\n" if lines else ""), encoding="utf-8")
    with pytest.raises(UserError, match=message) as info:
        read_journal(path)
    assert str(info.value).startswith(str(path)) and "\n" not in str(info.value)
