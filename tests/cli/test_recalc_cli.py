"""`zoneprofile recalc` end to end: outputs, summary, and every bad input."""

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest

from zoneprofile.cli import main
from zoneprofile.io import read_profile

from conftest import run_cli

TABLES = Path(__file__).resolve().parents[2] / "fixtures" / "tables"


def test_recalc_csv_output_is_a_profile(tmp_path):
    out = tmp_path / "p.csv"
    code, _, err = run_cli("recalc", TABLES / "plag_comma.csv", "-o", out)
    assert code == 0, err
    assert "read 8 analyses" in err and "flagged 0 of 8" in err and "An 52.0-69.4 mol%" in err
    t = pd.read_csv(out)
    for col in ("point", "distance_um", "total_wt", "Si", "Al", "Ca", "Na", "K", "An", "Ab", "Or", "species", "qc", "censored", "row"):
        assert col in t.columns
    assert "_row" not in t.columns
    prof = read_profile(out, columns=("An",), optional=("Ab",))  # readable by the next stage
    assert len(prof) == 8


@pytest.mark.parametrize("ext", [".tsv", ".xlsx", ".json"])
def test_recalc_other_formats(tmp_path, ext):
    out = tmp_path / f"p{ext}"
    assert main(["recalc", str(TABLES / "olivine_spaces.txt"), "--mineral", "olivine", "-o", str(out)]) == 0
    if ext == ".json":
        doc = json.loads(out.read_text())
        assert doc["mineral"] == "olivine" and len(doc["sha256"]) == 64
        assert [p["point"] for p in doc["points"]][:2] == ["ol1", "ol2"]
    else:
        prof = read_profile(out, columns=("Fo",))
        assert prof["Fo"].iloc[0] == pytest.approx(88.0, abs=0.05)


def test_flagged_points_keep_their_rows(tmp_path, capsys):
    from zoneprofile.io import synthetic_traverse_table

    src = tmp_path / "s.csv"
    synthetic_traverse_table(src, seed=1, bad=[(3, "crack"), (7, "na-loss")], n_points=12)
    out = tmp_path / "o.csv"
    assert main(["recalc", str(src), "-o", str(out)]) == 0
    err = capsys.readouterr().err
    assert "flagged 2 of 12" in err
    t = pd.read_csv(out)
    assert len(t) == 12
    assert t["qc"].iloc[3].startswith("total ") and "M-site" in t["qc"].iloc[7]
    assert len(read_profile(out)) == 10  # the next stage leaves them out


def test_qc_overrides_from_the_command_line(tmp_path):
    from zoneprofile.io import synthetic_traverse_table

    src = tmp_path / "s.csv"
    synthetic_traverse_table(src, seed=1, bad=[(3, "crack")], n_points=6)
    out = tmp_path / "o.csv"
    assert main(["recalc", str(src), "--total-range", "90,102", "--qc", "m_site=0.9,1.1", "-o", str(out)]) == 0
    assert (pd.read_csv(out)["qc"] == "ok").all()


def test_force_overwrites_and_existing_output_is_kept_otherwise(tmp_path, capsys):
    out = tmp_path / "p.csv"
    out.write_text("keep me")
    assert main(["recalc", str(TABLES / "plag_tab.tsv"), "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert "--force" in err and len(err.strip().splitlines()) == 1
    assert out.read_text() == "keep me"
    assert main(["recalc", str(TABLES / "plag_tab.tsv"), "-o", str(out), "--force"]) == 0
    assert "An" in out.read_text().splitlines()[0]


def test_help_speaks_petrology(capsys):
    with pytest.raises(SystemExit):
        main(["recalc", "--help"])
    text = capsys.readouterr().out
    for word in ("--mineral", "--rim", "--stage-units", "--sheet", "--force", "below-detection", "cations per formula unit", "Droop"):
        assert word in text


BAD = [
    # (arguments before -o, expected file name, row, column, text in the message)
    (["bad_empty.csv"], "bad_empty.csv", None, None, "empty"),
    (["bad_binary.csv"], "bad_binary.csv", None, None, "binary"),
    (["bad_truncated.xlsx"], "bad_truncated.xlsx", None, None, "damaged, truncated"),
    (["bad_truncated.csv"], "bad_truncated.csv", "row 5", None, "looks truncated"),
    (["bad_header_only.csv"], "bad_header_only.csv", "row 1", None, "no data rows"),
    (["bad_not_numeric.csv"], "bad_not_numeric.csv", "row 3", "column 'CaO'", "found '12.3.4'"),
    (["bad_no_cao.csv"], "bad_no_cao.csv", "row 1", None, "needs the oxide columns SiO2, Al2O3, CaO, Na2O; missing: CaO"),
    (["bad_duplicate_columns.csv"], "bad_duplicate_columns.csv", "row 1", "column 'SiO2 (wt%)'", "duplicate"),
    (["bad_one_point.csv"], "bad_one_point.csv", "row 2", None, "at least two points"),
    (["bad_same_position.csv"], "bad_same_position.csv", "row 2", "column 'X'", "same stage position"),
    (["bad_absurd_value.csv"], "bad_absurd_value.csv", "row 4", "column 'SiO2'", "found '1e308'"),
    (["bad_negative_total.csv"], "bad_negative_total.csv", "row 2", "column 'Total'", "negative oxide total"),
    (["plag_comma.csv", "--mineral", "garnet"], None, None, None, "unknown mineral 'garnet'"),
    (["no_such_table.csv"], "no_such_table.csv", None, None, "not found"),
    (["plag_sheets.xlsx", "--sheet", "nope"], "plag_sheets.xlsx", None, None, "no sheet named 'nope'"),
    (["plag_comma.csv", "--rim", "middle"], None, None, None, "choose one of: start, end"),
    (["plag_comma.csv", "--stage-units", "inch"], None, None, None, "choose one of: um, mm"),
    (["plag_comma.csv", "--total-range", "99"], None, None, None, "two numbers"),
    (["plag_comma.csv", "--fo-with-mn"], None, None, None, "applies to olivine"),
    (["olivine_spaces.txt"], "olivine_spaces.txt", "row 1", None, "missing: Al2O3, Na2O (columns found: SiO2, FeO, MgO, CaO); these columns suit --mineral olivine"),
]


def _check_bad(err, name, row, column, text):
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    line = lines[0]
    assert "Traceback" not in err
    if name:
        assert name in line
    for part in (row, column, text):
        if part:
            assert part in line, line


@pytest.mark.parametrize("args, name, row, column, text", BAD, ids=[b[0][0] + (b[0][1] if len(b[0]) > 1 else "") for b in BAD])
def test_bad_input_in_process(tmp_path, capsys, args, name, row, column, text):
    out = tmp_path / "out.csv"
    argv = ["recalc", str(TABLES / args[0]), *args[1:], "-o", str(out)]
    assert main(argv) == 2
    _check_bad(capsys.readouterr().err, name, row, column, text)
    assert not out.exists()
    assert list(tmp_path.iterdir()) == []  # no temporary file left either


@pytest.mark.parametrize("index", [0, 5, 12])
def test_bad_input_through_the_console(tmp_path, index):
    # a representative set through a fresh interpreter (exit code, one line, no traceback)
    args, name, row, column, text = BAD[index]
    out = tmp_path / "out.csv"
    out.write_text("previous result")
    code, stdout, err = run_cli("recalc", TABLES / args[0], *args[1:], "-o", out, "--force")
    assert code == 2
    _check_bad(err, name, row, column, text)
    assert out.read_text() == "previous result"


def test_pyroxene_summary_states_the_fs_convention(tmp_path, capsys):
    assert main(["recalc", str(TABLES / "pyroxene_mm.csv"), "--mineral", "pyroxene", "-o", str(tmp_path / "p.csv")]) == 0
    err = capsys.readouterr().err
    assert "Fs = Fe2+ + Fe3+ + Mn" in err and "Droop" in err and "Mg# 64.5-77.6" in err


def test_unwritable_output_folder_is_refused(tmp_path, capsys):
    out = tmp_path / "missing-folder" / "p.csv"
    assert main(["recalc", str(TABLES / "plag_comma.csv"), "-o", str(out)]) == 2
    assert "folder" in capsys.readouterr().err


def test_inputs_are_never_changed(tmp_path):
    src = tmp_path / "in.csv"
    shutil.copy(TABLES / "plag_comma.csv", src)
    before = src.read_bytes()
    assert main(["recalc", str(src), "-o", str(tmp_path / "o.csv")]) == 0
    assert src.read_bytes() == before
    assert main(["recalc", str(src), "-o", str(src), "--force"]) == 2
    assert src.read_bytes() == before
