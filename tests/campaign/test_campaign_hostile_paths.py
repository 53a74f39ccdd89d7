"""Hostile paths and files in campaigns: each refused at once with exit code 2 and one plain line.

FIFOs and devices given as the campaign file or as an input (reading would block or never
end), symbolic-link loops, NUL bytes, names longer than the file system allows, TOML nested
thousands deep, and the same odd paths as ``--out``. Nothing is written in any case.
"""

from __future__ import annotations

import os
import threading

import pytest

from zoneprofile.cli import main

BASE = """seed = 1
[defaults]
temperature_c = 1000
mineral = "plagioclase"
[samples.A]
[[crystals]]
sample = "A"
id = "c1"
traverse = "t.csv"
"""

LONG = "a" * 5000


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "t.csv").write_text("Point,distance_um,SiO2,Al2O3,CaO,Na2O,K2O\n1,0,50,31,14,3.2,0.1\n")
    return tmp_path


def _run(capsys, *args, timeout=30):
    """main(['run', ...]) in a thread, so a read that blocks fails the test instead of hanging it."""
    result = {}

    def target():
        result["code"] = main(["run", *map(str, args)])

    thread = threading.Thread(target=target, daemon=True)
    thread.start()
    thread.join(timeout)
    assert not thread.is_alive(), "the run blocked"
    err = capsys.readouterr().err
    return result["code"], err


def _one_line(err):
    assert err.count("\n") == 1 and "Traceback" not in err and "internal error" not in err, err
    return err


def _nothing_written(folder):
    assert not (folder / "out").exists() and not (folder / ".zoneprofile-cache").exists()
    assert not list(folder.glob(".out*"))


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
def test_fifo_as_campaign_file(capsys, folder):
    os.mkfifo(folder / "c.toml")
    code, err = _run(capsys, folder / "c.toml", "--out", folder / "out")
    assert code == 2 and "FIFO" in _one_line(err)
    _nothing_written(folder)


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero here")
def test_device_as_campaign_file(capsys, folder):
    code, err = _run(capsys, "/dev/zero", "--out", folder / "out")
    assert code == 2 and "is a device" in _one_line(err)


def test_symlink_loop_nul_and_long_name_as_campaign_file(capsys, folder):
    os.symlink(folder / "b.toml", folder / "a.toml")
    os.symlink(folder / "a.toml", folder / "b.toml")
    for path, expected in [(folder / "a.toml", "loop of symbolic links"),
                           (str(folder / "c") + "\0.toml", "NUL character"),
                           (folder / (LONG + ".toml"), "longer than the file system allows")]:
        code, err = _run(capsys, path, "--out", folder / "out")
        assert code == 2 and expected in _one_line(err)
        assert len(err) < 400 and "\0" not in err  # the name is shortened and escaped in the message
    _nothing_written(folder)


@pytest.mark.parametrize("nested", ["a = " + "[" * 100_000 + "]" * 100_000,
                                    "a = " + "{x = " * 5000 + "1" + "}" * 5000])
def test_toml_nested_deep(capsys, folder, nested):
    (folder / "c.toml").write_text(nested + "\n")
    code, err = _run(capsys, folder / "c.toml", "--out", folder / "out")
    assert code == 2 and "nested too deeply" in _one_line(err)
    _nothing_written(folder)


def _with_input(folder, value, *, outside=False):
    text = BASE.replace('traverse = "t.csv"', f"traverse = {value}")
    if outside:
        text = "allow_outside_paths = true\n" + text
    (folder / "c.toml").write_text(text)
    return folder / "c.toml"


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no FIFOs here")
def test_fifo_and_device_as_input(capsys, folder):
    os.mkfifo(folder / "pipe.csv")
    code, err = _run(capsys, _with_input(folder, '"pipe.csv"'), "--out", folder / "out")
    assert code == 2 and "FIFO" in _one_line(err) and "line 9" in err
    if os.path.exists("/dev/zero"):
        code, err = _run(capsys, _with_input(folder, '"/dev/zero"', outside=True), "--out", folder / "out")
        assert code == 2 and "is a device" in _one_line(err)
    _nothing_written(folder)


def test_loop_nul_and_long_name_as_input(capsys, folder):
    os.symlink(folder / "y.csv", folder / "x.csv")
    os.symlink(folder / "x.csv", folder / "y.csv")
    for value, expected in [('"x.csv"', "loop of symbolic links"), ('"t\\u0000.csv"', "NUL character"),
                            (f'"{LONG}.csv"', "longer than the file system allows")]:
        code, err = _run(capsys, _with_input(folder, value), "--out", folder / "out")
        assert code == 2 and expected in _one_line(err), err
        assert len(err) < 500
    _nothing_written(folder)


def test_odd_output_paths(capsys, folder):
    (folder / "c.toml").write_text(BASE)
    os.symlink(folder / "o2", folder / "o1")
    os.symlink(folder / "o1", folder / "o2")
    for out, expected in [(folder / "o1", "loop of symbolic links"), (str(folder / "o") + "\0", "NUL character"),
                          (folder / LONG, "longer than the file system allows")]:
        code, err = _run(capsys, folder / "c.toml", "--out", out)
        assert code == 2 and expected in _one_line(err), err
    assert not (folder / ".zoneprofile-cache").exists()
