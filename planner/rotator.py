"""Talking to a rotator controller over the network: the hamlib rotator daemon's text protocol.

``rotctld`` (Debian package ``libhamlib-utils``) serves a rotator on a TCP port
(4533 by default). One command per line, plain ASCII:

``P AZ EL``  set the position (degrees); the answer is ``RPRT 0`` on success and
             ``RPRT -n`` (a negative hamlib error code) when the controller refuses
``p``        get the position: two lines, azimuth then elevation (degrees)
``S``        stop both axes; answered with ``RPRT``
``q``        close the connection (no answer)

Azimuths are sent and read as the drive (encoder) angle, which on a cable wrap
may be below 0 or above 360; a controller is expected to report the same wrap
it was given. ``K`` (park at the controller's own park position) is never sent:
that position is not known here and cannot be checked against the Sun, so
parking is a ``P`` to the site's park position.

Every operation has a timeout. Failures are ``RotatorRefused`` (the controller
answered with a negative code) or ``RotatorLost`` (no connection, a closed or
reset connection, silence past the timeout, or an answer that does not parse):
the executor (``planner.drive``) decides what to do about them.

``DryRunRotator`` has the same methods, sends nothing and is wherever it was last
told to go; it reports each line it would have sent.
"""
from __future__ import annotations

import socket

from .errors import UserError

DEFAULT_PORT = 4533
# Seconds to wait for a connection or an answer; a rotctld answers in milliseconds
# (a dozen on a serial link), so five seconds of silence means it is gone. Our choice.
ANSWER_TIMEOUT_S = 5.0
_MAX_LINE_BYTES = 256  # an answer is a number or "RPRT n"; anything longer is not rotctld


class RotatorError(Exception):
    """Something went wrong talking to the controller."""


class RotatorRefused(RotatorError):
    """The controller answered a command with a negative ``RPRT`` code."""

    def __init__(self, command: str, code: int):
        super().__init__(f"the controller refused '{command}' (RPRT {code})")
        self.command = command
        self.code = code


class RotatorLost(RotatorError):
    """No usable connection: refused, closed, reset, silent or talking nonsense."""


def parse_address(text: str, option: str = "--rotator") -> tuple[str, int]:
    """(host, port) from ``HOST:PORT`` (``[v6 address]:PORT`` for IPv6; the port may be left out)."""
    body = text.strip()
    if not body:
        raise UserError(f"{option}: give the controller as HOST:PORT, e.g. 127.0.0.1:4533")
    if body.startswith("["):
        host, sep, rest = body[1:].partition("]")
        if not sep or (rest and not rest.startswith(":")):
            raise UserError(f"{option}: '{text}' is not HOST:PORT (IPv6 as [::1]:4533)")
        port_text = rest[1:] if rest else ""
    elif body.count(":") == 1:
        host, port_text = body.split(":")
    elif ":" in body:
        raise UserError(f"{option}: '{text}': write an IPv6 address in brackets, e.g. [::1]:4533")
    else:
        host, port_text = body, ""
    if not host:
        raise UserError(f"{option}: '{text}' has no host; e.g. 127.0.0.1:{DEFAULT_PORT}")
    if not port_text:
        return host, DEFAULT_PORT
    if not port_text.isdigit() or not 0 < int(port_text) < 65536:
        raise UserError(f"{option}: '{text}': the port must be a number from 1 to 65535")
    return host, int(port_text)


def _parse_position(lines: list[str]) -> tuple[float, float]:
    try:
        az, el = (float(line) for line in lines)
    except ValueError:
        raise RotatorLost(f"the position answer {lines!r} is not two numbers") from None
    if az != az or el != el or abs(az) == float("inf") or abs(el) == float("inf"):
        raise RotatorLost(f"the position answer {lines!r} is not two finite numbers")
    return az, el


