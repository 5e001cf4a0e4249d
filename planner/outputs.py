"""Writing output files safely: atomic replace, no clobbering without --force.

A file is written to a temporary name in the target folder and renamed over
the target only when complete, so an interrupted run never leaves a partial
file and an existing file is replaced in one step (POSIX rename). A command
with several outputs writes them with ``write_all``: every file is written in
full under its temporary name first and only then are all renamed into place,
so a failure (a full disk, a read-only folder) leaves none of them behind.
Failures to write are one-line UserErrors naming the file.

The name ``-`` (``STDOUT``) means standard output.

Text cells of CSV outputs go through ``csv_text``: a cell that starts like a
spreadsheet formula gets a leading apostrophe (OWASP, "CSV Injection").
"""
from __future__ import annotations

import errno
import os
import sys
import tempfile
from pathlib import Path

from .errors import UserError

STDOUT = "-"
# A cell starting with one of these is read as a formula by common spreadsheets
# (OWASP "CSV Injection"); TAB and CR are on OWASP's list too.
CSV_FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def is_stdout(path) -> bool:
    """True for the output name ``-``: standard output."""
    return path is not None and str(path) == STDOUT


def check_writable(path: Path, force: bool) -> None:
    """Raise a UserError if ``path`` cannot or should not be written (``-`` always can)."""
    if is_stdout(path):
        return
    path = Path(path)
    if path.is_dir():
        raise UserError(f"{path}: is a folder, not a file")
    if path.exists() and not force:
        raise UserError(f"{path}: already exists (use --force to replace it)")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise UserError(f"{path}: folder {folder} does not exist")
    if not os.access(folder, os.W_OK):
        raise UserError(f"{path}: folder {folder} is not writable")


def write_atomic(path: Path, data: bytes | str, force: bool = False) -> Path:
    """Write ``data`` to ``path`` atomically (``-``: standard output); text is UTF-8 encoded."""
    return write_all([(path, data)], force)[0]


def write_all(items, force: bool = False) -> list[Path]:
    """Write several outputs, each ``(path, data)``, all or none (module doc).

    Files are staged under temporary names and renamed into place only when
    every one is complete; ``-`` goes to standard output after the files.
    """
    items = [(Path(path) if not is_stdout(path) else STDOUT, data) for path, data in items]
    files = [(path, data) for path, data in items if path != STDOUT]
    for path, _ in files:
        check_writable(path, force)
    staged: list[tuple[str, Path]] = []
    current = None
    try:
        for path, data in files:
            current = path
            staged.append((_stage(path, data), path))
        while staged:
            tmp_name, current = staged[0]
            os.replace(tmp_name, current)
            staged.pop(0)
    except OSError as exc:
        raise UserError(write_problem(current, exc)) from None
    finally:
        for tmp_name, _ in staged:
            _unlink(tmp_name)
    for path, data in items:
        if path == STDOUT:
            write_stdout(data)
    return [path for path, _ in items]


def _stage(path: Path, data: bytes | str) -> str:
    """``data`` written in full and synced to a temporary file beside ``path``; its name."""
    payload = data.encode("utf-8") if isinstance(data, str) else data
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=folder)
    try:
        try:
            view = memoryview(payload)
            while view:
                view = view[os.write(fd, view):]
            os.fsync(fd)
        finally:
            os.close(fd)
        os.chmod(tmp_name, 0o644)
    except BaseException:
        _unlink(tmp_name)
        raise
    return tmp_name


def _unlink(name: str) -> None:
    try:
        os.unlink(name)
    except FileNotFoundError:
        pass


def write_problem(path, exc: OSError) -> str:
    """One line on why ``path`` could not be written."""
    if exc.errno in (errno.ENOSPC, getattr(errno, "EDQUOT", errno.ENOSPC)):
        why = "the disk is full (no space left on the device)"
    elif exc.errno == errno.EROFS:
        why = "the file system is read-only"
    elif exc.errno in (errno.EACCES, errno.EPERM):
        why = "permission denied"
    else:
        why = exc.strerror or str(exc)
    return f"{path}: cannot write the file: {why}; nothing was written"


def write_stdout(data: bytes | str) -> None:
    """``data`` to standard output: text as it is, bytes unchanged (e.g. an .ics or .png)."""
    if isinstance(data, str):
        sys.stdout.write(data)
        sys.stdout.flush()
    else:
        sys.stdout.flush()
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()


def csv_text(text: str) -> str:
    """A CSV text cell that no spreadsheet runs as a formula: ``'`` before a leading
    ``= + - @``, TAB or CR; a text that is just a number (``-2.5``) stays as it is.

    An apostrophe already guarding such a start gets one more, so ``csv_untext``
    gives back exactly the text.
    """
    if text.lstrip("'")[:1] in CSV_FORMULA_STARTS and not _plain_number(text):
        return "'" + text
    return text


def csv_untext(cell: str) -> str:
    """The text a ``csv_text`` cell holds (one guarding apostrophe removed)."""
    if cell[:1] == "'" and cell.lstrip("'")[:1] in CSV_FORMULA_STARTS and cell.lstrip("'"):
        return cell[1:]
    return cell


def _plain_number(text: str) -> bool:
    if text != text.strip() or "_" in text:
        return False
    try:
        float(text)
    except ValueError:
        return False
    return True
