"""Spectrum recordings: the tables a station's recorder writes, one row per spectrum.

hiplan reads them (never writes to them) to learn what was really recorded
(docs/recordings.md). Open formats only:

* CSV (``.csv``): UTF-8 text (a leading byte-order mark is fine), LF or CRLF; lines
  whose first non-blank character is ``#`` and blank lines are skipped; the first
  other line names the columns, in any order, case and surrounding spaces ignored.
  Columns hiplan does not know are ignored, so a recorder may add its own. A row
  lives on one line.
* ECSV (``.ecsv``, astropy's enhanced CSV): the same columns. ``time_utc`` may also
  be an astropy ``Time`` column (its scale names the clock); a column carrying a
  unit is converted (``exposure_s`` in min, angles in rad).
* FITS (``.fits``, ``.fit``, ``.fts``): binary tables of the single-dish FITS
  convention, one row per spectrum, with ``DATE-OBS`` per row, ``EXPOSURE`` (or
  ``EXPTIME``), and a pointing as ``CRVAL2``/``CRVAL3`` (their ``CTYPE2``/``CTYPE3``
  say RA/DEC, the default, or GLON/GLAT) or as ``AZIMUTH``/``ELEVATIO``. As the
  convention allows, any of these may instead be a keyword of the table's header,
  the same for every row. A file without such a table may hold spectra as images
  or tables whose own header gives ``DATE-OBS`` and ``EXPTIME`` (or ``EXPOSURE``):
  one spectrum per such HDU, pointing from its ``CTYPEn``/``CRVALn`` or
  ``AZIMUTH``/``ELEVATIO`` keywords. ``DATE-OBS`` is read in the ``TIMESYS`` clock,
  UTC when absent as the FITS standard says (Rots et al. 2015, A&A 574, A36);
  TAI, TT and GPS (TAI - 19 s) are converted. RA/Dec are taken as ICRS: FK5 J2000
  differs by < 0.1 arcsec; other equinoxes (B1950) are refused.

Columns of the text tables (units in the names):

* ``time_utc``: ISO 8601 with ``Z`` or an explicit UTC offset; a time without one is
  refused, as everywhere in hiplan. Second 60 only in a real leap second.
* ``exposure_s``: integration of the spectrum, seconds, > 0 and at most a day.
* optional ``ra_deg``/``dec_deg`` (ICRS) or ``alt_deg``/``az_deg`` (azimuth from
  north through east): where the beam pointed. An empty cell means the row gives no
  pointing; with both pairs, RA/Dec is used.

The time stamp marks the start of the exposure unless the user says otherwise
(``hiplan tally --stamp``). Every problem is a one-line ``UserError`` naming the
file and the line (text tables) or the HDU and row (FITS).
"""
from __future__ import annotations

import csv
import glob
import math
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

import numpy as np

from .errors import UserError
from .inputs import decode_text, open_input, read_input
from .timebase import END_MJD, FIRST_MJD, SUPPORTED_TEXT, astropy_offline, iso_utc, unix_to_mjd_utc

SUFFIXES = {".csv": "csv", ".ecsv": "ecsv", ".fits": "fits", ".fit": "fits", ".fts": "fits"}
# Limits against a mistaken input (our choice): a text table of 200 MB holds millions of
# spectra; a FITS file is paged through in place (the spectra themselves are never read),
# so it may be larger. Module constants so tests can lower them.
MAX_TABLE_BYTES = 200_000_000
MAX_FITS_BYTES = 4_000_000_000
MAX_FILES = 100_000
MAX_SPECTRA = 5_000_000  # all files together: ~150 bytes each through the tally
MAX_EXPOSURE_S = 86_400.0

TIME_COLUMN, EXPOSURE_COLUMN = "time_utc", "exposure_s"
POINTING_COLUMNS = (("ra_deg", "dec_deg"), ("alt_deg", "az_deg"))
KNOWN_COLUMNS = (TIME_COLUMN, EXPOSURE_COLUMN) + tuple(c for pair in POINTING_COLUMNS for c in pair)
_RANGES = {"ra_deg": (0.0, 360.0), "dec_deg": (-90.0, 90.0), "alt_deg": (-90.0, 90.0),
           "az_deg": (0.0, 360.0)}
GPS_MINUS_TAI_S = -19.0  # GPS time runs 19 s behind TAI (fixed since 1980)
_FITS_SCALES = {"UTC": "utc", "TAI": "tai", "TT": "tt", "TDT": "tt", "GPS": "tai"}


