"""Feed safety for month plans: which settings and moves the Sun forbids, and what is left.

A drift plan holds a setting through move-slot intervals and changes it at move
slots. ``SunGuard`` answers the planner's two questions from ``sunsafety``:
is this setting safe through this interval (no hazardous Sun approach overlaps
it), and is this move safe (the path the dish takes during it stays clear of
the visible Sun). It also turns a finished plan's unavoidable or insisted-on
hazards into ``HazardTask`` entries: the dish already parked in the Sun's way
before the first move slot, or a plan made with ``enforce`` false.

Angles in degrees, times float MJD (UTC).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .avoidance import SUNSET_ALTITUDE_DEG
from .pointing import Pointing
from .site import Site
from .sunsafety import SunApproaches, move_safe_matrix, move_sun_sep_deg, sun_approaches


@dataclass(frozen=True)
class HazardTask:
    """A time the Sun comes within the feed-safety limit of the dish as planned."""

    row: int  # sweep row the dish is at (or moving to)
    kind: str  # "parked" | "move"
    closest_mjd: float
    sep_deg: float
    enter_mjd: float  # Sun closer than the limit from here ...
    exit_mjd: float  # ... to here


@dataclass
class SunGuard:
    """Feed-safety constraints for the rows (pointings) of one sweep over its period.

    ``enforce`` false: the user insists; nothing is forbidden, every hazard becomes a task.
    """

    site: Site
    pointings: list[Pointing]
    approaches: SunApproaches
    limit_deg: float
    enforce: bool = True
    _moves: dict = field(default_factory=dict, repr=False)

    def unsafe_slots(self, edges: np.ndarray) -> np.ndarray:
        """(R, K) True where the Sun endangers row r's feed during interval [edges[k], edges[k+1])."""
        unsafe = np.zeros((len(self.pointings), edges.size - 1), dtype=bool)
        if not self.enforce:
            return unsafe
        ap = self.approaches
        inside = ap.hazard & (ap.exit_mjd > edges[0]) & (ap.enter_mjd < edges[-1])
        for i in np.flatnonzero(inside):  # a few per unsafe row and day
            k_lo = np.searchsorted(edges, ap.enter_mjd[i], side="right") - 1
            k_hi = np.searchsorted(edges, ap.exit_mjd[i], side="left") - 1
            unsafe[ap.row[i], max(k_lo, 0):max(k_hi, 0) + 1] = True
        return unsafe

    def moves_safe(self, t0_mjd: float, t1_mjd: float) -> np.ndarray:
        """(R, R) True where a move from row a to row b during [t0, t1] is allowed."""
        if not self.enforce:
            return np.ones((len(self.pointings),) * 2, dtype=bool)
        key = (round(t0_mjd, 9), round(t1_mjd, 9))
        if key not in self._moves:  # one matrix per move slot, reused by every search
            self._moves[key] = move_safe_matrix(self.site, self.pointings, t0_mjd, t1_mjd,
                                                self.limit_deg)
        return self._moves[key]

    def hazard_tasks(self, parkings, repark_days: float, start_mjd: float) -> tuple[HazardTask, ...]:
        """Every time the Sun endangers the feed in a plan's parkings and moves, in time order."""
        ap = self.approaches
        tasks = []
        previous = None
        for p in parkings:  # a handful of parkings
            held_from = p.move_mjd if p.move_mjd is not None else start_mjd
            for i in ap.hazards_overlapping(p.row, held_from, p.end_mjd):
                tasks.append(HazardTask(p.row, "parked", float(ap.closest_mjd[i]),
                                        float(ap.sep_deg[i]), float(ap.enter_mjd[i]),
                                        float(ap.exit_mjd[i])))
            if p.move_mjd is not None and previous is not None:
                t0, t1 = p.move_mjd, p.move_mjd + repark_days
                sep, sun_alt = move_sun_sep_deg(self.site, self.pointings[previous],
                                                [self.pointings[p.row]], t0, t1)
                if sun_alt > SUNSET_ALTITUDE_DEG and sep[0] < self.limit_deg:
                    tasks.append(HazardTask(p.row, "move", t0, float(sep[0]), t0, t1))
            previous = p.row
        return tuple(sorted(tasks, key=lambda t: (t.enter_mjd, t.row)))


def sun_guard(sweep, enforce: bool = True) -> SunGuard:
    """The feed-safety constraints for planning over ``sweep`` (a ``coverage.Sweep``)."""
    site = sweep.site
    pointings = [r.pointing for r in sweep.rows]
    approaches = sun_approaches(site, pointings, sweep.start_mjd, sweep.end_mjd, nodes=sweep.nodes)
    return SunGuard(site, pointings, approaches, site.rules.sun_hazard_deg, enforce)
