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
import functools
import importlib
import os
import sys
import traceback

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
        p.set_defaults(_run=_quietly(module.run))
    return parser


def main(argv=None) -> int:
    """Entry point of the ``zoneprofile`` console script."""
    parser = build_parser()
    args = parser.parse_args(argv)
    if getattr(args, "_run", None) is None:
        parser.print_help()
        return 2
    try:
        code = args._run(args)
    except InputError as exc:
        sys.stderr.write(f"zoneprofile {args.command}: {exc}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("zoneprofile: interrupted\n")
        return 130
    except BrokenPipeError:
        return _closed_stdout(args.command)
    except OSError as exc:
        told = _environment_fault(exc)
        if told is None:
            return _internal_error(args.command, exc)
        sys.stderr.write(f"zoneprofile {args.command}: {told}\n")
        return 2
    except Exception as exc:  # an internal error: one line, traceback on request
        return _internal_error(args.command, exc)
    try:
        sys.stdout.flush()
    except BrokenPipeError:
        return _closed_stdout(args.command)
    return int(code or 0)


def _internal_error(command, exc) -> int:
    if os.environ.get("ZONEPROFILE_DEBUG"):
        traceback.print_exception(exc)
    text = " ".join(str(exc).split()) or type(exc).__name__
    sys.stderr.write(
        f"zoneprofile {command}: internal error: {type(exc).__name__}: {text} "
        "(set ZONEPROFILE_DEBUG=1 for details and please report it)\n"
    )
    return 1


def _closed_stdout(command) -> int:
    """Standard output was closed by the reader (``zoneprofile zones ... | head``): one line, exit 2."""
    try:  # further writes (and the interpreter's final flush) go nowhere instead of raising again
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass
    sys.stderr.write(f"zoneprofile {command}: standard output was closed before the output was written; "
                     "write to a file with --out instead\n")
    return 2


def _environment_fault(exc: OSError) -> str | None:
    """One line for a fault of the machine (read-only, full disk, permission), or None."""
    from zoneprofile._outdir import ENVIRONMENT_ERRNOS  # the one table of such faults

    reason = ENVIRONMENT_ERRNOS.get(exc.errno)
    if reason is None:
        return None
    where = exc.filename if exc.filename is not None else "an output file"
    return f"{where}: cannot write: {reason}; free space or choose a writable place for the output"


def _quietly(run):
    """``run`` with library chatter (numpy RuntimeWarnings, tifffile log lines) kept off
    stderr: the command's own notes and its one-line refusals are what the user reads."""

    @functools.wraps(run)
    def quiet(args):
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
                return run(args)
        finally:
            logger.setLevel(saved[0])
            logger.propagate = saved[1]

    return quiet


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
