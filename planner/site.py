"""Observing sites: TOML site files, validation and the bundled examples.

A site file has four tables (all angles in degrees, longitude east-positive):

``[site]``      name, latitude_deg, longitude_deg, height_m, timezone (IANA)
``[dish]``      diameter_m, beamwidth_deg (optional), mount, elevation limits,
                horizon mask, and for ``altaz`` mounts azimuth limits and slew rates;
                for a dish run by ``hiplan drive`` an optional park position and
                pointing tolerance
``[receiver]``  bandwidth_mhz, channels, tsys_k
``[rules]``     sun_min_sep_deg, sun_hazard_deg, moon_min_sep_deg, b_max_deg, bin_width_deg

plus an optional ``[pointing]`` (alt_deg/az_deg or dec_deg) used when a command
is given no pointing. The full field list is ``FIELDS`` below and docs/site-files.md.

When ``beamwidth_deg`` is absent the half-power beamwidth is taken as
70 lambda/D degrees (about 1.2 lambda/D radians, a typical edge-tapered feed;
NRAO "Essential Radio Astronomy", reflector antennas chapter).

Two Sun rules, deliberately separate: ``sun_min_sep_deg`` is the data-quality
rule (solar emission in the sidelobes spoils a recording), ``sun_hazard_deg``
the feed-safety rule (the closest the Sun may come to the axis of a parked or
moving dish before the reflector focuses its heat on the feed).
"""
from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np

from .errors import UserError
from .inputs import check_plain, read_input_text

# HI hyperfine rest frequency, Hellwig et al. 1970, IEEE Trans. Instrum. Meas. IM-19, 200.
HI_REST_FREQUENCY_MHZ = 1420.405751768
SPEED_OF_LIGHT_KMS = 299792.458
HI_WAVELENGTH_M = SPEED_OF_LIGHT_KMS * 1e3 / (HI_REST_FREQUENCY_MHZ * 1e6)
# HPBW ~ 70 deg * lambda/D for a tapered dish (NRAO Essential Radio Astronomy).
HPBW_COEFFICIENT_DEG = 70.0

MOUNTS = ("transit", "fixed", "altaz")
# Per-axis pointing tolerance for a dish run by ``hiplan drive``: 0.5 deg, a fifteenth of a
# 2 m dish's beam at 21 cm; our choice.
DEFAULT_POINTING_TOLERANCE_DEG = 0.5
DEFAULT_SITE = "hollowmere"


@dataclass(frozen=True)
class Dish:
    """Antenna and mount. Angles in degrees, rates in degrees per second."""

    diameter_m: float
    beamwidth_deg: float
    beamwidth_from: str  # "site file" or the approximation used
    mount: str  # transit | fixed | altaz
    elevation_min_deg: float
    elevation_max_deg: float
    facing: str = "either"  # transit mounts: north | south | either
    horizon_az_deg: tuple[float, ...] = ()
    horizon_el_deg: tuple[float, ...] = ()
    azimuth_min_deg: float = 0.0
    azimuth_max_deg: float = 360.0
    slew_az_deg_s: float | None = None
    slew_el_deg_s: float | None = None
    settle_s: float = 0.0
    # Where ``hiplan drive`` parks the dish (drive azimuth, elevation); None: the Sun-safe stow.
    park_alt_deg: float | None = None
    park_az_deg: float | None = None
    # How close a read-back position must be to the commanded one, per axis, to count as there.
    pointing_tolerance_deg: float = DEFAULT_POINTING_TOLERANCE_DEG

    def horizon_limit_deg(self, az_deg) -> np.ndarray:
        """Lowest usable elevation at azimuth ``az_deg``: max(mask, elevation_min)."""
        az = np.mod(np.asarray(az_deg, dtype=float), 360.0)
        if not self.horizon_az_deg:
            return np.full_like(az, self.elevation_min_deg)
        mask = np.interp(az, self.horizon_az_deg, self.horizon_el_deg, period=360.0)
        return np.maximum(mask, self.elevation_min_deg)


