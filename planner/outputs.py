"""Writing output files safely: atomic replace, no clobbering without --force.

A file is written to a temporary name in the target folder and renamed over
the target only when complete, so an interrupted run never leaves a partial
file and an existing file is replaced in one step (POSIX rename).
"""
from __future__ import annotations

import os
import tempfile
from pathlib import Path

from .errors import UserError


def check_writable(path: Path, force: bool) -> None:
    """Raise a UserError if ``path`` cannot or should not be written."""
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
    """Write ``data`` to ``path`` atomically; text is UTF-8 encoded."""
    path = Path(path)
    check_writable(path, force)
    payload = data.encode("utf-8") if isinstance(data, str) else data
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp_name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=folder)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(payload)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(tmp_name, 0o644)
        os.replace(tmp_name, path)
    except BaseException:
        try:
            os.unlink(tmp_name)
        except FileNotFoundError:
            pass
        raise
    return path