@dataclass(frozen=True)
class Source:
    """One place spectra come from: a text table, or one HDU of a FITS file."""

    path: str
    hdu: int | None = None  # None for text tables
    per_row: bool = True  # False: the HDU's header describes one spectrum

    def where(self, row: int) -> str:
        if self.hdu is None:
            return f"{self.path}:{row}"
        return f"{self.path}: HDU {self.hdu} row {row}" if self.per_row else f"{self.path}: HDU {self.hdu}"


@dataclass(frozen=True)
class Spectra:
    """Every spectrum read, in file order (arrays of length N).

    ``time_mjd`` is the time stamp as read (UTC MJD); pointings are NaN where a row
    gives none. ``row`` is the line of a text table or the row of a FITS table
    (1-based), 0 for a spectrum described by an HDU's header.
    """

    time_mjd: np.ndarray
    exposure_s: np.ndarray
    ra_deg: np.ndarray
    dec_deg: np.ndarray
    alt_deg: np.ndarray
    az_deg: np.ndarray
    source: np.ndarray
    row: np.ndarray
    sources: tuple[Source, ...]

    def __len__(self) -> int:
        return int(self.time_mjd.size)

    def where(self, i: int) -> str:
        """'file:line' (or 'file: HDU h row r') of spectrum ``i``, for messages."""
        return self.sources[int(self.source[i])].where(int(self.row[i]))

    def where_all(self) -> np.ndarray:
        """``where`` of every spectrum (text array), built per source."""
        out = np.empty(len(self), dtype=object)
        for k, source in enumerate(self.sources):  # files (and FITS HDUs), not spectra
            idx = np.flatnonzero(self.source == k)
            if source.hdu is None:
                out[idx] = np.char.add(f"{source.path}:", self.row[idx].astype(str))
            elif source.per_row:
                out[idx] = np.char.add(f"{source.path}: HDU {source.hdu} row ", self.row[idx].astype(str))
            else:
                out[idx] = source.where(0)
        return out.astype(str)

    @property
    def has_sky(self) -> np.ndarray:
        return np.isfinite(self.ra_deg) & np.isfinite(self.dec_deg)

    @property
    def has_altaz(self) -> np.ndarray:
        return ~self.has_sky & np.isfinite(self.alt_deg) & np.isfinite(self.az_deg)


# ------------------------------------------------------------------ finding files

def _has_magic(text: str) -> bool:
    return any(ch in text for ch in "*?[")


def _recording_files_in(folder: Path) -> list[Path]:
    return sorted(p for p in folder.rglob("*") if p.suffix.lower() in SUFFIXES
                  and not any(part.startswith(".") for part in p.relative_to(folder).parts)
                  and p.is_file())


def find_recordings(specs) -> list[Path]:
    """Recording files from names, folders (every recording file in them and their
    subfolders, hidden ones left out) and glob patterns (``night-*.csv``, ``**/*.fits``),
    each file once, in the order given (folders and patterns sorted)."""
    found: list[Path] = []
    seen: set[Path] = set()
    for spec in specs:  # a few names
        text = str(spec)
        path = Path(text)
        if path.is_dir():
            items = _recording_files_in(path)
            if not items:
                raise UserError(f"{text}: no recording files in this folder (expected "
                                f"{', '.join(SUFFIXES)})")
        elif not path.exists() and _has_magic(text):
            items = []
            for name in sorted(glob.glob(text, recursive=True)):
                hit = Path(name)
                items += _recording_files_in(hit) if hit.is_dir() else (
                    [hit] if hit.suffix.lower() in SUFFIXES else [])
            if not items:
                raise UserError(f"{text}: no recording file matches this pattern")
        else:
            if path.suffix.lower() not in SUFFIXES:
                raise UserError(f"{text}: not a kind of recording hiplan reads (the name must "
                                f"end in {', '.join(SUFFIXES)})")
            items = [path]
        for item in items:
            key = item.resolve()
            if key not in seen:
                seen.add(key)
                found.append(item)
    if len(found) > MAX_FILES:
        raise UserError(f"{len(found):,} recording files, more than the {MAX_FILES:,} hiplan "
                        "reads at once; tally them in parts")
    return found


# ----------------------------------------------------------------------- reading

