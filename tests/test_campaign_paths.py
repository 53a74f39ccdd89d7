"""Hostile input paths in a campaign file: refused naming the line and key (they were internal errors)."""

import os

import pytest

from test_campaign_schema import GOOD, error_of, write


@pytest.mark.parametrize("path, expect", [
    ("data/c1\\u0000x.csv", "NUL character"),
    ("loop1/c.csv", "loop of symbolic links"),
    ("loop1", "loop of symbolic links"),
    ("a" * 5000 + ".csv", "too long"),
    (("b" * 200 + "/") * 30 + "c.csv", "too long"),
])
def test_hostile_path_is_refused(tmp_path, path, expect):
    os.symlink(tmp_path / "loop1", tmp_path / "loop2")
    os.symlink(tmp_path / "loop2", tmp_path / "loop1")
    msg = str(error_of(write(tmp_path, GOOD.replace('traverse = "data/c1.csv"', f'traverse = "{path}"'))))
    assert expect in msg and "key 'traverse' of crystal #1" in msg and "\n" not in msg
