"""Observation log: which galactic longitudes a drift survey has already covered.

The log is a small CSV format of hiplan's own (full description in
docs/observation-log.md). One data row is one recording; it credits
``minutes`` of integration to every longitude bin its range touches, so a
planner can see which bins still need time.

- UTF-8 text, a leading byte-order mark is tolerated, LF or CRLF line ends.
- A note that starts like a spreadsheet formula (``=``, ``+``, ``-``, ``@``) is
  written with a leading apostrophe (``outputs.csv_text``), and one such
  apostrophe is dropped on reading, so a note reads back as it was written.
- Lines whose first non-blank character is ``#`` are comments; blank lines
  are skipped. The first remaining line is the header (``LOG_COLUMNS`` in any
  order, case-sensitive, spaces around names ignored).
- Fields are split on commas; a field holding a comma or a quote is written in
  double quotes with inner quotes doubled. Spaces around a field are dropped.
  A row lives on one physical line.
- Times are ISO 8601 with ``Z`` or an explicit UTC offset; a time without one
  is refused rather than guessed.
- Longitude ranges run upward from ``l_from_deg`` to ``l_to_deg`` (degrees),
  through 360 when ``l_to_deg < l_from_deg``; equal values are one point and
  ``0 -> 360`` is the whole circle.

Every problem raises ``UserError`` with one line ``"{path}:{line}: {what}"``,
``line`` being the physical, 1-based line in the file. Problems with the file
as a whole (missing, unreadable, too large) are reported at line 1.
Reading never writes to the file.
"""
from __future__ import annotations

import csv
import difflib
import io
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from datetime import datetime

import numpy as np

from .errors import UserError
from .inputs import read_input
from .outputs import csv_text, csv_untext
from .timebase import LeapSecondError, datetime_to_mjd_utc, iso_utc, leap_instant_mjd, parse_iso

LOG_COLUMNS = ("start_utc", "end_utc", "dec_deg", "l_from_deg", "l_to_deg", "minutes",
               "quality", "note")
REQUIRED_COLUMNS = ("start_utc", "l_from_deg", "l_to_deg", "minutes", "quality")
QUALITIES = ("good", "fair", "bad")
COUNTED_QUALITIES = ("good", "fair")  # "bad" rows are kept but never count as coverage

# Limits that keep a mistaken input (a raw data file, a runaway script) from
# eating memory. Module constants so tests can lower them.
MAX_FILE_BYTES = 50_000_000  # "50 MB", decimal megabytes
MAX_DATA_ROWS = 200_000
MAX_MINUTES = 1440.0  # one day

FORMAT_COMMENT = "# hiplan observation log, format 1 (see docs/observation-log.md)"

# Typed values such as 0.3 with a bin width of 0.1 give 2.9999999999999996 on
# division (a third of all 0.1-step values do); the nudge puts them in the bin
# a person expects. At 1e-9 bin it is far below any longitude anyone writes.
_BIN_EDGE_NUDGE = 1e-9
# Cap on (row, bin) pairs expanded at once by coverage_minutes (8 bytes each).
_PAIRS_PER_BLOCK = 4_000_000


@dataclass(frozen=True)
class LogEntry:
    """One recording from the log.

    Times are MJD (UTC, days); angles in degrees; ``minutes`` is integration
    time credited to each longitude bin the range touches. ``line`` is where
    the row sits in its file and is left out of equality, so the same rows
    read from two files compare equal.
    """

    line: int = field(compare=False)
    start_mjd: float
    end_mjd: float | None
    dec_deg: float | None
    l_from_deg: float
    l_to_deg: float
    minutes: float
    quality: str
    note: str

    @property
    def counted(self) -> bool:
        """True when the row counts as coverage (quality good or fair)."""
        return self.quality in COUNTED_QUALITIES


# ------------------------------------------------------------------- reading

def read_log(path) -> list[LogEntry]:
    """Read and validate an observation log file (see the module docstring)."""
    src = str(path)
    # Regular files only (a device or FIFO is refused unread), at most MAX_FILE_BYTES.
    data = read_input(path, "observation log", MAX_FILE_BYTES, where=f"{src}:1")
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise UserError(f"{src}:{line}: not UTF-8 text (byte 0x{data[exc.start]:02X}); "
                        "save the log as UTF-8") from None
    return parse_log_text(text, src)


def read_logs(paths) -> list[LogEntry]:
    """Read several logs and merge them: a recording in more than one counts once.

    The same recording is the same start instant and longitude range (as
    ``_check_duplicate`` judges within one file); the first file's row is kept.
    Within one file a repeat is still an error.
    """
    merged: list[LogEntry] = []
    seen: set[tuple] = set()
    for path in paths:  # a few files
        for entry in read_log(path):
            key = (entry.start_mjd, entry.l_from_deg, entry.l_to_deg)
            if key not in seen:
                seen.add(key)
                merged.append(entry)
    return merged


