"""The plan executor against a fake rotctld that misbehaves on cue, and against the real
``rotctld -m 1`` (hamlib's dummy rotator) when it is installed. Network: 127.0.0.1 only,
every wait bounded."""
import dataclasses
import json
import math
import os
import shutil
import socket
import subprocess
import sys
import time

import pytest

from drive_plans import MORNING, NIGHT, block, drift_doc, mjd, survey_doc, three_blocks
from fake_rotator import FakeRotator
from planner.cli import main
from planner.clocks import SimulatedClock
from planner.drive import DriveOptions, Executor
from planner.driveplan import park_position, plan_steps, sun_altaz_deg
from planner.errors import UserError
from planner.journal import JOURNAL_SCHEMA, read_journal
from planner.rotator import RotatorClient

# Fast polling for an instant fake dish; the timeout is short because the fake arrives at
# once and a test of "never arrives" should not wait long.
FAST = DriveOptions(tolerance_deg=0.5, poll_s=0.01, heartbeat_s=0.05, arrival_timeout_s=0.5,
                    record_grace_s=5.0)
ANSWER_TIMEOUT_S = 0.5


def _quick_sleep(seconds):
    """Reconnection back-off and refusal pauses, cut to a hundredth of a second."""
    time.sleep(min(seconds, 0.01))


class HookClock(SimulatedClock):
    """A simulated clock that runs ``hook(n)`` on its n-th wait (to make things happen mid-run)."""

    def __init__(self, start_mjd, hook, speed=math.inf):
        super().__init__(start_mjd, speed)
        self.hook, self.waits = hook, 0

    def wait_until(self, mjd_utc, max_real_s=math.inf):
        self.waits += 1
        self.hook(self.waits)
        super().wait_until(mjd_utc, max_real_s)


@pytest.fixture
def fake():
    server = FakeRotator(az=20.0, el=30.0)
    yield server
    server.close()


def _run(site, doc, fake, clock, template=None, options=FAST):
    events = []
    rotator = RotatorClient("127.0.0.1", fake.port, timeout_s=ANSWER_TIMEOUT_S)
    executor = Executor(site, plan_steps(doc, site, "plan.json"), rotator, clock, events.append,
                        template, options, begin={"schema": JOURNAL_SCHEMA}, sleep=_quick_sleep)
    try:
        outcome = executor.run()
    finally:
        rotator.close()
    return outcome, events


def _kinds(events, kind):
    return [e for e in events if e["event"] == kind]


def _night_plan(site):
    return survey_doc(site, three_blocks(site, mjd(NIGHT) + 2 / 1440.0))


def test_plan_runs_every_block_arrived_within_tolerance(school, fake):
    outcome, events = _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT), math.inf))
    assert (outcome.status, outcome.recorded, outcome.skipped, outcome.parked) == (
        "finished", 3, 0, True)
    arrived = _kinds(events, "arrived")
    assert arrived and all(e["offset_deg"] <= 0.5 for e in arrived)
    assert [e["name"] for e in _kinds(events, "record_start")] == ["T0", "T1", "T2"]
    # Tracking: re-commanded each time the sky moved a tenth of the 7.5 deg beam; a 10-minute
    # block near 30 deg elevation moves 2-3 deg, so two or three times.
    assert 2 <= len([e for e in _kinds(events, "track") if e["name"] == "T0"]) <= 3
    # The end: stop, then the park position (Saltbush: the Sun-safe stow toward the pole).
    assert events[-1]["event"] == "end" and events[-1]["parked"] is True
    assert fake.position() == pytest.approx(park_position(school), abs=0.01)
    assert fake.commands("S")


def test_refused_twice_skips_the_block(school, fake):
    fake.refuse_p = 2  # the slew to T0, and its one retry
    outcome, events = _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT), math.inf))
    skips = _kinds(events, "skip")
    assert [s["name"] for s in skips] == ["T0"] and "refused" in skips[0]["reason"]
    assert (outcome.status, outcome.recorded) == ("finished", 2)


def test_refused_every_time_parks_and_stops(school, fake):
    fake.refuse_p = 1000
    outcome, events = _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT), math.inf))
    assert outcome.status == "stopped" and "3 blocks in a row failed" in outcome.reason
    assert not outcome.parked  # the park command is refused too, and the journal says so
    assert any("not parked" in (e["reason"] or "") for e in _kinds(events, "error"))


def test_dropped_connection_reconnects_and_carries_on(school, fake):
    fake.drop_after = 6
    outcome, events = _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT), math.inf))
    assert (outcome.status, outcome.recorded) == ("finished", 3)
    assert fake.connections == 2
    assert any("reconnecting" in e["reason"] for e in _kinds(events, "error"))


