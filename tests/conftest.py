"""Shared test helpers."""

from __future__ import annotations

import contextlib
import io
import os
import subprocess
import sys

import pytest


def run_cli(*args, cwd=None):
    """Run ``zoneprofile ARGS`` in this process through ``main([...])``; return (code, stdout, stderr).

    In-process is the default for speed (no interpreter start-up per refusal); the
    console-script route itself is tested by :func:`run_cli_process` callers.
    """
    from zoneprofile.cli import main

    out, err = io.StringIO(), io.StringIO()
    with contextlib.chdir(cwd or os.getcwd()), contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main([str(a) for a in args])
        except SystemExit as exc:  # argparse refusals exit 2 after one usage line
            code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 2)
    return code, out.getvalue(), err.getvalue()


def run_cli_process(*args, cwd=None):
    """Run ``zoneprofile ARGS`` in a fresh interpreter, as a user does; return (code, stdout, stderr)."""
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
