"""Output folders of whole runs: checked before computing, locked while written, replaced only when ours.

A campaign (``zoneprofile run``, ``zoneprofile demo``) writes a folder of
results. :class:`OutputFolder` makes that safe against the things that happen
on a shared laptop or cluster node:

* the folder is checked *before* anything is computed: it must not exist
  (unless ``force``), must not be a file, FIFO or device, and its parent must be
  writable (proved by creating the lock file there);
* a lock file beside the folder (``.NAME.lock``: holder pid, host and start
  time) makes a second run into the same folder refuse at once; a lock whose
  holder is gone (killed) is recognised as stale and taken over;
* the new folder is built under a temporary name beside it (``.NAME.XXXXXXXX``)
  and moved into place at the end; temporary folders left by killed runs are
  removed by the next run into the same folder;
* ``force`` replaces only a folder that carries the marker file
  :data:`MARKER` written into every output folder, never an arbitrary folder.

Environment faults while writing (read-only file system, full disk, no
permission) become :class:`InputError` naming the folder (exit code 2).
See docs/design.md (command-line contract) for the rules.
"""

from __future__ import annotations

import errno
import json
import os
import re
import shutil
import socket
import stat
import tempfile
import time
from datetime import datetime, timezone
from pathlib import Path

from zoneprofile import __version__
from zoneprofile._output import replace_folder
from zoneprofile._paths import reason, shown
from zoneprofile._validation import InputError

__all__ = ["OutputFolder", "MARKER", "environment_error", "ENVIRONMENT_ERRNOS"]

#: File written into every output folder; ``--force`` replaces only folders holding it.
MARKER = ".zoneprofile-output"

#: errno values that are the machine's fault, not the program's: told as one line, exit code 2.
ENVIRONMENT_ERRNOS = {
    errno.ENOSPC: "no space left on the device",
    errno.EROFS: "the file system is read-only",
    errno.EACCES: "permission denied",
    errno.EPERM: "operation not permitted",
    getattr(errno, "EDQUOT", -1): "disk quota exceeded",
    errno.EIO: "input/output error on the device",
}

_TMP_NAME = re.compile(r"^\.(?P<name>.+)\.(?P<tag>[a-z0-9_]{8}|old)$")


def environment_error(exc: OSError, what: str, path) -> InputError | None:
    """An :class:`InputError` telling an environment fault in one line, or None for other errors."""
    reason = ENVIRONMENT_ERRNOS.get(exc.errno)
    if reason is None:
        return None
    return InputError(f"cannot write {what}: {reason}; free space or choose a writable --out", path=shown(path))