def parse_log_text(text: str, source: str) -> list[LogEntry]:
    """Parse the text of an observation log; ``source`` names it in error messages."""
    if text.startswith("\ufeff"):
        text = text[1:]
    header: tuple[str, ...] | None = None
    entries: list[LogEntry] = []
    seen: dict[tuple, int] = {}
    physical = text.split("\n")
    if physical and physical[-1] == "":
        physical.pop()  # the final newline ends the last line, it does not start one
    for number, raw in enumerate(physical, start=1):
        line = raw[:-1] if raw.endswith("\r") else raw
        stripped = line.strip()
        if not stripped or stripped.startswith("#"):
            continue
        where = f"{source}:{number}"
        fields = _split_fields(line, where)
        if header is None:
            header = _check_header(fields, where)
            continue
        if len(entries) >= MAX_DATA_ROWS:
            raise UserError(f"{where}: more than {MAX_DATA_ROWS} data rows, the limit for one "
                            "observation log")
        if len(fields) != len(header):
            hint = (" (put a note that contains commas in double quotes)"
                    if "note" in header and len(fields) > len(header) else "")
            raise UserError(f"{where}: row has {len(fields)} fields but the header has "
                            f"{len(header)} columns{hint}")
        entry = _entry_from_texts(dict(zip(header, fields)), number, where)
        _check_duplicate(entry, seen, number, where)
        entries.append(entry)
    if header is None:
        raise UserError(f"{source}:{max(1, len(physical))}: missing header: no line names the "
                        f"columns (expected e.g. {','.join(REQUIRED_COLUMNS)})")
    return entries


def _hint(word: str, choices, cutoff: float = 0.6) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=cutoff)
    return f" (did you mean '{close[0]}'?)" if close else ""


def _split_fields(line: str, where: str) -> list[str]:
    """Fields of one physical line, stripped; quotes follow the usual CSV rules."""
    if '"' not in line:
        return [f.strip() for f in line.split(",")]
    try:
        fields = next(csv.reader([line], skipinitialspace=True, strict=True))
    except csv.Error as exc:
        raise UserError(f"{where}: cannot split the line into fields ({exc}); "
                        "check the double quotes") from None
    return [f.strip() for f in fields]


def _check_header(names: list[str], where: str) -> tuple[str, ...]:
    # Column names never start with a digit; times and longitudes do.
    if any(name[:1].isdigit() for name in names):
        raise UserError(f"{where}: missing header: the first line that is not a comment must "
                        f"name the columns (e.g. {','.join(REQUIRED_COLUMNS)}), "
                        f"found '{','.join(names)[:60]}'")
    for i, name in enumerate(names):
        if not name:
            raise UserError(f"{where}: empty column name in the header (column {i + 1}; "
                            "a stray comma?)")
        if name not in LOG_COLUMNS:
            raise UserError(f"{where}: unknown column '{name}'{_hint(name, LOG_COLUMNS)}; "
                            f"known columns: {', '.join(LOG_COLUMNS)}")
        if name in names[:i]:
            raise UserError(f"{where}: column '{name}' appears twice in the header")
    missing = [c for c in REQUIRED_COLUMNS if c not in names]
    if missing:
        listed = ", ".join(f"'{c}'" for c in missing)
        raise UserError(f"{where}: missing required column{'s' if len(missing) > 1 else ''} "
                        f"{listed}")
    return tuple(names)


def _entry_from_texts(texts: Mapping[str, str], line: int, where: str) -> LogEntry:
    """Validate one row given as column -> text; ``where`` prefixes every error."""
    def value(column: str) -> str | None:
        text = (texts.get(column) or "").strip()
        if not text:
            if column in REQUIRED_COLUMNS:
                raise UserError(f"{where}: {column} is empty but required")
            return None
        return text

    start_mjd = _parse_time(value("start_utc"), "start_utc", where)
    end_text = value("end_utc")
    end_mjd = None if end_text is None else _parse_time(end_text, "end_utc", where)
    if end_mjd is not None and end_mjd <= start_mjd:
        raise UserError(f"{where}: end_utc {end_text} is not after start_utc "
                        f"{value('start_utc')}")
    dec_text = value("dec_deg")
    dec_deg = None if dec_text is None else _parse_number(dec_text, "dec_deg", where, -90, 90)
    l_from = _parse_number(value("l_from_deg"), "l_from_deg", where, 0, 360)
    l_to = _parse_number(value("l_to_deg"), "l_to_deg", where, 0, 360)
    minutes = _parse_number(value("minutes"), "minutes", where, 0, MAX_MINUTES, lo_open=True)
    quality = value("quality")
    if quality not in QUALITIES:
        # A looser cutoff than for column names: the words are short ('gud' -> 'good'
        # scores 0.57) and there are only three to confuse.
        raise UserError(f"{where}: quality '{quality}' must be good, fair or bad"
                        f"{_hint(quality.lower(), QUALITIES, cutoff=0.5)}")
    note = csv_untext(value("note") or "")  # written guarded against spreadsheet formulas
    if "\n" in note or "\r" in note:
        raise UserError(f"{where}: note contains a line break; a row must fit on one line")
    return LogEntry(line=line, start_mjd=start_mjd, end_mjd=end_mjd, dec_deg=dec_deg,
                    l_from_deg=l_from, l_to_deg=l_to, minutes=minutes, quality=quality,
                    note=note)


