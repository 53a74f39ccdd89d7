"""Shared test helpers."""

from __future__ import annotations

import subprocess
import sys

import pytest


def run_cli(*args, cwd=None):
    """Run ``zoneprofile ARGS`` in a fresh interpreter; return (code, stdout, stderr)."""
    proc = subprocess.run(
        [sys.executable, "-m", "zoneprofile", *map(str, args)],
        capture_output=True,
        text=True,
        cwd=cwd,
        timeout=600,
    )
    return proc.returncode, proc.stdout, proc.stderr


@pytest.fixture
def cli():
    return run_cli
