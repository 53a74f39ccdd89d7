"""Writing outputs safely: atomically, never over an existing file without ``force``.

Every command checks all its output paths with :func:`check_outputs` *before*
computing, then writes each file with one of the ``write_*`` functions, which
write to a temporary file in the same folder and rename it into place, so a
crash never leaves a half-written output.
"""

from __future__ import annotations

import json
import math
import os
import re
import shutil
import tempfile
from pathlib import Path

import numpy as np

from zoneprofile._validation import InputError

__all__ = [
    "check_outputs",
    "replace_folder",
    "write_bytes",
    "write_text",
    "write_json",
    "write_table",
    "to_jsonable",
    "neutralise_cell",
    "atomic_folder",
]


def check_outputs(*paths, force: bool = False) -> list[Path]:
    """Refuse outputs that exist (unless ``force``) or whose folder is missing."""
    out = []
    for path in paths:
        if path is None:
            continue
        p = Path(path)
        if p.is_dir():  # whatever its name; --force cannot turn a folder into a file
            message = "output is a folder, expected a file name"
            raise InputError(message, path=p)
        if p.exists() and not force:
            message = "output exists; pass --force to overwrite it"
            raise InputError(message, path=p)
        parent = p.parent if str(p.parent) else Path(".")
        if not parent.exists():
            message = "the folder for this output does not exist; create it first"
            raise InputError(message, path=p)
        _probe_writable(parent)
        out.append(p)
    return out


def _probe_writable(folder: Path) -> None:
    """Create and remove a small file in ``folder``, so a read-only folder or file
    system (or a full disk) is found before any work is done, not after."""
    try:
        fd, tmp = tempfile.mkstemp(prefix=".zoneprofile-probe.", dir=folder)
    except OSError as exc:
        import errno

        reason = {errno.EROFS: "read-only file system", errno.ENOSPC: "no space left on the device",
                  errno.EACCES: "permission denied", errno.EPERM: "permission denied",
                  errno.EDQUOT: "disk quota exceeded"}.get(exc.errno, exc.strerror or "permission denied")
        message = f"cannot write in this folder ({reason}); choose another output folder or fix its permissions"
        raise InputError(message, path=folder) from None
    os.close(fd)
    os.unlink(tmp)


def write_bytes(path, data: bytes) -> Path:
    """Write ``data`` to ``path`` atomically (temporary file, then rename)."""
    p = Path(path)
    p.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".tmp", dir=p.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual mode
        os.replace(tmp, p)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError) and exc.filename is None:  # a failed write (full disk): name the output
            raise OSError(exc.errno, exc.strerror, str(p)) from exc
        raise
    return p


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_text(path, text: str) -> Path:
    """Write UTF-8 ``text`` atomically."""
    return write_bytes(path, text.encode("utf-8"))


def to_jsonable(obj):
    """Convert numpy scalars/arrays, Paths and non-finite floats to JSON-safe values.

    NaN and infinities become ``None`` (JSON ``null``) so the file stays valid JSON.
    """
    kind = type(obj)
    if kind is float:
        return obj if math.isfinite(obj) else None
    if kind is str or kind is int or kind is bool or obj is None:
        return obj
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        if len(obj) > 8 and set(map(type, obj)) == {float}:  # the common long case: curves and draws
            return list(obj) if all(map(math.isfinite, obj)) else [v if math.isfinite(v) else None for v in obj]
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        if obj.dtype.kind == "f" and obj.ndim == 1:
            return to_jsonable(obj.astype(float).tolist())
        return [to_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.bool_, bool)):
        return bool(obj)
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        return x if math.isfinite(x) else None
    if isinstance(obj, Path):
        return str(obj)
    return obj


def dumps_readable(obj, indent: int = 2) -> str:
    """JSON text with objects and nested lists indented, and lists of plain values on one line.

    Reads like ``json.dumps(obj, indent=2)`` but keeps a 300-point curve, a
    list of draws or a small object of plain values (``{best, median, ...}``)
    on one line instead of one value per line (a campaign's results.json is
    about a third smaller and a curve reads as one line). ``obj`` must
    already be JSON-plain (see :func:`to_jsonable`).
    """
    one = json.JSONEncoder(ensure_ascii=False, allow_nan=False).encode

    def encode(value, level):
        if isinstance(value, dict):
            if len(value) <= 8 and not any(isinstance(v, (dict, list, tuple)) for v in value.values()):
                return one(value)  # a small record of plain values ({best, median, p2_5, ...}) on one line
            pad = "\n" + " " * (indent * (level + 1))
            body = ",".join(f"{pad}{one(str(k))}: {encode(v, level + 1)}" for k, v in value.items())
            return "{" + body + "\n" + " " * (indent * level) + "}"
        if isinstance(value, (list, tuple)):
            if not any(isinstance(v, (dict, list, tuple)) for v in value):
                return one(list(value))
            pad = "\n" + " " * (indent * (level + 1))
            body = ",".join(f"{pad}{encode(v, level + 1)}" for v in value)
            return "[" + body + "\n" + " " * (indent * level) + "]"
        return one(value)

    return encode(obj, 0)