def read_recordings(paths, progress=None) -> Spectra:
    """All spectra of the files, in order; ``progress(done, total)`` after each file."""
    parts: list[dict] = []
    sources: list[Source] = []
    total = 0
    for k, path in enumerate(paths):  # files, not spectra
        for source, part in _read_file(Path(path)):
            part["source"] = np.full(part["time_mjd"].size, len(sources))
            sources.append(source)
            parts.append(part)
            total += part["time_mjd"].size
            if total > MAX_SPECTRA:
                raise UserError(f"{path}: more than {MAX_SPECTRA:,} spectra in all, the limit "
                                "for one tally; tally the files in parts")
        if progress is not None:
            progress(k + 1, len(paths))
    if total == 0:
        raise UserError(f"{paths[0] if len(paths) == 1 else 'the recordings'}: no spectra to "
                        "tally (no data rows)")
    keys = ("time_mjd", "exposure_s", "ra_deg", "dec_deg", "alt_deg", "az_deg", "source", "row")
    joined = {key: np.concatenate([p[key] for p in parts]) for key in keys}
    return Spectra(**joined, sources=tuple(sources))


def _read_file(path: Path) -> list[tuple[Source, dict]]:
    kind = SUFFIXES.get(path.suffix.lower())
    if kind == "fits":
        return _read_fits(path)
    if kind is None:
        raise UserError(f"{path}: not a kind of recording hiplan reads (the name must end in "
                        f"{', '.join(SUFFIXES)})")
    src = str(path)
    data = read_input(path, "recording", MAX_TABLE_BYTES, where=f"{src}:1")
    text = decode_text(data, f"{src}:1", "recording")
    part = _read_ecsv(text, src) if kind == "ecsv" else _read_csv(text, src)
    return [(Source(src), part)]


def _data_lines(text: str) -> list[tuple[int, str]]:
    """(physical line number, text) of every line that is neither blank nor a comment."""
    out = []
    for number, raw in enumerate(text.split("\n"), start=1):
        line = raw[:-1] if raw.endswith("\r") else raw
        stripped = line.strip()
        if stripped and not stripped.startswith("#"):
            out.append((number, line))
    return out


def _read_csv(text: str, src: str) -> dict:
    lines = _data_lines(text)
    if not lines:
        raise UserError(f"{src}:1: no header: no line names the columns (expected e.g. "
                        f"{TIME_COLUMN},{EXPOSURE_COLUMN})")
    header_line = lines[0][0]
    reader = csv.reader([line for _, line in lines], skipinitialspace=True, strict=True)
    try:
        rows = list(reader)
    except csv.Error as exc:
        number = lines[min(max(reader.line_num, 1), len(lines)) - 1][0]
        raise UserError(f"{src}:{number}: cannot split the line into fields ({exc}); check the "
                        "double quotes") from None
    names = [name.strip().lower() for name in rows[0]]
    if any(name[:1].isdigit() for name in names):
        raise UserError(f"{src}:{header_line}: no header: the first line that is not a comment "
                        f"must name the columns (e.g. {TIME_COLUMN},{EXPOSURE_COLUMN}), found "
                        f"'{','.join(rows[0])[:60]}'")
    index = _column_index(names, f"{src}:{header_line}")
    numbers = np.array([n for n, _ in lines[1:]], dtype=np.int64)
    body = rows[1:]
    lengths = np.fromiter((len(r) for r in body), dtype=np.int64, count=len(body))
    bad = np.flatnonzero(lengths != len(names))
    if bad.size:
        i = int(bad[0])
        raise UserError(f"{src}:{numbers[i]}: row has {lengths[i]} fields but the header has "
                        f"{len(names)} columns")

    def column(name):
        k = index.get(name)
        return None if k is None else [r[k].strip() for r in body]

    def where(i):
        return f"{src}:{numbers[i]}"

    return _assemble(column, len(body), numbers, where)


def _column_index(names: list[str], where: str) -> dict[str, int]:
    index: dict[str, int] = {}
    for k, name in enumerate(names):
        if name in KNOWN_COLUMNS:
            if name in index:
                raise UserError(f"{where}: column '{name}' appears twice in the header")
            index[name] = k
    missing = [c for c in (TIME_COLUMN, EXPOSURE_COLUMN) if c not in index]
    if missing:
        import difflib
        hints = []
        for col in missing:
            close = difflib.get_close_matches(col, names, n=1, cutoff=0.6)
            hints.append(f"'{col}'" + (f" (is '{close[0]}' meant?)" if close else ""))
        raise UserError(f"{where}: missing column{'s' if len(missing) > 1 else ''} "
                        f"{', '.join(hints)}; a recording needs {TIME_COLUMN} and {EXPOSURE_COLUMN}")
    for a, b in POINTING_COLUMNS:
        if (a in index) != (b in index):
            have, lack = (a, b) if a in index else (b, a)
            raise UserError(f"{where}: column '{have}' without '{lack}'; a pointing needs both")
    return index


