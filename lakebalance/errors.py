"""Every error and warning that lakebalance raises, in one place.

The command line turns a :class:`LakebalanceError` into one line on stderr,
``error: <file>[:<line>[:<column>]]: <what is wrong>``, and exit code 2.
Any other exception is a bug in lakebalance (exit code 1).
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable
from pathlib import Path

__all__ = [
    "LakebalanceError",
    "InputError",
    "ConfigError",
    "UnitError",
    "FitError",
    "RangeError",
    "OptionError",
    "LimitError",
    "OutputError",
    "MemoryLimitError",
    "SchedulerError",
    "LakebalanceWarning",
    "DataQualityWarning",
    "ExtrapolationWarning",
    "ApproximationWarning",
    "FormulaValueWarning",
    "suggest",
    "excerpt",
]

#: At most this many characters of an offending line or cell are quoted in a message.
EXCERPT_CHARS = 120
#: A message longer than this is cut when printed (a last guard; quotes use :func:`excerpt`).
MESSAGE_CHARS = 4000


class LakebalanceError(Exception):
    """Base of every error lakebalance raises on purpose.

    Parameters
    ----------
    message : str
        What is wrong, in plain words.
    file : str or Path, optional
        The file at fault.
    line : int, optional
        1-based line (or spreadsheet row) in ``file``.
    column : int or str, optional
        1-based column number or column name in ``file``.
    """

    def __init__(
        self,
        message: str,
        *,
        file: str | Path | None = None,
        line: int | None = None,
        column: int | str | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.file = None if file is None else str(file)
        self.line = line
        self.column = column

    def location(self) -> str:
        """``file[:line[:column]]``, or an empty string when no file is known."""
        if self.file is None:
            return ""
        loc = self.file
        if self.line is not None:
            loc += f":{self.line}"
            if self.column is not None:
                loc += f":{self.column}"
        elif self.column is not None:
            loc += f": column {self.column}"
        return loc

    def one_line(self) -> str:
        """The message the CLI prints: ``error: <file>[:<line>[:<column>]]: <what>``."""
        loc = self.location()
        text = " ".join(self.message.splitlines())
        if len(text) > MESSAGE_CHARS:
            text = text[:MESSAGE_CHARS] + " ... (message cut)"
        return f"error: {loc}: {text}" if loc else f"error: {text}"

    def __str__(self) -> str:  # pragma: no cover - trivial
        loc = self.location()
        return f"{loc}: {self.message}" if loc else self.message


class InputError(LakebalanceError):
    """A data file (gauge series, survey, gaugings) cannot be used as it is."""


class ConfigError(LakebalanceError):
    """The site file is wrong: unknown key, wrong type, missing key, bad value."""


class UnitError(LakebalanceError):
    """A declared unit is unknown or of the wrong dimension for its series."""


class FitError(LakebalanceError):
    """A fit cannot be made from the data given (too few points, no spread, no convergence)."""


class RangeError(LakebalanceError):
    """A value lies outside a relation's range and the declared policy is ``error``."""


class OptionError(ConfigError, ValueError):
    """An option is out of its declared range or of the wrong kind.

    Raised by the options objects themselves (so the Python API gets a ``ValueError`` that names
    the option); the site-file loader re-raises it with the file and line of the key.

    Parameters
    ----------
    option : str
        The option's name (the site-file key).
    message : str
        What is wrong, naming the option.
    """

    def __init__(self, option: str, message: str, **where) -> None:
        super().__init__(message, **where)
        self.option = option


class LimitError(InputError):
    """A file goes past one of the documented reading limits (size, line length, columns, nesting
    depth, inflated workbook size), or is not a regular file. See README, "Safety"."""


class OutputError(LakebalanceError):
    """An output would leave ``--out``, overwrite an input, or replace a folder that is not a
    lakebalance output folder."""


class MemoryLimitError(LakebalanceError, ValueError):
    """The arrays a setting asks for (draws, members, days, rating variants, bootstrap refits)
    would not fit in the memory this machine has free.

    Parameters
    ----------
    option : str
        The setting to lower.
    message : str
        The estimate and the limit, in words.
    """

    def __init__(self, option: str, message: str, **where) -> None:
        super().__init__(message, **where)
        self.option = option


class SchedulerError(LakebalanceError):
    """A Dask scheduler cannot be reached (or the cluster cannot run the batch)."""


class LakebalanceWarning(UserWarning):
    """Base of lakebalance's warnings (raise with ``stacklevel=2``)."""


class DataQualityWarning(LakebalanceWarning):
    """Something in the records is doubtful but usable."""


class ExtrapolationWarning(LakebalanceWarning):
    """A relation (rating, storage) was used outside the range it was built on."""


class ApproximationWarning(LakebalanceWarning):
    """A method is an approximation whose accuracy the user should weigh."""


class FormulaValueWarning(DataQualityWarning):
    """Values read from a workbook are the results of formulas as last saved (not recomputed)."""


def excerpt(text: object, limit: int = EXCERPT_CHARS) -> str:
    """``repr`` of at most ``limit`` characters of ``text`` (an offending line or cell), with
    ``...`` and the full length when cut, for quoting in a message."""
    s = str(text)
    if len(s) <= limit:
        return repr(s)
    return f"{s[:limit]!r}... ({len(s):,} characters)"


def suggest(word: str, choices: Iterable[str]) -> str:
    """A ``" (did you mean 'x'?)"`` suffix naming the nearest valid choice, or ``""``."""
    match = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{match[0]}'?)" if match else ""
