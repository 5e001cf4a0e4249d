"""The rotctld protocol client against a fake daemon on 127.0.0.1 (every call bounded by a timeout)."""
import socket

import pytest

from fake_rotator import FakeRotator
from planner.errors import UserError
from planner.rotator import (DEFAULT_PORT, DryRunRotator, RotatorClient, RotatorLost,
                             RotatorRefused, parse_address, position_command)

# A fake daemon answers in microseconds; 0.3 s of silence is a dead one (keeps tests fast).
TIMEOUT_S = 0.3


@pytest.fixture
def fake():
    server = FakeRotator(az=10.0, el=20.0)
    yield server
    server.close()


@pytest.fixture
def client(fake):
    c = RotatorClient("127.0.0.1", fake.port, timeout_s=TIMEOUT_S)
    c.connect()
    yield c
    c.close()


def test_position_round_trip(fake, client):
    assert client.get_position() == (10.0, 20.0)
    assert client.set_position(-120.5, 45.25) == "P -120.50 45.25"
    assert client.get_position() == (-120.5, 45.25)  # a cable-wrap angle below 0 passes through
    client.stop()
    assert fake.log == ["p", "P -120.50 45.25", "p", "S"]


def test_refusal_is_an_error_with_its_code(fake, client):
    fake.refuse_p = 1
    with pytest.raises(RotatorRefused) as info:
        client.set_position(30, 40)
    assert info.value.code == -1 and "RPRT -1" in str(info.value)
    client.set_position(30, 40)  # the connection is still good
    assert client.get_position() == (30.0, 40.0)


def test_closed_connection_is_lost_and_reconnect_works(fake, client):
    fake.drop_after = 0
    with pytest.raises(RotatorLost, match="closed the connection"):
        client.get_position()
    client.connect()
    assert client.get_position() == (10.0, 20.0)
    assert fake.connections == 2


def test_silent_daemon_times_out(fake, client):
    fake.silent = True
    with pytest.raises(RotatorLost, match="no answer"):
        client.get_position()


def test_nonsense_answer_is_lost(fake, client):
    fake.report = (float("nan"), 1.0)
    with pytest.raises(RotatorLost, match="not two finite numbers"):
        client.get_position()


def test_nobody_listening():
    with socket.socket() as s:  # a port that was free a moment ago
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    c = RotatorClient("127.0.0.1", port, timeout_s=TIMEOUT_S)
    with pytest.raises(RotatorLost, match="cannot connect"):
        c.connect()


def test_dead_daemon_refuses_reconnection(fake, client):
    fake.kill()
    with pytest.raises(RotatorLost):
        client.get_position()
    with pytest.raises(RotatorLost, match="cannot connect"):
        client.connect()


@pytest.mark.parametrize("text, expected", [
    ("127.0.0.1:4533", ("127.0.0.1", 4533)),
    ("localhost", ("localhost", DEFAULT_PORT)),
    ("[::1]:4600", ("::1", 4600)),
    (" dish.local:80 ", ("dish.local", 80)),
])
def test_parse_address(text, expected):
    assert parse_address(text) == expected


@pytest.mark.parametrize("text, message", [
    ("", "give the controller"),
    (":4533", "no host"),
    ("host:port", "must be a number"),
    ("host:70000", "must be a number"),
    ("::1:4533", "brackets"),
])
def test_parse_address_errors(text, message):
    with pytest.raises(UserError, match=message) as info:
        parse_address(text)
    assert str(info.value).startswith("--rotator: ")


def test_dry_run_rotator_reports_what_it_would_send():
    seen = []
    dry = DryRunRotator(180.0, 34.93, on_send=seen.append)
    dry.connect()
    assert dry.get_position() == (180.0, 34.93)
    dry.set_position(12.345, 40.0)
    dry.stop()
    assert seen == [position_command(12.345, 40.0), "S"] == ["P 12.35 40.00", "S"]
    assert dry.get_position() == (12.35, 40.0)  # as a controller reports it: two decimals
