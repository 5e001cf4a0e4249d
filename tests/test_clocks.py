"""Real and simulated clocks: plan time, waiting at speed, and the --clock/--speed options."""
import math

import pytest

from planner.clocks import RealClock, SimulatedClock, parse_clock
from planner.errors import UserError
from planner.timebase import SECONDS_PER_DAY, parse_instant, unix_to_mjd_utc

START = parse_instant("2027-03-01T12:00:00Z", "test")


class FakeTime:
    """A monotonic clock that only moves when something sleeps (or the test says so)."""

    def __init__(self):
        self.now = 1000.0
        self.slept = []

    def monotonic(self):
        return self.now

    def sleep(self, seconds):
        self.slept.append(seconds)
        self.now += seconds


def _seconds(mjd_utc):
    return (mjd_utc - START) * SECONDS_PER_DAY


def test_simulated_clock_waits_at_speed_and_runs_real_time_between():
    t = FakeTime()
    clock = SimulatedClock(START, speed=60, sleep=t.sleep, monotonic=t.monotonic)
    assert clock.now_mjd() == START
    t.now += 30  # the dish takes 30 real seconds to arrive: 30 plan seconds pass
    assert _seconds(clock.now_mjd()) == pytest.approx(30, abs=1e-4)
    clock.wait_until(START + 630 / SECONDS_PER_DAY)  # 600 plan seconds to wait, at 60x: 10 s
    assert t.slept == [pytest.approx(10.0)]
    assert _seconds(clock.now_mjd()) == pytest.approx(630, abs=1e-4)  # 1e-4 s: MJD round-off
    clock.wait_until(START)  # the past: no wait
    assert len(t.slept) == 1


def test_simulated_wait_is_chunked_by_max_real_s():
    t = FakeTime()
    clock = SimulatedClock(START, speed=100, sleep=t.sleep, monotonic=t.monotonic)
    target = START + 3600 / SECONDS_PER_DAY  # 36 real seconds at 100x
    calls = 0
    while clock.now_mjd() < target - 1e-9:
        clock.wait_until(target, max_real_s=10)
        calls += 1
    assert calls == 4 and t.slept[:3] == [10, 10, 10]
    assert sum(t.slept) == pytest.approx(36.0)


def test_infinite_speed_jumps_without_sleeping():
    t = FakeTime()
    clock = SimulatedClock(START, speed=math.inf, sleep=t.sleep, monotonic=t.monotonic)
    clock.wait_until(START + 1.0, max_real_s=5)
    assert t.slept == [] and clock.now_mjd() == START + 1.0
    t.now += 30  # real time passing between waits does not move a dry run's clock
    assert clock.now_mjd() == START + 1.0
    assert clock.wall_seconds(900) == 0.0


def test_real_clock_sleeps_the_gap():
    slept = []
    clock = RealClock(sleep=slept.append, wall=lambda: 1.8e9)
    now = float(unix_to_mjd_utc(1.8e9))
    assert clock.now_mjd() == now
    clock.wait_until(now + 90 / SECONDS_PER_DAY, max_real_s=60)
    assert slept == [60]
    clock.wait_until(now + 30 / SECONDS_PER_DAY)
    assert slept[1] == pytest.approx(30, abs=1e-4)
    assert clock.wall_seconds(900) == 900


def test_parse_clock():
    assert isinstance(parse_clock(None, None), RealClock)
    assert isinstance(parse_clock("real", None), RealClock)
    sim = parse_clock("simulated:2027-03-01T12:00:00Z", 50)
    assert sim.simulated and sim.speed == 50
    assert abs(_seconds(sim.now_mjd())) < 5  # it runs in real time from the start given


@pytest.mark.parametrize("text, speed, message", [
    (None, 10.0, "--speed: only with --clock simulated"),
    ("simulated", None, "is not 'real' or 'simulated:ISO_TIME'"),
    ("fast:2027-03-01", None, "is not 'real'"),
    ("simulated:tomorrow", None, "--clock: 'tomorrow' is not an ISO 8601 time"),
])
def test_parse_clock_errors(text, speed, message):
    with pytest.raises(UserError, match=message):
        parse_clock(text, speed)
