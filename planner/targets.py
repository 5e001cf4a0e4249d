"""Survey targets: a galactic grid syntax of our own, CSV/TOML target lists, reference positions.

Grid (``--grid``): comma-separated ``key=spec`` items, ``l`` and ``b`` each
exactly once, in any order. ``spec`` is a single value (``b=0``) or an
inclusive range with a step, ``from..to/step`` (``l=20..240/5``): the values
``from, from+step, ...`` up to and including ``to`` when the step divides the
span (else the last value below ``to``). ``l`` may wrap through 360:
``l=300..40/10`` is 300, 310, ..., 350, 0, 10, ..., 40; ``l=0..360/10`` is the
whole circle (360 is the same point as 0 and is not repeated). ``b`` runs
upward (``b=-4..4/4`` is -4, 0, 4). Every (l, b) pair becomes one target named
``G<l><+/-b>`` (``G120+0``, ``G20.5-4``) with the default integration minutes,
priority 1 and one repeat.

Target files (``--targets``), chosen by suffix:

* ``.csv``: a header line naming the columns, then one target per line.
  Columns: ``name``, ``l``/``b`` (galactic) or ``ra``/``dec`` (ICRS), and
  optionally ``minutes``, ``priority``, ``repeats``; ``l_deg`` etc. are
  accepted for the angle columns. Empty optional fields take the defaults;
  an empty name becomes the ``G`` name. ``#`` lines and blank lines are skipped.
* ``.toml``: ``[[target]]`` tables with the same keys; an optional
  ``[defaults]`` table sets ``minutes``, ``priority`` and ``repeats`` for the file.

Priorities are positive numbers, larger is more important. Angles in degrees,
integration in minutes. Every problem raises ``UserError`` naming the option or
``file:line``.

Reference ("off") positions for position switching (``--reference``):
``high-b`` picks, for each target, a point at the target's longitude and
b = +/-30, 40, 50 or 60 deg (the HI sky is faint and smooth there; common
practice), whichever is up and closest when the target is done; ``l=..,b=..``
is one fixed position used for every target.
"""
from __future__ import annotations

import csv
import io
import math
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from .errors import UserError
from .galactic import galactic_to_icrs_deg, icrs_to_galactic_deg
from .inputs import check_plain, read_input_text

MAX_TARGETS = 5000  # a bigger grid is almost surely a typo in the step
MAX_REPEATS = 1000
MAX_MINUTES = 1440.0
GRID_EXAMPLE = "l=20..240/5,b=-4..4/4"
HIGH_B_DEG = (30.0, 40.0, 50.0, 60.0)
_EPS = 1e-9
_COLUMN_ALIASES = {"l_deg": "l", "b_deg": "b", "ra_deg": "ra", "dec_deg": "dec"}
COLUMNS = ("name", "l", "b", "ra", "dec", "minutes", "priority", "repeats")


@dataclass(frozen=True)
class Target:
    """One pointed survey position: galactic and ICRS coordinates (deg), minutes, priority."""

    name: str
    l_deg: float  # [0, 360)
    b_deg: float
    ra_deg: float  # ICRS, [0, 360)
    dec_deg: float
    minutes: float  # integration per repeat
    priority: float = 1.0  # larger = more important
    repeats: int = 1
    source: str = ""  # where it was defined, for messages


@dataclass(frozen=True)
class ReferenceSpec:
    """How reference positions are chosen: ``high-b`` or one ``fixed`` (l, b) in degrees."""

    mode: str  # "high-b" | "fixed"
    l_deg: float | None = None
    b_deg: float | None = None

    def describe(self) -> str:
        if self.mode == "high-b":
            return "high-b (target l, b = +/-30..60 deg)"
        return f"fixed l={_fmt(self.l_deg)}, b={_fmt(self.b_deg)}"


def _fmt(value: float) -> str:
    text = f"{value:.3f}".rstrip("0").rstrip(".")
    return "0" if text in ("-0", "") else text


