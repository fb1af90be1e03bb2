"""Errors that reach the engineer: each names the place and what is wrong."""

from __future__ import annotations

from dataclasses import dataclass

EXIT_INPUT = 2  # bad input or bad option: nothing was written
EXIT_REFUSED = 3  # output exists and --force was not given, or may never be replaced
EXIT_INTERNAL = 70  # a bug (BSD EX_SOFTWARE): reported without a traceback, nothing written


@dataclass
class InputError(Exception):
    """A problem in the input, located as precisely as the data allows.

    ``row`` is the 1-based row number as the engineer sees it in the spreadsheet
    (header row included), not a pandas index.
    """

    message: str
    file: str | None = None
    sheet: str | None = None
    row: int | None = None
    column: str | None = None

    def __str__(self) -> str:
        where = []
        if self.file:
            where.append(f"file {self.file}")
        if self.sheet:
            where.append(f"sheet {self.sheet!r}")
        if self.row is not None:
            where.append(f"row {self.row}")
        if self.column:
            where.append(f"column {self.column!r}")
        prefix = ", ".join(where)
        return f"{prefix}: {self.message}" if prefix else self.message


class OptionError(ValueError):
    """An option value the engineer typed cannot be used (named in the message)."""


class OutputExistsError(Exception):
    """Refusing to overwrite an earlier report or workbook."""


class ParameterError(OptionError):
    """A value given to a Python function cannot be used. ``parameter`` names the keyword
    argument (never a command-line flag); the command layer maps it to its flag.

    >>> err = ParameterError("spec", 1.5, "a defect-rate limit lies strictly between 0 and 1")
    >>> str(err)
    'spec=1.5: a defect-rate limit lies strictly between 0 and 1'
    >>> isinstance(err, ValueError)
    True
    """

    def __init__(self, parameter: str, value: object, message: str):
        self.parameter = parameter
        self.value = value
        self.reason = message
        super().__init__(f"{parameter}={value!r}: {message}")