def _process_start(pid: int) -> str | None:
    """Start time of process ``pid`` as the kernel tells it (Linux), to tell a reused pid apart."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return None
    # the command name (field 2) is in parentheses and may hold spaces: split after the last ')'
    fields = text[text.rfind(")") + 2:].split()
    return fields[19] if len(fields) > 19 else None  # field 22 of the full line: starttime


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True  # exists, owned by someone else
    except OSError:
        return False
    try:  # a zombie (killed, not yet reaped) holds its pid but is gone
        state = Path(f"/proc/{pid}/stat").read_text()
        if state[state.rfind(")") + 2:].startswith("Z"):
            return False
    except OSError:
        pass
    return True


class OutputFolder:
    """Check, lock, build and move into place one output folder.

    ``OutputFolder(out, force=...)`` checks the folder at once (so call it
    before computing); ``with folder as tmp:`` yields the temporary folder to
    fill; on success it replaces ``out``. Call :meth:`release` (or use the
    ``with`` block) to drop the lock.
    """

    def __init__(self, path, *, force: bool = False, command: str = "run"):
        self.path = Path(path)
        self.force = bool(force)
        self.command = command
        self.tmp: Path | None = None
        self.lock: Path | None = None
        self.notes: list[str] = []
        self._check()
        self._acquire()
        try:
            self._clean_leftovers()
        except BaseException:
            self.release()
            raise

    # -- checks -----------------------------------------------------------------
    def _check(self) -> None:
        p = self.path
        if not p.name or p.name in (".", ".."):
            raise InputError("give a folder name for --out, not '.' or '..'", path=shown(p))
        try:
            st = os.stat(p)
        except FileNotFoundError:
            st = None
        except OSError as exc:  # a symlink loop, a name too long, ...
            raise InputError(f"cannot use this output path: {reason(exc)}", path=shown(p)) from None
        except ValueError:  # a NUL byte
            raise InputError("cannot use this output path: it contains a NUL character", path=shown(p)) from None
        if st is not None:
            if not stat.S_ISDIR(st.st_mode):
                kind = "a FIFO" if stat.S_ISFIFO(st.st_mode) else (
                    "a device" if stat.S_ISCHR(st.st_mode) or stat.S_ISBLK(st.st_mode) else (
                        "a socket" if stat.S_ISSOCK(st.st_mode) else "a file"))
                raise InputError(f"output exists and is {kind}, not a folder; choose another --out", path=shown(p))
            if not self.force:
                raise InputError("output folder exists; pass --force to overwrite it", path=shown(p))
            if not (p / MARKER).is_file():
                raise InputError(f"output folder exists and holds no earlier zoneprofile output (no {MARKER} "
                                 "file); --force replaces only such folders: remove it yourself or choose "
                                 "another --out", path=shown(p))
        parent = self._parent()
        # the nearest existing ancestor must be a writable folder (missing ones are created)
        probe = parent
        while not probe.exists() and probe != probe.parent:
            probe = probe.parent
        if not probe.is_dir():
            raise InputError(f"cannot create the output folder: {probe} is not a folder", path=shown(p))
        if not os.access(probe, os.W_OK | os.X_OK):
            raise InputError(f"cannot write the output folder: {probe} is not writable; choose a writable --out",
                             path=shown(p))

    def _parent(self) -> Path:
        return (self.path.parent if str(self.path.parent) else Path(".")).absolute()

    # -- lock -------------------------------------------------------------------
    def _lock_path(self) -> Path:
        return self._parent() / f".{self.path.name}.lock"

    def _acquire(self) -> None:
        parent = self._parent()
        try:
            parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise environment_error(exc, "the output folder", self.path) or InputError(
                f"cannot create the output folder's parent: {exc.strerror or exc}", path=shown(self.path)) from None
        lock = self._lock_path()
        holder = {"pid": os.getpid(), "host": socket.gethostname(), "process_start": _process_start(os.getpid()),
                  "started_utc": datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"),
                  "command": self.command}
        for _ in range(3):
            try:
                fd = os.open(lock, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
            except FileExistsError:
                other = self._read_lock(lock)
                if other is not None and self._held(other):
                    raise InputError(
                        f"another zoneprofile run is writing this output folder (pid {other.get('pid')}, "
                        f"started {other.get('started_utc')}); wait for it to finish or choose another --out",
                        path=shown(self.path)) from None
                if other is None and time.time() - _mtime(lock) < 5.0:
                    # a lock being written this very moment by another run: theirs
                    raise InputError("another zoneprofile run is starting in this output folder; "
                                     "wait for it to finish or choose another --out", path=shown(self.path)) from None
                try:  # stale: its holder is gone
                    os.unlink(lock)
                except FileNotFoundError:
                    pass
                if other is not None:
                    self.notes.append(f"removed a stale lock of a run that was stopped (pid {other.get('pid')}, "
                                      f"started {other.get('started_utc')})")
                continue
            except OSError as exc:
                raise environment_error(exc, "the output folder", self.path) or InputError(
                    f"cannot write beside the output folder: {exc.strerror or exc}", path=shown(self.path)) from None
            try:
                with os.fdopen(fd, "w", encoding="utf-8") as fh:
                    fh.write(json.dumps(holder) + "\n")
            except OSError as exc:
                os.unlink(lock)
                raise environment_error(exc, "the output folder", self.path) or InputError(
                    f"cannot write beside the output folder: {exc.strerror or exc}", path=shown(self.path)) from None
            self.lock = lock
            return
        raise InputError("cannot take the lock of the output folder; another run keeps taking it",
                         path=shown(self.path))

    @staticmethod
    def _read_lock(lock: Path) -> dict | None:
        try:
            data = json.loads(lock.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        return data if isinstance(data, dict) and isinstance(data.get("pid"), int) else None

    @staticmethod
    def _held(holder: dict) -> bool:
        """Whether the run that wrote ``holder`` still runs (same host, pid alive with the same start time)."""
        if holder.get("host") != socket.gethostname():
            return True  # another machine's run on a shared disk: cannot tell, so respect it
        pid = holder["pid"]
        if not _alive(pid):
            return False
        start = holder.get("process_start")
        now = _process_start(pid)
        return start is None or now is None or start == now

    def release(self) -> None:
        """Drop the lock (idempotent)."""
        if self.lock is not None:
            try:
                os.unlink(self.lock)
            except OSError:
                pass
            self.lock = None

    # -- leftovers ----------------------------------------------------------------
    def _clean_leftovers(self) -> None:
        """Remove temporary folders of earlier, killed runs into this folder (we hold the lock)."""
        parent = self._parent()
        removed = 0
        try:
            entries = list(os.scandir(parent))
        except OSError:
            return
        for entry in entries:
            m = _TMP_NAME.match(entry.name)
            if not m or m.group("name") != self.path.name:
                continue
            try:
                if not entry.is_dir(follow_symlinks=False):
                    continue
            except OSError:
                continue
            folder = Path(entry.path)
            if m.group("tag") != "old" and not (folder / MARKER).is_file():
                continue  # not one of ours
            shutil.rmtree(folder, ignore_errors=True)
            removed += 1
        if removed:
            self.notes.append(f"removed {removed} unfinished output folder(s) left by an interrupted run")

    # -- building ----------------------------------------------------------------
    def __enter__(self) -> Path:
        if self.lock is None:
            raise RuntimeError("output folder already released")
        try:
            self.tmp = Path(tempfile.mkdtemp(prefix=f".{self.path.name}.", dir=self._parent())).absolute()
            os.chmod(self.tmp, 0o777 & ~_umask())
            self._write_marker(self.tmp)
        except OSError as exc:
            self._discard()
            self.release()
            raise environment_error(exc, "the output folder", self.path) or exc
        return self.tmp

    def _write_marker(self, folder: Path) -> None:
        data = {"software": "zoneprofile", "version": __version__, "command": self.command,
                "created_utc": datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")}
        (folder / MARKER).write_text(json.dumps(data) + "\n", encoding="utf-8")

    def _discard(self) -> None:
        if self.tmp is not None:
            shutil.rmtree(self.tmp, ignore_errors=True)

    def __exit__(self, exc_type, exc, tb):
        try:
            if exc_type is not None:
                self._discard()
                if isinstance(exc, OSError):
                    told = environment_error(exc, "the output folder", self.path)
                    if told is not None:
                        raise told from None
                return False
            try:
                self._swap()
            except OSError as err:
                self._discard()
                told = environment_error(err, "the output folder", self.path)
                if told is not None:
                    raise told from None
                raise
            return False
        finally:
            self.release()

    def _swap(self) -> None:
        if self.path.exists():
            if not self.force:
                raise InputError("output folder appeared during the run; it was left alone (pass --force to "
                                 "replace it)", path=shown(self.path))
            if not (self.path / MARKER).is_file():  # appeared while we computed (the lock is ours)
                raise InputError("output folder appeared during the run and holds no earlier zoneprofile "
                                 "output; it was left alone and nothing was written", path=shown(self.path))
        replace_folder(self.tmp, self.path)


def _mtime(path: Path) -> float:
    try:
        return path.stat().st_mtime
    except OSError:
        return 0.0


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask
