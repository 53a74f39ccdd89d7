"""The command-line contract shared by every command (docs/design.md)."""

import json

import numpy as np
import pytest

from zoneprofile._output import check_outputs, neutralise_cell, write_json, write_table, atomic_folder
from zoneprofile._validation import InputError
from zoneprofile.cli import COMMANDS, main


def test_every_command_has_help(capsys):
    for name in COMMANDS:
        with pytest.raises(SystemExit) as exc:
            main([name, "--help"])
        assert exc.value.code == 0
        out = capsys.readouterr().out
        assert out.startswith("usage: zoneprofile " + name)


def test_usage_error_is_one_line_exit_2(capsys):
    with pytest.raises(SystemExit) as exc:
        main(["no-such-command"])
    assert exc.value.code == 2
    err = capsys.readouterr().err
    assert len(err.strip().splitlines()) == 1


def test_input_error_names_file_row_column():
    err = InputError("not a number", path="a.csv", row=7, column="CaO", text="1,2,3")
    assert str(err) == "a.csv, row 7, column 'CaO': not a number (found '1,2,3')"


def test_existing_output_not_overwritten(tmp_path):
    out = tmp_path / "x.csv"
    out.write_text("keep")
    with pytest.raises(InputError, match="--force"):
        check_outputs(out)
    assert check_outputs(out, force=True) == [out]
    assert out.read_text() == "keep"


def test_json_writer_turns_nan_into_null(tmp_path):
    p = write_json(tmp_path / "a.json", {"x": np.float64("nan"), "y": np.arange(2)})
    assert json.loads(p.read_text()) == {"x": None, "y": [0, 1]}


@pytest.mark.parametrize(
    "cell, expected",
    [("=SUM(A1)", "'=SUM(A1)"), ("+1+1", "'+1+1"), ("@x", "'@x"), ("-x", "'-x"), ("-1.5", "-1.5"), ("ok", "ok")],
)
def test_formula_cells_are_neutralised(cell, expected):
    # common practice (OWASP "CSV injection"): prefix a quote to formula-like cells
    assert neutralise_cell(cell) == expected


def test_table_writer_neutralises(tmp_path):
    import pandas as pd

    p = write_table(tmp_path / "t.csv", pd.DataFrame({"sample": ["=cmd()"], "v": [1.0]}))
    assert "'=cmd()" in p.read_text()


def test_atomic_folder_leaves_nothing_on_failure(tmp_path):
    target = tmp_path / "out"
    with pytest.raises(RuntimeError):
        with atomic_folder(target) as tmp:
            (tmp / "a.txt").write_text("x")
            raise RuntimeError("boom")
    assert not target.exists()
    assert [p.name for p in tmp_path.iterdir()] == []


def test_outputs_get_the_usual_file_mode(tmp_path):
    import os

    mask = os.umask(0)
    os.umask(mask)
    p = write_json(tmp_path / "m.json", {})
    assert (p.stat().st_mode & 0o777) == (0o666 & ~mask)


def test_readable_json_round_trips_and_keeps_value_lists_on_one_line():
    import math

    from zoneprofile._output import dumps_readable, to_jsonable

    doc = to_jsonable({"curve": np.linspace(0, 1, 300), "time_days": {"best": 1.5, "median": math.nan},
                       "nested": [{"a": [1, 2]}, [3, "x"], {}], "empty": [], "text": "ü <&> \"q\""})
    text = dumps_readable(doc)
    assert json.loads(text) == doc  # the standard library reads back exactly what was written
    lines = text.splitlines()
    assert sum(line.strip().startswith('"curve": [') for line in lines) == 1  # 300 values, one line
    assert '"time_days": {"best": 1.5, "median": null}' in text
    assert len(lines) < 20