def _assemble(column, n: int, numbers: np.ndarray, where) -> dict:
    """Arrays of one text table from its columns of text (``column(name)`` -> list or None)."""
    times = column(TIME_COLUMN)
    time_mjd = times if isinstance(times, np.ndarray) else parse_times(times, where, TIME_COLUMN)
    exposure = _numbers(column(EXPOSURE_COLUMN), EXPOSURE_COLUMN, where, required=True)
    _check_exposure(exposure, where)
    out = {"time_mjd": time_mjd, "exposure_s": exposure, "row": numbers}
    for a, b in POINTING_COLUMNS:
        for name in (a, b):
            values = column(name)
            out[name] = (np.full(n, np.nan) if values is None
                         else _numbers(values, name, where, required=False))
        both = np.isfinite(out[a]) == np.isfinite(out[b])
        if not both.all():
            i = int(np.flatnonzero(~both)[0])
            raise UserError(f"{where(i)}: {a} and {b} must both be given or both be empty")
    return out


def _numbers(values, column: str, where, required: bool) -> np.ndarray:
    """Floats of a text column (empty: NaN, or an error if ``required``), range-checked."""
    if isinstance(values, np.ndarray):
        arr = values.astype(float)
    else:
        try:
            arr = np.array([v if v else "nan" for v in values], dtype=float)
        except ValueError:
            for i, v in enumerate(values):  # find the culprit, only on error
                try:
                    float(v or "nan")
                except ValueError:
                    raise UserError(f"{where(i)}: {column} '{v}' is not a number") from None
            raise
    missing = np.isnan(arr)
    if required and missing.any():
        i = int(np.flatnonzero(missing)[0])
        raise UserError(f"{where(i)}: {column} is empty but required")
    if np.isinf(arr).any():
        i = int(np.flatnonzero(np.isinf(arr))[0])
        raise UserError(f"{where(i)}: {column} must be a finite number")
    lo, hi = _RANGES.get(column, (-math.inf, math.inf))
    with np.errstate(invalid="ignore"):
        outside = ~missing & ((arr < lo) | (arr > hi))
    if outside.any():
        i = int(np.flatnonzero(outside)[0])
        raise UserError(f"{where(i)}: {column} = {arr[i]:g} is outside [{lo:g}, {hi:g}]")
    return arr


def _check_exposure(exposure: np.ndarray, where) -> None:
    bad = ~((exposure > 0) & (exposure <= MAX_EXPOSURE_S))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise UserError(f"{where(i)}: {EXPOSURE_COLUMN} = {exposure[i]:g} is outside "
                        f"(0, {MAX_EXPOSURE_S:g}] seconds")


def parse_times(texts, where, column: str = TIME_COLUMN) -> np.ndarray:
    """UTC MJD of ISO 8601 texts that carry ``Z`` or an offset; ``where(i)`` names row i.

    One ``fromisoformat`` per text (the library has no array parser for times with
    zones; 100,000 take ~40 ms); second 60 goes the slow way through ``parse_iso``.
    """
    posix = np.empty(len(texts))
    leap: dict[int, float] = {}
    parse = datetime.fromisoformat
    for i, text in enumerate(texts):  # parsing text, one call per row
        try:
            moment = parse(text)
        except (ValueError, TypeError):
            moment = None
        if moment is None or moment.tzinfo is None:
            leap[i] = _slow_time(text, where(i), column)
            posix[i] = 0.0
            continue
        posix[i] = moment.timestamp()
    mjd = unix_to_mjd_utc(posix)
    for i, value in leap.items():  # leap seconds and odd spellings: rare
        mjd[i] = value
    _check_dates(mjd, where, lambda i: f"{column} '{texts[i]}'")
    return mjd


def _check_dates(mjd: np.ndarray, where, what) -> None:
    """UserError naming the first time outside the supported dates (``what(i)``: its words)."""
    outside = ~((mjd >= FIRST_MJD) & (mjd < END_MJD))
    if outside.any():
        i = int(np.flatnonzero(outside)[0])
        raise UserError(f"{where(i)}: {what(i)} is outside the dates hiplan supports "
                        f"({SUPPORTED_TEXT})")