def test_daemon_gone_stops_without_hanging(school, fake):
    clock = HookClock(mjd(NIGHT), lambda n: fake.kill() if n == 3 else None)
    started = time.monotonic()
    outcome, events = _run(school, _night_plan(school), fake, clock)
    assert time.monotonic() - started < 10  # bounded: 3 reconnection attempts, short timeouts
    assert outcome.status == "stopped" and "could not reconnect" in outcome.reason
    assert "stop it at the controller" in outcome.reason
    assert not _kinds(events, "park")


def test_dish_that_never_moves_is_stopped_and_left(school, fake):
    fake.frozen = True
    outcome, events = _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT), math.inf))
    assert outcome.status == "stopped" and "did not move" in outcome.reason
    assert not outcome.parked and fake.commands("S")
    assert len(fake.commands("P")) == 1  # not commanded again after the fault


def test_dish_that_stalls_is_parked_and_stopped(school, fake):
    fake.rate_deg_s = 1e4  # fast, so it really moves, then stalls 2 deg into the move
    fake.stall_after_deg = 2.0
    doc = survey_doc(school, [block(school, "FAR", 60.0, 40.0, mjd(NIGHT) + 5 / 1440.0)])
    outcome, events = _run(school, doc, fake, SimulatedClock(mjd(NIGHT), math.inf))
    assert outcome.status == "stopped" and "did not reach" in outcome.reason
    assert outcome.parked
    assert fake.position() == pytest.approx(park_position(school), abs=0.01)


def test_position_outside_the_limits_stops_without_parking(school, fake):
    def hook(n):
        if n == 2:
            fake.report = (500.0, 30.0)  # beyond the 350 deg end of the cable wrap
    outcome, events = _run(school, _night_plan(school), fake, HookClock(mjd(NIGHT), hook))
    assert outcome.status == "stopped" and "outside this dish's limits" in outcome.reason
    assert not outcome.parked and not _kinds(events, "park")
    assert fake.commands("S")


def test_outside_the_limits_at_the_start_refuses(school, fake):
    fake.report = (20.0, 120.0)
    with pytest.raises(UserError, match="outside this dish's limits"):
        _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT), math.inf))
    assert not fake.commands("P")


def test_moved_by_hand_while_resting_stops(school, fake):
    def hook(n):
        if n == 1:
            fake.move_by_hand(100.0, 50.0)
    outcome, events = _run(school, _night_plan(school), fake, HookClock(mjd(NIGHT), hook))
    assert outcome.status == "stopped" and "moved by hand" in outcome.reason
    assert not outcome.parked and fake.position() == (100.0, 50.0)


def test_recording_command_output_and_failure(school, fake, tmp_path):
    write = [sys.executable, "-c", "import pathlib, sys; p = pathlib.Path(sys.argv[1]); "
             "p.write_text(sys.argv[2]); print(p)", str(tmp_path / "{name}.dat"),
             "{l_deg:.2f} {seconds}"]
    outcome, events = _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT), math.inf),
                           template=tuple(write))
    ends = _kinds(events, "record_end")
    assert [e["files"] for e in ends] == [[str(tmp_path / f"T{i}.dat")] for i in range(3)]
    assert all(e["status"] == "ok" and e["exit_status"] == 0 for e in ends)
    l0 = _kinds(events, "record_start")[0]["l_deg"]
    # {seconds} is wall-clock time: an infinitely fast clock leaves none, so the floor of 1 s.
    assert (tmp_path / "T0.dat").read_text() == f"{l0:.2f} 1"

    failing = (sys.executable, "-c", "import sys; sys.stderr.write('no receiver'); sys.exit(3)")
    fake.move_by_hand(20.0, 30.0)
    outcome, events = _run(school, survey_doc(school, three_blocks(school, mjd(NIGHT) + 2 / 1440)[:2]),
                           fake, SimulatedClock(mjd(NIGHT), math.inf), template=failing)
    ends = _kinds(events, "record_end")
    assert [(e["status"], e["exit_status"]) for e in ends] == [("failed", 3)] * 2
    assert "no receiver" in ends[0]["reason"]
    assert (outcome.status, outcome.failed) == ("finished", 2)  # two in a row: carries on


def test_recording_that_overruns_is_stopped(school, fake):
    slow = (sys.executable, "-c", "import time; time.sleep(30)")
    options = dataclasses.replace(FAST, record_grace_s=0.2)
    doc = survey_doc(school, three_blocks(school, mjd(NIGHT) + 2 / 1440)[:1])
    outcome, events = _run(school, doc, fake, SimulatedClock(mjd(NIGHT), math.inf), slow, options)
    end = _kinds(events, "record_end")[0]
    assert end["status"] == "failed" and "stopped it" in end["reason"]


