"""The top-level layout of a crystal record, written once.

A crystal record is the JSON object the campaign stores for each crystal (in
the result cache and in ``crystals.json``) and the report reads. Its top-level
keys and their types are declared here as a :class:`typing.TypedDict`; the
cache checks a record against it once, when it reads the record back
(:func:`valid_record`), so a damaged or hand-edited cache file is recomputed
rather than reported.
"""
# no "from __future__ import annotations": TypedDict must see NotRequired at class creation

import types
import typing
from typing import NotRequired, TypedDict

__all__ = ["CrystalRecord", "valid_record"]


class CrystalRecord(TypedDict):
    """One crystal's result (the inner parts stay plain JSON objects)."""

    sample: str
    crystal: str
    mineral: str
    error: str | None  # "stage: reason" when a stage failed
    inputs: list  # [{path, sha256, role}]
    parameters: dict  # the merged settings of the crystal
    boundaries: list  # one object per dated boundary
    warnings: list  # plain sentences
    profile: NotRequired[dict | None]
    trace_profile: NotRequired[dict | None]
    zones: NotRequired[dict | None]
    recharge_intervals_days: NotRequired[list]
    map: NotRequired[dict | None]
    timing_s: NotRequired[dict]
    crystal_model: NotRequired[dict | None]
    model: NotRequired[dict | None]  # which model dated the crystal: {requested, used, note}


def _kinds(hint) -> tuple[type, ...]:
    """The runtime types ``isinstance`` checks for a field's annotation."""
    if isinstance(hint, types.UnionType) or typing.get_origin(hint) is typing.Union:
        return tuple(k for a in typing.get_args(hint) for k in _kinds(a))
    if hint is None or hint is type(None):
        return (type(None),)
    return (typing.get_origin(hint) or hint,)


_FIELDS = {name: _kinds(hint) for name, hint in typing.get_type_hints(CrystalRecord).items()}
_REQUIRED = frozenset(CrystalRecord.__required_keys__)


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
    """Whether ``record`` has the layout of :class:`CrystalRecord` (a damaged or emptied
    cache file must be recomputed, never reported as a crystal without a name)."""
    if not isinstance(record, dict):
        return False
    for name, kinds in _FIELDS.items():
        if name not in record:
            if name in _REQUIRED:
                return False
            continue
        if not isinstance(record[name], kinds):
            return False
    if not (_crystal_model_ok(record.get("crystal_model")) and _model_ok(record.get("model"))):
        return False
    if (record.get("model") or {}).get("used") == "crystal" and not record.get("crystal_model"):
        return False  # dated by the whole-crystal model, but its result is missing
    return all(record[k].strip() for k in ("sample", "crystal", "mineral"))
