"""Fault tests of whole runs: kill -9, Ctrl-C, two runs into one folder, read-only and full disks,
a closed standard output, leftovers of killed runs, and what ``--force`` may replace.

The process tests start ``tests/_fault_driver.py`` in a child process: a campaign of tiny
crystals whose per-crystal function sleeps, so a kill lands at a known point.
"""

from __future__ import annotations

import errno
import json
import os
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from zoneprofile._outdir import MARKER, OutputFolder
from zoneprofile._validation import InputError
from zoneprofile.campaign import run_campaign

HERE = Path(__file__).resolve().parents[1]  # tests/
DRIVER = HERE / "_fault_driver.py"
sys.path.insert(0, str(HERE))
from _fault_driver import write_campaign  # noqa: E402

#: Workers must be gone this long after their parent dies or is interrupted (issue contract).
DEADLINE_S = 2.0


def _env():
    env = dict(os.environ)
    root = str(HERE.parent)
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")
    return env


class _Run:
    """The driver in a child process (its own session, so a group signal reaches it and its workers only)."""

    def __init__(self, folder, n, out, seconds, workers=2, *extra):
        self.log = Path(folder) / f"stderr-{time.monotonic_ns()}.txt"
        with open(self.log, "w") as fh:
            self.proc = subprocess.Popen([sys.executable, str(DRIVER), str(folder), str(n), str(out), str(seconds),
                                          str(workers), *extra], env=_env(), stdout=subprocess.DEVNULL, stderr=fh,
                                         start_new_session=True)
        self.pid = self.proc.pid

    def poll(self):
        return self.proc.poll()

    def wait(self, timeout):
        return self.proc.wait(timeout)

    def kill(self):
        self.proc.kill()
        self.proc.wait(10)

    @property
    def err(self) -> str:
        return self.log.read_text()


_start = _Run


def _cached(folder) -> int:
    return len(list((Path(folder) / ".zoneprofile-cache").glob("??/*.json")))


def _wait_for(condition, timeout):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if condition():
            return True
        time.sleep(0.05)
    return False


def _running(pid: int) -> bool:
    """Alive and not a zombie (a dead process not yet reaped has stopped computing)."""
    try:
        text = Path(f"/proc/{pid}/stat").read_text()
    except OSError:
        return False
    return not text[text.rfind(")") + 2:].startswith("Z")


def _worker_pids(folder, parent_pid):
    pids = {int(p) for p in (Path(folder) / "pids.txt").read_text().split()}
    return pids - {parent_pid}


needs_proc = pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="reads /proc to see processes")


@pytest.mark.slow
@needs_proc
def test_kill_9_leaves_no_orphan_and_keeps_finished_work(tmp_path):
    proc = _start(tmp_path, 24, tmp_path / "out", 0.4)
    try:
        assert _wait_for(lambda: _cached(tmp_path) >= 4, 60), proc.err
        workers = _worker_pids(tmp_path, proc.pid)
        assert len(workers) == 2
        os.kill(proc.pid, signal.SIGKILL)
        killed_at = time.monotonic()
        assert _wait_for(lambda: not any(_running(p) for p in workers), DEADLINE_S), "orphan workers still running"
        assert time.monotonic() - killed_at <= DEADLINE_S
        proc.wait(5)
    finally:
        if proc.poll() is None:
            proc.kill()
    kept = _cached(tmp_path)
    assert kept >= 4
    assert not (tmp_path / "out").exists()
    # the next run takes the stale lock over and computes only what was not finished
    again = _start(tmp_path, 24, tmp_path / "out", 0.01)
    assert again.wait(120) == 0, again.err
    err = again.err
    m = re.search(r"(\d+) computed, (\d+) from cache", err)
    assert m and int(m.group(2)) == kept and int(m.group(1)) == 24 - kept
    assert (tmp_path / "out" / MARKER).is_file()
    assert not (tmp_path / ".out.lock").exists()


@pytest.mark.slow
@needs_proc
def test_ctrl_c_stops_the_run_and_its_workers(tmp_path):
    proc = _start(tmp_path, 40, tmp_path / "out", 0.4)
    try:
        assert _wait_for(lambda: _cached(tmp_path) >= 2, 60)
        workers = _worker_pids(tmp_path, proc.pid)
        os.killpg(proc.pid, signal.SIGINT)  # what a terminal sends to the whole foreground group on Ctrl-C
        t0 = time.monotonic()
        code = proc.wait(10)
        assert time.monotonic() - t0 <= DEADLINE_S + 1.0
        assert _wait_for(lambda: not any(_running(p) for p in workers), DEADLINE_S)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert code == 130, proc.err
    assert _cached(tmp_path) >= 2
    assert not (tmp_path / "out").exists() and not (tmp_path / ".out.lock").exists()
    assert not list(tmp_path.glob(".out.*"))  # no temporary folder left


