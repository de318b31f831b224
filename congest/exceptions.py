"""Exceptions and warnings raised by congest.

The tree::

    CongestError                    base of everything congest raises on purpose
    ├── NetworkError                a network or demand that cannot be solved as given
    │   └── InputError              a bad value in an input file (file, row, column, value)
    └── SolverError                 a solver asked for something it cannot do

    ConvergenceWarning (UserWarning)  a solver stopped at its iteration cap before its
                                      gap target; the best result is still returned

Messages are written for the person who made the input: they name the file, the row
(1-based, counting the header as row 1, as a spreadsheet shows it), the column and the
offending value where those exist.
"""

from __future__ import annotations

__all__ = [
    "CongestError",
    "NetworkError",
    "InputError",
    "SolverError",
    "ConvergenceWarning",
]


class CongestError(Exception):
    """Base class of the errors congest raises on purpose."""


class NetworkError(CongestError, ValueError):
    """A network or demand that is inconsistent or cannot be solved as given."""


class InputError(NetworkError):
    """A bad value in an input file.

    Parameters
    ----------
    message : str
        What is wrong, in plain words.
    path : str or None
        The file the value came from.
    row : int or None
        Row number as a spreadsheet shows it (header is row 1, first data row is 2).
    column : str or None
        Column name.
    value : object, optional
        The offending value.
    """

    def __init__(self, message, *, path=None, row=None, column=None, value=None):
        self.path = None if path is None else str(path)
        self.row = row
        self.column = column
        self.value = value
        self.reason = message
        where = []
        if self.path is not None:
            where.append(self.path)
        if row is not None:
            where.append(f"row {row}")
        if column is not None:
            where.append(f"column {column!r}")
        prefix = ", ".join(where)
        text = f"{prefix}: {message}" if prefix else message
        if value is not None:
            text += f" (value: {value!r})"
        super().__init__(text)


class SolverError(CongestError, ValueError):
    """A solver was asked for something it cannot do (unknown method, bad option)."""


class ConvergenceWarning(UserWarning):
    """A solver hit its iteration or time cap before reaching its gap target."""
