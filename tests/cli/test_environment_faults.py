"""Faults of the surroundings for the single commands: a read-only output folder,
a full disk, a closed standard output. Each is exit 2 and one line naming the
folder or the stream, never "internal error".

The test machine runs as root (permissions do not bind root) and cannot mount
a small file system, so the read-only folder and the full disk are simulated
where the operating system reports them: the temporary file of an atomic
write fails with EACCES / EROFS, or is opened on /dev/full (ENOSPC on write).
"""

import errno
import io
import os
import subprocess
import sys
import tempfile

import pytest

from hostile_corpus import profile_table
from zoneprofile import _output
from zoneprofile.cli import main

ZONES = ["--column", "Sr_ppm", "--noise-sd", "5"]


def _zones(tmp_path, out):
    return ["zones", str(profile_table(tmp_path)), *ZONES, "-o", str(out)]


@pytest.mark.parametrize("code, words", [(errno.EACCES, "permission denied"), (errno.EROFS, "read-only file system")])
def test_unwritable_output_folder_is_found_before_computing(tmp_path, monkeypatch, capsys, code, words):
    out_dir = tmp_path / "locked"
    out_dir.mkdir()
    real = tempfile.mkstemp

    def refuse(*args, dir=None, **kw):
        if dir is not None and os.path.samefile(dir, out_dir):
            raise OSError(code, os.strerror(code), os.path.join(dir, ".probe"))
        return real(*args, dir=dir, **kw)

    monkeypatch.setattr(_output.tempfile, "mkstemp", refuse)
    called = []
    monkeypatch.setattr("zoneprofile.zoning.analyse_zoning", lambda *a, **k: called.append(1))
    capsys.readouterr()
    assert main(_zones(tmp_path, out_dir / "z.json")) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(out_dir) in err and words in err and "internal error" not in err
    assert not called and not any(out_dir.iterdir())


def test_full_disk_names_the_folder_and_leaves_nothing(tmp_path, monkeypatch, capsys):
    out_dir = tmp_path / "full"
    out_dir.mkdir()
    real = tempfile.mkstemp

    def dev_full(*args, prefix=None, dir=None, **kw):
        fd, path = real(*args, prefix=prefix, dir=dir, **kw)
        if prefix and not prefix.startswith(".zoneprofile-probe"):  # the write itself: the disk is full
            os.close(fd)
            fd = os.open("/dev/full", os.O_WRONLY)
        return fd, path

    monkeypatch.setattr(_output.tempfile, "mkstemp", dev_full)
    capsys.readouterr()
    assert main(_zones(tmp_path, out_dir / "z.json")) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "no space left" in err and str(out_dir) in err
    assert not any(out_dir.iterdir())  # the temporary file was removed


def test_closed_stdout_in_process(tmp_path, monkeypatch, capsys):
    class Closed:
        def write(self, text):
            raise BrokenPipeError(errno.EPIPE, "Broken pipe")

        def flush(self):
            pass

        def fileno(self):  # not a real file descriptor, as pytest's capture
            raise io.UnsupportedOperation("fileno")

    capsys.readouterr()
    monkeypatch.setattr(sys, "stdout", Closed())
    assert main(_zones(tmp_path, tmp_path / "z.json")) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "standard output" in err and "closed" in err
    assert (tmp_path / "z.json").exists()  # the results were complete before the summary line


def test_closed_pipe_in_a_real_process(tmp_path):
    """`zoneprofile zones ... | :` — the reader exits before the summary is printed."""
    argv = _zones(tmp_path, tmp_path / "z.json")
    proc = subprocess.Popen([sys.executable, "-m", "zoneprofile", *argv], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE)
    proc.stdout.close()
    with proc.stderr:
        err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 2, err
    assert err.count("\n") == 1 and "standard output" in err and "closed" in err, err
