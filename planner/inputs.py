"""Reading what a user hands hiplan: input files within limits, and text free of control characters.

Files (site TOML, availability windows, target lists, observation logs, plans)
are read through ``read_input``: only regular files (a device such as
/dev/zero, a FIFO or a socket is refused before any byte is read, so nothing
hangs), at most ``limit_bytes`` (``MAX_SMALL_FILE_BYTES`` for site, windows and
target files; logs and plans keep their own 50 MB), never written to; ``open_input``
makes the same checks and hands over the open file, for FITS recordings read in
place rather than copied into memory. Text
files are UTF-8; ``decode_text`` drops a leading byte-order mark, which some
editors write.

Text that hiplan echoes into its outputs (site and target names, window
rules, plan fields that go into a calendar) must not carry control characters:
a carriage return or line feed in a name would end a line of an iCalendar
file and start a forged one, and an escape character would drive the
terminal. ``control_character`` finds them: the C0 controls U+0000-U+001F,
DEL U+007F, the C1 controls U+0080-U+009F (NEL U+0085 among them) and the
Unicode line and paragraph separators U+2028 and U+2029; TAB is allowed where
whitespace is.
"""
from __future__ import annotations

import os
import re
import stat

from .errors import UserError

MAX_SMALL_FILE_BYTES = 10_000_000  # "10 MB" (decimal): site, windows and target files

_CONTROL = re.compile("[\x00-\x08\x0a-\x1f\x7f-\x9f\u2028\u2029]")
_CONTROL_OR_TAB = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")
_NAMES = {0x00: "NUL", 0x09: "tab", 0x0A: "line feed", 0x0B: "vertical tab", 0x0C: "form feed",
          0x0D: "carriage return", 0x1B: "escape", 0x7F: "delete", 0x85: "next line",
          0x2028: "line separator", 0x2029: "paragraph separator"}


def _kind(mode: int) -> str | None:
    """What a non-regular file is, in words (None for a regular file)."""
    if stat.S_ISREG(mode):
        return None
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a pipe (FIFO)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _article(what: str) -> str:
    return f"an {what}" if what[:1] in "aeiou" else f"a {what}"


def open_input(path, what: str, limit_bytes: int, where: str | None = None):
    """An input file opened for binary reading, after the checks of ``read_input``.

    For large inputs a reader pages through itself (a FITS table read column by column):
    only regular files, at most ``limit_bytes``; the caller closes the handle.
    """
    src = str(path) if where is None else where
    try:
        # O_NONBLOCK: opening a FIFO with no writer must not wait; a regular file ignores it.
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except FileNotFoundError:
        raise UserError(f"{src}: {what} not found") from None
    except IsADirectoryError:
        raise UserError(f"{src}: cannot read {what}: it is a folder") from None
    except (OSError, ValueError) as exc:  # ValueError: a NUL in the name
        raise UserError(f"{src}: cannot read {what} ({getattr(exc, 'strerror', None) or exc})") from None
    try:
        info = os.fstat(fd)
        kind = _kind(info.st_mode)
        if kind is not None:
            raise UserError(f"{src}: cannot read {what}: it is {kind}, not a regular file")
        if info.st_size > limit_bytes:
            raise UserError(_too_big(src, info.st_size, limit_bytes, what))
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def read_input(path, what: str, limit_bytes: int, where: str | None = None) -> bytes:
    """The bytes of an input file; a one-line UserError for every problem.

    ``what`` names the file kind in messages ("site file"); ``where`` is the
    message prefix (default the path; a log says ``path:1``). Non-regular files
    are refused without reading; a file larger than ``limit_bytes`` is refused,
    also one that grows past it while being read.
    """
    src = str(path) if where is None else where
    with open_input(path, what, limit_bytes, where) as handle:
        try:
            data = handle.read(limit_bytes + 1)  # one byte more tells a file that grew
        except OSError as exc:
            raise UserError(f"{src}: cannot read {what} ({exc.strerror or exc})") from None
    if len(data) > limit_bytes:
        raise UserError(_too_big(src, len(data), limit_bytes, what))
    return data


def _too_big(src: str, size: int, limit: int, what: str) -> str:
    return (f"{src}: file is {size / 1e6:.1f} MB, larger than the {limit / 1e6:g} MB limit "
            f"for {_article(what)}")


def decode_text(data: bytes, src: str, what: str) -> str:
    """UTF-8 text of ``data`` without a leading byte-order mark; UserError naming the line."""
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise UserError(f"{src}: cannot read {what}: not UTF-8 text (byte 0x{data[exc.start]:02X} "
                        f"on line {line}); save it as UTF-8") from None


def read_input_text(path, what: str, limit_bytes: int | None = None) -> str:
    """``read_input`` then ``decode_text``; the limit defaults to ``MAX_SMALL_FILE_BYTES``."""
    limit = MAX_SMALL_FILE_BYTES if limit_bytes is None else limit_bytes
    return decode_text(read_input(path, what, limit), str(path), what)


def control_character(text: str, allow_tab: bool = True) -> str | None:
    """The first control character in ``text`` (see the module doc), or None."""
    match = (_CONTROL if allow_tab else _CONTROL_OR_TAB).search(text)
    return match.group() if match else None


def describe_character(ch: str) -> str:
    """'U+000D (carriage return)'."""
    code = ord(ch)
    name = _NAMES.get(code, "control character")
    return f"U+{code:04X} ({name})"


def check_plain(text: str, where: str, field: str, allow_tab: bool = True) -> str:
    """``text`` unchanged, or UserError "{where}: {field} contains a control character ..."."""
    ch = control_character(text, allow_tab)
    if ch is not None:
        raise UserError(f"{where}: {field} contains a control character, {describe_character(ch)}; "
                        "write it on one line without control characters")
    return text
