"""The ``zoneprofile`` command line: a thin shell over the public functions.

Each command lives in its own small module of this package with two functions:
``configure(parser)`` adds its arguments and ``run(args) -> int`` does the work
by calling public functions of the stage packages. Heavy imports happen inside
``run`` so ``zoneprofile --help`` stays fast.

Exit codes: 0 success, 2 bad input (one plain line on stderr naming the file,
row and column where they apply), 1 internal error. Set ``ZONEPROFILE_DEBUG=1``
to see the traceback of an internal error.
"""

from __future__ import annotations

import argparse
import contextlib
import errno
import importlib
import os
import sys
import traceback
from pathlib import Path

from zoneprofile import __version__
from zoneprofile._limits import apply_limits
from zoneprofile._validation import InputError

__all__ = ["main", "COMMANDS"]

# name -> (module, one-line help). An explicit registry: adding a command means
# adding a module and a line here.
COMMANDS: dict[str, tuple[str, str]] = {
    "demo": ("zoneprofile.cli.demo", "write and run the invented demo campaign"),
    "recalc": ("zoneprofile.cli.recalc", "microprobe table -> cations, An/Fo/Wo-En-Fs, QC, distance from rim"),
    "zones": ("zoneprofile.cli.zones", "read the zoning of a profile: steps, resorption, oscillatory bands, zones"),
    "fit": ("zoneprofile.cli.fit", "fit a diffusion model to a boundary and date it"),
    "laws": ("zoneprofile.cli.laws", "list the diffusion laws with citations and calibrated ranges"),
    "map": ("zoneprofile.cli.map", "calibrate an element map and extract a composition profile"),
    "run": ("zoneprofile.cli.run", "run a whole campaign (TOML) and write the report"),
}


class _Parser(argparse.ArgumentParser):
    """ArgumentParser whose usage errors are one plain line and exit code 2."""

    def error(self, message):  # noqa: D401 - argparse API
        sys.stderr.write(f"{self.prog}: {message} (see --help)\n")
        raise SystemExit(2)


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="zoneprofile",
        description=(
            "Composition profiles, zoning and diffusion timescales of zoned crystals, "
            "from microprobe and LA-ICP-MS tables and element maps."
        ),
        epilog="Run 'zoneprofile COMMAND --help' for the options of a command.",
    )
    parser.add_argument("--version", action="version", version=f"zoneprofile {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for name, (module_name, help_text) in COMMANDS.items():
        module = importlib.import_module(module_name)
        p = sub.add_parser(
            name,
            help=help_text,
            description=getattr(module, "DESCRIPTION", help_text),
            formatter_class=argparse.RawDescriptionHelpFormatter,
        )
        module.configure(p)
        apply_limits(name, p)  # shared ranges of numeric options (zoneprofile/_limits.py)
        p.set_defaults(_run=module.run)
    return parser


def main(argv=None) -> int:
    """Entry point of the ``zoneprofile`` console script."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "_run", None) is None:
        parser.print_help()
        return 2
    try:
        with _quiet_libraries():
            code = args._run(args)
        sys.stdout.flush()
    except InputError as exc:
        sys.stderr.write(f"zoneprofile {args.command}: {exc}\n")
        return 2
    except (OSError, ValueError) as exc:
        message = environment_message(exc)
        if message is None:
            return _internal_error(args, exc)
        if isinstance(exc, BrokenPipeError) or not isinstance(exc, OSError):
            _silence_stdout()
        sys.stderr.write(f"zoneprofile {args.command}: {message}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("zoneprofile: interrupted\n")
        return 130
    except Exception as exc:  # an internal error: one line, traceback on request
        return _internal_error(args, exc)
    return int(code or 0)


def _internal_error(args, exc) -> int:
    if os.environ.get("ZONEPROFILE_DEBUG"):
        traceback.print_exception(exc)
    text = " ".join(str(exc).split()) or type(exc).__name__
    sys.stderr.write(
        f"zoneprofile {args.command}: internal error: {type(exc).__name__}: {text} "
        "(set ZONEPROFILE_DEBUG=1 for details and please report it)\n"
    )
    return 1


_DENIED = {errno.EACCES, errno.EPERM, errno.EROFS}
_FULL = {errno.ENOSPC, errno.EDQUOT, errno.EFBIG}


def environment_message(exc) -> str | None:
    """One plain line for a fault of the surroundings (closed output stream,
    read-only folder, full disk), or None when ``exc`` is not one."""
    if isinstance(exc, BrokenPipeError) or (isinstance(exc, OSError) and exc.errno == errno.EPIPE):
        return "standard output is closed (the program reading it has exited); output files, if any, are complete"
    if not isinstance(exc, OSError):  # print() to a closed sys.stdout
        if "closed file" in str(exc):
            return "standard output is closed; output files, if any, are complete"
        return None
    path = exc.filename2 or exc.filename
    where = ""
    if path:
        p = Path(os.fsdecode(path))
        # a temporary file of an atomic write: name the folder the user chose
        folder = p.parent if p.name.startswith(".") or not p.exists() or p.is_file() else p
        where = f" in the folder {folder}"
    if exc.errno in _DENIED:
        kind = "read-only file system" if exc.errno == errno.EROFS else "permission denied"
        return f"cannot write{where}: {kind}; choose another output folder or fix its permissions"
    if exc.errno in _FULL:
        return f"no space left on the device{where}; free some space or choose another output folder"
    return None


def _silence_stdout() -> None:
    """After a closed pipe, point stdout at /dev/null so the interpreter's final flush stays quiet."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError, AttributeError):  # not a real file (a test capture): nothing to silence
        pass


@contextlib.contextmanager
def _quiet_libraries():
    """Keep library chatter (numpy RuntimeWarnings, tifffile log lines) off stderr:
    the command's own notes and its one-line refusals are what the user reads."""
    import logging
    import warnings

    logger = logging.getLogger("tifffile")
    saved = logger.level, logger.propagate
    logger.setLevel(logging.CRITICAL + 1)
    logger.propagate = False
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            warnings.filterwarnings("ignore", module="tifffile")
            yield
    finally:
        logger.setLevel(saved[0])
        logger.propagate = saved[1]


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
