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


class _LocatedError(CracktipError, ValueError):
    """An error at a place in a file: the message starts with where it is."""

    def __init__(self, problem, file=None, row=None, column=None, value=None):
        self.problem = problem
        self.file, self.row, self.column, self.value = file, row, column, value
        where = _where(file, row, column, value)
        super().__init__(f"{where}: {problem}" if where else problem)


class SheetError(_LocatedError):
    """A test-sheet row (or the sheet itself) is missing or has impossible data.

    Parameters
    ----------
    problem : str
        What is wrong and what was expected, in words.
    file, row, column, value
        Where it is: the sheet path, the 1-based data row as a person counts
        it in a spreadsheet (header = row 1), the column name and the value.
    """



class RecordError(_LocatedError):
    """A raw load-displacement record cannot be read or makes no sense.

    Parameters
    ----------
    problem : str
        What is wrong and what would settle it.
    file, row, column, value
        Where it is: the record path, the 1-based line in the file, the
        column header and the offending value, as far as known.
    """



class ReductionError(CracktipError, ValueError):
    """A record was read but the E399 construction cannot be made on it."""


class RulesError(CracktipError, ValueError):
    """An unknown rule set or a malformed limits file."""


class SpecError(CracktipError, ValueError):
    """A customer specification file (TOML) is missing, malformed or inconsistent.

    Parameters
    ----------
    problem : str
        What is wrong and what was expected, in words.
    file : str, optional
        The specification file.
    where : str, optional
        The place in it, e.g. ``"requirement 2 (L-T at 21 °C)"``.
    key, value
        The key and the value found, as far as known.
    """

    def __init__(self, problem, file=None, where=None, key=None, value=None):
        self.problem = problem
        self.file, self.where, self.key, self.value = file, where, key, value
        parts = [str(p) for p in (file, where) if p is not None]
        if key is not None:
            parts.append(f"key '{key}'")
        if value is not None:
            parts.append(f"value {value!r}")
        where_text = ", ".join(parts)
        super().__init__(f"{where_text}: {problem}" if where_text else problem)


class StoreError(CracktipError, RuntimeError):
    """The QA database cannot be opened, is of an unknown schema, or refuses a write."""


class ApprovalError(CracktipError, ValueError):
    """A QA step is not allowed in the present state (e.g. approving a heat whose
    verdict changed, or issuing a certificate before approval)."""


class ReportError(CracktipError, ValueError):
    """A report cannot be made or read: a bad lab profile, a certificate
    without its embedded results, a heat that may not be certified."""