def _slow_time(text: str, where: str, column: str) -> float:
    """MJD of a time ``fromisoformat`` refused (second 60, a lower-case z), else UserError
    with the observation log's words (``obslog``: the same rule for every time read)."""
    from .obslog import _parse_time
    if not text:
        raise UserError(f"{where}: {column} is empty but required")
    return _parse_time(text, column, where)


# ------------------------------------------------------------------------ ECSV

def _read_ecsv(text: str, src: str) -> dict:
    time_module = astropy_offline()
    from astropy.table import Table
    lines = _data_lines(text)
    numbers = np.array([n for n, _ in lines[1:]], dtype=np.int64)
    try:
        table = Table.read(text, format="ascii.ecsv")
    except Exception as exc:  # astropy raises many kinds; each is the file's fault here
        why = " ".join(str(exc).split())[:160]
        raise UserError(f"{src}: not a readable ECSV table ({type(exc).__name__}: {why})") from None
    names = [name.strip().lower() for name in table.colnames]
    index = _column_index(names, f"{src}:{lines[0][0] if lines else 1}")
    n = len(table)
    by_line = numbers.size == n  # else a value spans lines: number the rows instead

    def where(i):
        return f"{src}:{numbers[i]}" if by_line else f"{src}: row {i + 1}"

    if not by_line:
        numbers = np.arange(1, n + 1)

    def column(name):
        k = index.get(name)
        if k is None:
            return None
        col = table.columns[k]
        if isinstance(col, time_module.Time):
            if name != TIME_COLUMN:
                raise UserError(f"{src}: column '{name}' holds times, not numbers")
            return np.atleast_1d(np.asarray(col.utc.mjd, dtype=float))
        if name == TIME_COLUMN:
            if getattr(col, "mask", None) is not None and np.any(col.mask):
                i = int(np.flatnonzero(col.mask)[0])
                raise UserError(f"{where(i)}: {TIME_COLUMN} is empty but required")
            return [str(v).strip() for v in col]
        return _ecsv_numbers(col, name, src)

    part = _assemble(column, n, numbers, where)
    _check_dates(part["time_mjd"], where, lambda i: TIME_COLUMN)  # a Time column's too
    return part


def _ecsv_numbers(col, name: str, src: str) -> np.ndarray:
    """A numeric ECSV column in the unit its name says (s or deg); masked cells are NaN."""
    unit = getattr(col, "unit", None)
    try:
        values = np.ma.filled(np.ma.asarray(col).astype(float), np.nan)
    except (TypeError, ValueError):
        raise UserError(f"{src}: column '{name}' does not hold numbers") from None
    if unit is not None and str(unit) not in ("", "s" if name == EXPOSURE_COLUMN else "deg"):
        import astropy.units as u
        want = u.s if name == EXPOSURE_COLUMN else u.deg
        try:
            values = values * unit.to(want)
        except u.UnitConversionError:
            raise UserError(f"{src}: column '{name}' has unit '{unit}', which is not "
                            f"{'a time' if want is u.s else 'an angle'}") from None
    return np.asarray(values, dtype=float)


# ------------------------------------------------------------------------ FITS

def _read_fits(path: Path) -> list[tuple[Source, dict]]:
    astropy_offline()
    from astropy.io import fits
    src = str(path)
    handle = open_input(path, "recording", MAX_FITS_BYTES)
    with handle:
        try:
            hdus = fits.open(handle, memmap=True, lazy_load_hdus=False)
        except Exception as exc:  # astropy: OSError, ValueError, ... for a damaged file
            why = " ".join(str(exc).split())[:120]
            raise UserError(f"{src}: not a readable FITS file ({why})") from None
        with hdus:
            try:
                return _fits_spectra(hdus, src)
            except UserError:
                raise
            except Exception as exc:  # a damaged table or header in the middle of the file
                why = " ".join(str(exc).split())[:120]
                raise UserError(f"{src}: cannot read the FITS file ({type(exc).__name__}: "
                                f"{why})") from None


def _fits_spectra(hdus, src: str) -> list[tuple[Source, dict]]:
    primary = hdus[0].header
    tables = [(k, hdu) for k, hdu in enumerate(hdus)
              if hdu.is_image is False and hdu.data is not None
              and "DATE-OBS" in (n.upper() for n in hdu.columns.names)]
    if tables:
        return [(Source(src, k, True), _fits_table(hdu, primary, src, k)) for k, hdu in tables]
    out = []
    for k, hdu in enumerate(hdus):
        header = hdu.header
        if "DATE-OBS" in header and ("EXPTIME" in header or "EXPOSURE" in header):
            out.append((Source(src, k, False), _fits_header_spectrum(header, primary, src, k)))
    if not out:
        raise UserError(f"{src}: no spectra: no table with a DATE-OBS column (single-dish FITS) "
                        "and no header with DATE-OBS and EXPTIME")
    return out


