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
            "recharge_intervals_days": [], "timing_s": {}, "trace_profile": None, "map": None, "model": None}


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


def _summary(median):
    return {"median": median, "p2_5": median / 2, "p97_5": median * 2, "statement": "date",
            "upper_bound": None, "lower_bound": None}


def _crystal_record():
    """A record dated by the whole-crystal model (keys: docs/whole-crystal-model.md)."""
    one = {"status": "one element", "reasons": []}
    cm = {"boundaries": [{"id": "B1", "position_um": 150.0, "fitted_position_um": 150.0, "age_days": _summary(180.0),
                          "by_element": {"Mg": _summary(180.0)}, "concordance": one},
                         {"id": "B2", "position_um": 30.0, "fitted_position_um": 30.0, "age_days": _summary(15.0),
                          "by_element": {"Mg": _summary(15.0)}, "concordance": one}],
          "gaps": [{"older": "B1", "younger": "B2", "days": _summary(165.0)}], "elements": ["Mg"],
          "warnings": [], "method": "whole-crystal", "temperature_c": 1000.0, "temperature_sd_c": 20.0,
          "n_draws": 50, "rim": "open", "obliquity": None, "position_window_um": 3.0, "cell_um": 0.85,
          "grid_cells": 202, "chi2": 1.0, "n_points": 80, "best_ages_days_at_nominal_temperature": [180.0, 15.0],
          "laws": {"Mg": "mg-plag"}, "uncertainty": "Laplace approximation", "timing_s": None}
    return {**_record(), "crystal_model": cm,
            "model": {"requested": "crystal", "used": "crystal", "note": "2 boundaries dated together"}}


def test_crystal_model_record_round_trips(tmp_path):
    cache = ResultCache(tmp_path)
    cache.put(KEY, _crystal_record())
    assert cache.get(KEY)["crystal_model"]["gaps"][0]["days"]["median"] == 165.0


def _drop_gap(r):
    r["crystal_model"]["gaps"] = []
    return r


def _swap_gap(r):
    r["crystal_model"]["gaps"][0]["older"], r["crystal_model"]["gaps"][0]["younger"] = "B2", "B1"
    return r


def _bad_statement(r):
    r["crystal_model"]["boundaries"][0]["age_days"]["statement"] = "maybe"
    return r


def _text_median(r):
    r["crystal_model"]["boundaries"][1]["by_element"]["Mg"]["median"] = "15"
    return r


@pytest.mark.parametrize("damage", [
    _drop_gap,                                                   # one gap fewer than boundaries, no more no less
    _swap_gap,                                                   # a gap runs from the older to the younger
    _bad_statement,
    _text_median,
    lambda r: {**r, "crystal_model": []},
    lambda r: {**r, "crystal_model": None},                      # dated by the model, its result missing
    lambda r: {**r, "model": {"used": "both"}},
])
def test_damaged_crystal_model_reads_as_absent(tmp_path, damage):
    cache = ResultCache(tmp_path)
    cache.put(KEY, _crystal_record())
    p = tmp_path / KEY[:2] / f"{KEY}.json"
    p.write_text(json.dumps({"key": KEY, "record": damage(_crystal_record())}))
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