def _parse_time(text: str, column: str, where: str) -> float:
    """MJD (UTC) of an ISO 8601 time that carries Z or an explicit offset."""
    try:
        moment, leap = parse_iso(text)  # second 60 only in a real leap second
    except ValueError:
        raise UserError(f"{where}: {column} '{text}' is not an ISO 8601 time "
                        "(e.g. 2027-03-02T19:26:10Z)") from None
    if moment.tzinfo is None:
        raise UserError(f"{where}: {column} '{text}' has no UTC offset; add Z for UTC "
                        "(2027-03-02T19:26:10Z) or an offset such as +01:00")
    try:
        return leap_instant_mjd(moment, text) if leap else datetime_to_mjd_utc(moment)
    except LeapSecondError as exc:
        raise UserError(f"{where}: {column} {exc}") from None
    except OverflowError:
        raise UserError(f"{where}: {column} '{text}' is out of range") from None


def _parse_number(text: str, column: str, where: str, lo: float, hi: float,
                  lo_open: bool = False) -> float:
    try:
        number = float(text)
    except ValueError:
        raise UserError(f"{where}: {column} '{text}' is not a number") from None
    if not math.isfinite(number):
        raise UserError(f"{where}: {column} '{text}' must be a finite number")
    if number > hi or number < lo or (lo_open and number == lo):
        bracket = "(" if lo_open else "["
        raise UserError(f"{where}: {column} = {text} is outside {bracket}{lo:g}, {hi:g}]")
    return number


def _check_duplicate(entry: LogEntry, seen: dict, number: int, where: str,
                     unit: str = "line") -> None:
    # Same instant and range counts as a repeat even when written differently
    # (another offset, 30 vs 30.0): it is the same recording typed twice.
    key = (entry.start_mjd, entry.l_from_deg, entry.l_to_deg)
    if key in seen:
        raise UserError(f"{where}: duplicate of {unit} {seen[key]} (same start_utc, l_from_deg "
                        "and l_to_deg)")
    seen[key] = number


# ------------------------------------------------------------------ coverage

def _bin_count(bin_width_deg: float) -> int:
    """Number of longitude bins; the width must divide 360 degrees."""
    bw = float(bin_width_deg)
    if not (math.isfinite(bw) and bw > 0):
        raise UserError(f"bin_width_deg = {bin_width_deg} must be a positive number")
    n = round(360.0 / bw)
    if n < 1 or abs(n * bw - 360.0) > 1e-9 * 360.0:
        raise UserError(f"bin_width_deg = {bin_width_deg} must divide 360 exactly "
                        "(e.g. 0.5, 1, 2, 5)")
    return n


def _bin_spans(l_from_deg: np.ndarray, l_to_deg: np.ndarray, bin_width_deg: float,
               n_bins: int) -> tuple[np.ndarray, np.ndarray]:
    """(first bin index in [0, n_bins), number of bins) for each upward range."""
    first = np.floor(l_from_deg / bin_width_deg + _BIN_EDGE_NUDGE).astype(np.int64)
    last = np.floor(l_to_deg / bin_width_deg + _BIN_EDGE_NUDGE).astype(np.int64)
    # A range whose end lies below its start runs through 360: unroll it by a turn.
    last = last + np.where(l_to_deg < l_from_deg, n_bins, 0)
    count = np.minimum(last - first + 1, n_bins)
    return first % n_bins, count


def _expand(first: np.ndarray, count: np.ndarray, n_bins: int) -> tuple[np.ndarray, np.ndarray]:
    """(row number, bin index) for every bin of every range, rows in order."""
    owner = np.repeat(np.arange(count.size), count)
    offsets = np.cumsum(count) - count
    step = np.arange(owner.size) - offsets[owner]
    return owner, (first[owner] + step) % n_bins


def entry_bins(entry: LogEntry, bin_width_deg: float = 1.0) -> np.ndarray:
    """Start longitudes (deg) of the bins a row's range touches, in the order it runs.

    A bin starts at floor(l / bin_width) * bin_width; both ends are inclusive,
    so 350 -> 10 gives 350..359 then 0..10 (21 bins at 1 deg).
    """
    n_bins = _bin_count(bin_width_deg)
    first, count = _bin_spans(np.array([entry.l_from_deg]), np.array([entry.l_to_deg]),
                              bin_width_deg, n_bins)
    _, index = _expand(first, count, n_bins)
    return index * float(bin_width_deg)


