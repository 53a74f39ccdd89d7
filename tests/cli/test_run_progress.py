"""The progress line of a campaign: a line at once, and a time left that ignores start-up and the cache."""

from __future__ import annotations

import io

import pytest

from zoneprofile.campaign._executors import Progress


class Tty(io.StringIO):
    def isatty(self):
        return True


def test_phase_line_is_shown_at_once_and_blanked_by_the_next():
    stream = Tty()
    bar = Progress(10, stream=stream)
    bar.phase("checking the input files of 10000 crystals")
    bar.update(0, force=True)
    text = stream.getvalue()
    assert text.startswith("\rchecking the input files of 10000 crystals")
    last = text.split("\r")[-1]
    assert last.startswith("crystals  0/10") and len(last) >= len("checking the input files of 10000 crystals")
    assert Progress(10, stream=io.StringIO()).enabled is False  # not a terminal: nothing drawn


def test_time_left_from_the_rate_after_the_first_crystal():
    # a resumed run: 1000 of 3000 from the cache, 2 workers, the first crystal after a 5 s start-up,
    # then one crystal every 0.01 s. The earlier estimate (elapsed / computed) said 5 s x 1999 = 10^4 s;
    # the rate after the first crystal gives the true 0.01 s x remaining
    bar = Progress(3000, stream=Tty(), workers=2)
    assert bar.eta_seconds(1001, 1, now=5.0) is None  # first crystal: nothing to go on yet
    for k in range(2, 5):
        assert bar.eta_seconds(1000 + k, k, now=5.0 + 0.01 * (k - 1)) is None  # fewer than 2 x workers since
    left = bar.eta_seconds(1005, 5, now=5.04)
    assert left == pytest.approx(0.01 * (3000 - 1005))
    assert bar.eta_seconds(3000, 2000, now=30.0) is None  # done