def test_clock_past_or_late(school, fake):
    blocks = three_blocks(school, mjd(NIGHT))  # T0 12:00-12:10, T1 12:12-12:22, T2 12:24-12:34
    # At 12:16: T0 is over (skipped), T1 has 6 of 10 minutes left (recorded from now), T2 normal.
    outcome, events = _run(school, survey_doc(school, blocks), fake,
                           SimulatedClock(mjd("2027-03-01T12:16:00Z"), math.inf))
    skip = _kinds(events, "skip")
    assert [s["name"] for s in skip] == ["T0"] and "already past" in skip[0]["reason"]
    starts = _kinds(events, "record_start")
    assert [s["name"] for s in starts] == ["T1", "T2"]
    assert starts[0]["start_utc"] == "2027-03-01T12:16:00Z"
    # At 12:18: T1 has 4 of 10 minutes left, less than half: skipped.
    fake.move_by_hand(20.0, 30.0)
    outcome, events = _run(school, survey_doc(school, blocks), fake,
                           SimulatedClock(mjd("2027-03-01T12:18:00Z"), math.inf))
    assert "too late" in [s for s in _kinds(events, "skip") if s["name"] == "T1"][0]["reason"]


def test_every_block_over_refuses(school, fake):
    with pytest.raises(UserError, match="every block ended"):
        _run(school, _night_plan(school), fake, SimulatedClock(mjd(NIGHT) + 1, math.inf))
    assert not fake.commands("P")


def test_ctrl_c_stops_the_recording_and_parks(school, fake):
    def hook(n):
        if n == 4:
            raise KeyboardInterrupt
    outcome, events = _run(school, _night_plan(school), fake, HookClock(mjd(NIGHT), hook))
    assert outcome.status == "interrupted" and outcome.parked
    assert _kinds(events, "record_end")[-1]["status"] == "interrupted"
    assert _kinds(events, "park")[0]["reason"] == "interrupted"
    assert fake.position() == pytest.approx(park_position(school), abs=0.01)


def test_drift_plan_moves_and_records_at_fixed_settings(club):
    """A re-park along the meridian, then a recording with the dish standing still."""
    south = {"dec_deg": 20.0, "alt_deg": 56.58, "az_deg": 180.0, "facing": "south"}
    higher = {"dec_deg": 30.0, "alt_deg": 66.58, "az_deg": 180.0, "facing": "south"}
    doc = drift_doc(club, higher, "2027-03-01T19:00:00Z",
                    ("2027-03-01T20:00:00Z", "2027-03-01T20:40:00Z"), (63.0, 70.0))
    with _server(180.0, south["alt_deg"]) as f:
        outcome, events = _run(club, doc, f, SimulatedClock(mjd("2027-03-01T18:00:00Z"),
                                                            math.inf))
        assert (outcome.status, outcome.recorded) == ("finished", 1)
        assert f.commands("P")[0] == "P 180.00 66.58"
        start = _kinds(events, "record_start")[0]
        assert (start["kind"], start["l_from_deg"], start["l_to_deg"]) == ("drift", 63.0, 70.0)
        assert not _kinds(events, "track")  # a parked beam: the sky drifts through it


# ------------------------------------------------------------------ the Sun


def test_refuses_to_start_when_the_first_slew_passes_the_sun(school):
    t = mjd(MORNING)
    sun_alt, sun_az = (float(v[0]) for v in sun_altaz_deg(school, t))
    # The dish 30 deg of azimuth on one side of the Sun, the first block as far on the other,
    # both at the Sun's elevation (23 deg away from it); every route, the one through the
    # stow toward the south pole included, sweeps within the 10 deg hazard.
    with _server(sun_az - 30, sun_alt) as f:
        doc = survey_doc(school, [block(school, "EAST", sun_az + 30.0, sun_alt, t + 2 / 1440)])
        with pytest.raises(UserError, match="refusing to start: the first slew") as info:
            _run(school, doc, f, SimulatedClock(t, math.inf))
        assert "sun_hazard_deg" in str(info.value)
        assert not f.commands("P") and not f.commands("S")


