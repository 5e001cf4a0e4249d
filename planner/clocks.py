"""Clocks for running a plan: the real one, and a simulated one for rehearsals and tests.

Two kinds of waiting happen while a plan runs, and they are kept apart:

* waiting for *plan time* (a block to start, the next tracking step):
  ``wait_until(mjd)``;
* waiting for the *dish* (polling the controller until it arrives): always real
  seconds, because a rotator, even a simulated one, moves in real time.

``RealClock`` is UTC from the system clock. ``SimulatedClock`` starts at a given
instant; between waits it runs at the real rate, so the time a dish takes to
move counts in full, and ``wait_until`` covers the gap ``speed`` times faster
than real time. With an infinite speed (dry runs) it jumps at once and stands
still between waits, so a dry run's times are the same on every run. Times are
float MJD (UTC); ``wait_until`` never sleeps longer than ``max_real_s`` in one
call, so the caller can check on the dish while it waits.
"""
from __future__ import annotations

import math
import time

from .errors import UserError
from .timebase import SECONDS_PER_DAY, parse_instant, unix_to_mjd_utc

CLOCK_HELP = "real (the system clock, default) or simulated:ISO_TIME (rehearsal from that instant)"


class RealClock:
    """UTC from the system clock."""

    simulated = False
    speed = 1.0

    def __init__(self, sleep=time.sleep, wall=time.time):
        self._sleep, self._wall = sleep, wall

    def now_mjd(self) -> float:
        return float(unix_to_mjd_utc(self._wall()))

    def wait_until(self, mjd_utc: float, max_real_s: float = math.inf) -> None:
        """Sleep until ``mjd_utc`` or for ``max_real_s`` seconds, whichever comes first."""
        gap_s = (mjd_utc - self.now_mjd()) * SECONDS_PER_DAY
        if gap_s > 0:
            self._sleep(min(gap_s, max_real_s))

    def wall_seconds(self, plan_seconds: float) -> float:
        """How long ``plan_seconds`` of plan time last on the wall clock."""
        return plan_seconds


class SimulatedClock:
    """Plan time from ``start_mjd``: real rate between waits, ``speed`` times faster in them."""

    simulated = True

    def __init__(self, start_mjd: float, speed: float = 1.0, sleep=time.sleep,
                 monotonic=time.monotonic):
        if not speed > 0:
            raise ValueError("speed must be positive")
        self.speed = float(speed)
        self._sleep, self._monotonic = sleep, monotonic
        self.start_mjd = float(start_mjd)     # where it started (a dry run starts exactly here)
        self._anchor_mjd = float(start_mjd)
        self._anchor_real = monotonic()

    def now_mjd(self) -> float:
        if not math.isfinite(self.speed):  # a dry run: time moves only when waited for
            return self._anchor_mjd
        return self._anchor_mjd + (self._monotonic() - self._anchor_real) / SECONDS_PER_DAY

    def wait_until(self, mjd_utc: float, max_real_s: float = math.inf) -> None:
        """Advance to ``mjd_utc`` at ``speed``, sleeping at most ``max_real_s`` real seconds."""
        now = self.now_mjd()
        gap_s = (mjd_utc - now) * SECONDS_PER_DAY
        if gap_s <= 0:
            return
        real_s = gap_s / self.speed
        if not math.isfinite(self.speed):
            target = mjd_utc  # a dry run: no waiting at all
        elif real_s > max_real_s:
            self._sleep(max_real_s)
            target = now + max_real_s * self.speed / SECONDS_PER_DAY
        else:
            self._sleep(real_s)
            target = mjd_utc
        self._anchor_mjd = max(target, now)
        self._anchor_real = self._monotonic()

    def wall_seconds(self, plan_seconds: float) -> float:
        return plan_seconds / self.speed


def parse_clock(text: str | None, speed: float | None):
    """The clock for ``--clock`` and ``--speed``: RealClock, or SimulatedClock from ``simulated:ISO``."""
    if text is None or text.strip().lower() == "real":
        if speed is not None:
            raise UserError("--speed: only with --clock simulated:ISO_TIME (the real clock runs "
                            "at its own pace)")
        return RealClock()
    kind, sep, when = text.strip().partition(":")
    if kind.strip().lower() != "simulated" or not sep or not when.strip():
        raise UserError(f"--clock: '{text}' is not 'real' or 'simulated:ISO_TIME' "
                        "(e.g. simulated:2027-03-01T09:30:00Z)")
    start = parse_instant(when.strip(), "--clock")
    return SimulatedClock(start, 1.0 if speed is None else float(speed))