@pytest.mark.slow
def test_second_run_into_the_same_folder_refuses_at_once(tmp_path):
    first = _start(tmp_path, 12, tmp_path / "out", 0.4, 1)
    try:
        assert _wait_for(lambda: (tmp_path / ".out.lock").exists() and _cached(tmp_path) >= 1, 60)
        t0 = time.monotonic()
        second = _start(tmp_path, 12, tmp_path / "out", 0.4, 1, "--force")
        assert second.wait(60) == 2
        err = second.err
        assert "another zoneprofile run is writing this output folder" in err and f"pid {first.pid}" in err
        assert time.monotonic() - t0 < 10  # refused before computing: 12 crystals take 4.8 s
        assert first.wait(120) == 0
    finally:
        if first.poll() is None:
            first.kill()
    assert (tmp_path / "out" / "report.html").is_file()


# ---- in-process checks (fast) -------------------------------------------------------------------------------


def _noop(task):
    from zoneprofile.campaign._pipeline import _base_record

    return _base_record(task)


class _Counting:
    def __init__(self):
        self.calls = 0

    def __call__(self, task):
        self.calls += 1
        return _noop(task)


@pytest.fixture
def campaign(tmp_path):
    folder = tmp_path / "c"
    folder.mkdir()
    return write_campaign(folder, 2)


def test_existing_folder_is_refused_before_computing(campaign, tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "mine.txt").write_text("keep")
    counting = _Counting()
    with pytest.raises(InputError, match="output folder exists; pass --force"):
        run_campaign(campaign, out, process=counting, progress=False)
    assert counting.calls == 0
    # --force replaces only an earlier zoneprofile output: this folder has no marker
    with pytest.raises(InputError, match="holds no earlier zoneprofile output"):
        run_campaign(campaign, out, force=True, process=counting, progress=False)
    assert counting.calls == 0 and (out / "mine.txt").read_text() == "keep"


def test_force_replaces_an_earlier_output(campaign, tmp_path):
    out = tmp_path / "out"
    run_campaign(campaign, out, process=_noop, progress=False)
    marker = json.loads((out / MARKER).read_text())
    assert marker["software"] == "zoneprofile" and marker["command"] == "run"
    (out / "stale.txt").write_text("old")
    run_campaign(campaign, out, force=True, process=_noop, progress=False, cache=False)
    assert not (out / "stale.txt").exists() and (out / "report.html").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c", "out"]  # no lock, no temporary folder


@pytest.mark.parametrize("kind", ["file", "fifo"])
def test_output_that_is_not_a_folder_is_refused(campaign, tmp_path, kind):
    out = tmp_path / "out"
    if kind == "fifo":
        if not hasattr(os, "mkfifo"):
            pytest.skip("no FIFOs here")
        os.mkfifo(out)
    else:
        out.write_text("x")
    counting = _Counting()
    with pytest.raises(InputError, match=f"is a {'FIFO' if kind == 'fifo' else 'file'}, not a folder"):
        run_campaign(campaign, out, force=True, process=counting, progress=False)
    assert counting.calls == 0


def test_stale_lock_is_taken_over_and_live_lock_refuses(campaign, tmp_path):
    out = tmp_path / "out"
    lock = tmp_path / ".out.lock"
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, text=True)
    import socket

    lock.write_text(json.dumps({"pid": int(dead.stdout), "host": socket.gethostname(), "process_start": "1",
                                "started_utc": "2000-01-01T00:00:00Z"}))
    target = OutputFolder(out)
    assert any("stale lock" in n for n in target.notes)
    # while we hold it, a second taker refuses at once, naming our pid
    with pytest.raises(InputError, match=f"pid {os.getpid()}"):
        OutputFolder(out)
    target.release()
    assert not lock.exists()


def test_leftover_temporary_folders_are_cleaned(campaign, tmp_path):
    ours = tmp_path / ".out.ab12cd34"
    ours.mkdir()
    (ours / MARKER).write_text("{}")
    (ours / "report.html").write_text("half")
    foreign = tmp_path / ".out.zz99zz99"  # same pattern, but not ours (no marker): left alone
    foreign.mkdir()
    summary = run_campaign(campaign, tmp_path / "out", process=_noop, progress=False)
    assert not ours.exists() and foreign.exists()
    assert any("unfinished output folder" in n for n in summary.notes)


