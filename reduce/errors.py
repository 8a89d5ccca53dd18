"""The error hierarchy of cracktip.

Every error a user can cause (a bad sheet row, an unreadable record, a record
that cannot be reduced) is a :class:`CracktipError`.  Each also inherits the
matching built-in so callers may catch ``ValueError`` as usual.  The fields
are kept on the instance and the message names them, so the command line can
print one clear line instead of a traceback.
"""

from __future__ import annotations


class CracktipError(Exception):
    """Base class of every error cracktip reports to a user."""


def _where(file=None, row=None, column=None, value=None) -> str:
    parts = []
    if file is not None:
        parts.append(f"{file}")
    if row is not None:
        parts.append(f"row {row}")
    if column is not None:
        parts.append(f"column '{column}'")
    if value is not None:
        parts.append(f"value {value!r}")
    return ", ".join(parts)


class SheetError(CracktipError, ValueError):
    """A test-sheet row (or the sheet itself) is missing or has impossible data.

    Parameters
    ----------
    problem : str
        What is wrong and what was expected, in words.
    file, row, column, value
        Where it is: the sheet path, the 1-based data row as a person counts
        it in a spreadsheet (header = row 1), the column name and the value.
    """

    def __init__(self, problem, file=None, row=None, column=None, value=None):
        self.problem = problem
        self.file, self.row, self.column, self.value = file, row, column, value
        where = _where(file, row, column, value)
        super().__init__(f"{where}: {problem}" if where else problem)


class RecordError(CracktipError, ValueError):
    """A raw load-displacement record cannot be read or makes no sense.

    Parameters
    ----------
    problem : str
        What is wrong and what would settle it.
    file, row, column, value
        Where it is: the record path, the 1-based line in the file, the
        column header and the offending value, as far as known.
    """

    def __init__(self, problem, file=None, row=None, column=None, value=None):
        self.problem = problem
        self.file, self.row, self.column, self.value = file, row, column, value
        where = _where(file, row, column, value)
        super().__init__(f"{where}: {problem}" if where else problem)


class ReductionError(CracktipError, ValueError):
    """A record was read but the E399 construction cannot be made on it."""


class RulesError(CracktipError, ValueError):
    """An unknown rule set or a malformed limits file."""
