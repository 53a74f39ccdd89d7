"""The crystal record and its parts are typed (zoneprofile._records) and checked once, on reading the cache.

Records made by the campaign from invented demo crystals (a traverse with a
laser table, and a mapped crystal) must conform to the declared types; a cached
record whose inner part is damaged (a boundary's time summary, an interval, a
zoning step, the map's boundaries, ...) must read as absent, so the crystal is
computed again instead of reported.
"""

from __future__ import annotations

import copy
import json
import re
import typing
from pathlib import Path

import pytest

from zoneprofile._output import to_jsonable
from zoneprofile._records import BoundaryRecord, CrystalRecord, valid_record
from zoneprofile.campaign import ResultCache, execute_campaign, load_campaign
from zoneprofile.demo import make_demo

KEY = "cd" + "1" * 62


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """The demo's mapped crystal m07 (map and laser table) dated by the whole-crystal model, and its
    crystal p05 (traverse and laser table) dated boundary by boundary (no figures: records only)."""
    folder = tmp_path_factory.mktemp("records")
    mapped = make_demo(folder / "mapped", only=("m07",), draws=50)["campaign"]
    crystal = execute_campaign(load_campaign(mapped), progress=False, formats=())
    made = make_demo(folder / "traverse", only=("p05",), draws=50)["campaign"]
    text = Path(made).read_text(encoding="utf-8")
    other = Path(made).with_name("boundary.toml")
    other.write_text(re.sub(r'model\s*=\s*"crystal"', 'model = "boundary"', text), encoding="utf-8")
    boundary = execute_campaign(load_campaign(other), progress=False, formats=())
    return {"boundary_campaign": other, "crystal": crystal, "boundary": boundary}


def _records(demo):
    return [r for key in ("crystal", "boundary") for r in demo[key].records]


def test_fresh_records_have_the_declared_layout(demo):
    records = _records(demo)
    assert len(records) == 2 and all(r["error"] is None for r in records)
    assert all(valid_record(r) for r in records)
    # every part the types describe is exercised: boundaries, intervals, map, crystal model
    assert any(r["boundaries"] for r in records) and any(r["recharge_intervals_days"] for r in records)
    assert any(r["map"] for r in records) and any(r.get("crystal_model") for r in records)
    # each key the boundary type requires is written by the pipeline (the type does not promise more)
    for r in records:
        for b in r["boundaries"]:
            assert BoundaryRecord.__required_keys__ <= b.keys()
    assert CrystalRecord.__required_keys__ <= records[0].keys()


def test_a_valid_record_round_trips(tmp_path, demo):
    cache = ResultCache(tmp_path)
    for record in _records(demo):
        stored = to_jsonable({k: v for k, v in record.items() if not k.startswith("_")})
        cache.put(KEY, stored)
        assert cache.get(KEY) == json.loads(json.dumps(stored))


def _boundary_record(demo):
    return next(r for r in demo["boundary"].records if r["boundaries"] and r["recharge_intervals_days"])


def _set(path, value):
    def damage(record):
        part = record
        for key in path[:-1]:
            part = part[key]
        if value is KeyError:
            del part[path[-1]]
        else:
            part[path[-1]] = value
        return record
    return damage


DAMAGES = {
    "boundary without its time summary": _set(("boundaries", 0, "time_days"), KeyError),
    "time summary without its statement": _set(("boundaries", 0, "time_days", "statement"), KeyError),
    "statement not one of the four": _set(("boundaries", 0, "time_days", "statement"), "perhaps"),
    "median written as text": _set(("boundaries", 0, "time_days", "median"), "12.5"),
    "boundary without a position": _set(("boundaries", 0, "position_um"), None),
    "resolved as a number": _set(("boundaries", 0, "resolved"), 1),
    "draws not a list of numbers": _set(("boundaries", 0, "time_draws_days"), ["a"]),
    "curve without its data": _set(("boundaries", 0, "curve", "data"), KeyError),
    "boundary not an object": _set(("boundaries", 0), [1, 2]),
    "interval count as a float": _set(("recharge_intervals_days", 0, "n_draws"), 50.0),
    "interval without its inner position": _set(("recharge_intervals_days", 0, "inner_um"), KeyError),
    "zoning step without a position": _set(("zones", "steps", 0, "position_um"), KeyError),
    "zones without steps": _set(("zones", "steps"), KeyError),
    "profile points not text": _set(("profile", "point", 0), 3),
    "input without its sha256": _set(("inputs", 0, "sha256"), KeyError),
}