def test_detour_when_the_direct_slew_passes_the_sun(school):
    t = mjd(MORNING)
    sun_alt, sun_az = (float(v[0]) for v in sun_altaz_deg(school, t))
    # Diagonally across the Sun: elevation first, then along 15 deg below it, is clear.
    with _server(sun_az - 30, sun_alt + 15) as f:
        doc = survey_doc(school, [block(school, "EAST", sun_az + 30.0, sun_alt - 15, t + 3 / 1440)])
        outcome, events = _run(school, doc, f, SimulatedClock(t, math.inf))
        slews = [e for e in _kinds(events, "slew") if e["name"] == "EAST"]
        assert [e["via"] for e in slews] == ["leg 1 of 2", "leg 2 of 2"]
        assert slews[0]["az_deg"] == pytest.approx(sun_az - 30, abs=0.01)  # elevation first
        assert outcome.recorded == 1


def test_resting_dish_goes_to_park_before_the_sun_arrives(school):
    t = mjd(MORNING)
    # Rest where the Sun will be in an hour (about 15 deg from it now); the block is later.
    later_alt, later_az = (float(v[0]) for v in sun_altaz_deg(school, t + 1 / 24))
    with _server(later_az, later_alt) as f:
        doc = survey_doc(school, [block(school, "WEST", 250.0, 40.0, t + 2 / 24)])
        outcome, events = _run(school, doc, f, SimulatedClock(t, math.inf))
        first = _kinds(events, "slew")[0]
        assert first["name"] == "park" and "the Sun would come within" in first["reason"]
        assert outcome.recorded == 1


def test_park_position_the_sun_reaches_is_refused(school, fake):
    t = mjd(NIGHT)
    alt, az = (float(v[0]) for v in sun_altaz_deg(school, t + 0.5))  # tomorrow morning's Sun
    site = dataclasses.replace(school, dish=dataclasses.replace(
        school.dish, park_alt_deg=round(alt, 1), park_az_deg=round(az, 1)))
    with pytest.raises(UserError, match="park position .* has the Sun within 10°"):
        _run(site, _night_plan(site), fake, SimulatedClock(t, math.inf))
    assert not fake.commands("P")


class _server:
    """A FakeRotator as a context manager."""

    def __init__(self, az, el):
        self.fake = FakeRotator(az=az, el=el)

    def __enter__(self):
        return self.fake

    def __exit__(self, *exc):
        self.fake.close()


# ------------------------------------------------------------------ the command line


def _write_plan(tmp_path, site, blocks):
    path = tmp_path / "plan.json"
    path.write_text(json.dumps(survey_doc(site, blocks)), encoding="utf-8")
    return path


def test_cli_rehearsal_with_the_fake_daemon(school, fake, tmp_path, capsys):
    plan = _write_plan(tmp_path, school, three_blocks(school, mjd(NIGHT) + 2 / 1440))
    journal = tmp_path / "night.jsonl"
    status = main(["drive", str(plan), "--rotator", fake.address, "--site", "saltbush-ridge",
                   "--clock", f"simulated:{NIGHT}", "--speed", "1e5", "--journal", str(journal),
                   "--record", f"{sys.executable} -c 'print(123)' {{name}} {{seconds}}"])
    assert status == 0
    out = capsys.readouterr().out
    assert "record_start T0" in " ".join(out.split()) and "finished: 3 recorded" in out
    intervals = read_journal(journal)
    assert [(i.name, i.status, round(i.minutes, 3)) for i in intervals] == [
        ("T0", "ok", 10.0), ("T1", "ok", 10.0), ("T2", "ok", 10.0)]
    lines = [json.loads(line) for line in journal.read_text().splitlines()]
    assert lines[0]["schema"] == JOURNAL_SCHEMA and lines[0]["speed"] == 1e5
    assert lines[-1]["event"] == "end" and lines[-1]["status"] == "finished"


def test_cli_dry_run_sends_nothing(school, tmp_path, capsys):
    plan = _write_plan(tmp_path, school, three_blocks(school, mjd(NIGHT) + 2 / 1440))
    assert main(["drive", str(plan), "--dry-run", "--clock", f"simulated:{NIGHT}",
                 "--record", "rec {name} {seconds}"]) == 0
    out = capsys.readouterr().out
    assert "would send: P 20.00 30.00" in out  # T0's start; the dry run starts at the park
    assert "runs rec T0 600" in out and "finished: 3 recorded" in out


@pytest.mark.parametrize("argv, message", [
    ([], "--rotator HOST:PORT is required"),
    (["--rotator", "127.0.0.1:1", "--speed", "10"], "--speed: only with --clock simulated"),
    (["--dry-run", "--clock", "yesterday"], "--clock: 'yesterday' is not"),
    (["--dry-run", "--record", "rec {where}"], "--record: unknown placeholder {where}"),
    (["--dry-run", "--site", "hollowmere"], "the plan is for"),
])
def test_cli_mistakes_are_one_line(school, tmp_path, capsys, argv, message):
    plan = _write_plan(tmp_path, school, three_blocks(school, mjd(NIGHT) + 2 / 1440))
    assert main(["drive", str(plan), *argv]) == 2
    err = capsys.readouterr().err.strip()
    assert message in err and "\n" not in err


