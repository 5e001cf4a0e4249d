"""The tally of recorded spectra: where the beam was, which spectra count, minutes per bin.

For each spectrum, at the middle of its exposure: the beam centre's ICRS and galactic
position, whether it lies in the strip |b| <= b_max, its longitude bin (``floor(l /
bin_width)``, as the planner bins), and the LSR correction there (``doppler``; the sign
convention of every hiplan output), so a user can check their own processing. A parked
pointing (the recorder's alt/az, the dish setting the user or the plan gives) goes
through the fast sky-track engine (``skytrack.fixed_pointing_icrs``: fixed hour angle and
declination of date, aberration, no refraction); a sky position the recorder gives
(RA/Dec) is used as it is.

A spectrum counts, crediting its whole exposure to its bin, unless one of these holds
(the first that applies is its reason, ``REASONS``):

* ``duplicate``: its time stamp repeats an earlier spectrum's (to the millisecond): the
  same spectrum read twice counts once;
* ``moving``: the plan had the dish being moved then;
* ``no_setting``: the plan gives no setting for that moment (before its first move
  with the earlier setting unknown);
* ``outside_strip``: the beam centre is outside |b| <= b_max;
* ``sun``: the beam is closer to the Sun than the site's ``sun_min_sep_deg``;
* ``daylight``: with night only, the Sun's centre is above the night limit.

These are the planner's rules (``coverage``), judged per spectrum rather than per
passage. The Sun is the geometric geocentric direction (``avoidance``; its parallax,
under 9 arcsec, is far below any rule). The computation is vectorised: one Earth state
per spectrum, no loop over spectra.
"""
from __future__ import annotations

from dataclasses import dataclass

import erfa
import numpy as np

from .avoidance import separation_deg, sun_altitude_deg, sun_direction
from .doppler import velocity_corrections
from .earth import earth_state, spherical_deg, unit_vectors
from .errors import UserError
from .galactic import ICRS_TO_GALACTIC
from .pointing import Pointing
from .recordings import Spectra
from .site import Site
from .skytrack import fixed_pointing_icrs
from .timebase import SECONDS_PER_DAY, iso_utc

TALLY_SCHEMA = "hiplan.tally/1"
REASONS = ("duplicate", "moving", "no_setting", "outside_strip", "sun", "daylight")
REASON_TEXT = {"duplicate": "duplicate (same time twice: counted once)",
               "moving": "dish being moved (plan)", "no_setting": "no dish setting known (plan)",
               "outside_strip": "outside the strip", "sun": "too close to the Sun",
               "daylight": "in daylight (night only)"}
STAMPS = ("start", "middle", "end")
# Spectra closer than this (in time stamp) are the same spectrum: recorders write
# milliseconds at best.
DUPLICATE_TOLERANCE_S = 1e-3
# Log rows: counted spectra with breaks shorter than this (our choice: a recorder paused
# to change a file) belong to one recording; each recording gives one row per bin.
RUN_GAP_S = 600.0

PARKED, MOVING, UNKNOWN = 0, 1, 2


@dataclass(frozen=True)
class Setting:
    """Where a parked dish was for each spectrum (hour angle, declination of date, deg),
    for spectra whose file gives no pointing; ``status`` PARKED, MOVING or UNKNOWN."""

    ha_deg: np.ndarray
    dec_deg: np.ndarray
    status: np.ndarray

    @classmethod
    def fixed(cls, pointing: Pointing, n: int) -> Setting:
        """The same pointing for all ``n`` spectra."""
        return cls(np.full(n, pointing.ha_deg), np.full(n, pointing.dec_deg),
                   np.zeros(n, dtype=np.int8))


@dataclass(frozen=True)
class Rules:
    """What counts: the strip, the bins, the Sun rule, night only (deg; see module doc)."""

    b_max_deg: float
    bin_width_deg: float
    sun_min_sep_deg: float
    night_only: bool = False
    night_sun_alt_deg: float = 0.0
    solar_motion: str = "standard"

    @classmethod
    def of_site(cls, site: Site, b_max_deg: float | None = None, night_only: bool = False,
                night_sun_alt_deg: float = 0.0, solar_motion: str = "standard") -> Rules:
        return cls(site.rules.b_max_deg if b_max_deg is None else float(b_max_deg),
                   site.rules.bin_width_deg, site.rules.sun_min_sep_deg, night_only,
                   night_sun_alt_deg, solar_motion)


