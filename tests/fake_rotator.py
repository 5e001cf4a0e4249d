"""A small rotctld look-alike for the tests: 127.0.0.1 only, and it misbehaves on cue.

It speaks the commands hiplan sends (``P``, ``p``, ``S``, ``q``), keeps a log of
them, and moves its dish toward the last commanded position at ``rate_deg_s``
per axis in real time (infinite: at once). Faults, set as attributes at any time:

* ``refuse_p``: answer the next that many ``P`` commands with ``RPRT -1``;
* ``drop_after``: close the connection after that many more commands (once);
* ``kill()``: the daemon dies (the connection closes, new ones are refused);
* ``frozen``: accept ``P`` but never move;
* ``stall_after_deg``: on the next move, stop after that many degrees (once);
* ``report``: report this (az, el) instead of the real position;
* ``silent``: read commands and never answer.
"""
from __future__ import annotations

import math
import socket
import threading
import time


class FakeRotator:
    def __init__(self, az: float = 0.0, el: float = 0.0, rate_deg_s: float = math.inf):
        self.rate_deg_s = rate_deg_s
        self._from = (float(az), float(el))
        self._to = (float(az), float(el))
        self._since = time.monotonic()
        self._limit_deg = math.inf
        self.log: list[str] = []
        self.refuse_p = 0
        self.drop_after: int | None = None
        self.dead = False  # set by kill()
        self.frozen = False
        self.stall_after_deg: float | None = None
        self.report: tuple[float, float] | None = None
        self.silent = False
        self.connections = 0
        self._lock = threading.Lock()
        self._server = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self._server.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        self._server.bind(("127.0.0.1", 0))
        self._server.listen(4)
        self._server.settimeout(0.1)
        self.port = self._server.getsockname()[1]
        self._stop = threading.Event()
        self._conn: socket.socket | None = None
        self._thread = threading.Thread(target=self._serve, daemon=True)
        self._thread.start()

    @property
    def address(self) -> str:
        return f"127.0.0.1:{self.port}"

    # -- the dish

    def position(self) -> tuple[float, float]:
        with self._lock:
            return self._where()

    def _where(self) -> tuple[float, float]:
        elapsed = time.monotonic() - self._since
        travel = min(self.rate_deg_s * elapsed, self._limit_deg)
        out = []
        for a, b in zip(self._from, self._to):
            step = min(abs(b - a), travel)
            out.append(a + math.copysign(step, b - a))
        return out[0], out[1]

    def move_by_hand(self, az: float, el: float) -> None:
        """Someone moves the dish at the controller."""
        with self._lock:
            self._from = self._to = (float(az), float(el))
            self._since = time.monotonic()

    def _command_to(self, az: float, el: float) -> None:
        with self._lock:
            here = self._where()
            self._from = here
            self._since = time.monotonic()
            if self.frozen:
                self._to = here
                return
            self._to = (az, el)
            self._limit_deg = math.inf
            if self.stall_after_deg is not None:
                self._limit_deg, self.stall_after_deg = self.stall_after_deg, None

    def _halt(self) -> None:
        with self._lock:
            here = self._where()
            self._from = self._to = here
            self._since = time.monotonic()

    # -- the server

    def _serve(self) -> None:
        while not self._stop.is_set():
            if self.dead:
                time.sleep(0.02)
                continue
            try:
                conn, _ = self._server.accept()
            except (socket.timeout, OSError):
                continue
            self.connections += 1
            self._conn = conn
            try:
                self._talk(conn)
            except OSError:
                pass
            finally:
                conn.close()
                self._conn = None

    def _talk(self, conn: socket.socket) -> None:
        conn.settimeout(0.1)
        buffer = b""
        while not self._stop.is_set() and not self.dead:
            try:
                chunk = conn.recv(4096)
            except socket.timeout:
                continue
            if not chunk:
                return
            buffer += chunk
            while b"\n" in buffer:
                line, _, buffer = buffer.partition(b"\n")
                text = line.decode().strip()
                self.log.append(text)
                if self.drop_after is not None:
                    if self.drop_after <= 0:
                        self.drop_after = None
                        return
                    self.drop_after -= 1
                if self.silent:
                    continue
                answer = self._answer(text)
                if answer is None:
                    return
                conn.sendall(answer.encode())

    def _answer(self, text: str) -> str | None:
        if text == "q":
            return None
        if text == "p":
            az, el = self.report if self.report is not None else self.position()
            return f"{az:.2f}\n{el:.2f}\n"
        if text == "S":
            self._halt()
            return "RPRT 0\n"
        if text.startswith("P "):
            if self.refuse_p > 0:
                self.refuse_p -= 1
                return "RPRT -1\n"
            try:
                _, az, el = text.split()
                self._command_to(float(az), float(el))
            except ValueError:
                return "RPRT -1\n"
            return "RPRT 0\n"
        return "RPRT -4\n"  # not implemented, as rotctld answers an unknown command

    def kill(self) -> None:
        """The daemon dies: the connection closes and new ones are refused."""
        self.dead = True
        self._server.close()
        conn = self._conn
        if conn is not None:
            try:
                conn.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass

    def commands(self, prefix: str) -> list[str]:
        return [c for c in self.log if c.startswith(prefix)]

    def close(self) -> None:
        self._stop.set()
        conn = self._conn
        if conn is not None:
            try:
                conn.close()
            except OSError:
                pass
        self._server.close()
        self._thread.join(2.0)