@pytest.mark.parametrize("code", [errno.ENOSPC, errno.EROFS])
def test_write_faults_are_one_line_and_leave_nothing(campaign, tmp_path, monkeypatch, code):
    """Simulated full disk / read-only file system while writing the report."""
    import zoneprofile.campaign._run as run_module

    def failing(summary, folder, **kw):
        (Path(folder) / "part.txt").write_text("half")
        raise OSError(code, os.strerror(code), str(Path(folder) / "report.html"))

    monkeypatch.setattr(run_module, "write_campaign_outputs", failing)
    out = tmp_path / "out"
    with pytest.raises(InputError) as info:
        run_campaign(campaign, out, process=_noop, progress=False)
    text = str(info.value)
    assert str(out) in text and ("no space left" in text or "read-only" in text)
    assert "\n" not in text
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c"]  # no folder, no lock, no temporary folder


def _can_mount() -> bool:
    return sys.platform.startswith("linux") and hasattr(os, "geteuid") and os.geteuid() == 0 \
        and subprocess.run(["which", "mount"], capture_output=True).returncode == 0


@pytest.fixture
def small_mount(tmp_path):
    """A real 64 KiB tmpfs (when this machine allows mounting); yields a function to make it read-only."""
    if not _can_mount():
        pytest.skip("cannot mount a small file system here (the simulated test covers it)")
    point = tmp_path / "mnt"
    point.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs", str(point)], capture_output=True)
    if done.returncode != 0:
        pytest.skip("mount refused: " + done.stderr.decode(errors="replace"))
    try:
        yield point
    finally:
        subprocess.run(["umount", "-l", str(point)], capture_output=True)


def test_full_disk_for_real(campaign, small_mount, capsys):
    from zoneprofile.cli import main

    filler = small_mount / "filler"
    fd = os.open(filler, os.O_WRONLY | os.O_CREAT)  # fill the disk, then free two pages (lock and marker)
    try:
        while True:
            os.write(fd, b"\0" * 4096)
    except OSError as exc:
        assert exc.errno == errno.ENOSPC
    finally:
        os.close(fd)
    os.truncate(filler, filler.stat().st_size - 2 * 4096)
    out = small_mount / "out"
    code = main(["run", str(campaign), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2, err
    assert err.count("\n") == 1 and "no space left" in err and str(out) in err
    assert [p.name for p in small_mount.iterdir()] == ["filler"]  # the half-written folder and the lock are gone


def test_read_only_disk_for_real(campaign, small_mount, capsys):
    from zoneprofile.cli import main

    subprocess.run(["mount", "-o", "remount,ro", str(small_mount)], check=True)
    counting = _Counting()
    with pytest.raises(InputError, match="is not writable"):
        run_campaign(campaign, small_mount / "out", process=counting, progress=False)
    assert counting.calls == 0  # found before computing
    code = main(["run", str(campaign), "--out", str(small_mount / "out"), "--quiet"])
    err = capsys.readouterr().err
    assert code == 2 and err.count("\n") == 1 and "not writable" in err


def test_closed_stdout_is_one_line(tmp_path):
    x = np.linspace(0, 200, 60)
    an = np.where(x < 100, 70.0, 50.0)
    path = tmp_path / "p.csv"
    pd.DataFrame({"distance_um": x, "An": an}).to_csv(path, index=False)
    read, write = os.pipe()
    os.close(read)  # the reader is gone before anything is written: `zoneprofile zones ... | :`
    try:
        proc = subprocess.run([sys.executable, "-m", "zoneprofile", "zones", str(path), "-o",
                               str(tmp_path / "z.json")], stdout=write, stderr=subprocess.PIPE, text=True,
                              env=_env(), timeout=120)
    finally:
        os.close(write)
    assert proc.returncode == 2, proc.stderr
    assert proc.stderr.count("\n") == 1 and "standard output was closed" in proc.stderr


@pytest.mark.parametrize("code, expected", [(errno.ENOSPC, "no space left"), (errno.EROFS, "read-only"),
                                            (errno.EACCES, "permission denied")])
def test_single_command_write_fault_is_one_line(tmp_path, monkeypatch, capsys, code, expected):
    """Simulated full disk, read-only file system and refused permission while `zones` writes its JSON."""
    import zoneprofile._output as output
    from zoneprofile.cli import main

    x = np.linspace(0, 200, 60)
    path = tmp_path / "p.csv"
    pd.DataFrame({"distance_um": x, "An": np.where(x < 100, 70.0, 50.0)}).to_csv(path, index=False)
    target = tmp_path / "z.json"

    def failing(p, data):
        raise OSError(code, os.strerror(code), str(p))

    monkeypatch.setattr(output, "write_bytes", failing)
    assert main(["zones", str(path), "-o", str(target)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and expected in err and str(target.parent) in err and "internal error" not in err
    assert not target.exists()
