"""The recording hook: a command run for each block while the dish is on it.

``--record 'COMMAND ...'`` is split into words as a POSIX shell would split
them (quotes group, nothing else is interpreted: no pipes, no variables, no
globbing) and run directly, without a shell. Words may hold placeholders,
filled in per block:

``{name}``       the block's name (G300+0, a reference's name, or a drift recording's)
``{l_deg}``, ``{b_deg}``  galactic position observed (degrees)
``{start_utc}``, ``{end_utc}``  the interval to record (ISO 8601 UTC)
``{freq_mhz}``   the receiver centre frequency of the plan's tuning (MHz)
``{seconds}``    how long to record, in whole seconds of wall-clock time (under a
                 simulated clock the plan's length divided by the speed, so a
                 rehearsal recorder finishes in time)

Numbers accept Python format specifications (``{l_deg:.1f}``); ``{{`` and
``}}`` are literal braces. The command should record and then exit, 0 for
success, printing the name of each file it wrote on a line of its own on
standard output: lines that name an existing file are journaled as the
recording's files. Its output goes to temporary files (never a pipe that could
fill up and stall it); the command runs in the working directory of hiplan.
"""
from __future__ import annotations

import math
import os
import shlex
import string
import subprocess
import tempfile
from dataclasses import dataclass

from .errors import UserError

PLACEHOLDERS = ("name", "l_deg", "b_deg", "start_utc", "end_utc", "freq_mhz", "seconds")
_SAMPLE = {"name": "G300+0", "l_deg": 300.0, "b_deg": 0.0, "start_utc": "2027-03-01T10:00:00Z",
           "end_utc": "2027-03-01T10:15:00Z", "freq_mhz": 1420.405752, "seconds": 900}
_TAIL_CHARS = 300  # how much of a failing command's error output is journaled


def parse_template(text: str, option: str = "--record") -> tuple[str, ...]:
    """The words of a recording command, checked: placeholders known, format specs valid."""
    try:
        words = tuple(shlex.split(text, comments=False, posix=True))
    except ValueError as exc:
        raise UserError(f"{option}: cannot split '{text}' into words ({exc})") from None
    if not words:
        raise UserError(f"{option}: empty command")
    for word in words:
        try:
            fields = [f for _, f, _, _ in string.Formatter().parse(word) if f is not None]
        except ValueError as exc:
            raise UserError(f"{option}: '{word}': {exc} (write {{{{ and }}}} for literal "
                            "braces)") from None
        for name in fields:
            if name not in PLACEHOLDERS:
                raise UserError(f"{option}: unknown placeholder {{{name}}} in '{word}'; use "
                                + ", ".join("{" + p + "}" for p in PLACEHOLDERS))
        try:
            word.format(**_SAMPLE)
        except (ValueError, TypeError) as exc:
            raise UserError(f"{option}: '{word}': {exc}") from None
    return words


@dataclass(frozen=True)
class RecordingValues:
    """What a recording command is told about its block (see the module docstring)."""

    name: str
    l_deg: float | None
    b_deg: float | None
    start_utc: str
    end_utc: str
    freq_mhz: float | None
    seconds: float

    def as_fields(self) -> dict:
        return {"name": self.name,
                "l_deg": float("nan") if self.l_deg is None else round(self.l_deg, 4),
                "b_deg": float("nan") if self.b_deg is None else round(self.b_deg, 4),
                "start_utc": self.start_utc, "end_utc": self.end_utc,
                "freq_mhz": float("nan") if self.freq_mhz is None else round(self.freq_mhz, 6),
                "seconds": max(1, int(math.floor(self.seconds + 0.5)))}


def command_words(template: tuple[str, ...], values: RecordingValues) -> list[str]:
    """The argument list for one block."""
    fields = values.as_fields()
    return [word.format(**fields) for word in template]


@dataclass(frozen=True)
class RecordingResult:
    """How a recording command ended: exit status (None: could not start, or was stopped)."""

    exit_status: int | None
    files: tuple[str, ...]
    problem: str | None  # None when it exited 0

    @property
    def ok(self) -> bool:
        return self.problem is None


class RecordingProcess:
    """One running recording command; ``finish`` collects it (stopping it after a grace)."""

    def __init__(self, argv: list[str]):
        self.argv = argv
        self._out = tempfile.TemporaryFile()
        self._err = tempfile.TemporaryFile()
        self.start_problem: str | None = None
        try:
            self._proc = subprocess.Popen(argv, stdin=subprocess.DEVNULL, stdout=self._out,
                                          stderr=self._err, close_fds=True)
        except OSError as exc:
            self._proc = None
            self.start_problem = (f"cannot run '{argv[0]}' "
                                  f"({exc.strerror or exc.__class__.__name__})")

    def running(self) -> bool:
        return self._proc is not None and self._proc.poll() is None

    def stop(self) -> None:
        """Ask the command to stop (SIGTERM), then kill it if it has not after 5 s."""
        if not self.running():
            return
        self._proc.terminate()
        try:
            self._proc.wait(5.0)
        except subprocess.TimeoutExpired:
            self._proc.kill()
            self._proc.wait()

    def finish(self, grace_s: float) -> RecordingResult:
        """Wait up to ``grace_s`` for the command to end (stopping it after that)."""
        if self._proc is None:
            self._close()
            return RecordingResult(None, (), self.start_problem)
        stopped = False
        try:
            self._proc.wait(grace_s)
        except subprocess.TimeoutExpired:
            self.stop()
            stopped = True
        status = self._proc.returncode
        out, err = self._read(self._out), self._read(self._err)
        self._close()
        files = tuple(line.strip() for line in out.splitlines()
                      if line.strip() and os.path.isfile(line.strip()))
        if stopped:
            return RecordingResult(None, files, f"still running {grace_s:g} s after the block "
                                                "ended: stopped it")
        if status != 0:
            tail = " ".join(err.split())[-_TAIL_CHARS:]
            what = (f"killed by signal {-status}" if status < 0 else f"exit status {status}")
            return RecordingResult(status, files, what + (f": {tail}" if tail else ""))
        return RecordingResult(0, files, None)

    @staticmethod
    def _read(handle) -> str:
        handle.seek(0)
        return handle.read(1_000_000).decode("utf-8", "replace")

    def _close(self) -> None:
        for handle in (self._out, self._err):
            handle.close()