def coverage_minutes(entries: Iterable[LogEntry], bin_width_deg: float = 1.0) -> np.ndarray:
    """Integration minutes per longitude bin from good and fair rows.

    Returns an array of length 360 / bin_width_deg; index i is the bin that
    starts at i * bin_width_deg. Bad rows add nothing; a bin no row touches is
    exactly 0.
    """
    n_bins = _bin_count(bin_width_deg)
    counted = [e for e in entries if e.counted]
    total_min = np.zeros(n_bins)
    if not counted:
        return total_min
    l_from_deg = np.array([e.l_from_deg for e in counted])
    l_to_deg = np.array([e.l_to_deg for e in counted])
    minutes = np.array([e.minutes for e in counted])
    first, count = _bin_spans(l_from_deg, l_to_deg, bin_width_deg, n_bins)
    # Rows go in blocks so 200,000 whole-circle rows never expand to 72 million
    # pairs at once; bincount then adds each bin's minutes in row order.
    rows_per_block = max(1, _PAIRS_PER_BLOCK // n_bins)
    for lo in range(0, len(counted), rows_per_block):
        block = slice(lo, lo + rows_per_block)
        owner, index = _expand(first[block], count[block], n_bins)
        total_min += np.bincount(index, weights=minutes[block][owner], minlength=n_bins)
    return total_min


# ------------------------------------------------------------------- writing

def format_log(entries_or_dicts: Iterable[LogEntry | Mapping]) -> str:
    """Text of a valid log (format comment, header, one row per item).

    Items are ``LogEntry`` objects or mappings from column name to value
    (str, number, aware datetime or None). Every item is validated as if read
    from a file; errors name the item as ``format_log item N``. Times are
    written in UTC to the millisecond, numbers in the shortest form that reads
    back to the same float, so reading the text gives the same entries.
    """
    rows = []
    seen: dict[tuple, int] = {}
    for number, item in enumerate(entries_or_dicts, start=1):
        where = f"format_log item {number}"
        if isinstance(item, LogEntry):
            texts = _entry_texts(item)
        elif isinstance(item, Mapping):
            texts = _mapping_texts(item, where)
        else:
            raise TypeError(f"{where}: expected a LogEntry or a mapping, got "
                            f"{type(item).__name__}")
        entry = _entry_from_texts(texts, number, where)
        _check_duplicate(entry, seen, number, where, unit="item")
        texts = _entry_texts(entry)
        rows.append([texts[c] for c in LOG_COLUMNS])
    out = io.StringIO()
    out.write(FORMAT_COMMENT + "\n")
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(LOG_COLUMNS)
    writer.writerows(rows)
    return out.getvalue()


def _mapping_texts(item: Mapping, where: str) -> dict[str, str]:
    texts = {}
    for key, raw in item.items():
        if key not in LOG_COLUMNS:
            raise UserError(f"{where}: unknown column '{key}'{_hint(str(key), LOG_COLUMNS)}")
        if raw is None:
            texts[key] = ""
        elif isinstance(raw, datetime):
            texts[key] = raw.isoformat()
        elif isinstance(raw, (int, float)) and not isinstance(raw, bool):
            texts[key] = _number_text(float(raw))
        else:
            # A note is the text itself, not a file cell: guarded like a written one, so
            # reading it back (csv_untext) gives it unchanged.
            texts[key] = csv_text(str(raw)) if key == "note" else str(raw)
    return texts


def _entry_texts(entry: LogEntry) -> dict[str, str]:
    return {
        "start_utc": _iso_from_mjd(entry.start_mjd),
        "end_utc": "" if entry.end_mjd is None else _iso_from_mjd(entry.end_mjd),
        "dec_deg": "" if entry.dec_deg is None else _number_text(entry.dec_deg),
        "l_from_deg": _number_text(entry.l_from_deg),
        "l_to_deg": _number_text(entry.l_to_deg),
        "minutes": _number_text(entry.minutes),
        "quality": entry.quality,
        "note": csv_text(entry.note),  # a note starting like a formula gets a leading '
    }


def _number_text(value: float) -> str:
    # repr is the shortest text that reads back to the identical float.
    return str(int(value)) if float(value).is_integer() else repr(float(value))


def _iso_from_mjd(mjd_utc: float) -> str:
    """ISO 8601 UTC with Z, to the millisecond (seconds only when whole).

    Float MJD near 6e4 days resolves ~0.6 microseconds, so rounding to the
    millisecond recovers exactly the time that was read (leap seconds included).
    """
    return iso_utc(mjd_utc, milliseconds=True)