def test_cli_journal_never_replaced_without_force(school, tmp_path, capsys):
    plan = _write_plan(tmp_path, school, three_blocks(school, mjd(NIGHT) + 2 / 1440))
    journal = tmp_path / "j.jsonl"
    journal.write_text("keep me")
    argv = ["drive", str(plan), "--dry-run", "--clock", f"simulated:{NIGHT}", "--journal",
            str(journal)]
    assert main(argv) == 2 and journal.read_text() == "keep me"
    assert "already exists" in capsys.readouterr().err
    assert main([*argv, "--force"]) == 0 and read_journal(journal)[0].dry_run
    assert main(["drive", str(plan), "--dry-run", "--journal", str(plan), "--force"]) == 2


def test_cli_unreachable_rotator_is_one_line(school, tmp_path, capsys):
    plan = _write_plan(tmp_path, school, three_blocks(school, mjd(NIGHT) + 2 / 1440))
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    assert main(["drive", str(plan), "--rotator", f"127.0.0.1:{port}",
                 "--clock", f"simulated:{NIGHT}"]) == 2
    assert "cannot connect" in capsys.readouterr().err


# ------------------------------------------------------------------ the real rotctld


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def rotctld():
    """``rotctld -m 1`` (the dummy rotator) on a free port of 127.0.0.1."""
    exe = shutil.which("rotctld")
    if exe is None:
        pytest.skip("rotctld is not installed (Debian package libhamlib-utils; .ci/run "
                    "installs it where it can)")
    port = _free_port()
    proc = subprocess.Popen([exe, "-m", "1", "-T", "127.0.0.1", "-t", str(port)],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 10.0
    while True:
        try:
            socket.create_connection(("127.0.0.1", port), timeout=0.5).close()
            break
        except OSError:
            if proc.poll() is not None or time.monotonic() > deadline:
                proc.kill()
                pytest.skip("rotctld -m 1 did not start listening within 10 s")
            time.sleep(0.05)
    yield f"127.0.0.1:{port}"
    proc.terminate()
    try:
        proc.wait(5)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()


def test_rehearsal_against_the_dummy_rotator(school, rotctld, tmp_path):
    """A short survey rehearsed from the command line against hamlib's dummy rotator.

    The dummy starts at azimuth 0, elevation 0 and moves about 6 deg/s in real time, so the
    blocks sit low in the north-east and the park position is configured beside them (a
    test site file): the whole run takes a few seconds of real time.
    """
    site_text = (tmp_path / "site.toml")
    source = open(school.source, encoding="utf-8").read()
    site_text.write_text(source.replace("settle_s = 10", "settle_s = 10\npark_alt_deg = 35\n"
                                        "park_az_deg = 24"), encoding="utf-8")
    from planner.site import read_site_file
    site = read_site_file(site_text)
    plan = _write_plan(tmp_path, site, three_blocks(site, mjd(NIGHT) + 2 / 1440))
    journal = tmp_path / "rehearsal.jsonl"
    recorder = [sys.executable, "-c", "import pathlib, sys; p = pathlib.Path(sys.argv[1]); "
                "p.touch(); print(p)", str(tmp_path / "{name}.dat")]
    started = time.monotonic()
    status = main(["drive", str(plan), "--rotator", rotctld, "--site", str(site_text),
                   "--clock", f"simulated:{NIGHT}", "--speed", "3000", "--journal", str(journal),
                   "--record", " ".join(f"'{w}'" for w in recorder)])
    assert status == 0
    assert time.monotonic() - started < 30
    events = [json.loads(line) for line in journal.read_text().splitlines()]
    arrived = [e for e in events if e["event"] == "arrived"]
    assert len(arrived) == 4  # three blocks and the park
    assert all(e["offset_deg"] <= site.dish.pointing_tolerance_deg for e in arrived)
    tracks = [e for e in events if e["event"] == "track"]
    assert tracks and all(e["offset_deg"] <= site.dish.pointing_tolerance_deg for e in tracks)
    intervals = read_journal(journal)
    assert [(i.name, i.status, i.files) for i in intervals] == [
        (f"T{k}", "ok", (str(tmp_path / f"T{k}.dat"),)) for k in range(3)]
    assert events[-1]["parked"] is True
    assert os.path.exists(tmp_path / "T2.dat")
