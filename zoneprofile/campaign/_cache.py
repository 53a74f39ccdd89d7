"""Per-crystal result cache.

A crystal's record is stored as JSON under a key: the sha256 of its inputs'
bytes (with their roles and paths), its merged parameters (seed and draws
included), the software version and the record layout version. Change one
byte of an input, one parameter or the software, and the key changes, so the
crystal is recomputed; everything else is reused.

Each record is written atomically (temporary file, then rename) as soon as its
crystal finishes, so a run that is killed keeps what it finished. Failed
crystals are not stored: they are tried again on the next run.
"""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

from zoneprofile._output import to_jsonable, write_bytes, write_text
from zoneprofile.campaign._record import valid_record  # the record layout, checked once on reading

__all__ = ["RECORD_LAYOUT", "task_key", "code_fingerprint", "ResultCache"]

#: Bump when the record layout or the pipeline's meaning changes (2: ``model = "crystal"``
#: dates crystals of two or more boundaries by the whole-crystal model alone; ``record["model"]``).
RECORD_LAYOUT = 2

_CODE: list = []


def code_fingerprint() -> str:
    """sha256 of the package's own source files: any change of the code invalidates the cache."""
    if not _CODE:
        root = Path(__file__).resolve().parent.parent
        h = hashlib.sha256()
        for p in sorted(root.rglob("*.py")):
            h.update(p.relative_to(root).as_posix().encode("utf-8") + b"\0")
            h.update(p.read_bytes())
        _CODE.append(h.hexdigest())
    return _CODE[0]


def task_key(task: dict, version: str) -> str:
    """Cache key of a crystal task (hex sha256)."""
    content = {
        "software": version,
        "code": code_fingerprint(),
        "layout": RECORD_LAYOUT,
        "sample": task["sample"],
        "crystal": task["crystal"],
        "mineral": task["mineral"],
        "inputs": [[i["role"], i["rel"], i["sha256"]] for i in task["inputs"]],
        "parameters": to_jsonable(task["parameters"]),
    }
    text = json.dumps(content, sort_keys=True, ensure_ascii=True, allow_nan=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


class ResultCache:
    """A folder of crystal records, one JSON file per key."""

    def __init__(self, folder):
        self.folder = Path(folder)

    def _path(self, key: str) -> Path:
        return self.folder / key[:2] / f"{key}.json"

    def get(self, key: str) -> dict | None:
        """The stored record, or None when absent or unreadable (then it is recomputed)."""
        p = self._path(key)
        try:
            data = json.loads(p.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            return None
        if not isinstance(data, dict) or data.get("key") != key or not valid_record(data.get("record")):
            return None
        return data["record"]

    def put(self, key: str, record: dict, figures: dict | None = None) -> None:
        """Store ``record`` atomically, with its figure files (``{format: bytes}``) beside it.

        Figures are written first, the record last: a record present means
        its crystal is complete.
        """
        for fmt, data in (figures or {}).items():
            write_bytes(self._path(key).with_suffix(f".{fmt}"), data)
        text = json.dumps({"key": key, "record": to_jsonable(record)}, allow_nan=False, ensure_ascii=False)
        write_text(self._path(key), text)

    def get_figures(self, key: str, formats) -> dict | None:
        """The stored figure files of ``key`` in every one of ``formats``, or None."""
        out = {}
        for fmt in formats:
            p = self._path(key).with_suffix(f".{fmt}")
            try:
                out[fmt] = p.read_bytes()
            except OSError:
                return None
        return out

    def __len__(self) -> int:
        if not self.folder.exists():
            return 0
        return sum(1 for _ in self.folder.glob("??/*.json"))