def position_name(l_deg: float, b_deg: float) -> str:
    """``G<l><+/-b>`` with up to three decimals, e.g. G120+0, G20.5-4."""
    b_text = _fmt(b_deg)
    sign = "" if b_text.startswith("-") else "+"
    return f"G{_fmt(round(float(l_deg), 3) % 360.0)}{sign}{b_text}"


def galactic_target(name: str | None, l_deg: float, b_deg: float, minutes: float,
                    priority: float = 1.0, repeats: int = 1, source: str = "") -> Target:
    """A target from galactic l, b (deg)."""
    ra, dec = galactic_to_icrs_deg(l_deg, b_deg)
    l_norm = float(l_deg) % 360.0
    return Target(name or position_name(l_norm, b_deg), l_norm, float(b_deg), float(ra),
                  float(dec), float(minutes), float(priority), int(repeats), source)


def icrs_target(name: str | None, ra_deg: float, dec_deg: float, minutes: float,
                priority: float = 1.0, repeats: int = 1, source: str = "") -> Target:
    """A target from ICRS RA, Dec (deg)."""
    l_deg, b_deg = icrs_to_galactic_deg(ra_deg, dec_deg)
    return Target(name or position_name(float(l_deg), float(b_deg)), float(l_deg), float(b_deg),
                  float(ra_deg) % 360.0, float(dec_deg), float(minutes), float(priority),
                  int(repeats), source)


# ------------------------------------------------------------------ grid