class _Lookup:
    """A single-dish quantity as a column (one value per row) or a header keyword."""

    def __init__(self, hdu, primary, n: int):
        self.data = hdu.data
        self.names = {name.upper(): name for name in hdu.columns.names}
        self.header, self.primary, self.n = hdu.header, primary, n

    def get(self, key: str, header_only: bool = False):
        if not header_only and key in self.names:
            return np.asarray(self.data[self.names[key]])
        if key in self.header:
            return np.full(self.n, self.header[key], dtype=object)
        return None

    def unit(self, key: str) -> str:
        if key not in self.names:
            return ""
        k = [name.upper() for name in self.data.columns.names].index(key) + 1
        return str(self.header.get(f"TUNIT{k}", "")).strip()

    def keyword(self, key: str, default=None):
        return self.header.get(key, self.primary.get(key, default))


def _fits_table(hdu, primary, src: str, k: int) -> dict:
    n = len(hdu.data)
    source = Source(src, k, True)
    look = _Lookup(hdu, primary, n)

    def where(i):
        return source.where(i + 1)

    dates = look.get("DATE-OBS")
    time_mjd = _fits_times(dates, look.keyword("TIMESYS", "UTC"), where)
    exposure = None
    for key in ("EXPOSURE", "EXPTIME"):
        exposure = look.get(key)
        if exposure is not None:
            exposure = _fits_floats(exposure, key, where) * _seconds_per(look.unit(key), key, src)
            break
    if exposure is None:
        raise UserError(f"{src}: HDU {k}: no EXPOSURE (or EXPTIME) column or keyword: "
                        "the length of each spectrum is needed")
    _check_exposure(exposure, where)
    out = {"time_mjd": time_mjd, "exposure_s": exposure, "row": np.arange(1, n + 1)}
    out.update(_fits_pointing(look, n, where, f"{src}: HDU {k}"))
    return out


def _fits_header_spectrum(header, primary, src: str, k: int) -> dict:
    where_text = f"{src}: HDU {k}"

    def where(_i):
        return where_text

    time_mjd = _fits_times(np.array([header["DATE-OBS"]], dtype=object),
                           header.get("TIMESYS", primary.get("TIMESYS", "UTC")), where)
    key = "EXPTIME" if "EXPTIME" in header else "EXPOSURE"
    exposure = _fits_floats(np.array([header[key]], dtype=object), key, where)
    _check_exposure(exposure, where)
    out = {"time_mjd": time_mjd, "exposure_s": exposure, "row": np.zeros(1, dtype=np.int64),
           "ra_deg": np.full(1, np.nan), "dec_deg": np.full(1, np.nan),
           "alt_deg": np.full(1, np.nan), "az_deg": np.full(1, np.nan)}
    axes = {str(header.get(f"CTYPE{j}", "")).strip().upper()[:4]: j for j in range(1, 10)}
    for lon, lat, galactic in (("RA", "DEC", False), ("GLON", "GLAT", True)):
        j_lon = next((j for t, j in axes.items() if t.startswith(lon)), None)
        j_lat = next((j for t, j in axes.items() if t.startswith(lat)), None)
        if j_lon is not None and j_lat is not None:
            a = _fits_floats(np.array([header.get(f"CRVAL{j_lon}")], dtype=object), f"CRVAL{j_lon}", where)
            b = _fits_floats(np.array([header.get(f"CRVAL{j_lat}")], dtype=object), f"CRVAL{j_lat}", where)
            if not galactic:
                _check_equinox(header.get("EQUINOX", header.get("EPOCH")), header.get("RADESYS"),
                               where_text)
            out["ra_deg"], out["dec_deg"] = _to_icrs(a, b, galactic, where, lon, lat)
            return out
    if "AZIMUTH" in header and "ELEVATIO" in header:
        out["az_deg"] = _fits_floats(np.array([header["AZIMUTH"]], dtype=object), "AZIMUTH", where) % 360.0
        out["alt_deg"] = _fits_floats(np.array([header["ELEVATIO"]], dtype=object), "ELEVATIO", where)
        _check_range(out["alt_deg"], "ELEVATIO", -90.0, 90.0, where)
    return out


