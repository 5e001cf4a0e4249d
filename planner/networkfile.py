"""The stations of a network: ``--station`` specs and the TOML network file.

A station is a site (a bundled name or a site file) with its own observation logs, operator
windows, the setting its dish is parked at now and a cap on moves:

* ``--station SITE[,log=FILE][,windows=FILE][,max-moves=N][,start-dec=DEG]`` (``log`` may be
  given more than once);
* a network file (TOML), one ``[[station]]`` table each::

      [[station]]
      site = "hollowmere"
      log = ["examples/observation-log.csv"]   # or one file as a string
      windows = "examples/windows.txt"
      max_moves = 4
      start_dec = 60.2

Relative file names in a network file are taken from the file's own folder. Every mistake
is a one-line ``UserError`` naming the spec or the file and station.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from .errors import UserError

SPEC_KEYS = ("log", "windows", "max-moves", "start-dec")
FILE_KEYS = ("site", "log", "windows", "max_moves", "start_dec")
MAX_NETWORK_BYTES = 1_000_000
MAX_STATIONS = 50


@dataclass(frozen=True)
class Station:
    site: str  # a bundled site name or a site file
    logs: tuple[str, ...] = ()
    windows: str | None = None
    max_moves: int | None = None
    start_dec: float | None = None
    where: str = ""  # for messages: the spec or "file: station N"


def _int(value, what: str) -> int:
    try:
        n = int(value)
    except (TypeError, ValueError):
        raise UserError(f"{what}: '{value}' is not a whole number") from None
    if isinstance(value, float) or not 0 <= n <= 92:
        raise UserError(f"{what}: {value} must be a whole number from 0 to 92")
    return n


def _dec(value, what: str) -> float:
    try:
        x = float(value)
    except (TypeError, ValueError):
        raise UserError(f"{what}: '{value}' is not a number") from None
    if isinstance(value, bool) or not math.isfinite(x) or not -90 <= x <= 90:
        raise UserError(f"{what}: {value} must be a declination from -90 to 90")
    return x


def parse_station_spec(text: str) -> Station:
    """``SITE[,key=value]...`` as a ``Station``."""
    where = f"--station {text}"
    parts = [p.strip() for p in text.split(",")]
    if not parts[0] or "=" in parts[0]:
        raise UserError(f"{where}: start with the site (a bundled name or a site file), "
                        "e.g. --station hollowmere,log=my-log.csv")
    logs, fields = [], {}
    for part in parts[1:]:
        key, sep, value = part.partition("=")
        key, value = key.strip().lower(), value.strip()
        if not sep or key not in SPEC_KEYS or not value:
            raise UserError(f"{where}: '{part}' is not one of "
                            + ", ".join(f"{k}=..." for k in SPEC_KEYS))
        if key == "log":
            logs.append(value)
        elif key in fields:
            raise UserError(f"{where}: {key} given twice")
        else:
            fields[key] = value
    return Station(
        site=parts[0], logs=tuple(logs), windows=fields.get("windows"),
        max_moves=_int(fields["max-moves"], f"{where}: max-moves") if "max-moves" in fields else None,
        start_dec=_dec(fields["start-dec"], f"{where}: start-dec") if "start-dec" in fields else None,
        where=where)


def read_network_file(path) -> list[Station]:
    """The stations of a TOML network file (module docstring)."""
    import tomllib

    from .inputs import read_input_text
    src = str(path)
    text = read_input_text(path, "network file", MAX_NETWORK_BYTES)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"{src}: not valid TOML ({exc})") from None
    tables = doc.get("station")
    unknown = sorted(set(doc) - {"station"})
    if unknown:
        raise UserError(f"{src}: unknown top-level key '{unknown[0]}' (a network file holds "
                        "[[station]] tables)")
    if not isinstance(tables, list) or not tables or not all(isinstance(t, dict) for t in tables):
        raise UserError(f"{src}: no [[station]] tables")
    base = Path(src).parent
    out = []
    for k, table in enumerate(tables, start=1):
        where = f"{src}: station {k}"
        extra = sorted(set(table) - set(FILE_KEYS))
        if extra:
            raise UserError(f"{where}: unknown key '{extra[0]}' (known: {', '.join(FILE_KEYS)})")
        site = table.get("site")
        if not isinstance(site, str) or not site.strip():
            raise UserError(f"{where}: 'site' must name a bundled site or a site file")
        logs = table.get("log", [])
        logs = [logs] if isinstance(logs, str) else logs
        if not isinstance(logs, list) or not all(isinstance(x, str) for x in logs):
            raise UserError(f"{where}: 'log' must be a file name or a list of them")
        windows = table.get("windows")
        if windows is not None and not isinstance(windows, str):
            raise UserError(f"{where}: 'windows' must be a file name or window text")

        def local(name: str) -> str:
            return str(base / name) if not Path(name).is_absolute() else name

        site_path = local(site) if site.endswith(".toml") else site
        if windows is not None and (base / windows).is_file():
            windows = local(windows)
        out.append(Station(
            site=site_path, logs=tuple(local(x) for x in logs), windows=windows,
            max_moves=_int(table["max_moves"], f"{where}: max_moves") if "max_moves" in table else None,
            start_dec=_dec(table["start_dec"], f"{where}: start_dec") if "start_dec" in table else None,
            where=where))
    return out
