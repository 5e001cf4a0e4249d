"""The drive journal: what ``hiplan drive`` did, one JSON object per line, and reading it back.

Format ``hiplan.journal/1`` (docs/drive.md has the full description). UTF-8,
one JSON object per line, written and flushed as each event happens, so the
file is a faithful record up to the moment a run stops, however it stops (this
is the one output hiplan writes piece by piece, on purpose). Every object has

``time_utc``  plan time of the event (ISO 8601, UTC, milliseconds; the simulated
              time in a rehearsal)
``event``     begin | slew | arrived | track | record_start | record_end | skip |
              error | park | end
``block``     index of the plan entry (a survey plan's ``blocks`` index; for a
              drift plan the recording or move number), or null
``name``      its name, or null
``az_deg``, ``el_deg``            commanded drive azimuth and elevation, or null
``read_az_deg``, ``read_el_deg``  the position the controller reported, or null
``reason``    why (skip, error, park, end), else null

and some events more: ``begin`` the ``schema``, plan, site, clock, speed,
rotator and ``dry_run``; ``record_start`` the ``recording`` number, ``kind``,
``l_deg``, ``b_deg`` (the position observed; for a drift recording the beam at
mid-recording), ``l_from_deg``/``l_to_deg`` (the longitude range swept; equal
for a pointed block), ``ra_deg``, ``dec_deg``, ``start_utc``/``end_utc`` (the
interval being recorded), ``freq_mhz``, ``command`` (the words run, or null);
``record_end`` the same ``recording`` number, ``status`` (ok | failed |
interrupted), ``exit_status`` and ``files``; ``arrived`` and ``track``
``offset_deg`` (the larger per-axis difference between commanded and read back);
``end`` ``status`` and counts.

``read_journal`` turns a journal into the intervals actually recorded.
"""
from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass
from pathlib import Path

from .errors import UserError
from .timebase import iso_utc, parse_instant

JOURNAL_SCHEMA = "hiplan.journal/1"
EVENTS = ("begin", "slew", "arrived", "track", "record_start", "record_end", "skip", "error",
          "park", "end")
RECORD_STATUSES = ("ok", "failed", "interrupted")
MAX_JOURNAL_BYTES = 200_000_000  # a night of tracking writes well under a megabyte
_CORE = ("time_utc", "event", "block", "name", "az_deg", "el_deg", "read_az_deg", "read_el_deg",
         "reason")


def _angle(value):
    return None if value is None else round(float(value), 3)


def make_event(mjd_utc: float, event: str, block: int | None = None, name: str | None = None,
               commanded=None, read_back=None, reason: str | None = None, **extra) -> dict:
    """One journal object: the core fields in a fixed order, then ``extra``.

    ``commanded`` and ``read_back`` are (drive azimuth, elevation) pairs or None.
    """
    if event not in EVENTS:
        raise ValueError(f"unknown journal event {event!r}")
    az, el = commanded if commanded is not None else (None, None)
    raz, rel = read_back if read_back is not None else (None, None)
    out = {"time_utc": iso_utc(mjd_utc, milliseconds=True), "event": event, "block": block,
           "name": name, "az_deg": _angle(az), "el_deg": _angle(el), "read_az_deg": _angle(raz),
           "read_el_deg": _angle(rel), "reason": reason}
    out.update(extra)
    return out


class JournalWriter:
    """Appends events to a new journal file, each line flushed to disk as it is written."""

    def __init__(self, path, force: bool = False):
        self.path = Path(path)
        try:
            # "x": never replace a journal by accident (the command checks --force first).
            self._file = open(self.path, "w" if force else "x", encoding="utf-8")
        except FileExistsError:
            raise UserError(f"{self.path}: already exists (use --force to replace it)") from None
        except OSError as exc:
            raise UserError(f"{self.path}: cannot write the journal "
                            f"({exc.strerror or exc.__class__.__name__})") from None

    def write(self, event: dict) -> None:
        self._file.write(json.dumps(event, ensure_ascii=False, allow_nan=False) + "\n")
        self._file.flush()
        try:
            os.fsync(self._file.fileno())
        except OSError:
            pass  # not every file system syncs (a pipe, some network mounts); flushed anyway

    def close(self) -> None:
        self._file.close()


@dataclass(frozen=True)
class RecordedInterval:
    """One recording made during a run, as the journal tells it.

    Times are float MJD (UTC): ``start_mjd``/``end_mjd`` the interval recorded
    (``end_mjd`` is the last journal time when the run stopped mid-recording:
    status ``unfinished``). Angles in degrees: ``l_deg``/``b_deg`` the position
    observed, ``l_from_deg``/``l_to_deg`` the longitude range swept (equal for a
    pointed block), ``az_deg``/``el_deg`` the drive position commanded when
    recording began and ``read_az_deg``/``read_el_deg`` where the controller
    said the dish was. ``status``: ok | failed | interrupted | unfinished.
    """

    recording: int
    block: int | None
    name: str | None
    kind: str  # target | reference | calibration | drift
    start_mjd: float
    end_mjd: float
    l_deg: float | None
    b_deg: float | None
    l_from_deg: float | None
    l_to_deg: float | None
    ra_deg: float | None
    dec_deg: float | None
    az_deg: float | None
    el_deg: float | None
    read_az_deg: float | None
    read_el_deg: float | None
    freq_mhz: float | None
    status: str
    exit_status: int | None
    files: tuple[str, ...]
    dry_run: bool
    line: int = 0  # the journal line of its record_start (for messages)

    @property
    def minutes(self) -> float:
        return (self.end_mjd - self.start_mjd) * 1440.0

    @property
    def ok(self) -> bool:
        """Recorded to the end with a successful command, in a real (not dry) run."""
        return self.status == "ok" and not self.dry_run