@dataclass(frozen=True)
class Receiver:
    """Spectrometer: total bandwidth (MHz), channel count, system temperature (K)."""

    bandwidth_mhz: float
    channels: int
    tsys_k: float

    @property
    def channel_width_khz(self) -> float:
        return self.bandwidth_mhz * 1e3 / self.channels


# Feed safety: a dish focuses sunlight toward its feed when the Sun is within a few
# degrees of its axis; 10 deg between the Sun and the axis is a conservative default.
# Common practice, no published source.
DEFAULT_SUN_HAZARD_DEG = 10.0


@dataclass(frozen=True)
class Rules:
    """Survey rules (deg): Sun data-quality and feed-safety limits, Moon limit, |b| strip half-width, bin width."""

    sun_min_sep_deg: float = 15.0
    sun_hazard_deg: float = DEFAULT_SUN_HAZARD_DEG
    moon_min_sep_deg: float = 0.0
    b_max_deg: float = 3.0
    bin_width_deg: float = 1.0


@dataclass(frozen=True)
class Site:
    """An observing site with its dish, receiver and rules."""

    name: str
    latitude_deg: float
    longitude_deg: float  # east positive
    height_m: float
    timezone: str
    dish: Dish
    receiver: Receiver
    rules: Rules
    default_pointing: dict = field(default_factory=dict)
    source: str = ""

    @property
    def tz(self) -> ZoneInfo:
        return ZoneInfo(self.timezone)

    def summary(self) -> dict:
        """The ``site`` object every JSON output carries."""
        return {
            "name": self.name,
            "latitude_deg": self.latitude_deg,
            "longitude_deg": self.longitude_deg,
            "height_m": self.height_m,
            "timezone": self.timezone,
            "mount": self.dish.mount,
            "diameter_m": self.dish.diameter_m,
            "beamwidth_deg": round(self.dish.beamwidth_deg, 3),
            "elevation_min_deg": self.dish.elevation_min_deg,
            "elevation_max_deg": self.dish.elevation_max_deg,
            "sun_min_sep_deg": self.rules.sun_min_sep_deg,
            "sun_hazard_deg": self.rules.sun_hazard_deg,
            "b_max_deg": self.rules.b_max_deg,
        }


# ---------------------------------------------------------------- validation

@dataclass(frozen=True)
class _Spec:
    kind: type | tuple
    required: bool = False
    lo: float | None = None
    hi: float | None = None
    lo_open: bool = False  # True: value must be > lo
    default: object = None