def _grid_number(text: str, where: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise UserError(f"{where}: '{text}' is not a number (e.g. {GRID_EXAMPLE})") from None
    if not math.isfinite(value):
        raise UserError(f"{where}: '{text}' must be a finite number")
    return value


def _axis_values(key: str, spec: str, where: str) -> list[float]:
    item = f"{where}: {key}={spec}"
    match = re.fullmatch(r"\s*([^.\s/][^/]*?)\s*\.\.\s*([^/]+?)\s*(?:/\s*(.+?))?\s*", spec)
    if match is None:
        if ".." in spec or "/" in spec:
            raise UserError(f"{item}: write a range as from..to/step (e.g. {key}=20..240/5)")
        value = _grid_number(spec.strip(), item)
        lo_hi = (0.0, 360.0) if key == "l" else (-90.0, 90.0)
        if not lo_hi[0] <= value <= lo_hi[1]:
            raise UserError(f"{item}: {key} must be in [{lo_hi[0]:g}, {lo_hi[1]:g}]")
        return [value % 360.0 if key == "l" else value]
    start = _grid_number(match.group(1), item)
    stop = _grid_number(match.group(2), item)
    if match.group(3) is None:
        if start != stop:
            raise UserError(f"{item}: a range needs a step, e.g. {key}={match.group(1)}.."
                            f"{match.group(2)}/5")
        step = 1.0
    else:
        step = _grid_number(match.group(3), item)
        if step <= 0:
            raise UserError(f"{item}: the step must be positive")
    if key == "l":
        for value in (start, stop):
            if not 0.0 <= value <= 360.0:
                raise UserError(f"{item}: l must be in [0, 360]")
        span = (stop - start) % 360.0
        if span == 0.0 and stop != start:
            span = 360.0  # 0..360 is the whole circle
    else:
        for value in (start, stop):
            if not -90.0 <= value <= 90.0:
                raise UserError(f"{item}: b must be in [-90, 90]")
        if stop < start:
            raise UserError(f"{item}: b runs upward; write b={match.group(2)}..{match.group(1)}")
        span = stop - start
    count = math.floor(span / step + _EPS) + 1
    if count > MAX_TARGETS:
        raise UserError(f"{item}: {count} values, more than the {MAX_TARGETS} allowed "
                        "(is the step right?)")
    values = [start + i * step for i in range(count)]
    if key == "l":
        seen, unique = set(), []
        for v in values:
            v = round(v % 360.0, 9) % 360.0
            if v not in seen:
                seen.add(v)
                unique.append(v)
        return unique
    return [round(v, 9) + 0.0 for v in values]


def parse_grid(text: str, minutes: float, priority: float = 1.0, repeats: int = 1,
               source: str = "--grid") -> list[Target]:
    """Targets on a galactic grid written ``l=A..B/STEP,b=C..D/STEP`` (see module doc).

    Targets come out in order of l (as written, wrapping) then b.
    """
    if not text or not text.strip():
        raise UserError(f"{source}: empty grid (e.g. {GRID_EXAMPLE})")
    axes: dict[str, list[float]] = {}
    for item in text.split(","):
        key, eq, spec = item.partition("=")
        key = key.strip().lower()
        if not eq:
            raise UserError(f"{source}: '{item.strip()}' is not key=range (e.g. {GRID_EXAMPLE})")
        if key not in ("l", "b"):
            raise UserError(f"{source}: unknown axis '{key}' (the grid takes l and b, "
                            f"e.g. {GRID_EXAMPLE})")
        if key in axes:
            raise UserError(f"{source}: {key} is given twice")
        axes[key] = _axis_values(key, spec, source)
    for key in ("l", "b"):
        if key not in axes:
            raise UserError(f"{source}: {key} is missing (e.g. {GRID_EXAMPLE})")
    total = len(axes["l"]) * len(axes["b"])
    if total > MAX_TARGETS:
        raise UserError(f"{source}: {total} positions, more than the {MAX_TARGETS} allowed "
                        "(is a step too small?)")
    _check_defaults(minutes, priority, repeats, source)
    return [galactic_target(None, l_deg, b_deg, minutes, priority, repeats, source)
            for l_deg in axes["l"] for b_deg in axes["b"]]


def _check_defaults(minutes, priority, repeats, where: str) -> None:
    if not (isinstance(minutes, (int, float)) and 0 < minutes <= MAX_MINUTES):
        raise UserError(f"{where}: minutes must be in (0, {MAX_MINUTES:g}], got {minutes!r}")
    if not (isinstance(priority, (int, float)) and math.isfinite(priority) and priority > 0):
        raise UserError(f"{where}: priority must be a positive number, got {priority!r}")
    if isinstance(repeats, bool) or not isinstance(repeats, int) or not 1 <= repeats <= MAX_REPEATS:
        raise UserError(f"{where}: repeats must be a whole number in [1, {MAX_REPEATS}], "
                        f"got {repeats!r}")


# ------------------------------------------------------------------ files


def read_targets(path, minutes: float, priority: float = 1.0, repeats: int = 1) -> list[Target]:
    """Targets from a ``.csv`` or ``.toml`` file (see module doc); defaults fill empty fields."""
    src = str(path)
    suffix = Path(path).suffix.lower()
    if suffix not in (".csv", ".toml"):
        raise UserError(f"{src}: target files must end in .csv or .toml")
    text = read_input_text(path, "target file")  # UTF-8, a leading BOM allowed, at most 10 MB
    if suffix == ".csv":
        return parse_targets_csv(text, src, minutes, priority, repeats)
    return parse_targets_toml(text, src, minutes, priority, repeats)


def _number(value, column: str, where: str, lo: float, hi: float, lo_open=False) -> float:
    if isinstance(value, bool):
        raise UserError(f"{where}: {column} must be a number, got {value!r}")
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise UserError(f"{where}: {column} '{value}' is not a number") from None
    if not math.isfinite(number) or number > hi or number < lo or (lo_open and number == lo):
        left = "(" if lo_open else "["
        raise UserError(f"{where}: {column} = {value} is outside {left}{lo:g}, {hi:g}]")
    return number


def _target_from_fields(fields: dict, where: str, minutes: float, priority: float,
                        repeats: int) -> Target:
    """Validate one row (column -> value, None for empty) and build the target."""
    def given(key):
        return fields.get(key) is not None

    has_gal = given("l") or given("b")
    has_eq = given("ra") or given("dec")
    if has_gal and has_eq:
        raise UserError(f"{where}: give l/b or ra/dec, not both")
    if not (has_gal or has_eq):
        raise UserError(f"{where}: no position: give l and b, or ra and dec")
    pair = ("l", "b") if has_gal else ("ra", "dec")
    for key in pair:
        if not given(key):
            raise UserError(f"{where}: {pair[0]} and {pair[1]} must be given together "
                            f"({key} is missing)")
    mins = minutes if not given("minutes") else _number(fields["minutes"], "minutes", where, 0,
                                                         MAX_MINUTES, lo_open=True)
    prio = priority if not given("priority") else _number(fields["priority"], "priority", where,
                                                          0, 1e9, lo_open=True)
    reps = repeats
    if given("repeats"):
        value = _number(fields["repeats"], "repeats", where, 1, MAX_REPEATS)
        if value != int(value):
            raise UserError(f"{where}: repeats = {fields['repeats']} must be a whole number")
        reps = int(value)
    name = fields.get("name")
    if name is not None:
        name = str(name).strip()
        if not name:
            name = None
        elif len(name) > 80:
            raise UserError(f"{where}: name must be one line of at most 80 characters")
        else:
            check_plain(name, where, "name", allow_tab=False)
    if has_gal:
        l_deg = _number(fields["l"], "l", where, 0, 360)
        b_deg = _number(fields["b"], "b", where, -90, 90)
        return galactic_target(name, l_deg, b_deg, mins, prio, reps, where)
    ra = _number(fields["ra"], "ra", where, 0, 360)
    dec = _number(fields["dec"], "dec", where, -90, 90)
    return icrs_target(name, ra, dec, mins, prio, reps, where)


def parse_targets_csv(text: str, source: str, minutes: float, priority: float = 1.0,
                      repeats: int = 1) -> list[Target]:
    """Targets from CSV text; ``source`` names the file in errors (``source:line``)."""
    header: list[str] | None = None
    targets: list[Target] = []
    # Lines end at LF (or CRLF) only: any other line break inside a line is a control
    # character the name check refuses, not a new line.
    lines = text.split("\n")
    for number, line in enumerate(lines, start=1):
        line = line[:-1] if line.endswith("\r") else line
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        where = f"{source}:{number}"
        try:
            fields = [f.strip() for f in next(csv.reader(io.StringIO(line), strict=True))]
        except csv.Error as exc:
            raise UserError(f"{where}: cannot split the line into fields ({exc})") from None
        if header is None:
            header = [_COLUMN_ALIASES.get(f.lower(), f.lower()) for f in fields]
            for i, name in enumerate(header):
                if name not in COLUMNS:
                    raise UserError(f"{where}: unknown column '{fields[i]}'; columns are "
                                    f"{', '.join(COLUMNS)}")
                if name in header[:i]:
                    raise UserError(f"{where}: column '{name}' appears twice")
            if not ({"l", "b"} <= set(header) or {"ra", "dec"} <= set(header)):
                raise UserError(f"{where}: the header needs l and b, or ra and dec columns "
                                "(e.g. name,l,b,minutes,priority)")
            continue
        if len(fields) != len(header):
            raise UserError(f"{where}: {len(fields)} fields but the header has {len(header)}")
        row = {k: (v if v != "" else None) for k, v in zip(header, fields)}
        targets.append(_target_from_fields(row, where, minutes, priority, repeats))
    if header is None:
        raise UserError(f"{source}:1: no header line (e.g. name,l,b,minutes,priority)")
    if not targets:
        raise UserError(f"{source}: no targets listed")
    return check_unique(targets)


def parse_targets_toml(text: str, source: str, minutes: float, priority: float = 1.0,
                       repeats: int = 1) -> list[Target]:
    """Targets from TOML text (``[[target]]`` tables, optional ``[defaults]``)."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"{source}: not valid TOML ({exc})") from None
    except RecursionError:
        raise UserError(f"{source}: not a target file (arrays or tables nested too deeply)") from None
    # tomllib keeps no line numbers: the n-th [[target]] header is the n-th table.
    header_lines = [i for i, line in enumerate(text.splitlines(), start=1)
                    if re.match(r"\s*\[\[\s*target\s*\]\]", line)]
    for key in raw:
        if key not in ("target", "defaults"):
            raise UserError(f"{source}: unknown table or key '{key}' (expected [[target]] "
                            "tables and an optional [defaults])")
    defaults = raw.get("defaults", {})
    if not isinstance(defaults, dict):
        raise UserError(f"{source}: defaults must be a table")
    for key in defaults:
        if key not in ("minutes", "priority", "repeats"):
            raise UserError(f"{source}: [defaults] unknown key '{key}' "
                            "(minutes, priority, repeats)")
    where = f"{source}: [defaults]"
    if "minutes" in defaults:
        minutes = _number(defaults["minutes"], "minutes", where, 0, MAX_MINUTES, lo_open=True)
    if "priority" in defaults:
        priority = _number(defaults["priority"], "priority", where, 0, 1e9, lo_open=True)
    if "repeats" in defaults:
        value = _number(defaults["repeats"], "repeats", where, 1, MAX_REPEATS)
        if value != int(value):
            raise UserError(f"{where}: repeats must be a whole number")
        repeats = int(value)
    tables = raw.get("target", [])
    if not isinstance(tables, list) or not tables:
        raise UserError(f"{source}: no [[target]] tables")
    targets = []
    for i, table in enumerate(tables):
        line = header_lines[i] if i < len(header_lines) else 1
        where = f"{source}:{line}"
        fields = {}
        for key, value in table.items():
            column = _COLUMN_ALIASES.get(key, key)
            if column not in COLUMNS:
                raise UserError(f"{where}: unknown key '{key}'; keys are {', '.join(COLUMNS)}")
            fields[column] = value
        targets.append(_target_from_fields(fields, where, minutes, priority, repeats))
    return check_unique(targets)


def check_unique(targets: list[Target]) -> list[Target]:
    """The list unchanged; UserError if two targets share a name."""
    seen: dict[str, Target] = {}
    for t in targets:
        if t.name in seen:
            raise UserError(f"{t.source}: target name '{t.name}' is already used "
                            f"({seen[t.name].source})")
        seen[t.name] = t
    return targets


# ------------------------------------------------------------- references


def parse_reference(text: str, option: str = "--reference") -> ReferenceSpec:
    """``high-b`` or ``l=..,b=..`` (degrees) into a ReferenceSpec."""
    body = text.strip().lower()
    if body in ("high-b", "highb", "high_b"):
        return ReferenceSpec("high-b")
    fields = {}
    for item in body.split(","):
        key, eq, value = (s.strip() for s in item.partition("="))
        if not eq or key not in ("l", "b") or key in fields:
            raise UserError(f"{option}: '{text}' is not 'high-b' or 'l=..,b=..' "
                            "(e.g. l=180,b=60)")
        fields[key] = _number(value, key, option, *((0, 360) if key == "l" else (-90, 90)))
    if set(fields) != {"l", "b"}:
        raise UserError(f"{option}: give both l and b (e.g. l=180,b=60)")
    return ReferenceSpec("fixed", fields["l"] % 360.0, fields["b"])


def reference_positions(spec: ReferenceSpec, target: Target) -> list[tuple[float, float]]:
    """Candidate (l, b) reference positions for ``target``, in order of preference.

    high-b: the target's longitude at b = +/-30..60 deg, the target's own side of
    the plane first (b >= 0 counts as north), nearest latitude first.
    """
    if spec.mode == "fixed":
        return [(spec.l_deg, spec.b_deg)]
    sign = 1.0 if target.b_deg >= 0 else -1.0
    return ([(target.l_deg, sign * b) for b in HIGH_B_DEG]
            + [(target.l_deg, -sign * b) for b in HIGH_B_DEG])