class RotatorClient:
    """A connection to ``rotctld`` at (host, port); every call bounded by ``timeout_s``."""

    def __init__(self, host: str, port: int, timeout_s: float = ANSWER_TIMEOUT_S):
        self.host, self.port, self.timeout_s = host, port, timeout_s
        self._sock: socket.socket | None = None
        self._buffer = b""

    @property
    def address(self) -> str:
        return f"[{self.host}]:{self.port}" if ":" in self.host else f"{self.host}:{self.port}"

    def connect(self) -> None:
        self.close()
        try:
            self._sock = socket.create_connection((self.host, self.port), timeout=self.timeout_s)
        except socket.timeout:
            raise RotatorLost(f"no answer from {self.address} within {self.timeout_s:g} s") from None
        except OSError as exc:
            raise RotatorLost(f"cannot connect to {self.address} "
                              f"({exc.strerror or exc.__class__.__name__})") from None
        self._sock.settimeout(self.timeout_s)
        self._buffer = b""

    def close(self) -> None:
        """Say goodbye (``q``) if still connected, and close; never raises."""
        sock, self._sock = self._sock, None
        if sock is None:
            return
        try:
            sock.sendall(b"q\n")
        except OSError:
            pass
        try:
            sock.close()
        except OSError:
            pass

    def _send(self, line: str) -> None:
        if self._sock is None:
            raise RotatorLost(f"not connected to {self.address}")
        try:
            self._sock.sendall(line.encode("ascii") + b"\n")
        except socket.timeout:
            self._drop()
            raise RotatorLost(f"{self.address} stopped reading commands") from None
        except OSError as exc:
            self._drop()
            raise RotatorLost(f"connection to {self.address} lost "
                              f"({exc.strerror or exc.__class__.__name__})") from None

    def _read_line(self) -> str:
        while b"\n" not in self._buffer:
            if len(self._buffer) > _MAX_LINE_BYTES:
                self._drop()
                raise RotatorLost(f"{self.address} sent an over-long answer; is it rotctld?")
            try:
                chunk = self._sock.recv(4096)
            except socket.timeout:
                self._drop()
                raise RotatorLost(f"no answer from {self.address} within "
                                  f"{self.timeout_s:g} s") from None
            except OSError as exc:
                self._drop()
                raise RotatorLost(f"connection to {self.address} lost "
                                  f"({exc.strerror or exc.__class__.__name__})") from None
            if not chunk:
                self._drop()
                raise RotatorLost(f"{self.address} closed the connection")
            self._buffer += chunk
        line, _, self._buffer = self._buffer.partition(b"\n")
        return line.decode("ascii", "replace").strip()

    def _drop(self) -> None:
        sock, self._sock = self._sock, None
        if sock is not None:
            try:
                sock.close()
            except OSError:
                pass

    def _report(self, command: str) -> None:
        """Send a command answered by ``RPRT n``; raise unless n is 0."""
        self._send(command)
        answer = self._read_line()
        if not answer.startswith("RPRT"):
            self._drop()
            raise RotatorLost(f"unexpected answer {answer!r} to '{command}'")
        try:
            code = int(answer[4:])
        except ValueError:
            self._drop()
            raise RotatorLost(f"unexpected answer {answer!r} to '{command}'") from None
        if code != 0:
            raise RotatorRefused(command, code)

    def set_position(self, az_deg: float, el_deg: float) -> str:
        """Command a position (drive azimuth, elevation); returns the line sent."""
        command = position_command(az_deg, el_deg)
        self._report(command)
        return command

    def get_position(self) -> tuple[float, float]:
        """(drive azimuth, elevation) as the controller reports them."""
        self._send("p")
        first = self._read_line()
        if first.startswith("RPRT"):
            try:
                code = int(first[4:])
            except ValueError:
                code = -1
            raise RotatorRefused("p", code)
        return _parse_position([first, self._read_line()])

    def stop(self) -> None:
        self._report("S")


def position_command(az_deg: float, el_deg: float) -> str:
    """The ``P`` line for a position; two decimals, as rotctld reports positions."""
    return f"P {az_deg:.2f} {el_deg:.2f}"


class DryRunRotator:
    """Sends nothing: reports each line it would send (``on_send``) and is where it was told."""

    address = "dry run"

    def __init__(self, az_deg: float, el_deg: float, on_send=None):
        self.position = (float(az_deg), float(el_deg))
        self.sent: list[str] = []
        self._on_send = on_send

    def _record(self, line: str) -> None:
        self.sent.append(line)
        if self._on_send is not None:
            self._on_send(line)

    def connect(self) -> None:
        pass

    def close(self) -> None:
        pass

    def set_position(self, az_deg: float, el_deg: float) -> str:
        command = position_command(az_deg, el_deg)
        self._record(command)
        # As a controller would report it after arriving (two decimals).
        self.position = (round(float(az_deg), 2), round(float(el_deg), 2))
        return command

    def get_position(self) -> tuple[float, float]:
        return self.position

    def stop(self) -> None:
        self._record("S")