_NUM = (int, float)
FIELDS: dict[str, dict[str, _Spec]] = {
    "site": {
        "name": _Spec(str, required=True),
        "latitude_deg": _Spec(_NUM, True, -90, 90),
        "longitude_deg": _Spec(_NUM, True, -180, 180),
        "height_m": _Spec(_NUM, False, -500, 9000, default=0.0),
        "timezone": _Spec(str, required=True),
    },
    "dish": {
        "diameter_m": _Spec(_NUM, True, 0, 100, lo_open=True),
        "beamwidth_deg": _Spec(_NUM, False, 0, 90, lo_open=True),
        "mount": _Spec(str, required=True),
        "facing": _Spec(str, default="either"),
        "elevation_min_deg": _Spec(_NUM, False, 0, 90, default=5.0),
        "elevation_max_deg": _Spec(_NUM, False, 0, 90, default=90.0),
        "horizon": _Spec(list, default=[]),
        "azimuth_min_deg": _Spec(_NUM, False, -360, 360, default=0.0),
        "azimuth_max_deg": _Spec(_NUM, False, -360, 720, default=360.0),
        "slew_az_deg_s": _Spec(_NUM, False, 0, 90, lo_open=True),
        "slew_el_deg_s": _Spec(_NUM, False, 0, 90, lo_open=True),
        "settle_s": _Spec(_NUM, False, 0, 3600, default=0.0),
        "park_alt_deg": _Spec(_NUM, False, 0, 90),
        "park_az_deg": _Spec(_NUM, False, -360, 720),
        "pointing_tolerance_deg": _Spec(_NUM, False, 0, 10, lo_open=True,
                                        default=DEFAULT_POINTING_TOLERANCE_DEG),
    },
    "receiver": {
        "bandwidth_mhz": _Spec(_NUM, True, 0, 1000, lo_open=True),
        "channels": _Spec(int, True, 1, 1 << 24),
        "tsys_k": _Spec(_NUM, True, 0, 1e5, lo_open=True),
    },
    "rules": {
        "sun_min_sep_deg": _Spec(_NUM, False, 0, 180, default=15.0),
        "sun_hazard_deg": _Spec(_NUM, False, 0, 45, lo_open=True, default=DEFAULT_SUN_HAZARD_DEG),
        "moon_min_sep_deg": _Spec(_NUM, False, 0, 180, default=0.0),
        "b_max_deg": _Spec(_NUM, False, 0, 90, lo_open=True, default=3.0),
        "bin_width_deg": _Spec(_NUM, False, 0, 30, lo_open=True, default=1.0),
    },
    "pointing": {
        "alt_deg": _Spec(_NUM, False, -90, 90),
        "az_deg": _Spec(_NUM, False, -360, 360),
        "dec_deg": _Spec(_NUM, False, -90, 90),
    },
}
_REQUIRED_TABLES = ("site", "dish", "receiver")


def _hint(word: str, choices) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


# Fields renamed since earlier versions: (table, old name) -> new name.
RENAMED = {("rules", "band_deg"): "b_max_deg"}


def _check_table(src: str, table: str, raw: dict) -> dict:
    """Validate one table against FIELDS; return it with defaults filled in."""
    specs = FIELDS[table]
    if not isinstance(raw, dict):
        raise UserError(f"{src}: [{table}] must be a table")
    for key in raw:
        if (table, key) in RENAMED:
            raise UserError(f"{src}: [{table}] {key} is now called {RENAMED[table, key]} "
                            "(the half-width of the |b| strip); rename it in this file")
        if key not in specs:
            raise UserError(f"{src}: [{table}] unknown field '{key}'{_hint(key, specs)}")
    out = {}
    for key, spec in specs.items():
        where = f"{src}: [{table}] {key}"
        if key not in raw:
            if spec.required:
                raise UserError(f"{where} is missing")
            out[key] = spec.default
            continue
        value = raw[key]
        kinds = spec.kind if isinstance(spec.kind, tuple) else (spec.kind,)
        if isinstance(value, bool) or not isinstance(value, kinds):
            want = "a number" if kinds == _NUM else (
                "an integer" if kinds == (int,) else f"a {kinds[0].__name__}")
            raise UserError(f"{where} must be {want}, got {value!r}")
        if kinds == _NUM or kinds == (int,):
            if not math.isfinite(value):
                raise UserError(f"{where} must be finite, got {value!r}")
            too_low = spec.lo is not None and (value <= spec.lo if spec.lo_open else value < spec.lo)
            too_high = spec.hi is not None and value > spec.hi
            if too_low or too_high:
                lo_sym = "(" if spec.lo_open else "["
                raise UserError(f"{where} = {value} is out of range {lo_sym}{spec.lo}, {spec.hi}]")
            value = float(value) if kinds == _NUM else value
        out[key] = value
    return out


