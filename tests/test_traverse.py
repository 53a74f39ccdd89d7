"""Traverse geometry and the whole read -> recalc -> distance chain."""

import hashlib

import numpy as np
import pytest
from scipy.optimize import minimize_scalar

from zoneprofile import InputError
from zoneprofile.io import synthetic_traverse_table
from zoneprofile.traverse import infer_length_unit, project_on_line, read_traverse

PLANTED = ["crack", "epoxy", "olivine-inclusion", "glass-inclusion", "na-loss"]


def test_projection_matches_independent_minimisation():
    # independent reference: scipy.optimize over the line angle, minimising the
    # sum of squared perpendicular distances (definition of the TLS line)
    rng = np.random.default_rng(4)
    t = np.sort(rng.uniform(0, 80, 25))
    x = 3 + t * np.cos(0.7) + rng.normal(0, 0.8, 25) * -np.sin(0.7)
    y = -2 + t * np.sin(0.7) + rng.normal(0, 0.8, 25) * np.cos(0.7)
    cx, cy = x.mean(), y.mean()

    def cost(a):
        return np.sum((-(x - cx) * np.sin(a) + (y - cy) * np.cos(a)) ** 2)

    best = minimize_scalar(cost, bounds=(0, np.pi), method="bounded", options={"xatol": 1e-10}).x
    along_ref = (x - cx) * np.cos(best) + (y - cy) * np.sin(best)
    across_ref = -(x - cx) * np.sin(best) + (y - cy) * np.cos(best)
    along, across = project_on_line(x, y)
    sign = np.sign(along @ along_ref)
    assert np.max(np.abs(sign * along - along_ref)) < 1e-6
    assert np.max(np.abs(np.abs(across) - np.abs(across_ref))) < 1e-6


def test_infer_length_unit():
    # common practice: spot steps are 1-50 µm, i.e. 0.001-0.05 mm
    assert infer_length_unit([10.000, 10.003, 10.006])[0] == "mm"
    assert infer_length_unit([100.0, 103.0, 106.0])[0] == "um"


@pytest.mark.parametrize(
    "dialect, rim, stage_units, mineral, extra",
    [
        ("csv", "start", "mm", "plagioclase", {}),
        ("tsv", "end", "um", "plagioclase", {"unit_row": True, "spelling": "lower"}),
        ("semicolon", "start", "mm", "plagioclase", {"spelling": "wt%", "title_lines": 0}),
        ("xlsx", "end", "mm", "plagioclase", {"spelling": "suffix"}),
        ("whitespace", "start", "um", "plagioclase", {"spelling": "feo-star", "distance_column": True}),
        ("csv", "end", "mm", "olivine", {"unit_row": True}),
        ("xlsx", "start", "um", "pyroxene", {}),
    ],
)
def test_synthetic_tables_truth_flags_and_distances(tmp_path, dialect, rim, stage_units, mineral, extra):
    # self-consistency: seeded forward model with planted bad analyses (invented data)
    bad = PLANTED if mineral == "plagioclase" else ["crack", "epoxy", "glass-inclusion", "high-total"]
    ext = ".xlsx" if dialect == "xlsx" else ".txt"
    path = tmp_path / f"t{ext}"
    truth = synthetic_traverse_table(path, mineral=mineral, dialect=dialect, rim=rim, stage_units=stage_units,
                                     seed=11, bad=bad, jitter_um=0.4, n_points=36, **extra)
    tr = read_traverse(path, mineral=mineral, rim=rim)
    t = tr.table.merge(truth, on="point", suffixes=("", "_true"))
    assert len(tr.table) == len(truth)  # one row per analysis, flagged ones kept
    good = (t["bad"] == "").to_numpy()
    flagged = (t["qc"] != "ok").to_numpy()
    assert np.array_equal(flagged, ~good), t.loc[flagged != ~good, ["point", "bad", "qc"]]
    col = {"plagioclase": "An", "olivine": "Fo", "pyroxene": "Mg_number"}[mineral]
    assert np.max(np.abs(t[col] - t[f"{col}_true"])[good]) < 0.05
    assert np.max(np.abs(t["distance_um"] - t["distance_um_true"])) < 0.3
    assert tr.table["point"].tolist() == truth["point"].tolist()  # rim-to-core order


def test_rim_end_is_the_mirror_of_rim_start(tmp_path):
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    synthetic_traverse_table(a, seed=5, rim="start")
    synthetic_traverse_table(b, seed=5, rim="end")
    ta, tb = read_traverse(a).table, read_traverse(b, rim="end").table
    assert ta["point"].tolist() == tb["point"].tolist()
    np.testing.assert_allclose(ta["distance_um"], tb["distance_um"], atol=1e-9)
    np.testing.assert_allclose(ta["An"], tb["An"], atol=1e-12)
    # reading a core-first table as rim-first reverses the profile
    tc = read_traverse(b, rim="start").table
    assert tc["point"].tolist() == ta["point"].tolist()[::-1]


def test_offset_and_metadata(tmp_path):
    p = tmp_path / "j.csv"
    synthetic_traverse_table(p, seed=2, jitter_um=1.5, stage_units="um")
    tr = read_traverse(p, sample="S-7", crystal="c3", beam_um=5)
    assert tr.max_offset_um == pytest.approx(np.max(np.abs(tr.table["offset_um"])))
    assert 1.0 < tr.max_offset_um < 6.0
    assert tr.sha256 == hashlib.sha256(p.read_bytes()).hexdigest()  # standard library reference
    assert (tr.sample, tr.crystal, tr.beam_um, tr.mineral) == ("S-7", "c3", 5.0, "plagioclase")
    assert len(tr.good()) == len(tr.table)


