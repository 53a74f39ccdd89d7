"""The progress line of a large campaign: how soon it appears, and how sane its time left is.

    python tests/benchmarks/bench_progress.py [N_CRYSTALS]   (default 10000)

1. ``zoneprofile run`` of an N-crystal campaign (one small traverse each, two
   workers) with stderr on a pseudo-terminal: seconds until the first line and
   until the first line counting crystals, beside the 3 s goal.
2. A resumed run: a campaign of 3000 crystals whose per-crystal function sleeps
   a fixed time (tests/_fault_driver.py) is killed after a third is cached, then
   run again; every "time left" it shows is compared with the time the
   crystals really took from that moment (ratio shown / real; 1 is perfect;
   the time left counts crystals, not the report written after them).

Both are measured in this one run; figures go to docs/performance-campaign.md.
"""

from __future__ import annotations

import os
import pty
import re
import select
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT / "tests"))
from _fault_driver import write_campaign  # noqa: E402


def _env():
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    return env


def watch(cmd, *, until=None, limit=600.0, env=None):
    """Run ``cmd`` with stderr on a pty; return [(seconds, line)] and the end time."""
    master, slave = pty.openpty()
    t0 = time.monotonic()
    proc = subprocess.Popen(cmd, stderr=slave, stdout=subprocess.DEVNULL, env=env or _env(),
                            start_new_session=True)
    os.close(slave)
    lines = []
    try:
        while time.monotonic() - t0 < limit:
            ready, _, _ = select.select([master], [], [], 0.1)
            if ready:
                try:
                    data = os.read(master, 65536)
                except OSError:
                    break
                if not data:
                    break
                now = time.monotonic() - t0
                for part in re.split(rb"[\r\n]", data):
                    text = part.decode("utf-8", "replace").strip()
                    if text:
                        lines.append((now, text))
                if until is not None and until(lines):
                    break
            elif proc.poll() is not None:
                break
    finally:
        if proc.poll() is None:
            os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
        os.close(master)
    return lines, time.monotonic() - t0


def first_line(n):
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        toml = write_campaign(folder, n)
        lines, _ = watch([sys.executable, "-m", "zoneprofile", "run", str(toml), "--out", str(folder / "out"),
                          "--workers", "2"], until=lambda ls: any(t.startswith("crystals ") for _, t in ls))
    first = lines[0] if lines else (float("nan"), "")
    counting = next(((s, t) for s, t in lines if t.startswith("crystals ")), (float("nan"), ""))
    print(f"{n}-crystal campaign: first line after {first[0]:.2f} s ({first[1][:60]!r}); first line counting "
          f"crystals after {counting[0]:.2f} s; goal 3 s: ratio first line / goal {first[0] / 3.0:.2f}",
          flush=True)


def eta_after_resume(n=3000, seconds=0.02):
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        driver = [sys.executable, str(ROOT / "tests" / "_fault_driver.py"), str(folder), str(n),
                  str(folder / "out"), str(seconds), "2"]
        cache = folder / ".zoneprofile-cache"
        proc = subprocess.Popen(driver, env=_env(), stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                                start_new_session=True)
        while len(list(cache.glob("??/*.json"))) < n // 3:
            time.sleep(0.1)
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()
        env = _env()
        env["FAULT_PROGRESS"] = "1"
        lines, end = watch(driver, env=env)
    done_at = next((w for w, t in lines if t.startswith(f"crystals {n}/{n}")), end)
    etas = []
    for when, text in lines:
        m = re.search(r"about ([\d.]+) (s|min|h) left", text)
        if m:
            shown = float(m.group(1)) * {"s": 1, "min": 60, "h": 3600}[m.group(2)]
            etas.append((when, shown, done_at - when))
    if not etas:
        print("no time left was shown", flush=True)
        return
    # the earlier estimate, replayed on the same line times: elapsed since the bar appeared / crystals
    # computed, shown from the first computed crystal on
    bars = [(w, int(m.group(1)), int(m.group(2))) for w, t in lines
            if (m := re.search(r"crystals +(\d+)/\d+ .*?(\d+) from cache", t))]
    start = bars[0][0]
    old = [((w - start) / (d - c) * (n - d), done_at - w) for w, d, c in bars if d > c and d < n]
    old_ratios = sorted(a / max(b, 1e-9) for a, b in old)
    ratios = sorted(s / max(r, 1e-9) for _, s, r in etas)
    w, s, r = etas[0]
    print(f"resumed {n}-crystal run (a third cached, {seconds} s per crystal, 2 workers; last crystal at "
          f"{done_at:.1f} s, report written at {end:.1f} s): first "
          f"time left shown at {w:.2f} s: {s:.0f} s shown vs {r:.1f} s real (ratio {s / r:.2f}); over "
          f"{len(ratios)} lines shown/real median {ratios[len(ratios) // 2]:.2f}, range "
          f"{ratios[0]:.2f}-{ratios[-1]:.2f}", flush=True)
    print(f"  the earlier estimate on the same run: first {old[0][0]:.0f} s vs {old[0][1]:.1f} s real (ratio "
          f"{old[0][0] / old[0][1]:.2f}); median {old_ratios[len(old_ratios) // 2]:.2f}, range "
          f"{old_ratios[0]:.2f}-{old_ratios[-1]:.2f}; first-shown ratio earlier / now "
          f"{(old[0][0] / old[0][1]) / (s / r):.1f}", flush=True)


if __name__ == "__main__":
    first_line(int(sys.argv[1]) if len(sys.argv) > 1 else 10000)
    eta_after_resume()
