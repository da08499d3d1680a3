"""Exception types of ctt and the exit codes the command line maps them to.

Every error that comes from bad input names the file and, where there is one,
the line, and says what was expected. The CLI prints ``str(error)`` as one
line and exits with ``error.exit_code``; the traceback is shown only with
``--debug``.

The exit codes are those of the table in README.md ("Exit codes"), the one
statement of the contract; :data:`EXIT_BY_CLASS` below is the one place that
maps error classes onto them (a test checks the two agree), and
:func:`exit_code_for` is what the command line, ``daily`` and ``backfill``
use, so a day's failure carries its class, never a guess from its text.
Operating-system errors that reach the command line (a directory where a
file is expected, no permission, a full disk) are mapped here too, so that a
user's mistake never shows as an "internal error".
"""

from __future__ import annotations

EXIT_OK = 0
EXIT_PROCESSING = 1
EXIT_USAGE = 2
EXIT_MISSING_INPUT = 3
EXIT_LOCKED = 4


class CttError(Exception):
    """Base class of all ctt errors; ``exit_code`` is what the CLI returns (see EXIT_BY_CLASS)."""

    @property
    def exit_code(self) -> int:
        return exit_code_for(self)


class FileFormatError(CttError, ValueError):
    """A file does not follow its format.

    ``path`` and ``line`` (1-based, ``None`` when not tied to a line) locate the
    problem; ``expected`` says what the format requires there.
    """


    def __init__(self, path, line, expected, found=None):
        self.path = str(path)
        self.line = line
        self.expected = expected
        self.found = found
        where = f"{self.path}:{line}" if line is not None else self.path
        msg = f"{where}: expected {expected}"
        if found is not None:
            text = str(found).rstrip("\n")
            if len(text) > 80:
                text = text[:77] + "..."
            msg += f", found {text!r}"
        super().__init__(msg)


class RinexFormatError(FileFormatError):
    """A RINEX (observation, navigation, meteorological, clock) or SP3 file is malformed."""


class ProductFormatError(FileFormatError):
    """An SP3, RINEX clock, IONEX, ANTEX or bias file is malformed."""


class ConfigError(CttError):
    """A station, pair or scenario file is invalid; names the file and the key."""


    def __init__(self, path, key, problem):
        self.path = str(path) if path is not None else None
        self.key = key
        self.problem = problem
        where = self.path or "<config>"
        if key:
            where += f": [{key}]"
        super().__init__(f"{where}: {problem}")


class UsageError(CttError):
    """Command-line arguments that do not fit together."""



class MissingInputError(CttError, FileNotFoundError):
    """An input file is absent, or there is no usable data (e.g. no common satellites)."""



class NoDataError(MissingInputError):
    """The inputs exist but hold no usable data for the request."""


class TimeScaleError(CttError, ValueError):
    """An instant outside the domain of a time-scale conversion (e.g. UTC before 1972)."""


class OutOfSpanError(CttError, ValueError):
    """Interpolation requested outside the data span or across a gap."""


class ProcessingError(CttError):
    """The inputs were readable but the job could not be completed."""


class LockTimeoutError(CttError):
    """Another run holds the archive lock and the wait timed out."""



class ArchiveError(FileFormatError):
    """The archive file is damaged: names the file, what SQLite found and how to recover."""

    def __init__(self, path, found, recovery: str):
        super().__init__(path, None, "an SQLite archive written by ctt", found)
        self.recovery = recovery
        self.args = (f"{self.args[0]}. {recovery}",)


#: The one mapping of error classes onto the README's exit codes; the first class an error
#: is an instance of decides (subclasses before their bases). Anything else is exit 1.
EXIT_BY_CLASS: tuple[tuple[type, int], ...] = (
    (LockTimeoutError, EXIT_LOCKED),
    (ConfigError, EXIT_USAGE),
    (UsageError, EXIT_USAGE),
    (MissingInputError, EXIT_MISSING_INPUT),       # NoDataError included
    (CttError, EXIT_PROCESSING),
    # operating-system errors met while opening a user's paths
    (FileNotFoundError, EXIT_MISSING_INPUT),
    (IsADirectoryError, EXIT_USAGE),
    (NotADirectoryError, EXIT_USAGE),
    (PermissionError, EXIT_USAGE),
    (FileExistsError, EXIT_USAGE),
)

#: What each exit code means, as the README's table says it.
EXIT_MEANING = {
    EXIT_OK: "success",
    EXIT_PROCESSING: "processing error (inputs readable, job failed)",
    EXIT_USAGE: "usage or configuration error",
    EXIT_MISSING_INPUT: "missing input, or no usable data (e.g. no common satellites)",
    EXIT_LOCKED: "the archive is locked by another run and the wait timed out",
}


#: How bad a failed day is, worst first, for a run over many days (``backfill``): a
#: configuration error spoils every day, a processing error is a fault to look at, a
#: missing input is often a gap in the data that will be filled later.
SEVERITY = (EXIT_LOCKED, EXIT_USAGE, EXIT_PROCESSING, EXIT_MISSING_INPUT)


def worst_exit_code(codes) -> int:
    """The worst of some exit codes in the SEVERITY order; EXIT_OK when all are 0 (or none)."""
    bad = [c for c in codes if c != EXIT_OK]
    if not bad:
        return EXIT_OK
    return min(bad, key=lambda c: SEVERITY.index(c) if c in SEVERITY else len(SEVERITY))


def exit_code_for(exc: BaseException) -> int:
    """The documented exit code of an error (EXIT_BY_CLASS; anything else is a processing error)."""
    for cls, code in EXIT_BY_CLASS:
        if isinstance(exc, cls):
            return code
    return EXIT_PROCESSING


def is_user_error(exc: BaseException) -> bool:
    """A ctt error, or an operating-system error about a path the user gave (not a bug)."""
    return isinstance(exc, CttError) or (isinstance(exc, OSError) and exc.filename is not None)


def describe(exc: BaseException) -> str:
    """One line for an error: ctt errors as they are, OS errors as 'path: reason'."""
    if isinstance(exc, CttError):
        return str(exc)
    if isinstance(exc, OSError) and exc.filename is not None:
        what = {IsADirectoryError: "is a folder, expected a file",
                NotADirectoryError: "a part of the path is a file, expected a folder",
                FileExistsError: "exists and is in the way"}.get(type(exc), exc.strerror or str(exc))
        return f"{exc.filename}: {what}"
    return f"internal error: {type(exc).__name__}: {exc}"


def require_file(path, what: str = "file") -> str:
    """``path`` as text when it is an existing regular file.

    Absent: MissingInputError (exit 3). A folder, a device such as /dev/null, a
    socket...: UsageError (exit 2): a file name was mistyped, not a file lost.
    """
    import os
    import stat

    text = os.fspath(path)
    try:
        mode = os.stat(text).st_mode
    except FileNotFoundError:
        raise MissingInputError(f"{text}: {what} not found") from None
    except NotADirectoryError:
        raise UsageError(f"{text}: {what}: a part of the path is a file, expected a folder") from None
    except PermissionError:
        raise UsageError(f"{text}: {what}: no permission to read it") from None
    if stat.S_ISDIR(mode):
        raise UsageError(f"{text}: {what}: is a folder, expected a file")
    if not stat.S_ISREG(mode):
        raise UsageError(f"{text}: {what}: is not a regular file (a device or pipe), expected a file")
    return text