def test_stage_units_override(tmp_path):
    p = tmp_path / "mm.csv"
    truth = synthetic_traverse_table(p, seed=3, stage_units="mm")
    d_mm = read_traverse(p).table["distance_um"].to_numpy()
    d_um = read_traverse(p, stage_units="um").table["distance_um"].to_numpy()
    np.testing.assert_allclose(d_mm, truth["distance_um"], atol=0.3)
    np.testing.assert_allclose(d_um * 1000, d_mm, atol=1e-6)


def test_distance_column_is_honoured(tmp_path):
    p = tmp_path / "d.csv"
    p.write_text("Point,Distance (µm),SiO2,Al2O3,CaO,Na2O,K2O\n"
                 "a,1.5,55.59,28.30,10.38,5.73,0\n"
                 "b,4.0,55.59,28.30,10.38,5.73,0\n"
                 "c,9.0,55.59,28.30,10.38,5.73,0\n")
    assert read_traverse(p).table["distance_um"].tolist() == [1.5, 4.0, 9.0]
    # rim at the end of a distance measured from the first row: flipped, rim at 0
    assert read_traverse(p, rim="end").table["distance_um"].tolist() == [0.0, 5.0, 7.5]


def test_step_um_when_no_positions(tmp_path):
    p = tmp_path / "n.csv"
    p.write_text("SiO2,Al2O3,CaO,Na2O\n55.59,28.30,10.38,5.73\n55.59,28.30,10.38,5.73\n")
    with pytest.raises(InputError, match="no stage X/Y or distance column"):
        read_traverse(p)
    assert read_traverse(p, step_um=2).table["distance_um"].tolist() == [0.0, 2.0]


def test_repeated_position_is_flagged(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("Point,X,Y,SiO2,Al2O3,CaO,Na2O\n"
                 "a,10.000,5.000,55.59,28.30,10.38,5.73\n"
                 "b,10.003,5.000,55.59,28.30,10.38,5.73\n"
                 "c,10.003,5.000,55.59,28.30,10.38,5.73\n")
    assert read_traverse(p).table["qc"].tolist() == ["ok", "ok", "same position as point b"]


def test_below_detection_policies(tmp_path):
    p = tmp_path / "c.csv"
    p.write_text("Point,Distance,SiO2,Al2O3,CaO,Na2O,K2O\n"
                 "a,0,68.74,19.44,bdl,11.82,<0.02\n"
                 "b,3,55.59,28.30,10.38,5.73,<0.02\n")
    t = read_traverse(p).table
    assert t["An"].tolist()[0] == pytest.approx(0.0) and t["qc"].tolist() == ["ok", "ok"]
    assert t["censored"].tolist() == ["CaO bdl; K2O<0.02", "K2O<0.02"]
    flagged = read_traverse(p, below_detection="flag").table["qc"].tolist()
    assert flagged == ["CaO below detection", "ok"]
    with pytest.raises(InputError, match="row 2, column 'CaO': below-detection value"):
        read_traverse(p, below_detection="raise")


def test_generator_refuses_to_overwrite(tmp_path):
    p = tmp_path / "x.csv"
    p.write_text("keep")
    with pytest.raises(InputError, match="--force"):
        synthetic_traverse_table(p)
    assert p.read_text() == "keep"


def test_feo_and_fe2o3_are_combined_as_total_iron(tmp_path):
    # FeO + Fe2O3/1.11135 (docs/references.md §1 factor) must give the same formula as all-FeO
    p = tmp_path / "fe.csv"
    p.write_text("Point,Distance,SiO2,Al2O3,FeO,Fe2O3,CaO,Na2O\n"
                 "a,0,55.59,28.30,0.20,0.33339,10.38,5.73\n"
                 "b,2,55.59,28.30,0.50,0,10.38,5.73\n")
    t = read_traverse(p).table
    assert t["Fe3"].iloc[0] == pytest.approx(t["Fe3"].iloc[1], rel=1e-4)


def test_unused_duplicate_columns_are_tolerated(tmp_path):
    p = tmp_path / "dup.csv"
    p.write_text("Point,SiO2,Al2O3,CaO,Na2O,Comment,Comment,Distance\n"
                 "a,55.59,28.30,10.38,5.73,x,y,0\n"
                 "b,55.59,28.30,10.38,5.73,x,y,2\n")
    tr = read_traverse(p)
    assert len(tr.table) == 2 and any("Comment#2" in n for n in tr.notes)
    p.write_text(p.read_text().replace("Comment,Distance", "SiO2,Distance"))
    with pytest.raises(InputError, match=r"'SiO2' \(column 2\) and 'SiO2' \(column 7\)"):
        read_traverse(p)


def test_several_crystals_in_one_table_need_a_choice(tmp_path):
    p = tmp_path / "multi.csv"
    rows = ["Crystal,Point,Distance,SiO2,Al2O3,CaO,Na2O"]
    for c, an_row in (("C1", "55.59,28.30,10.38,5.73"), ("C2", "43.19,36.65,20.16,0")):
        for k in range(3):
            rows.append(f"{c},{c}-{k},{2 * k},{an_row}")
    p.write_text("\n".join(rows) + "\n")
    with pytest.raises(InputError, match=r"column 'Crystal': the table holds 2 crystals \(C1, C2\); choose one with --crystal"):
        read_traverse(p)
    tr = read_traverse(p, crystal="C2")
    assert tr.table["point"].tolist() == ["C2-0", "C2-1", "C2-2"]
    assert tr.table["An"].tolist() == pytest.approx([100.0] * 3, abs=0.05)
    assert tr.crystal == "C2"