def _fits_floats(values, key: str, where) -> np.ndarray:
    try:
        arr = np.array(values, dtype=float).ravel()  # a copy: the file closes after reading
    except (TypeError, ValueError):
        for i, v in enumerate(np.ravel(values)):
            try:
                float(v)
            except (TypeError, ValueError):
                raise UserError(f"{where(i)}: {key} '{v}' is not a number") from None
        raise
    if not np.isfinite(arr).all():
        i = int(np.flatnonzero(~np.isfinite(arr))[0])
        raise UserError(f"{where(i)}: {key} is {arr[i]}, not a finite number")
    return arr


def _seconds_per(unit: str, key: str, src: str) -> float:
    if unit.lower() in ("", "s", "sec", "second", "seconds"):
        return 1.0
    import astropy.units as u
    try:
        return float(u.Unit(unit, format="fits").to(u.s))
    except (ValueError, u.UnitConversionError):
        raise UserError(f"{src}: {key} has unit '{unit}', which is not a time") from None


def _fits_times(values, timesys, where) -> np.ndarray:
    """UTC MJD of DATE-OBS texts (YYYY-MM-DDThh:mm:ss[.s...]) in the TIMESYS clock."""
    time_module = astropy_offline()
    system = str(timesys).strip().upper()
    scale = _FITS_SCALES.get(system)
    if scale is None:
        raise UserError(f"{where(0)}: TIMESYS '{timesys}' is not a clock hiplan converts "
                        f"({', '.join(_FITS_SCALES)})")
    texts = np.array([v.decode("ascii", "replace") if isinstance(v, bytes) else str(v)
                      for v in np.ravel(values)], dtype=str)
    texts = np.char.strip(texts)
    empty = np.char.str_len(texts) == 0
    if empty.any():
        raise UserError(f"{where(int(np.flatnonzero(empty)[0]))}: DATE-OBS is empty but required")
    no_clock = np.char.find(texts, "T") < 0
    if no_clock.any():
        i = int(np.flatnonzero(no_clock)[0])
        raise UserError(f"{where(i)}: DATE-OBS '{texts[i]}' has no time of day; hiplan needs "
                        "the time each spectrum started (YYYY-MM-DDThh:mm:ss)")
    try:
        moments = time_module.Time(texts, format="isot", scale=scale)
    except ValueError:
        for i, text in enumerate(texts):  # find the culprit, only on error
            try:
                time_module.Time(text, format="isot", scale=scale)
            except ValueError:
                raise UserError(f"{where(i)}: DATE-OBS '{text}' is not a FITS time "
                                "(YYYY-MM-DDThh:mm:ss[.sss], in the TIMESYS clock, no zone)") from None
        raise
    if system == "GPS":
        moments = moments + (-GPS_MINUS_TAI_S) * _seconds_unit()
    mjd = np.atleast_1d(np.asarray(moments.utc.mjd, dtype=float))
    _check_dates(mjd, where, lambda i: f"DATE-OBS '{texts[i]}'")
    return mjd


def _seconds_unit():
    import astropy.units as u
    return u.s


def _check_equinox(equinox, radesys, where_text: str) -> None:
    if radesys is not None and str(radesys).strip().upper() not in ("", "ICRS", "FK5"):
        raise UserError(f"{where_text}: RADESYS '{radesys}': hiplan reads ICRS or FK5 J2000 "
                        "positions only; convert the positions first")
    if equinox is None:
        return
    try:
        value = float(equinox)
    except (TypeError, ValueError):
        raise UserError(f"{where_text}: EQUINOX '{equinox}' is not a number") from None
    if abs(value - 2000.0) > 0.01:
        raise UserError(f"{where_text}: EQUINOX {value:g}: hiplan reads J2000/ICRS positions "
                        "only; convert the positions first")


def _to_icrs(lon, lat, galactic: bool, where, lon_name: str, lat_name: str):
    _check_range(lat, lat_name, -90.0, 90.0, where)
    if galactic:
        from .galactic import galactic_to_icrs_deg
        ra, dec = galactic_to_icrs_deg(lon, lat)
        return np.asarray(ra, dtype=float), np.asarray(dec, dtype=float)
    return np.asarray(lon, dtype=float) % 360.0, np.asarray(lat, dtype=float)


def _check_range(values, key: str, lo: float, hi: float, where) -> None:
    bad = ~((values >= lo) & (values <= hi))
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise UserError(f"{where(i)}: {key} = {values[i]:g} is outside [{lo:g}, {hi:g}]")


