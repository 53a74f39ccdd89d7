"""Cache records are validated when read: a damaged or emptied record is recomputed.

A record with an empty body used to come back as a crystal whose sample is
None, with exit 0.
"""

import json

import pytest

from zoneprofile.campaign import ResultCache

KEY = "ab" + "0" * 62


def _record():
    return {"sample": "S1", "crystal": "c1", "mineral": "plagioclase", "error": None, "inputs": [],
            "parameters": {"seed": 1}, "profile": None, "zones": None, "boundaries": [], "warnings": [],
            "recharge_intervals_days": [], "timing_s": {}}


def test_valid_record_round_trips(tmp_path):
    cache = ResultCache(tmp_path)
    cache.put(KEY, _record())
    assert cache.get(KEY)["sample"] == "S1"


@pytest.mark.parametrize("damage", [
    lambda r: {},
    lambda r: {**r, "sample": None},
    lambda r: {**r, "crystal": "  "},
    lambda r: {k: v for k, v in r.items() if k != "boundaries"},
    lambda r: {**r, "boundaries": "none"},
    lambda r: {**r, "zones": 3},
])
def test_damaged_record_reads_as_absent(tmp_path, damage):
    cache = ResultCache(tmp_path)
    cache.put(KEY, _record())
    p = tmp_path / KEY[:2] / f"{KEY}.json"
    p.write_text(json.dumps({"key": KEY, "record": damage(_record())}))
    assert cache.get(KEY) is None


def test_record_layout_is_the_typed_dict():
    """The cache checks the keys and types declared by CrystalRecord, and a fresh record has them."""
    import typing

    from zoneprofile.campaign._pipeline import _base_record
    from zoneprofile.campaign._record import CrystalRecord, valid_record

    task = {"sample": "S1", "crystal": "c1", "mineral": "olivine", "parameters": {},
            "inputs": [{"rel": "a.csv", "sha256": "0" * 64, "role": "traverse"}]}
    base = _base_record(task)
    assert valid_record(base)
    assert set(base) <= set(typing.get_type_hints(CrystalRecord))  # no undeclared top-level key
    assert set(CrystalRecord.__required_keys__) <= set(base)
    assert not valid_record({**base, "crystal_model": [1.0]})  # a declared optional key of the wrong type
    assert valid_record({k: v for k, v in base.items() if k not in CrystalRecord.__optional_keys__})
