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


def test_library_chatter_stays_off_stderr(tmp_path, capsys, monkeypatch):
    """tifffile log lines and numpy RuntimeWarnings used to come before the one-line refusal."""
    import logging

    import numpy as np

    from zoneprofile._validation import InputError
    from zoneprofile.cli import zones

    def chatty(args):
        logging.getLogger("tifffile").warning("TiffTag 33550: invalid value")
        np.log(np.zeros(1))  # RuntimeWarning: divide by zero
        raise InputError("refused", path=tmp_path / "x.csv")

    monkeypatch.setattr(zones, "run", chatty)
    capsys.readouterr()
    assert main(["zones", str(tmp_path / "x.csv"), "-o", str(tmp_path / "z.json")]) == 2
    err = capsys.readouterr().err
    assert err == f"zoneprofile zones: {tmp_path / 'x.csv'}: refused\n"
