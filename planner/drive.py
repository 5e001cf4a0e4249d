"""Running a plan on a dish through a rotator controller: the executor and its faults.

The executor walks the plan's steps (``planner.driveplan``) in time order. For
each one it waits (resting, Sun-guarded) until the move should leave, moves the
dish there along a Sun-safe route, polls the controller until the read-back
position is within the site's ``pointing_tolerance_deg`` on both axes, waits
for the start, then runs the recording command and tracks: every time the sky
position has moved a tenth of the beamwidth it is commanded again and polled
until the dish is there. At the end of the plan, on Ctrl-C and after a fault
that leaves the drive usable, it stops the drive (``S``) and parks it at the
site's park position, again along a Sun-safe route.

Before it sends anything it refuses to start (``UserError``, nothing moved)
when the controller cannot be reached or reports a position outside the
dish's limits, when every block is already over, when the park position is
not Sun-safe for the run, or when the first move the dish would make has no
Sun-safe route.

Faults, and what happens (each is a journal event with its reason):

* controller refuses a command (``RPRT`` < 0): tried once more after a second;
  refused again, the block is skipped;
* connection dropped or silent: reconnect (up to three times, 1, 2 and 4 s
  apart) and carry on; otherwise stop, since nothing can be commanded any more
  (the dish may still be moving: a person must stop it at the controller);
* the dish not within tolerance in time (``arrival_timeout_s``, by default 1.5
  times the move's expected time from the site's slew rates plus 20 s): stop
  the drive; if it moved at all (slow or obstructed) park it and stop, if it
  did not move (stopped at the controller, or a drive fault) leave it there and
  stop;
* a read-back position outside the limits (drive-azimuth range, elevation
  0-90 deg, each widened by the tolerance), twice in a row: stop the drive and
  stop, without parking: the encoders cannot be trusted;
* the dish found away from where it was left while resting (by more than twice
  the tolerance): someone or something else moved it; stop the drive and stop,
  never fighting a person at the controls;
* the recording command failing (cannot start, non-zero exit, still running
  ``record_grace_s`` after the block, then stopped): journaled with its exit
  status, the run goes on;
* the clock already past a block's end: skipped; arrived with less than
  ``min_fraction`` of a block left: skipped; no Sun-safe route now: skipped;
* ``max_failures`` blocks in a row that failed (refused, recording failed):
  park and stop, something is wrong that will not mend itself.

The executor never prints and never opens files: it talks to the rotator,
the clock, the journal (``emit``) and the recording hook it is given.
"""
from __future__ import annotations

import time
from dataclasses import dataclass

from .driveplan import (ELEVATION_RANGE_DEG, HI_REST_MHZ, TRACK_STEP_BEAMS, Step, check_park,
                        move_seconds, park_position, rest_danger_mjd, safe_route)
from .errors import UserError
from .journal import make_event
from .recordhook import RecordingProcess, RecordingValues, command_words
from .rotator import RotatorLost, RotatorRefused
from .site import Site
from .timebase import SECONDS_PER_DAY, iso_utc

# Arrival timeout: the expected move time from the site's rates, times a factor, plus
# slack for settling and controller lag; a drive slower than that is a fault. Our choice.
ARRIVAL_FACTOR = 1.5
ARRIVAL_SLACK_S = 20.0
ARRIVAL_DEFAULT_S = 180.0  # mounts without slew rates in the site file (our choice)
RECONNECT_WAITS_S = (1.0, 2.0, 4.0)
REFUSAL_WAIT_S = 1.0


@dataclass(frozen=True)
class DriveOptions:
    """How the executor behaves; times in real seconds."""

    tolerance_deg: float = 0.5
    arrival_timeout_s: float | None = None  # None: from each move's expected time
    poll_s: float = 0.25  # between position reads while the dish moves (a local TCP round trip)
    heartbeat_s: float = 10.0  # between position reads while it waits
    record_grace_s: float = 30.0  # a recording command may run this long past its block
    min_fraction: float = 0.5  # skip a block with less than this part of it left
    max_failures: int = 3  # blocks in a row that failed before parking and stopping
    dry_run: bool = False


@dataclass(frozen=True)
class DriveOutcome:
    """How a run ended: ``status`` finished | stopped | interrupted, and what it did."""

    status: str
    reason: str | None
    recorded: int
    failed: int
    skipped: int
    parked: bool


class _Halt(Exception):
    """A fault that ends the run; ``park``: the drive still works, so park it."""

    def __init__(self, reason: str, park: bool, stop: bool = True):
        super().__init__(reason)
        self.reason, self.park, self.stop = reason, park, stop


