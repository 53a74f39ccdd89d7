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


#: Fields every crystal record holds, with their types; and fields that, when
#: present, must have their type (None allowed where listed).
_REQUIRED = {
    "sample": (str,), "crystal": (str,), "mineral": (str,), "error": (str, type(None)),
    "inputs": (list,), "parameters": (dict,), "boundaries": (list,), "warnings": (list,),
}
_OPTIONAL = {
    "profile": (dict, type(None)), "zones": (dict, type(None)), "recharge_intervals_days": (list,),
    "timing_s": (dict,), "map": (dict, type(None)), "crystal_model": (dict, type(None)),
    "model": (dict, type(None)),
}
_TIME_KEYS = ("median", "p2_5", "p97_5", "upper_bound", "lower_bound")
_STATEMENTS = ("date", "upper_bound", "lower_bound", "none")


def _time_summary_ok(td) -> bool:
    if not isinstance(td, dict) or td.get("statement") not in _STATEMENTS:
        return False
    return all(td.get(k) is None or (isinstance(td[k], (int, float)) and not isinstance(td[k], bool))
               for k in _TIME_KEYS)


def _crystal_model_ok(cm) -> bool:
    """A whole-crystal model's layout (docs/whole-crystal-model.md): boundaries oldest first, each
    with a time summary; one gap fewer than boundaries, each between two successive ids."""
    if cm is None:
        return True
    bs, gaps = cm.get("boundaries"), cm.get("gaps")
    if not isinstance(bs, list) or not bs or not isinstance(gaps, list) or len(gaps) != len(bs) - 1:
        return False
    for b in bs:
        if not isinstance(b, dict) or not isinstance(b.get("id"), str) or not _time_summary_ok(b.get("age_days")):
            return False
        if not isinstance(b.get("position_um"), (int, float)) or isinstance(b.get("position_um"), bool):
            return False
        if not all(_time_summary_ok(td) for td in (b.get("by_element") or {}).values()):
            return False
    for g, older, younger in zip(gaps, bs[:-1], bs[1:]):
        if not isinstance(g, dict) or not _time_summary_ok(g.get("days")):
            return False
        if (g.get("older"), g.get("younger")) != (older["id"], younger["id"]):
            return False
    return True


def _model_ok(model) -> bool:
    return model is None or (model.get("used") in ("crystal", "boundary")
                             and isinstance(model.get("note", ""), str))


def valid_record(record) -> bool:
    """Whether ``record`` has the layout of a crystal record (a damaged or emptied
    cache file must be recomputed, never reported as a crystal without a name)."""
    if not isinstance(record, dict):
        return False
    for name, kinds in _REQUIRED.items():
        if name not in record or not isinstance(record[name], kinds):
            return False
    for name, kinds in _OPTIONAL.items():
        if name in record and not isinstance(record[name], kinds):
            return False
    if not (_crystal_model_ok(record.get("crystal_model")) and _model_ok(record.get("model"))):
        return False
    if (record.get("model") or {}).get("used") == "crystal" and not record.get("crystal_model"):
        return False  # dated by the whole-crystal model, but its result is missing
    return all(record[k].strip() for k in ("sample", "crystal", "mineral"))


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
