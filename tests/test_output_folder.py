"""An existing folder is never accepted as a file output, with or without ``--force``.

The command-line contract (README, docs/design.md): bad input exits 2 with one line naming the
file, nothing is written and nothing existing is touched. A folder given where a file name is
expected is bad input; ``--force`` allows overwriting a file, not replacing a folder.
"""

from pathlib import Path

import pytest

from zoneprofile._output import check_outputs
from zoneprofile._validation import InputError
from zoneprofile.cli import main

TABLES = Path(__file__).resolve().parent.parent / "fixtures" / "tables"


@pytest.mark.parametrize("name", ["results", "profile.csv"])  # a plain folder, and one named like a file
@pytest.mark.parametrize("force", [False, True])
def test_existing_folder_refused_with_and_without_force(tmp_path, name, force):
    folder = tmp_path / name
    folder.mkdir()
    (folder / "inside.txt").write_text("keep")
    with pytest.raises(InputError, match="folder"):
        check_outputs(folder, force=force)
    assert (folder / "inside.txt").read_text() == "keep"


def test_file_output_with_force_still_accepted(tmp_path):
    out = tmp_path / "x.csv"
    out.write_text("old")
    assert check_outputs(out, force=True) == [out]


def test_recalc_into_a_folder_with_force_is_exit_2_one_line(tmp_path, capsys):
    folder = tmp_path / "results"
    folder.mkdir()
    code = main(["recalc", str(TABLES / "plag_tab.tsv"), "-o", str(folder), "--force"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert len(err.strip().splitlines()) == 1 and "folder" in err and "results" in err
    assert folder.is_dir() and list(folder.iterdir()) == []