def _fits_pointing(look: _Lookup, n: int, where, where_text: str) -> dict:
    out = {key: np.full(n, np.nan) for key in ("ra_deg", "dec_deg", "alt_deg", "az_deg")}
    crval2, crval3 = look.get("CRVAL2"), look.get("CRVAL3")
    if crval2 is not None and crval3 is not None:
        ctype2, ctype3 = look.get("CTYPE2"), look.get("CTYPE3")
        kind2 = (np.full(n, "RA") if ctype2 is None
                 else np.char.upper(np.char.strip(np.asarray(ctype2, dtype=str))))
        kind3 = (np.full(n, "DEC") if ctype3 is None
                 else np.char.upper(np.char.strip(np.asarray(ctype3, dtype=str))))
        radec = np.char.startswith(kind2, "RA") & np.char.startswith(kind3, "DEC")
        gal = np.char.startswith(kind2, "GLON") & np.char.startswith(kind3, "GLAT")
        if radec.any() or gal.any():
            lon = _fits_floats(crval2, "CRVAL2", where)
            lat = _fits_floats(crval3, "CRVAL3", where)
            if radec.any():
                _check_equinox(look.keyword("EQUINOX", look.keyword("EPOCH")),
                               look.keyword("RADESYS"), where_text)
            for mask, galactic, names in ((radec, False, ("RA", "DEC")), (gal, True, ("GLON", "GLAT"))):
                if mask.any():
                    idx = np.flatnonzero(mask)
                    ra, dec = _to_icrs(lon[idx], lat[idx], galactic,
                                       lambda i, idx=idx: where(int(idx[i])), *names)
                    out["ra_deg"][idx], out["dec_deg"][idx] = ra, dec
    az, el = look.get("AZIMUTH"), look.get("ELEVATIO")
    if az is not None and el is not None:
        rest = np.flatnonzero(~np.isfinite(out["ra_deg"]))
        if rest.size:
            out["az_deg"][rest] = _fits_floats(az, "AZIMUTH", where)[rest] % 360.0
            el_deg = _fits_floats(el, "ELEVATIO", where)
            _check_range(el_deg[rest], "ELEVATIO", -90.0, 90.0, lambda i: where(int(rest[i])))
            out["alt_deg"][rest] = el_deg[rest]
    return out


# ------------------------------------------------------------------ writing

RECORDING_HEADER = "# spectra: one row per spectrum; time_utc is the start of the exposure"


def recordings_csv(time_mjd, exposure_s, ra_deg=None, dec_deg=None, alt_deg=None,
                   az_deg=None) -> str:
    """Text of a CSV recording table (the format above): a comment, the header, one row
    per spectrum; times in UTC to the millisecond, angles to 1e-6 deg."""
    columns = [TIME_COLUMN, EXPOSURE_COLUMN]
    extra = []
    for names, values in ((("ra_deg", "dec_deg"), (ra_deg, dec_deg)),
                          (("alt_deg", "az_deg"), (alt_deg, az_deg))):
        if values[0] is not None:
            columns += names
            extra += [np.asarray(v, dtype=float) for v in values]
    lines = [RECORDING_HEADER, ",".join(columns)]
    exposure = np.broadcast_to(np.asarray(exposure_s, dtype=float), np.shape(time_mjd))
    for i, t in enumerate(np.asarray(time_mjd, dtype=float)):  # writing text, one row each
        cells = [iso_utc(t, milliseconds=True), f"{exposure[i]:g}"]
        cells += ["" if not np.isfinite(v[i]) else f"{v[i]:.6f}" for v in extra]
        lines.append(",".join(cells))
    return "\n".join(lines) + "\n"


def planned_spectra(plan: dict, exposure_s: float, skip_dates=()) -> np.ndarray:
    """Start times (UTC MJD) of back-to-back spectra of ``exposure_s`` through every
    recording of a drift plan, as a recorder that followed it would stamp them (the demo
    and the tests make recordings with this); recordings of the local dates in
    ``skip_dates`` are left out, as on nights the receiver was off."""
    from .timebase import parse_instant
    step_d = float(exposure_s) / 86400.0
    starts = []
    skip = {str(d) for d in skip_dates}
    for day in plan["days"]:  # a month of days
        if day["date"] in skip:
            continue
        for rec in day["recordings"]:
            t0 = parse_instant(rec["start_utc"], "start_utc")
            t1 = parse_instant(rec["end_utc"], "end_utc")
            count = max(1, int(math.ceil((t1 - t0) / step_d - 1e-6)))  # MJD round-off
            starts.append(t0 + step_d * np.arange(count))
    return np.concatenate(starts) if starts else np.zeros(0)
