"""A drive journal's recordings as spectra for the tally (``hiplan tally --journal``).

``hiplan drive`` writes what it recorded to its journal (``planner.journal``); this turns each
recorded interval into consecutive pseudo-spectra of at most ``CHUNK_S`` seconds, pointed where
the journal says the dish was, so the tally counts a driven run exactly as it counts a
recorder's own table. Pointing: the block's ICRS RA/Dec when the journal gives them (a tracked
survey block), else the commanded azimuth/elevation (a drift plan's fixed setting).

What counts: recordings with status ``ok``, ``interrupted`` (up to where the run stopped) and
``unfinished`` (up to the journal's last event). A ``failed`` recording (its command exited
non-zero or never started) counts nothing: the file it should have written may not exist. A dry
run recorded nothing, so its journal is refused.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import UserError
from .journal import RecordedInterval, read_journal
from .recordings import Source, Spectra

# One-minute pseudo-spectra: the observation log's own resolution (common practice for drift
# logs); a longer recording's sky track is then sampled at least once a minute.
CHUNK_S = 60.0
COUNTED_STATUSES = ("ok", "interrupted", "unfinished")


@dataclass(frozen=True)
class JournalSpectra:
    """The pseudo-spectra of one or more journals, and the recordings left out (failed)."""

    spectra: Spectra
    failed: tuple[tuple[str, RecordedInterval], ...]   # (journal path, recording)


def _pointing(rec: RecordedInterval, where: str) -> tuple[float, float, float, float]:
    """(ra, dec, alt, az) in degrees, NaN where not given."""
    nan = float("nan")
    if rec.ra_deg is not None and rec.dec_deg is not None:
        return rec.ra_deg, rec.dec_deg, nan, nan
    if rec.el_deg is not None and rec.az_deg is not None:
        return nan, nan, rec.el_deg, rec.az_deg % 360.0  # cable-wrap angles back to 0-360
    raise UserError(f"{where}: recording {rec.recording} gives no pointing (ra_deg/dec_deg or "
                    "az_deg/el_deg), so the tally cannot place its beam")


def journal_spectra(paths, chunk_s: float = CHUNK_S) -> JournalSpectra:
    """Pseudo-spectra (UTC MJD start stamps, exposures in s, pointings in deg) of the counted
    recordings of each journal, in journal order; one-line errors name the journal line."""
    sources, parts, failed = [], [], []
    for path in paths:  # journals, then their recordings: not a loop over time samples
        src = str(path)
        recordings = read_journal(path)
        if recordings and recordings[0].dry_run:
            raise UserError(f"{src}: a dry run's journal (hiplan drive --dry-run): nothing was "
                            "recorded, so there is nothing to tally")
        sources.append(Source(src))
        for rec in recordings:
            if rec.status not in COUNTED_STATUSES:
                failed.append((src, rec))
                continue
            seconds = rec.minutes * 60.0
            if seconds <= 1e-6:
                continue
            ra, dec, alt, az = _pointing(rec, f"{src}:{rec.line}")
            n = int(np.ceil(seconds / chunk_s - 1e-9))
            offset_s = np.arange(n) * chunk_s
            exposure = np.minimum(chunk_s, seconds - offset_s)
            parts.append({
                "time_mjd": rec.start_mjd + offset_s / 86400.0, "exposure_s": exposure,
                "ra_deg": np.full(n, ra), "dec_deg": np.full(n, dec),
                "alt_deg": np.full(n, alt), "az_deg": np.full(n, az),
                "source": np.full(n, len(sources) - 1), "row": np.full(n, rec.line)})
    if not parts:
        where = str(paths[0]) if len(paths) == 1 else "the journals"
        raise UserError(f"{where}: no recording to tally ({len(failed)} failed, none recorded)")
    keys = ("time_mjd", "exposure_s", "ra_deg", "dec_deg", "alt_deg", "az_deg", "source", "row")
    joined = {key: np.concatenate([p[key] for p in parts]) for key in keys}
    return JournalSpectra(Spectra(**joined, sources=tuple(sources)), tuple(failed))


def join(a: Spectra, b: Spectra) -> Spectra:
    """Recorder tables and journal pseudo-spectra as one set (sources renumbered)."""
    keys = ("time_mjd", "exposure_s", "ra_deg", "dec_deg", "alt_deg", "az_deg", "row")
    joined = {key: np.concatenate([getattr(a, key), getattr(b, key)]) for key in keys}
    joined["source"] = np.concatenate([a.source, b.source + len(a.sources)])
    return Spectra(**joined, sources=a.sources + b.sources)