@pytest.mark.parametrize("damage", list(DAMAGES.values()), ids=list(DAMAGES))
def test_a_damaged_part_reads_as_absent(tmp_path, demo, damage):
    record = to_jsonable({k: v for k, v in _boundary_record(demo).items() if not k.startswith("_")})
    assert valid_record(record)
    cache = ResultCache(tmp_path)
    cache.put(KEY, record)
    assert cache.get(KEY) is not None
    path = tmp_path / KEY[:2] / f"{KEY}.json"
    path.write_text(json.dumps({"key": KEY, "record": damage(copy.deepcopy(record))}), encoding="utf-8")
    assert cache.get(KEY) is None


def test_a_damaged_map_part_reads_as_absent(demo):
    mapped = next(r for r in demo["crystal"].records if r["map"])
    record = to_jsonable({k: v for k, v in mapped.items() if not k.startswith("_")})
    assert valid_record(record) and record["map"]["boundaries"]
    for damage in (_set(("map", "boundaries", 0, "obliquity_deg"), "12"), _set(("map", "line"), KeyError),
                   _set(("map", "boundaries", 0, "position_um"), KeyError)):
        assert not valid_record(damage(copy.deepcopy(record)))


def test_a_damaged_crystal_model_part_reads_as_absent(demo):
    dated = next(r for r in demo["crystal"].records if r.get("crystal_model"))
    record = to_jsonable({k: v for k, v in dated.items() if not k.startswith("_")})
    assert valid_record(record)
    for damage in (_set(("crystal_model", "boundaries", 0, "by_element", "Mg", "statement"), KeyError),
                   _set(("crystal_model", "gaps", 0, "days", "p2_5"), "1"),
                   _set(("crystal_model", "boundaries", 0, "fitted_position_um"), KeyError),
                   _set(("model", "used"), "both")):
        assert not valid_record(damage(copy.deepcopy(record)))


def test_a_cached_record_with_a_damaged_boundary_is_recomputed_not_reported(demo):
    """End to end: damage one crystal's cached boundary part; the next run computes that crystal
    again (and only it) and reports the recomputed record, identical to the first run's."""
    campaign = demo["boundary_campaign"]
    first = execute_campaign(load_campaign(campaign), progress=False, formats=())  # everything from the cache
    assert first.computed == [] and len(first.from_cache) == 1
    cache_dir = load_campaign(campaign).cache_dir
    damaged = None
    for path in sorted(cache_dir.glob("??/*.json")):
        data = json.loads(path.read_text(encoding="utf-8"))
        rec = data["record"]
        if rec["parameters"].get("model") == "boundary" and rec["boundaries"]:
            del rec["boundaries"][0]["time_days"]["statement"]
            path.write_text(json.dumps(data), encoding="utf-8")
            damaged = f"{rec['sample']}/{rec['crystal']}"
            break
    assert damaged is not None
    again = execute_campaign(load_campaign(campaign), progress=False, formats=())
    labels = [str(c) for c in again.computed]
    assert len(again.computed) == 1 and again.from_cache == [] and damaged.split("/")[1] in labels[0]
    by_name = {r["crystal"]: r for r in first.records}
    for r in again.records:
        assert valid_record(r)
        for b, before in zip(r["boundaries"], by_name[r["crystal"]]["boundaries"], strict=True):
            assert b["time_days"] == before["time_days"]  # seeded: the recomputed crystal dates the same


def test_the_record_types_name_each_part_once():
    """Every part of the record is a declared type (no anonymous dict where a part is read)."""
    hints = typing.get_type_hints(CrystalRecord)
    for name in ("boundaries", "recharge_intervals_days", "inputs"):
        (item,) = typing.get_args(hints[name])
        assert typing.is_typeddict(item), name
    for name in ("profile", "trace_profile", "zones", "map", "crystal_model", "model"):
        assert any(typing.is_typeddict(a) for a in typing.get_args(hints[name])), name


def test_the_population_block_has_the_declared_layout(demo):
    """The report indexes the population's events directly: population_summary must give the
    keys PopulationEvent, ElementEvent and EventMember declare (after the JSON round trip too)."""
    from zoneprofile._records import ElementEvent, EventMember, PopulationEvent, _conforms
    from zoneprofile.chronology import population_summary

    records = _records(demo)
    pop = json.loads(json.dumps(to_jsonable(population_summary(records, n_bootstrap=10))))
    events = pop["events"]
    assert events["events"] and events["members"]
    assert all(_conforms(e, PopulationEvent) for e in events["events"])
    assert all(_conforms(m, EventMember) for m in events["members"])
    element_events = [e for block in pop["elements"].values() for e in block["events"]]
    assert element_events and all(_conforms(e, ElementEvent) for e in element_events)
    assert not _conforms({**events["events"][0], "n_crystals": "3"}, PopulationEvent)