def _parse_horizon(src: str, raw: list) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """Horizon mask: list of [azimuth_deg, elevation_deg] pairs, sorted by azimuth."""
    pairs = []
    for i, item in enumerate(raw):
        ok = (isinstance(item, list) and len(item) == 2
              and all(isinstance(v, _NUM) and not isinstance(v, bool) for v in item))
        if not ok:
            raise UserError(
                f"{src}: [dish] horizon item {i + 1} must be [azimuth_deg, elevation_deg], got {item!r}")
        az, el = float(item[0]), float(item[1])
        if not (0 <= az < 360) or not (0 <= el <= 90):
            raise UserError(
                f"{src}: [dish] horizon item {i + 1} {item!r}: azimuth must be in [0, 360) "
                "and elevation in [0, 90]")
        pairs.append((az, el))
    pairs.sort()
    azs = [p[0] for p in pairs]
    if len(set(azs)) != len(azs):
        raise UserError(f"{src}: [dish] horizon repeats an azimuth")
    return tuple(azs), tuple(p[1] for p in pairs)


def site_from_dict(raw: dict, src: str = "<site>") -> Site:
    """Build and validate a Site from parsed TOML; errors name ``src`` and the field."""
    for key in raw:
        if key not in FIELDS:
            raise UserError(f"{src}: unknown table [{key}]{_hint(key, FIELDS)}")
    for table in _REQUIRED_TABLES:
        if table not in raw:
            raise UserError(f"{src}: table [{table}] is missing")
    s = _check_table(src, "site", raw["site"])
    d = _check_table(src, "dish", raw["dish"])
    r = _check_table(src, "receiver", raw["receiver"])
    u = _check_table(src, "rules", raw.get("rules", {}))
    p = _check_table(src, "pointing", raw.get("pointing", {}))

    if not s["name"].strip():
        raise UserError(f"{src}: [site] name is empty")
    # The name goes into every output, calendars among them: one line, no control characters.
    check_plain(s["name"], src, "[site] name")
    try:
        ZoneInfo(s["timezone"])
    except (ZoneInfoNotFoundError, ValueError):
        raise UserError(f"{src}: [site] timezone '{s['timezone']}' is not a known IANA time zone "
                        "(e.g. Europe/London)") from None
    if d["mount"] not in MOUNTS:
        raise UserError(f"{src}: [dish] mount '{d['mount']}' must be one of {', '.join(MOUNTS)}"
                        f"{_hint(d['mount'], MOUNTS)}")
    if d["facing"] not in ("north", "south", "either"):
        raise UserError(f"{src}: [dish] facing '{d['facing']}' must be north, south or either")
    if d["elevation_min_deg"] >= d["elevation_max_deg"]:
        raise UserError(f"{src}: [dish] elevation_min_deg must be below elevation_max_deg")
    if d["azimuth_min_deg"] >= d["azimuth_max_deg"]:
        raise UserError(f"{src}: [dish] azimuth_min_deg must be below azimuth_max_deg")
    if d["mount"] == "altaz":
        for key in ("slew_az_deg_s", "slew_el_deg_s"):
            if d[key] is None:
                raise UserError(f"{src}: [dish] {key} is required for an altaz mount")
    if d["beamwidth_deg"] is None:
        beam = HPBW_COEFFICIENT_DEG * HI_WAVELENGTH_M / d["diameter_m"]
        beam_from = "70 lambda/D (tapered dish)"
    else:
        beam, beam_from = d["beamwidth_deg"], "site file"
    if (d["park_alt_deg"] is None) != (d["park_az_deg"] is None):
        raise UserError(f"{src}: [dish] park_alt_deg and park_az_deg go together (or leave both "
                        "out for the Sun-safe stow toward the pole)")
    if d["park_alt_deg"] is not None and d["park_alt_deg"] > d["elevation_max_deg"]:
        raise UserError(f"{src}: [dish] park_alt_deg = {d['park_alt_deg']:g} is above "
                        f"elevation_max_deg ({d['elevation_max_deg']:g})")
    if d["park_az_deg"] is not None and not (d["azimuth_min_deg"] <= d["park_az_deg"]
                                             <= d["azimuth_max_deg"]):
        raise UserError(f"{src}: [dish] park_az_deg = {d['park_az_deg']:g} is outside the drive "
                        f"range azimuth_min_deg..azimuth_max_deg ({d['azimuth_min_deg']:g}.."
                        f"{d['azimuth_max_deg']:g})")
    if ("alt_deg" in raw.get("pointing", {})) != ("az_deg" in raw.get("pointing", {})):
        raise UserError(f"{src}: [pointing] needs both alt_deg and az_deg")
    haz, hel = _parse_horizon(src, d["horizon"])
    dish = Dish(
        diameter_m=d["diameter_m"], beamwidth_deg=beam, beamwidth_from=beam_from,
        mount=d["mount"], facing=d["facing"],
        elevation_min_deg=d["elevation_min_deg"], elevation_max_deg=d["elevation_max_deg"],
        horizon_az_deg=haz, horizon_el_deg=hel,
        azimuth_min_deg=d["azimuth_min_deg"], azimuth_max_deg=d["azimuth_max_deg"],
        slew_az_deg_s=d["slew_az_deg_s"], slew_el_deg_s=d["slew_el_deg_s"],
        settle_s=d["settle_s"], park_alt_deg=d["park_alt_deg"], park_az_deg=d["park_az_deg"],
        pointing_tolerance_deg=d["pointing_tolerance_deg"],
    )
    receiver = Receiver(bandwidth_mhz=r["bandwidth_mhz"], channels=r["channels"], tsys_k=r["tsys_k"])
    rules = Rules(**u)
    pointing = {k: v for k, v in p.items() if v is not None}
    return Site(
        name=s["name"].strip(), latitude_deg=s["latitude_deg"], longitude_deg=s["longitude_deg"],
        height_m=s["height_m"], timezone=s["timezone"], dish=dish, receiver=receiver,
        rules=rules, default_pointing=pointing, source=src,
    )


