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


def _kinds(hint) -> tuple[type, ...]:
    """The runtime types ``isinstance`` checks for a field's annotation."""
    if isinstance(hint, types.UnionType) or typing.get_origin(hint) is typing.Union:
        return tuple(k for a in typing.get_args(hint) for k in _kinds(a))
    if hint is None or hint is type(None):
        return (type(None),)
    return (typing.get_origin(hint) or hint,)


_FIELDS = {name: _kinds(hint) for name, hint in typing.get_type_hints(CrystalRecord).items()}
_REQUIRED = frozenset(CrystalRecord.__required_keys__)


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
    return all(record[k].strip() for k in ("sample", "crystal", "mineral"))