def write_json(path, obj) -> Path:
    """Write ``obj`` as indented JSON atomically (lists of plain values on one line)."""
    return write_text(path, dumps_readable(to_jsonable(obj)) + "\n")


_FORMULA_START = ("=", "+", "@", "\t", "\r")
#: Control characters (C0, DEL, C1) and the Unicode line and paragraph separators:
#: a CR or LF inside a cell starts a new row for many readers, and a cell after
#: it could start with '='.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029]")
_NAMED_ESCAPES = {"\n": "\\n", "\r": "\\r", "\t": "\\t"}


def escape_control(value: str) -> str:
    """Write every control character of ``value`` as a visible escape (``\\r``, ``\\n``, ``\\x07``)."""
    if not _CONTROL.search(value):
        return value
    return _CONTROL.sub(lambda m: _NAMED_ESCAPES.get(m.group(), f"\\u{ord(m.group()):04x}"), value)


def neutralise_cell(value, *, escape: bool = True):
    """Make a text cell safe to open in a spreadsheet.

    Control characters (a CR or LF that would start a new row, a tab, a NUL)
    are written as visible escapes (``\\r``, ``\\n``, ``\\u0007``), so a cell
    stays one cell on one line; then text starting with ``=``, ``+``, ``@``
    (or ``-`` when it is not a number) is prefixed with a single
    quote so spreadsheet programs do not run it as a formula. Numbers are
    returned unchanged. ``escape=False`` keeps control characters (JSON output,
    which escapes them itself).
    """
    if not isinstance(value, str) or not value:
        return value
    if escape:
        value = escape_control(value)
    if value.startswith(_FORMULA_START):
        return "'" + value
    if value.startswith("-"):
        try:
            float(value)
        except ValueError:
            return "'" + value
    return value


def write_table(path, frame, *, index: bool = False) -> Path:
    """Write a DataFrame as CSV, TSV, XLSX or JSON (by extension), atomically.

    Text cells are neutralised against spreadsheet formula injection.
    """
    import pandas as pd

    p = Path(path)
    ext = p.suffix.lower()
    escape = ext != ".json"
    safe = frame.copy()
    for col in safe.columns:
        if safe[col].dtype == object or pd.api.types.is_string_dtype(safe[col]):
            safe[col] = safe[col].map(lambda v: neutralise_cell(v, escape=escape))
    safe.columns = [neutralise_cell(str(c), escape=escape) for c in safe.columns]
    if ext in (".csv", ".txt", ""):
        data = safe.to_csv(index=index, lineterminator="\n").encode("utf-8")
    elif ext == ".tsv":
        data = safe.to_csv(index=index, sep="\t", lineterminator="\n").encode("utf-8")
    elif ext == ".json":
        data = (safe.to_json(orient="records", indent=2, force_ascii=False) + "\n").encode("utf-8")
    elif ext == ".xlsx":
        import io

        buf = io.BytesIO()
        safe.to_excel(buf, index=index, engine="openpyxl")
        data = buf.getvalue()
    else:
        message = f"unsupported output extension '{ext}'; use .csv, .tsv, .xlsx or .json"
        raise InputError(message, path=p)
    return write_bytes(p, data)


class atomic_folder:
    """Build an output folder under a temporary name, then move it into place.

    ``with atomic_folder(out, force=...) as tmp:`` yields a temporary folder
    beside ``out``; on success it replaces ``out`` (only if ``force`` allowed an
    existing one), on failure it is removed and ``out`` is untouched.
    """

    def __init__(self, path, *, force: bool = False):
        self.path = Path(path)
        self.force = force
        self.tmp: Path | None = None

    def __enter__(self) -> Path:
        if self.path.exists() and not self.force:
            message = "output folder exists; pass --force to overwrite it"
            raise InputError(message, path=self.path)
        parent = self.path.parent if str(self.path.parent) else Path(".")
        parent.mkdir(parents=True, exist_ok=True)
        self.tmp = Path(tempfile.mkdtemp(prefix=f".{self.path.name}.", dir=parent)).absolute()
        os.chmod(self.tmp, 0o777 & ~_umask())
        return self.tmp

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            shutil.rmtree(self.tmp, ignore_errors=True)
            return False
        replace_folder(self.tmp, self.path)
        return False


def replace_folder(tmp: Path, path: Path) -> None:
    """Put the finished folder ``tmp`` at ``path``: two renames, the earlier folder (if any) moved
    aside to ``.NAME.old`` first and removed last, so ``path`` never holds a half-written output."""
    if path.exists():
        old = path.with_name(f".{path.name}.old")
        shutil.rmtree(old, ignore_errors=True)
        os.replace(path, old)
        os.replace(tmp, path)
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, path)