def read_site_file(path: Path) -> Site:
    """Read and validate one TOML site file (UTF-8, a leading BOM allowed, at most 10 MB)."""
    src = str(path)
    text = read_input_text(path, "site file")
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise UserError(f"{src}: not valid TOML ({exc})") from None
    except RecursionError:
        raise UserError(f"{src}: not a site file (arrays or tables nested too deeply)") from None
    return site_from_dict(raw, src)


def bundled_sites_dir() -> Path:
    """Folder of the example sites: package data when installed, ``sites/`` in a checkout."""
    packaged = resources.files("planner") / "_sites"
    if packaged.is_dir():
        return Path(str(packaged))
    return Path(__file__).resolve().parent.parent / "sites"


def _slug(text: str) -> str:
    return "".join(ch if ch.isalnum() else "-" for ch in text.lower()).strip("-")


def site_search_dirs() -> list[Path]:
    """Where site names are looked up: ./sites first, then the bundled examples."""
    dirs = [Path.cwd() / "sites", bundled_sites_dir()]
    unique = []
    for d in dirs:
        if d.is_dir() and d.resolve() not in [u.resolve() for u in unique]:
            unique.append(d)
    return unique


def available_sites() -> dict[str, Path]:
    """Site names (file stems) found in the search folders."""
    found: dict[str, Path] = {}
    for folder in site_search_dirs():
        for path in sorted(folder.glob("*.toml")):
            found.setdefault(path.stem, path)
    return found


def load_site(spec: str | None = None) -> Site:
    """Load a site by file path, by file stem in sites/, or the bundled default."""
    return read_site_file(site_file_path(spec))


def site_file_path(spec: str | None = None) -> Path:
    """The file ``load_site(spec)`` reads: a path, a file stem in sites/, or the bundled default."""
    spec = DEFAULT_SITE if spec is None else spec
    path = Path(spec)
    if path.suffix == ".toml" or path.exists() or "/" in spec:
        return path
    known = available_sites()
    if spec in known:
        return known[spec]
    wanted = _slug(spec)
    for stem, candidate in known.items():
        if _slug(stem) == wanted:
            return candidate
    names = ", ".join(known) or "none found"
    raise UserError(f"--site: no site file or site named '{spec}' (known: {names}){_hint(spec, known)}")