@dataclass(frozen=True)
class Tally:
    """Per spectrum (arrays of length N, in file order) and per bin."""

    start_mjd: np.ndarray  # exposure start (UTC MJD)
    mid_mjd: np.ndarray
    exposure_s: np.ndarray
    ra_deg: np.ndarray  # beam centre, ICRS (NaN where no pointing is known)
    dec_deg: np.ndarray
    l_deg: np.ndarray
    b_deg: np.ndarray
    l_bin: np.ndarray  # bin index (-1 where no pointing is known)
    in_strip: np.ndarray
    lsr_corr_kms: np.ndarray
    sun_sep_deg: np.ndarray
    dec_of_date_deg: np.ndarray  # a parked beam's declination of date; NaN for sky positions
    pointing_from: np.ndarray  # 0 the file (sky), 1 the file (alt/az), 2 the setting given
    reason: np.ndarray  # -1 counted, else index into REASONS
    duplicate_of: np.ndarray  # index of the spectrum it repeats, or -1
    bin_minutes: np.ndarray  # (B,) minutes of counted spectra per bin
    rules: Rules

    @property
    def counted(self) -> np.ndarray:
        return self.reason < 0


def mid_mjd(spectra: Spectra, stamp: str = "start") -> np.ndarray:
    """Middle of each exposure (UTC MJD) from the time stamps: ``stamp`` says whether a
    stamp marks the start (the default), middle or end of its exposure."""
    if stamp not in STAMPS:
        raise UserError(f"--stamp: '{stamp}' must be start, middle or end")
    half_d = 0.5 * spectra.exposure_s / SECONDS_PER_DAY
    return spectra.time_mjd + {"start": half_d, "middle": 0.0, "end": -half_d}[stamp]


def duplicates(spectra: Spectra) -> np.ndarray:
    """For each spectrum the index of the first one with the same time stamp (itself if
    none came earlier)."""
    key = np.round(spectra.time_mjd * (SECONDS_PER_DAY / DUPLICATE_TOLERANCE_S)).astype(np.int64)
    _, first, inverse = np.unique(key, return_index=True, return_inverse=True)
    return first[inverse.ravel()]


def tally(site: Site, spectra: Spectra, rules: Rules, stamp: str = "start",
          setting: Setting | None = None) -> Tally:
    """Judge every spectrum and add up the minutes per bin (module doc).

    ``setting`` gives the parked dish's pointing for spectra without their own (from
    --dec/--elevation/--alt --az, or a plan); without it such spectra are an error.
    """
    n = len(spectra)
    mid = mid_mjd(spectra, stamp)
    start = mid - 0.5 * spectra.exposure_s / SECONDS_PER_DAY
    sky, altaz = spectra.has_sky, spectra.has_altaz
    given = ~sky & ~altaz
    if given.any() and setting is None:
        i = int(np.flatnonzero(given)[0])
        raise UserError(f"{spectra.where(i)}: the recording gives no pointing; say where the dish "
                        "was parked (--dec, --elevation, --alt/--az) or give the plan it "
                        "followed (--plan)")
    ha = np.zeros(n)
    dec = np.zeros(n)
    status = np.zeros(n, dtype=np.int8)
    if altaz.any():
        h, d = erfa.ae2hd(np.radians(spectra.az_deg[altaz]), np.radians(spectra.alt_deg[altaz]),
                          np.radians(site.latitude_deg))
        ha[altaz], dec[altaz] = np.degrees(h), np.degrees(d)
    if given.any():
        ha[given], dec[given] = setting.ha_deg[given], setting.dec_deg[given]
        status[given] = setting.status[given]
        ha[given & (status != PARKED)] = 0.0  # any number: these are not located
        dec[given & (status != PARKED)] = 0.0

    state = earth_state(mid)
    vec = fixed_pointing_icrs(site, ha, dec, state)
    if sky.any():
        vec[sky] = unit_vectors(spectra.ra_deg[sky], spectra.dec_deg[sky])
    located = status == PARKED
    ra, dec_icrs = spherical_deg(vec)
    l_deg, b_deg = spherical_deg(vec @ ICRS_TO_GALACTIC.T)
    n_bins = int(round(360.0 / rules.bin_width_deg))
    l_bin = np.floor(l_deg / rules.bin_width_deg).astype(np.int64) % n_bins
    in_strip = np.abs(b_deg) <= rules.b_max_deg
    sun_sep = separation_deg(vec, sun_direction(state))
    lsr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra, dec_icrs,
                               mid, rules.solar_motion, state).lsr_corr_kms
    first = duplicates(spectra)
    checks = {
        "duplicate": first != np.arange(n),
        "moving": status == MOVING,
        "no_setting": status == UNKNOWN,
        "outside_strip": ~in_strip,
        "sun": sun_sep < rules.sun_min_sep_deg,
        "daylight": (sun_altitude_deg(site, state) >= rules.night_sun_alt_deg if rules.night_only
                     else np.zeros(n, dtype=bool)),
    }
    reason = np.full(n, -1, dtype=np.int8)
    for code in range(len(REASONS) - 1, -1, -1):  # six rules; the first that holds wins
        reason[checks[REASONS[code]]] = code
    counted = reason < 0
    bin_minutes = np.bincount(l_bin[counted], weights=spectra.exposure_s[counted] / 60.0,
                              minlength=n_bins)

    def known(values):
        return np.where(located, values, np.nan)

    return Tally(
        start_mjd=start, mid_mjd=mid, exposure_s=spectra.exposure_s,
        ra_deg=known(ra), dec_deg=known(dec_icrs), l_deg=known(l_deg), b_deg=known(b_deg),
        l_bin=np.where(located, l_bin, -1), in_strip=in_strip & located,
        lsr_corr_kms=known(lsr), sun_sep_deg=known(sun_sep),
        dec_of_date_deg=np.where(located & ~sky, dec, np.nan),
        pointing_from=np.where(sky, 0, np.where(altaz, 1, 2)).astype(np.int8),
        reason=reason, duplicate_of=np.where(first != np.arange(n), first, -1),
        bin_minutes=bin_minutes, rules=rules)