def read_events(path) -> list[dict]:
    """Every event of a journal, checked: one-line ``UserError("<path>:<line>: ...")`` otherwise."""
    from .inputs import read_input_text
    src = str(path)
    text = read_input_text(path, "drive journal", MAX_JOURNAL_BYTES)
    events = []
    for number, line in enumerate(text.splitlines(), start=1):
        if not line.strip():
            continue
        where = f"{src}:{number}"
        try:
            obj = json.loads(line)
        except json.JSONDecodeError as exc:
            # A run killed mid-write can leave a torn last line; anything else is not a journal.
            if number == len(text.splitlines()) and events:
                break
            raise UserError(f"{where}: not a JSON object ({exc.msg})") from None
        except RecursionError:
            raise UserError(f"{where}: not a journal line (nested too deeply)") from None
        if not isinstance(obj, dict):
            raise UserError(f"{where}: not a JSON object")
        if not events:
            if obj.get("event") != "begin" or obj.get("schema") != JOURNAL_SCHEMA:
                raise UserError(f"{where}: not a hiplan drive journal (expected a first line "
                                f"with \"event\": \"begin\" and \"schema\": \"{JOURNAL_SCHEMA}\")")
        event = obj.get("event")
        if event not in EVENTS:
            raise UserError(f"{where}: unknown event {event!r}")
        try:
            obj["_mjd"] = parse_instant(str(obj.get("time_utc")), f"{where}: time_utc")
        except UserError as exc:
            raise UserError(str(exc)) from None
        obj["_line"] = number
        events.append(obj)
    if not events:
        raise UserError(f"{src}: empty journal")
    return events


def _number(obj: dict, key: str, where: str) -> float | None:
    value = obj.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise UserError(f"{where}: {key} must be a number or null, got {value!r}")
    return float(value)


def read_journal(path) -> list[RecordedInterval]:
    """The recordings of a journal, in the order they began (see ``RecordedInterval``).

    Each ``record_start`` is paired with the ``record_end`` of the same
    ``recording`` number; the interval is the one the start event announced,
    ended early at the ``record_end`` time when that came first (a run stopped
    mid-block). A start without an end (the run was killed) ends at the last
    event's time with status ``unfinished``.
    """
    events = read_events(path)
    src = str(path)
    dry_run = bool(events[0].get("dry_run"))
    starts: dict[int, dict] = {}
    ends: dict[int, dict] = {}
    for obj in events:
        if obj["event"] not in ("record_start", "record_end"):
            continue
        where = f"{src}:{obj['_line']}"
        number = obj.get("recording")
        if isinstance(number, bool) or not isinstance(number, int):
            raise UserError(f"{where}: {obj['event']} needs an integer 'recording', "
                            f"got {number!r}")
        table = starts if obj["event"] == "record_start" else ends
        if number in table:
            raise UserError(f"{where}: recording {number} has a second {obj['event']}")
        if obj["event"] == "record_end" and number not in starts:
            raise UserError(f"{where}: record_end of recording {number} before its record_start")
        table[number] = obj
    last_mjd = events[-1]["_mjd"]
    out = []
    for number, start in starts.items():
        where = f"{src}:{start['_line']}"
        try:
            planned_start = parse_instant(str(start.get("start_utc")), f"{where}: start_utc")
            planned_end = parse_instant(str(start.get("end_utc")), f"{where}: end_utc")
        except UserError as exc:
            raise UserError(str(exc)) from None
        end = ends.get(number)
        if end is None:
            status, end_mjd, exit_status, files = "unfinished", min(planned_end, last_mjd), None, ()
        else:
            status = end.get("status")
            if status not in RECORD_STATUSES:
                raise UserError(f"{src}:{end['_line']}: status {status!r} is not one of "
                                f"{', '.join(RECORD_STATUSES)}")
            end_mjd = min(planned_end, end["_mjd"])
            exit_status = end.get("exit_status")
            if exit_status is not None and (isinstance(exit_status, bool)
                                            or not isinstance(exit_status, int)):
                raise UserError(f"{src}:{end['_line']}: exit_status must be an integer or null")
            files = end.get("files") or []
            if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
                raise UserError(f"{src}:{end['_line']}: files must be a list of file names")
            files = tuple(files)
        out.append(RecordedInterval(
            recording=number, block=start.get("block"), name=start.get("name"),
            kind=str(start.get("kind") or "target"), start_mjd=planned_start,
            end_mjd=max(planned_start, end_mjd),
            **{key: _number(start, key, where) for key in (
                "l_deg", "b_deg", "l_from_deg", "l_to_deg", "ra_deg", "dec_deg", "az_deg",
                "el_deg", "read_az_deg", "read_el_deg", "freq_mhz")},
            status=status, exit_status=exit_status, files=files, dry_run=dry_run,
            line=start["_line"]))
    return out