class _Skip(Exception):
    """The current step cannot be done: skip it (``failure``: counts toward max_failures)."""

    def __init__(self, reason: str, failure: bool = False):
        super().__init__(reason)
        self.reason, self.failure = reason, failure


def _fmt(pos) -> str:
    return f"drive az {pos[0]:.2f}°, el {pos[1]:.2f}°"


class Executor:
    """One run of a plan's steps against a rotator (see the module docstring).

    ``rotator``: ``rotator.RotatorClient`` or ``DryRunRotator``; ``clock``:
    ``clocks.RealClock`` or ``SimulatedClock``; ``emit(event_dict)`` receives every
    journal event; ``template``: the recording command's words or None; ``begin``:
    extra fields of the ``begin`` event. ``sleep``/``monotonic`` time the polling
    (real seconds; replaceable in tests).
    """

    def __init__(self, site: Site, steps: list[Step], rotator, clock, emit, template=None,
                 options: DriveOptions = DriveOptions(), begin: dict | None = None,
                 sleep=time.sleep, monotonic=time.monotonic):
        self.site, self.steps, self.rotator, self.clock = site, steps, rotator, clock
        self._emit_event, self.template, self.options = emit, template, options
        self.begin = dict(begin or {})
        self._sleep, self._monotonic = sleep, monotonic
        self.park = park_position(site)
        self.pos: tuple[float, float] | None = None  # last read-back position
        self.hold: tuple[float, float] | None = None  # where the dish should be standing
        self.recording_no = 0
        self.recorded = self.failed = self.skipped = 0
        self.failures_in_row = 0
        self.plan_end = max((s.end_mjd for s in steps), default=clock.now_mjd())
        self._parking = False

    # -- journal

    def _emit(self, event: str, step: Step | None = None, name: str | None = None, **fields):
        self._emit_event(make_event(self.clock.now_mjd(), event,
                                    None if step is None else step.number,
                                    step.name if step is not None else name, **fields))

    # -- the run

    def run(self) -> DriveOutcome:
        self._emit("begin", **self.begin)
        try:
            self._start()
        except UserError as exc:
            self._emit("error", reason=str(exc))
            self._end("refused", str(exc), False)
            raise
        except KeyboardInterrupt:
            return self._end("interrupted", "interrupted before anything moved", False)
        try:
            for step in self.steps:  # one per block
                self._step(step)
            return self._end("finished", None, self._park("the plan is done"))
        except KeyboardInterrupt:
            return self._end("interrupted", *self._after_interrupt())
        except _Halt as halt:
            return self._end("stopped", halt.reason, self._after_fault(halt))

    def _end(self, status: str, reason: str | None, parked: bool) -> DriveOutcome:
        self._emit("end", reason=reason, status=status, recorded=self.recorded,
                   failed=self.failed, skipped=self.skipped, parked=parked)
        return DriveOutcome(status, reason, self.recorded, self.failed, self.skipped, parked)

    def _after_interrupt(self) -> tuple[str, bool]:
        """Ctrl-C: stop and park; a second Ctrl-C (or one while parking) stops it where it is."""
        if self._parking:
            reason = "interrupted while parking: stopped the drive where it is"
            self._emit("error", reason=reason)
            self._stop_drive()
            return reason, False
        reason = "interrupted (Ctrl-C): stopping and parking"
        self._emit("error", reason=reason)
        try:
            self._stop_drive()
            return reason, self._park("interrupted")
        except KeyboardInterrupt:
            reason = "interrupted twice: stopped the drive where it is, not parked"
            self._emit("error", reason=reason)
            self._stop_drive()
        except _Halt as halt:
            reason = halt.reason
            self._emit("error", reason=reason)
        return reason, False

    def _after_fault(self, halt: _Halt) -> bool:
        """A fault ended the run: stop the drive and, if it still works, park it."""
        self._emit("error", reason=halt.reason)
        if halt.stop:
            self._stop_drive()
        if not halt.park or self._parking:
            return False
        try:
            return self._park(f"stopping after a fault: {halt.reason}")
        except _Halt as second:
            self._emit("error", reason=second.reason)
            return False

    def _start(self) -> None:
        """Connect, read the dish, and refuse (UserError) before anything moves if unsafe."""
        try:
            self.rotator.connect()
            pos = self.rotator.get_position()
        except RotatorLost as exc:
            raise UserError(f"--rotator: {exc}; is rotctld running there?") from None
        except RotatorRefused as exc:
            raise UserError(f"--rotator: {exc} when asked where the dish is") from None
        if not self._inside(pos):
            raise UserError(f"--rotator: the controller reports {_fmt(pos)}, outside this "
                            f"dish's limits; check the controller before driving")
        self.pos = self.hold = pos
        now = self.clock.now_mjd()
        pending = [s for s in self.steps if s.end_mjd > now]
        if not pending:
            raise UserError(f"{self.begin.get('plan', 'plan')}: every block ended before "
                            f"{iso_utc(now)}; nothing to drive (wrong plan, or --clock?)")
        check_park(self.site, self.park, now, self.plan_end)
        first = pending[0]
        depart = max(now, first.depart_mjd)
        if rest_danger_mjd(self.site, *pos, now, depart) is not None:
            goal, leave, what = self.park, now, "to the park position"
        else:
            goal, leave = first.position_at(max(depart, first.start_mjd)), depart
            what = f"to {first.name}"
        if safe_route(self.site, pos, goal, self.park, leave,
                      self._route_seconds(pos, goal)) is None:
            raise UserError(
                f"refusing to start: the first slew, from {_fmt(pos)} {what} ({_fmt(goal)}) at "
                f"{iso_utc(leave)}, would pass within {self.site.rules.sun_hazard_deg:g}° of the "
                "Sun (sun_hazard_deg) by every route; move the dish by hand or start later")

    # -- steps

    def _step(self, step: Step) -> None:
        now = self.clock.now_mjd()
        if now >= step.end_mjd:
            self._skip(step, f"the clock is already past this block (it ended "
                             f"{iso_utc(step.end_mjd)})")
            return
        try:
            self._wait(step.depart_mjd)
            self._goto(step, step.position_at(max(self.clock.now_mjd(), step.start_mjd)))
            if not step.records:
                return
            self._wait(step.start_mjd)
            now = self.clock.now_mjd()
            left = step.end_mjd - now
            if left < self.options.min_fraction * (step.end_mjd - step.start_mjd):
                late_min = (now - step.start_mjd) * 1440.0
                raise _Skip(f"arrived too late: {late_min:.1f} min after the start, "
                            f"{max(left, 0.0) * 1440.0:.1f} of "
                            f"{(step.end_mjd - step.start_mjd) * 1440.0:.1f} min left")
            self._record(step)
        except _Skip as skip:
            self._skip(step, skip.reason)
            if skip.failure:
                self._failure()

    def _skip(self, step: Step, reason: str) -> None:
        self.skipped += 1
        self._emit("skip", step, reason=reason)

    def _failure(self) -> None:
        self.failures_in_row += 1
        if self.failures_in_row >= self.options.max_failures:
            raise _Halt(f"{self.failures_in_row} blocks in a row failed: parking and stopping",
                        park=True)

    # -- moving

    def _timeout(self, start, goal) -> float:
        if self.options.arrival_timeout_s is not None:
            return self.options.arrival_timeout_s
        expected = move_seconds(self.site, start, goal)
        if expected is None:
            return ARRIVAL_DEFAULT_S
        return ARRIVAL_FACTOR * expected + ARRIVAL_SLACK_S

    def _route_seconds(self, start, goal) -> float:
        """The longest a route from ``start`` to ``goal`` may take: two legs, or via the park."""
        return max(2.0 * self._timeout(start, goal),
                   self._timeout(start, self.park) + self._timeout(self.park, goal))

    def _goto(self, step: Step | None, goal, event: str = "slew", reason: str | None = None,
              name: str | None = None) -> None:
        """Move to ``goal`` along a Sun-safe route (_Skip when there is none, or refused)."""
        goal = (float(goal[0]), float(goal[1]))
        if self._near(self.pos, goal):
            self.hold = goal
            return
        now = self.clock.now_mjd()
        route = safe_route(self.site, self.pos, goal, self.park, now,
                           self._route_seconds(self.pos, goal))
        if route is None:
            raise _Skip(f"no Sun-safe way from {_fmt(self.pos)} to {_fmt(goal)} now (the Sun is "
                        f"near every route; sun_hazard_deg {self.site.rules.sun_hazard_deg:g}°)")
        for k, waypoint in enumerate(route):  # one to three legs
            via = None if len(route) == 1 else f"leg {k + 1} of {len(route)}"
            self._emit(event, step, name, commanded=waypoint, read_back=self.pos, reason=reason,
                       via=via)
            self._move(waypoint, self._timeout(self.pos, waypoint))
            self._emit("arrived", step, name, commanded=waypoint, read_back=self.pos,
                       offset_deg=self._offset(self.pos, waypoint))

    def _move(self, goal, timeout_s: float) -> None:
        """Command ``goal`` and poll until the dish is there (faults as in the module doc)."""
        self._command(goal)
        self.hold = None  # moving: no "by hand" check until it arrives
        started = self._monotonic()
        first = self.pos
        moved = False
        while True:
            pos = self._read()
            if self._near(pos, goal):
                self.pos, self.hold = pos, goal
                return
            moved = moved or not self._near(pos, first)
            waited = self._monotonic() - started
            if waited > timeout_s:
                self.pos = pos
                self._stop_drive()
                if moved:
                    raise _Halt(f"the dish did not reach {_fmt(goal)} within {timeout_s:.0f} s "
                                f"(now at {_fmt(pos)}): a slow or obstructed drive", park=True)
                raise _Halt(f"the dish did not move toward {_fmt(goal)} in {timeout_s:.0f} s "
                            f"(still at {_fmt(pos)}): stopped at the controller, or a drive "
                            "fault; leaving it where it is", park=False)
            self._sleep(self.options.poll_s)

    def _command(self, goal) -> None:
        try:
            self._call(self.rotator.set_position, goal[0], goal[1])
        except RotatorRefused as exc:
            self._emit("error", reason=f"{exc}; trying once more")
            self._sleep(REFUSAL_WAIT_S)
            try:
                self._call(self.rotator.set_position, goal[0], goal[1])
            except RotatorRefused as again:
                raise _Skip(f"{again} twice", failure=True) from None

    def _read(self):
        """The read-back position, checked against the limits (twice before giving up)."""
        pos = self._call(self.rotator.get_position)
        if self._inside(pos):
            return pos
        self._sleep(self.options.poll_s)
        pos = self._call(self.rotator.get_position)
        if self._inside(pos):
            return pos
        raise _Halt(f"the controller reports {_fmt(pos)}, outside this dish's limits: stopped "
                    "the drive; check the encoders and the controller before running again",
                    park=False)

    def _call(self, func, *args):
        """``func(*args)`` on the rotator, reconnecting after a lost connection."""
        for attempt in range(len(RECONNECT_WAITS_S) + 1):
            try:
                return func(*args)
            except RotatorRefused as exc:
                if func == self.rotator.get_position:
                    raise _Halt(f"{exc} when asked where the dish is", park=False) from None
                raise
            except RotatorLost as exc:
                if attempt == len(RECONNECT_WAITS_S):
                    raise _Halt(f"lost the controller ({exc}) and could not reconnect; the dish "
                                "may still be moving: stop it at the controller", park=False,
                                stop=False) from None
                self._emit("error", reason=f"lost the controller ({exc}); reconnecting")
                self._sleep(RECONNECT_WAITS_S[attempt])
                try:
                    self.rotator.connect()
                except RotatorLost:
                    continue
        raise AssertionError("unreachable")

    def _stop_drive(self) -> None:
        """Send S; a controller that cannot be told any more is left to the person."""
        try:
            self.rotator.stop()
        except (RotatorLost, RotatorRefused):
            pass

    def _inside(self, pos) -> bool:
        dish, tol = self.site.dish, self.options.tolerance_deg
        return (dish.azimuth_min_deg - tol <= pos[0] <= dish.azimuth_max_deg + tol
                and ELEVATION_RANGE_DEG[0] - tol <= pos[1] <= ELEVATION_RANGE_DEG[1] + tol)

    def _near(self, pos, goal, factor: float = 1.0) -> bool:
        return self._offset(pos, goal) <= self.options.tolerance_deg * factor + 1e-9

    @staticmethod
    def _offset(pos, goal) -> float:
        return round(max(abs(pos[0] - goal[0]), abs(pos[1] - goal[1])), 3)

    # -- waiting

    def _wait(self, until_mjd: float, guard: bool = True) -> None:
        """Wait for plan time ``until_mjd``, reading the dish every heartbeat.

        ``guard``: first make sure the Sun keeps off the resting dish until then, going
        to the park position if not.
        """
        now = self.clock.now_mjd()
        if until_mjd <= now:
            return
        if guard and not self._near(self.pos, self.park):
            danger = rest_danger_mjd(self.site, *self.pos, now, until_mjd)
            if danger is not None:
                why = (f"the Sun would come within {self.site.rules.sun_hazard_deg:g}° of the "
                       f"resting dish at {iso_utc(danger)}: moving to the park position")
                try:
                    self._goto(None, self.park, event="slew", reason=why, name="park")
                except _Skip as skip:
                    raise _Halt(f"{why}, but {skip.reason}; cover the feed or move the dish by "
                                "hand", park=False) from None
        while self.clock.now_mjd() < until_mjd:
            self.clock.wait_until(until_mjd, max_real_s=self.options.heartbeat_s)
            self._check_hold()

    def _check_hold(self) -> None:
        pos = self._read()
        self.pos = pos
        if self.hold is not None and not self._near(pos, self.hold, factor=2.0):
            raise _Halt(f"the dish is at {_fmt(pos)}, not at {_fmt(self.hold)} where it was "
                        "left: it was moved by hand or by something else; stopping without "
                        "moving it again", park=False)

    # -- recording and tracking

    def _record(self, step: Step) -> None:
        now = self.clock.now_mjd()
        plan_s = (step.end_mjd - now) * SECONDS_PER_DAY
        values = RecordingValues(
            name=step.name, l_deg=step.l_deg, b_deg=step.b_deg, start_utc=iso_utc(now),
            end_utc=iso_utc(step.end_mjd),
            freq_mhz=step.freq_mhz if step.freq_mhz is not None else HI_REST_MHZ,
            seconds=plan_s if self.options.dry_run else self.clock.wall_seconds(plan_s))
        argv = command_words(self.template, values) if self.template else None
        self.recording_no += 1
        number = self.recording_no
        process = RecordingProcess(argv) if argv and not self.options.dry_run else None
        self._emit("record_start", step, commanded=self.hold, read_back=self.pos,
                   recording=number, kind=step.kind, l_deg=step.l_deg, b_deg=step.b_deg,
                   l_from_deg=step.l_from_deg, l_to_deg=step.l_to_deg, ra_deg=step.ra_deg,
                   dec_deg=step.dec_deg, start_utc=iso_utc(now), end_utc=iso_utc(step.end_mjd),
                   freq_mhz=values.freq_mhz, command=argv)
        if process is not None and process.start_problem is not None:
            self._record_end(step, number, "failed", None, (), process.start_problem)
            raise _Skip(f"recording not started: {process.start_problem}", failure=True)
        try:
            self._track(step)
        except BaseException as exc:  # Ctrl-C, a fault: stop the recording and say so
            if process is not None:
                process.stop()
                result = process.finish(0.0)
                files = result.files
            else:
                files = ()
            reason = exc.reason if isinstance(exc, (_Halt, _Skip)) else "interrupted (Ctrl-C)"
            self._record_end(step, number, "interrupted", None, files, reason)
            if isinstance(exc, _Skip):
                raise _Skip(f"tracking stopped: {exc.reason}", failure=exc.failure) from None
            raise
        if process is None:
            self._record_end(step, number, "ok", 0 if argv else None, (), None)
            self.recorded += 1
            self.failures_in_row = 0
            return
        result = process.finish(self.options.record_grace_s)
        if result.ok:
            self._record_end(step, number, "ok", result.exit_status, result.files, None)
            self.recorded += 1
            self.failures_in_row = 0
        else:
            self._record_end(step, number, "failed", result.exit_status, result.files,
                             f"recording command failed: {result.problem}")
            self.failed += 1
            self._failure()

    def _record_end(self, step, number, status, exit_status, files, reason) -> None:
        self._emit("record_end", step, commanded=self.hold, read_back=self.pos, reason=reason, recording=number, status=status,
                   exit_status=exit_status, files=list(files))

    def _track(self, step: Step) -> None:
        """Follow the step's sky position until its end (fixed steps just wait)."""
        if step.track is not None:
            beam = self.site.dish.beamwidth_deg * TRACK_STEP_BEAMS
            for t in step.track.command_times(beam):  # every tenth of a beam: a few per block
                if t <= self.clock.now_mjd():
                    continue
                if t >= step.end_mjd:
                    break
                self._wait(t, guard=False)
                goal = step.position_at(self.clock.now_mjd())
                self._move(goal, self._timeout(self.pos, goal))
                self._emit("track", step, commanded=goal, read_back=self.pos,
                           offset_deg=self._offset(self.pos, goal))
        self._wait(step.end_mjd, guard=False)

    # -- parking

    def _park(self, reason: str) -> bool:
        """Stop the drive and park it along a Sun-safe route; False when no route is clear."""
        if self.pos is None:  # never got as far as reading the dish
            return False
        self._parking = True
        self._stop_drive()
        if self._near(self.pos, self.park):
            self._emit("park", name="park", commanded=self.park, read_back=self.pos,
                       reason=f"{reason} (already there)")
            return True
        try:
            self._goto(None, self.park, event="park", reason=reason, name="park")
        except _Skip as skip:
            self._emit("error", name="park", reason=f"not parked: {skip.reason}; the dish stays "
                                                    f"at {_fmt(self.pos)}")
            return False
        return True
