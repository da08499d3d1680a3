"""The ``ctt`` command: parses arguments, calls the pipeline, maps errors to exit codes.

Sub-commands live in :mod:`ctt.commands`; each module there has a
``register(subparsers)`` function. Logs go to stderr; results go to files or
stdout. Exit codes are those of :mod:`ctt.errors` (``exit_code_for``).

Start-up stays fast (``ctt --version``, ``ctt --help``): the command modules
import only the standard library and :mod:`ctt.errors` at module level, and
import numpy, pandas, matplotlib and the processing modules inside the
functions that run a command (a test checks this; ``scripts/bench_startup.py``
measures it).
"""

from __future__ import annotations

import argparse
import importlib
import logging
import os
import sys

from . import __version__
from . import commands as _commands
from .errors import EXIT_OK, EXIT_USAGE, describe, exit_code_for, is_user_error

log = logging.getLogger("ctt")


def command_modules() -> list[str]:
    """Names of the modules in ctt/commands that define commands (not starting with '_')."""
    folder = os.path.dirname(_commands.__file__)
    return sorted(f[:-3] for f in os.listdir(folder) if f.endswith(".py") and not f.startswith("_"))


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="ctt",
        description=(
            "GNSS common-view time transfer: clock A minus clock B between two "
            "distant stations from their RINEX files, with uncertainties, "
            "stability and drift."
        ),
        epilog="Exit codes: 0 ok, 1 processing error, 2 usage/config error, "
        "3 missing input or no usable data, 4 archive locked by another run.",
    )
    parser.add_argument("--version", action="version", version=f"ctt {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks and debug logs")
    parser.add_argument("-q", "--quiet", action="store_true", help="only warnings and errors on stderr")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in command_modules():
        module = importlib.import_module(f"{_commands.__name__}.{name}")
        register = getattr(module, "register", None)
        if register is not None:
            register(sub)
    # -q / --debug are accepted after the sub-command too ("ctt daily -q ..."); SUPPRESS keeps
    # the value given before the sub-command when they are not repeated after it
    for sp in sub.choices.values():
        sp.add_argument("--debug", action="store_true", default=argparse.SUPPRESS, help="show tracebacks and debug logs")
        sp.add_argument("-q", "--quiet", action="store_true", default=argparse.SUPPRESS,
                        help="only warnings and errors on stderr")
    return parser


def _setup_logging(debug: bool, quiet: bool) -> None:
    level = logging.DEBUG if debug else (logging.WARNING if quiet else logging.INFO)
    handler = logging.StreamHandler(sys.stderr)
    handler.setFormatter(logging.Formatter("ctt: %(levelname)s: %(message)s"))
    root = logging.getLogger("ctt")
    root.handlers[:] = [handler]
    root.setLevel(level)
    root.propagate = False


def main(argv: list[str] | None = None) -> int:
    if (sys.argv[1:] if argv is None else list(argv)) == ["--version"]:
        print(f"ctt {__version__}")   # the cron/packaging probe: answer without building every parser
        return EXIT_OK
    parser = build_parser()
    args = parser.parse_args(argv)
    _setup_logging(args.debug, args.quiet)
    if not getattr(args, "func", None):
        parser.print_help(sys.stderr)
        print("ctt: error: give a command (listed above)", file=sys.stderr)
        return EXIT_USAGE
    try:
        code = args.func(args)
        return EXIT_OK if code is None else int(code)
    except KeyboardInterrupt:
        print("ctt: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        return EXIT_OK
    except Exception as exc:
        if is_user_error(exc):   # a ctt error, or an OS error about a path given by the user
            if args.debug:
                log.exception("failed")
            print(f"ctt: error: {describe(exc)}", file=sys.stderr)
            return exit_code_for(exc)
        if args.debug:           # a bug: still one line unless --debug
            raise
        print(f"ctt: {describe(exc)} (run with --debug for the traceback)", file=sys.stderr)
        return exit_code_for(exc)


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
