"""Exception types of ctt and the exit codes the command line maps them to.

Every error that comes from bad input names the file and, where there is one,
the line, and says what was expected. The CLI prints ``str(error)`` as one
line and exits with ``error.exit_code``; the traceback is shown only with
``--debug``.

Exit codes (documented in README.md):

====  =====================================================================
0     success
1     processing error (the inputs were readable but the job failed)
2     usage or configuration error
3     missing input (a file, or no usable data such as no common satellites)
4     another run holds the archive lock and the wait timed out
====  =====================================================================
"""

from __future__ import annotations

EXIT_OK = 0
EXIT_PROCESSING = 1
EXIT_USAGE = 2
EXIT_MISSING_INPUT = 3
EXIT_LOCKED = 4


class CttError(Exception):
    """Base class of all ctt errors; ``exit_code`` is what the CLI returns."""

    exit_code = EXIT_PROCESSING


class FileFormatError(CttError, ValueError):
    """A file does not follow its format.

    ``path`` and ``line`` (1-based, ``None`` when not tied to a line) locate the
    problem; ``expected`` says what the format requires there.
    """

    exit_code = EXIT_PROCESSING

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

    exit_code = EXIT_USAGE

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

    exit_code = EXIT_USAGE


class MissingInputError(CttError, FileNotFoundError):
    """An input file is absent, or there is no usable data (e.g. no common satellites)."""

    exit_code = EXIT_MISSING_INPUT


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

    exit_code = EXIT_LOCKED
