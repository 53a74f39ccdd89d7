"""The hostile corpus: every case is refused with exit 2, one plain line, nothing written.

Runs ``zoneprofile.cli.main`` in-process (fast); the corpus itself is
``tests/hostile_corpus.py``. Each case names the fault it reproduces.
"""

import pytest

from hostile_corpus import CASES
from zoneprofile.cli import main


@pytest.mark.parametrize("name", sorted(CASES))
def test_refused_with_one_line_and_nothing_written(tmp_path, capsys, name):
    argv, expected = CASES[name](tmp_path)
    capsys.readouterr()
    try:
        code = main(argv)
    except SystemExit as exc:  # an argparse usage error (an option out of its range)
        code = exc.code
    captured = capsys.readouterr()
    err = captured.err
    assert code == 2, err
    assert err.count("\n") == 1 and err.endswith("\n"), err
    assert "internal error" not in err and "Traceback" not in err
    assert expected in err, err
    out = tmp_path / "out"
    assert not out.exists() or not any(out.iterdir()), sorted(p.name for p in out.iterdir())