# ------------------------------------------------------------------ log rows

def log_rows(t: Tally, note: str = "tally") -> list[dict]:
    """Observation-log rows (``obslog`` columns) for the counted spectra.

    Counted spectra are grouped into recordings (breaks shorter than ``RUN_GAP_S``, at most
    a day long); each recording gives one row per bin it reached: the first start and last
    end of its spectra in that bin, ``l_from_deg`` = ``l_to_deg`` = the bin start, the
    minutes of those spectra, the parked declination of date (empty for sky positions).
    Read back, the rows give exactly the tally's minutes per bin.
    """
    idx = np.flatnonzero(t.counted)
    if idx.size == 0:
        return []
    idx = idx[np.argsort(t.start_mjd[idx], kind="stable")]
    start = t.start_mjd[idx]
    end = start + t.exposure_s[idx] / SECONDS_PER_DAY
    reach = np.maximum.accumulate(end)
    new_run = np.concatenate([[True], start[1:] - reach[:-1] > RUN_GAP_S / SECONDS_PER_DAY])
    run = np.cumsum(new_run) - 1
    run_start = start[new_run][run]
    piece = np.floor(start - run_start).astype(np.int64)  # whole days into the run
    keys = np.stack([run, piece, t.l_bin[idx]], axis=1)
    groups, group = np.unique(keys, axis=0, return_inverse=True)
    group = group.ravel()
    g = len(groups)
    first = np.full(g, np.inf)
    last = np.full(g, -np.inf)
    np.minimum.at(first, group, start)
    np.maximum.at(last, group, end)
    minutes = np.bincount(group, weights=t.exposure_s[idx] / 60.0, minlength=g)
    count = np.bincount(group, minlength=g)
    dec_sum = np.bincount(group, weights=np.nan_to_num(t.dec_of_date_deg[idx]), minlength=g)
    sky = np.bincount(group, weights=np.isnan(t.dec_of_date_deg[idx]).astype(float), minlength=g)
    bw = t.rules.bin_width_deg
    rows = []
    for k in np.lexsort((groups[:, 2], first)):  # one per (recording, bin): tens to thousands
        l_from = float(groups[k, 2] * bw)
        rows.append({
            "start_utc": iso_utc(first[k], milliseconds=True),
            "end_utc": iso_utc(last[k], milliseconds=True),
            "dec_deg": None if sky[k] else round(float(dec_sum[k] / count[k]), 4),
            "l_from_deg": int(l_from) if l_from.is_integer() else l_from,
            "l_to_deg": int(l_from) if l_from.is_integer() else l_from,
            "minutes": min(float(minutes[k]), 1440.0), "quality": "good",
            "note": f"{note}: {int(count[k])} spectra"})
    return rows


# ------------------------------------------------------------------ documents

SPECTRA_CSV_FIELDS = ("source", "time_utc", "mid_utc", "exposure_s", "ra_deg", "dec_deg", "l_deg",
                      "b_deg", "in_strip", "l_bin", "lsr_corr_kms", "sun_sep_deg", "counted", "reason")


