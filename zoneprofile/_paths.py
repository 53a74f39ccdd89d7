"""Paths given by users: shown safely, and opened only when they are regular files.

A path from a command line or a campaign file may be hostile or simply odd: a
FIFO or a device (reading would block forever or never end), a symbolic-link
loop, a NUL byte, a name longer than the file system allows, control
characters that would break a one-line message. :func:`shown` renders any path
for a message; :func:`check_regular_file` refuses everything but a readable
regular file with one plain :class:`InputError`; :func:`read_regular_file`
reads it without ever blocking on a special file.
"""

from __future__ import annotations

import errno
import os
import stat
from pathlib import Path

from zoneprofile._validation import InputError

__all__ = ["shown", "check_regular_file", "read_regular_file", "resolve_path", "reason"]

#: Longest path text shown in a message (longer ones are cut in the middle).
SHOWN_MAX = 120


def shown(path) -> str:
    """``path`` as text for a one-line message: control characters escaped, very long names shortened."""
    text = os.fspath(path) if not isinstance(path, str) else path
    if isinstance(text, bytes):
        text = text.decode("utf-8", "backslashreplace")
    text = "".join(ch if ch.isprintable() else ch.encode("unicode_escape").decode("ascii") for ch in text)
    if len(text) > SHOWN_MAX:
        half = (SHOWN_MAX - 5) // 2
        text = f"{text[:half]}[...]{text[-half:]}"
    return text


_REASONS = {
    errno.ELOOP: "a loop of symbolic links",
    errno.ENAMETOOLONG: "the name is longer than the file system allows",
    errno.ENOENT: "not found; check the path",
    errno.ENOTDIR: "a part of the path is not a folder",
    errno.EACCES: "permission denied",
    errno.EPERM: "operation not permitted",
}


def reason(exc: OSError) -> str:
    """A plain reason for an ``OSError`` met on a path."""
    return _REASONS.get(exc.errno, exc.strerror or str(exc))


def _kind(mode: int) -> str:
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _fail(message: str, path) -> InputError:
    return InputError(message, path=shown(path))


def resolve_path(path, *, what: str = "input file") -> Path:
    """``Path(path).resolve()``, with a NUL byte, a link loop or an overlong name told as bad input."""
    text = os.fspath(path)
    if "\0" in (text if isinstance(text, str) else text.decode("latin-1")):
        raise _fail(f"{what}: the path contains a NUL character", path)
    try:
        return Path(path).resolve()
    except RuntimeError:  # Python < 3.13 tells a link loop this way
        raise _fail(f"{what}: {_REASONS[errno.ELOOP]}", path) from None
    except OSError as exc:
        reason = _REASONS.get(exc.errno, exc.strerror or str(exc))
        raise _fail(f"{what}: {reason}", path) from None


def check_regular_file(path, *, what: str = "input file", allow_empty: bool = False) -> os.stat_result:
    """Stat ``path`` and refuse anything but an existing regular file (one line, exit code 2)."""
    text = os.fspath(path)
    if "\0" in (text if isinstance(text, str) else text.decode("latin-1")):
        raise _fail(f"{what}: the path contains a NUL character", path)
    try:
        st = os.stat(path)
    except OSError as exc:
        reason = _REASONS.get(exc.errno, exc.strerror or str(exc))
        raise _fail(f"{what}: {reason}", path) from None
    except ValueError as exc:  # embedded NUL in bytes paths and the like
        raise _fail(f"{what}: unusable path ({exc})", path) from None
    if stat.S_ISDIR(st.st_mode):
        raise _fail(f"{what} is a folder, expected a file", path)
    if not stat.S_ISREG(st.st_mode):
        raise _fail(f"{what} is {_kind(st.st_mode)}, not a regular file; give a file", path)
    if st.st_size == 0 and not allow_empty:
        raise _fail(f"{what} is empty", path)
    return st


def read_regular_file(path, *, what: str = "input file", max_bytes: int | None = None) -> bytes:
    """The bytes of a regular file; never blocks on a FIFO swapped in after the check."""
    check_regular_file(path, what=what)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(path, flags)
    except OSError as exc:
        reason = _REASONS.get(exc.errno, exc.strerror or str(exc))
        raise _fail(f"{what}: {reason}", path) from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise _fail(f"{what} is {_kind(st.st_mode)}, not a regular file; give a file", path)
        if max_bytes is not None and st.st_size > max_bytes:
            raise _fail(f"{what} is {st.st_size / 1e6:.0f} MB, more than the {max_bytes / 1e6:.0f} MB accepted",
                        path)
        with os.fdopen(fd, "rb", closefd=True) as fh:
            fd = None
            data = fh.read(max_bytes + 1 if max_bytes is not None else -1)
    finally:
        if fd is not None:
            os.close(fd)
    if max_bytes is not None and len(data) > max_bytes:
        raise _fail(f"{what} is more than the {max_bytes / 1e6:.0f} MB accepted", path)
    return data