def spectra_csv(t: Tally, spectra: Spectra) -> str:
    """The per-spectrum table as CSV text, in file order (columns ``SPECTRA_CSV_FIELDS``;
    empty cells where no pointing is known). Built column by column: 100,000 rows in
    well under a second."""
    from .outputs import csv_text

    def number(values, fmt):
        finite = np.isfinite(values)
        return np.where(finite, np.char.mod(fmt, np.where(finite, values, 0.0)), "")

    def flag(values):
        return np.where(values, "True", "False")

    bw = t.rules.bin_width_deg
    sources = spectra.where_all()
    quoted = [_csv_cell(csv_text(text)) for text in sources.tolist()]
    columns = [
        quoted, _iso_ms(spectra.time_mjd), _iso_ms(t.mid_mjd), np.char.mod("%g", t.exposure_s),
        number(t.ra_deg, "%.5f"), number(t.dec_deg, "%.5f"), number(t.l_deg, "%.5f"),
        number(t.b_deg, "%.5f"), flag(t.in_strip),
        np.where(t.l_bin >= 0, np.char.mod("%g", np.maximum(t.l_bin, 0) * bw), ""),
        number(t.lsr_corr_kms, "%.4f"), number(t.sun_sep_deg, "%.3f"), flag(t.counted),
        np.array(REASONS + ("",))[t.reason],
    ]
    lines = [",".join(SPECTRA_CSV_FIELDS)]
    lines += [",".join(row) for row in zip(*(list(c) if isinstance(c, list) else c.tolist()
                                             for c in columns))]
    return "\n".join(lines) + "\n"


def _csv_cell(text: str) -> str:
    """A CSV field: quoted (quotes doubled) when it holds a comma, a quote or a line break."""
    if any(ch in text for ch in ',"\r\n'):
        return '"' + text.replace('"', '""') + '"'
    return text


def _iso_ms(mjd_utc: np.ndarray) -> np.ndarray:
    """ISO 8601 UTC texts to the millisecond with Z (``iso_utc`` for whole arrays; days that
    end with a leap second go through ``iso_utc`` itself)."""
    from .timebase import UNIX_EPOCH_MJD, leap_seconds
    ms = np.round((mjd_utc - UNIX_EPOCH_MJD) * SECONDS_PER_DAY * 1000.0).astype(np.int64)
    text = np.char.add(np.datetime_as_string(ms.astype("datetime64[ms]"), unit="ms"), "Z")
    days, where = np.unique(np.floor(mjd_utc), return_inverse=True)
    leap = leap_seconds(days)[where.ravel()] != 0.0
    for i in np.flatnonzero(leap):  # spectra on a leap-second day: rare
        value = iso_utc(float(mjd_utc[i]), milliseconds=True)
        text[i] = value if "." in value else value[:-1] + ".000Z"
    return text


def _tidy(value):
    value = float(value)
    return int(value) if value.is_integer() else value


def summary(t: Tally, spectra: Spectra, max_listed: int = 20) -> dict:
    """The ``spectra``, ``bins``, ``rejected`` and ``duplicates`` parts of the document."""
    counted = t.counted
    minutes = t.exposure_s / 60.0
    bw = t.rules.bin_width_deg
    rejected = {}
    for code, name in enumerate(REASONS):
        mask = t.reason == code
        rejected[name] = {"spectra": int(mask.sum()), "minutes": float(minutes[mask].sum())}
    dups = np.flatnonzero(t.duplicate_of >= 0)
    lsr = t.lsr_corr_kms[counted]
    return {
        "spectra": {
            "read": len(spectra), "counted": int(counted.sum()),
            "counted_minutes": float(minutes[counted].sum()),
            "first_utc": iso_utc(float(t.start_mjd.min())),
            "last_utc": iso_utc(float((t.start_mjd + t.exposure_s / SECONDS_PER_DAY).max())),
            "pointing_from": {"file_sky": int((t.pointing_from == 0).sum()),
                              "file_altaz": int((t.pointing_from == 1).sum()),
                              "setting": int((t.pointing_from == 2).sum())},
            "lsr_corr_min_kms": float(lsr.min()) if lsr.size else None,
            "lsr_corr_max_kms": float(lsr.max()) if lsr.size else None,
        },
        "bins": [{"l_bin": _tidy(b * bw), "minutes": float(t.bin_minutes[b])}
                 for b in np.flatnonzero(t.bin_minutes > 0)],
        "rejected": rejected,
        "duplicates": [{"spectrum": spectra.where(i), "same_as": spectra.where(t.duplicate_of[i]),
                        "time_utc": iso_utc(float(spectra.time_mjd[i]), milliseconds=True)}
                       for i in dups[:max_listed]],
    }


def tally_document(site: Site, files, spectra: Spectra, t: Tally, settings: dict,
                   comparison: dict | None = None) -> dict:
    """The ``hiplan.tally/1`` document (docs/output-formats.md)."""
    from .report import _round_floats
    doc = {"schema": TALLY_SCHEMA, "site": site.summary(), "settings": settings,
           "files": [str(f) for f in files], **summary(t, spectra)}
    if comparison is not None:
        doc.update(comparison)
    return _round_floats(doc, 4)
