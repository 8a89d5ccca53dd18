"""Reading raw load-displacement records as test rigs write them.

A record is a table of channels, one sample a row: load, a displacement
(ideally a crack-opening gauge) and often time.  Rigs write it as CSV, TSV,
semicolon-separated text with decimal commas, whitespace-separated text or an
XLSX workbook, often below free-text preamble lines and sometimes with a line
of units under the header.  :func:`read_record` finds the layout, picks the
channels by header name and unit, converts them to the internal units (kN,
mm, s; see :mod:`reduce.units`) and returns a :class:`Record`.

How a text record is read, and why:

1. The first lines (at most ``_HEAD_LINES``) are sniffed as text to find the
   delimiter, the decimal mark, the header line, an optional unit line and
   the first data line.
2. The fast path (``reduce/_scan.c``, compiled on install; optional): the
   file's bytes are scanned from the first data line straight into float64
   columns of the channels used.  It takes only plain lines (numbers in
   every used field, the same number of fields on every line, no quotes, no
   blank lines before the end) and only numbers it converts exactly: at most
   19 significant digits, an integer part of at most 2**53 and a decimal
   exponent within +-22, so one IEEE 754 multiplication or division by an
   exact power of ten gives the correctly rounded value (Clinger's fast path,
   PLDI 1990), the value Python's ``float`` gives.  A record above
   ``_SPLIT_BYTES`` is scanned in parts cut at line ends, one thread per
   core (the scan releases the GIL).  At the first line it does not take,
   the scan gives up and step 3 reads the whole file.
3. Otherwise ``pandas.read_csv`` (C engine) parses the data once, with
   ``skiprows`` set to the first data line and ``header=None``.  The header
   is not parsed by pandas; it was already read in step 1.
4. Rows with empty, NaN or text cells in the used channels are dropped and
   listed in :attr:`Record.notes`; one bad row never loses the others.

Speed notes (measured on this project's 2-core machine, a 1,000,000-row
CSV of 28.6 MB): pandas 3.1 parses it in about 45 ms, splitting it across
both cores; the fast path scans it in about 20 ms in two threads, so the
reduction after it and the SHA-256 fit in the time of the pandas parse.
For the pandas path: pandas 3.1 splits a large file across threads only
without ``usecols``, without ``on_bad_lines="warn"`` and with a UTF-8
encoding; otherwise it parses serially, about twice as slowly.  So:

- when every field of the sniffed data lines is numeric, the record is parsed
  whole and the unused columns are dropped at once; ``usecols`` is used only
  when other columns hold text, or after a line with too many fields;
- lines with too many fields are found from the parser's error, not by
  ``on_bad_lines="warn"``;
- 8-bit records are parsed as UTF-8 with replacement: the data lines are
  ASCII in UTF-8, Latin-1 and cp1252 alike, and the header, which may not be,
  was decoded with the right codec in step 1;
- the SHA-256 of a file above 1 MiB is computed in a second thread
  (hashlib releases the GIL) that starts when the file has been parsed and
  runs while the record is checked and reduced; it hashes the very bytes the
  fast path scanned (or, after pandas, the file).  :attr:`Record.sha256`
  waits for it.

Hostile files: a text record above 1 GiB is refused before it is parsed
(memory); an XLSX container is checked before openpyxl opens it: the sizes
its ZIP directory declares (Python's zipfile never inflates a member beyond
its declared size, and fails on a CRC mismatch) must stay below 1 GiB in
all, 10,000 members and a compression ratio of 100 for members above
16 MiB (a ZIP bomb declares far more); workbooks are read only with
defusedxml's hardened XML parser in openpyxl (no entity expansion, no
external entities), so a workbook is never evaluated, expanded or followed.

References
----------
.. [1] RFC 4180, "Common Format and MIME Type for Comma-Separated Values
   (CSV) Files", 2005 (quoting rules of the text records).
.. [2] ECMA-376, "Office Open XML File Formats", Part 1 (the XLSX workbook);
   read with openpyxl in read-only mode, cached values only, external links
   not loaded.
.. [3] FIPS PUB 180-4, "Secure Hash Standard", 2015, sect. 6.2 (SHA-256).
.. [4] ASTM E399, the clause on the displacement gage: the test record is
   force against the output of a gage across the crack mouth or on the load
   line, not the machine's crosshead (from memory, clause number not checked
   here).  Hence a crack-opening channel is preferred over a crosshead one.
"""

from __future__ import annotations

import csv
import hashlib
import math
import os
import re
import stat
import threading
import warnings
from dataclasses import dataclass, field
from itertools import chain, islice

import numpy as np

from .errors import RecordError
from .units import LENGTH_TO_MM, LOAD_TO_KN, STRESS_TO_MPA, TIME_TO_S

try:  # the compiled fast path (reduce/_scan.c); optional, see the module notes
    from . import _scan
except ImportError:  # not built on this machine: every text record is parsed by pandas
    _scan = None

__all__ = ["Record", "check_workbook", "read_record", "sha256_file"]

#: bytes and lines looked at to find the layout of a text record
_HEAD_BYTES = 256 * 1024
_HEAD_LINES = 100
#: rows needed after bad rows are dropped, and the largest bad share accepted
#: (project rule for a record worth reducing; common practice, no source)
_MIN_VALID_ROWS = 20
_MAX_BAD_FRACTION = 0.5
#: how many line numbers a note lists before it says "and N more"
_LINES_LISTED = 10
#: files above this size are hashed in a second thread (module notes)
_THREAD_HASH_BYTES = 1 << 20
#: text records above this size are scanned in parallel parts by the fast path
_SPLIT_BYTES = 4 << 20
#: bytes that may end a text file after its last data line (the fast path's view;
#: anything else there, such as a DOS end-of-file mark, goes to pandas and its notes)
_TRAILING = b" \t\r\n"
#: hostile-file limits (module notes; project limits, common practice, no source)
_MAX_RECORD_BYTES = 1 << 30
_XLSX_MAX_UNPACKED = 1 << 30
_XLSX_MAX_MEMBERS = 10_000
_XLSX_MAX_RATIO, _XLSX_RATIO_FROM = 100, 16 << 20

_SETTLE = {
    "load": "load_column",
    "disp": "displacement_column",
}
_UNIT_SETTLE = {"load": "load_unit", "disp": "displacement_unit"}
_ROLE_WORD = {"load": "load", "disp": "displacement", "time": "time"}
_UNIT_TABLE = {"load": LOAD_TO_KN, "disp": LENGTH_TO_MM, "time": TIME_TO_S}
_UNIT_EXAMPLES = {"load": "N, kN, lbf or kip", "disp": "mm, µm or in", "time": "s, ms or min"}

# Header words, lower case.  A crack-opening gauge ranks above a generic
# displacement, which ranks above a machine (crosshead) channel [4].
_LOAD_WORDS = frozenset({"load", "force", "kraft"})
_LOAD_NAMES = frozenset({"f", "p", "fz"})
_OPENING_WORDS = frozenset(
    {"cod", "cmod", "clip", "clipgauge", "clipgage", "opening", "lld", "loadline",
     "vll", "gauge", "gage", "extensometer", "aufweitung"}
)
_GENERIC_DISP_WORDS = frozenset(
    {"displacement", "disp", "extension", "deflection", "elongation", "weg", "verschiebung"}
)
_DISP_NAMES = frozenset({"v", "u", "d"})
_MACHINE_WORDS = frozenset(
    {"crosshead", "cross", "head", "xhead", "stroke", "position", "pos", "actuator", "ram",
     "piston", "traverse", "machine", "lvdt"}
)
_TIME_WORDS = frozenset({"time", "zeit", "elapsed"})
_TIME_NAMES = frozenset({"t"})
#: words that make a header something other than a raw channel
_EXCLUDE_WORDS = frozenset(
    {"rate", "speed", "velocity", "setpoint", "set", "command", "demand", "target", "temperature",
     "temp", "strain", "stress", "max", "maximum", "peak", "cycle", "cycles", "count", "energy",
     "work", "stiffness", "compliance", "status", "length", "width", "thickness", "date"}
)
_RANK_OPENING, _RANK_GENERIC, _RANK_MACHINE, _RANK_WORD, _RANK_UNIT_ONLY = 4, 3, 2, 2, 1

#: cell texts that mean "no value" (as pandas reads them by default)
_MISSING = frozenset({"", "nan", "-nan", "na", "n/a", "#n/a", "null", "none", "<na>"})
_NUMBER = {
    ".": re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?\Z"),
    ",": re.compile(r"[+-]?(?:\d+(?:,\d*)?|,\d+)(?:[eE][+-]?\d+)?\Z"),
}
_EMPTY, _NUM, _TEXT = 0, 1, 2


def _numbers_line(sep, decimal):
    """A pattern for a whole text line of numbers only, in one layout."""
    num = _NUMBER[decimal].pattern[:-2]  # without the final \Z
    gap = r"[ \t]+" if sep == " " else rf"[ \t]*{re.escape(sep)}[ \t]*"
    return re.compile(rf"[ \t]*{num}(?:{gap}{num})*[ \t]*\Z")

#: (delimiter, decimal mark) tried in this order; " " means any whitespace
_TEXT_LAYOUTS = [(",", "."), ("\t", "."), ("\t", ","), (";", "."), (";", ","), ("|", "."),
                 ("|", ","), (" ", "."), (" ", ",")]
#: a line these match splits into numbers only: its row statistics need no
#: token-by-token look (the same answer, much faster on the usual data line)
_NUMBERS_LINE = {layout: _numbers_line(*layout) for layout in _TEXT_LAYOUTS}
#: bytes no text record holds (tab, line feed, form feed, carriage return and
#: the DOS end-of-file mark 0x1A are allowed)
_CONTROL_BYTES = bytes([*range(0, 9), 11, *range(14, 26), *range(27, 32), 127])
_LINE_BREAK = re.compile(r"\r\n|\r|\n")
_BYTE_LINE_BREAK = re.compile(rb"\r\n|\r|\n")
_LONG_LINE = re.compile(r"Expected \d+ fields in line (\d+)")


@dataclass
class Record:
    """One raw record, its channels converted to the internal units.

    Attributes
    ----------
    path : str
        The file as given.
    load_kN : numpy.ndarray of float64, shape (n,)
        Load, kN.  All three arrays are read-only: a record holds what the
        file says (see ``sha256``); copy an array to change it.
    disp_mm : numpy.ndarray of float64, shape (n,)
        Displacement, mm.
    time_s : numpy.ndarray of float64, shape (n,), or None
        Time, s; None when the record has no usable time channel.
    load_header, disp_header : str
        Header text of the channels used.
    time_header : str or None
        Header text of the time channel, None without one.
    columns : list of str
        All headers found, in file order (``"column 3"`` where a column has
        no header).
    sha256 : str
        SHA-256 of the file's bytes, hexadecimal [3].  For a file above
        1 MiB it is computed in a second thread; reading the attribute waits
        for it (and raises RecordError if the file could not be read).
    notes : list of str
        Human-readable notes: rows skipped and why, channels not used,
        encoding fallback, time stamps out of order.
    """

    path: str
    load_kN: np.ndarray
    disp_mm: np.ndarray
    time_s: np.ndarray | None
    load_header: str
    disp_header: str
    time_header: str | None
    columns: list[str]
    _sha256: "str | _Digest" = field(repr=False)
    notes: list[str] = field(default_factory=list)

    @property
    def sha256(self) -> str:
        if isinstance(self._sha256, _Digest):
            self._sha256 = self._sha256.result()
        return self._sha256


class _Digest:
    """The SHA-256 of a file (a path) or of its bytes, computed in a second
    thread; :meth:`result` waits."""

    def __init__(self, source):
        self._source, self._hex, self._error = source, None, None
        self._thread = threading.Thread(target=self._run, name="cracktip-sha256", daemon=True)
        self._thread.start()

    def _run(self):
        try:
            if isinstance(self._source, bytes):
                self._hex = hashlib.sha256(self._source).hexdigest()  # releases the GIL
            else:
                self._hex = sha256_file(self._source)
        except RecordError as exc:
            self._error = exc
        finally:
            self._source = None  # the bytes are not kept beyond the hash

    def result(self) -> str:
        self._thread.join()
        if self._error is not None:
            raise self._error
        return self._hex

    def __reduce__(self):  # a record sent to another process carries the finished digest
        return (str, (self.result(),))


@dataclass
class _Column:
    index: int  # 0-based position in the data rows
    header: str  # the header text as written
    name: str  # the header without its unit
    unit: str | None  # the unit as written (header or unit line), None if none


@dataclass
class _Channel:
    column: _Column
    factor: float  # multiplies the raw values into the internal unit


@dataclass
class _Choice:
    load: _Channel
    disp: _Channel
    time: _Channel | None
    notes: list[str]


@dataclass
class _Values:
    """Raw values of one used column, as parsed."""

    values: np.ndarray  # float64, NaN where empty or text
    text: np.ndarray | None  # bool, True where the cell held text; None if none did
    first_text: object = None  # the first text cell, for messages
    shared: bool = False  # values is a view into parsed data that holds unused columns too


# --------------------------------------------------------------------------
# public functions


def sha256_file(path) -> str:
    """SHA-256 of a file's bytes, read in chunks.

    Parameters
    ----------
    path : str or os.PathLike
        The file.

    Returns
    -------
    str
        64 lower-case hexadecimal digits.

    Raises
    ------
    RecordError
        When the file cannot be read.

    References
    ----------
    FIPS PUB 180-4, "Secure Hash Standard", sect. 6.2 (SHA-256).

    Examples
    --------
    >>> import tempfile
    >>> with tempfile.NamedTemporaryFile(delete=False) as f:
    ...     _ = f.write(b"abc")
    >>> sha256_file(f.name)[:16]  # FIPS 180-2 appendix B.1, message "abc" (value from memory)
    'ba7816bf8f01cfea'
    >>> os.remove(f.name)
    """
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as f:
            for chunk in iter(lambda: f.read(1 << 20), b""):
                digest.update(chunk)
    except OSError as exc:
        raise RecordError(f"cannot be read ({exc.strerror or exc})", file=os.fspath(path)) from None
    return digest.hexdigest()


def read_record(path, load_column=None, displacement_column=None, load_unit=None,
                displacement_unit=None) -> Record:
    """Read a raw load-displacement record from a rig's CSV, TSV, text or XLSX file.

    Parameters
    ----------
    path : str or os.PathLike
        The record file.  XLSX is recognised by its content (a ZIP
        container), anything else is read as delimited text.
    load_column, displacement_column : str or int, optional
        The channel to use, by its exact header text or its 1-based column
        number (int or digit string).  None (or empty) lets the header names
        and units decide.
    load_unit, displacement_unit : str, optional
        Unit of the channel (``N``, ``kN``, ``lbf``, ``kip``; ``mm``, ``µm``,
        ``in``), needed when the header has none; it overrides a unit in the
        header.

    Returns
    -------
    Record
        Load in kN, displacement in mm, time in s (or None), with the rows
        that had empty or non-numeric cells removed and listed in ``notes``.

    Raises
    ------
    RecordError
        For every file that cannot be read or makes no sense: missing,
        empty, binary, no data rows, channel or unit not decidable (the
        message lists the columns found and names the sheet column that
        settles it), more than half of the rows bad, or fewer than 20 valid
        rows.  The message names the file, line, column and value where known.

    References
    ----------
    RFC 4180 (CSV); ECMA-376 Part 1 (XLSX); FIPS PUB 180-4 (SHA-256); ASTM E399,
    displacement-gage clause, for preferring a crack-opening gauge over the
    crosshead (from memory, clause number not checked).

    Examples
    --------
    >>> import tempfile
    >>> rows = "".join(f"{0.1 * i:.1f},{0.5 * i:.1f},{0.002 * i:.3f}\\n" for i in range(30))
    >>> with tempfile.NamedTemporaryFile("w", suffix=".csv", delete=False) as f:
    ...     _ = f.write("Rig: R2\\nTime (s),Force [N],COD (mm)\\n" + rows)
    >>> rec = read_record(f.name)
    >>> rec.load_header, float(rec.load_kN[2]), rec.disp_header, rec.time_header
    ('Force [N]', 0.001, 'COD (mm)', 'Time (s)')
    >>> os.remove(f.name)
    """
    if not isinstance(path, (str, os.PathLike)):
        raise RecordError("a record must be given by its file name", value=path)
    path = os.fspath(path)
    size = _file_size(path)
    head = _read_head(path)
    overrides = {
        "load": (_given(load_column), _given(load_unit)),
        "disp": (_given(displacement_column), _given(displacement_unit)),
    }

    def choose(columns):
        return _choose_channels(path, columns, overrides)

    parsed, data = _read_any(path, head, choose, size)
    if data is not None:  # the bytes parsed are the bytes hashed
        digest = hashlib.sha256(data).hexdigest() if len(data) <= _THREAD_HASH_BYTES else _Digest(data)
    else:
        digest = sha256_file(path) if size <= _THREAD_HASH_BYTES else _Digest(path)
    return _finish(path, digest, *parsed)


# --------------------------------------------------------------------------
# file level


def _given(value):
    """None for an override left empty (None, '', NaN from a sheet cell)."""
    if value is None:
        return None
    if isinstance(value, float) and math.isnan(value):
        return None
    if isinstance(value, str) and not value.strip():
        return None
    return value


def _file_size(path):
    try:
        info = os.stat(path)
    except FileNotFoundError:
        raise RecordError("file not found", file=path) from None
    except OSError as exc:
        raise RecordError(f"cannot be opened ({exc.strerror or exc})", file=path) from None
    if stat.S_ISDIR(info.st_mode):
        raise RecordError("is a directory, not a record file", file=path)
    if info.st_size == 0:
        raise RecordError("the file is empty; expected a load-displacement record", file=path)
    return info.st_size


def _read_head(path):
    try:
        with open(path, "rb") as f:
            return f.read(_HEAD_BYTES)
    except OSError as exc:
        raise RecordError(f"cannot be read ({exc.strerror or exc})", file=path) from None


def _read_any(path, head, choose, size):
    if head.startswith(b"PK\x03\x04"):
        return _read_xlsx(path, choose), None
    if head.startswith(b"\xd0\xcf\x11\xe0"):
        raise RecordError("is a legacy binary Excel (.xls) or other OLE file; save it as .xlsx, "
                          "CSV or TSV", file=path)
    if size > _MAX_RECORD_BYTES:
        raise RecordError(f"is {size / 2**30:.1f} GiB; text records above "
                          f"{_MAX_RECORD_BYTES / 2**30:.0f} GiB are refused (reading one takes "
                          "several times its size in memory); split the record", file=path)
    return _read_text(path, head, choose)


# --------------------------------------------------------------------------
# layout: where the header, the unit line and the data are


def _token_class(token, decimal):
    if isinstance(token, bool):
        return _TEXT
    if isinstance(token, (int, float)):
        return _EMPTY if isinstance(token, float) and not math.isfinite(token) else _NUM
    if token is None:
        return _EMPTY
    if not isinstance(token, str):
        return _TEXT  # dates, times from a workbook
    text = token.strip()
    if text.lower() in _MISSING:
        return _EMPTY
    return _NUM if _NUMBER[decimal].match(text) else _TEXT


def _row_stats(row, decimal):
    """(numbers, texts, fields) of one row of tokens."""
    classes = [_token_class(t, decimal) for t in row]
    return classes.count(_NUM), classes.count(_TEXT), len(row)


def _data_like(st):
    n_num, n_text, _ = st
    return n_num >= 2 and n_num >= n_text


def _find_data(rows, decimal, stats=None):
    """First data row and a score for this reading of the rows, or None.

    A data row has at least two numbers and more numbers than texts; it
    starts the data if the next row is one too with as many fields, and at
    most one of the five rows after it is not (a bad row may follow).
    The score prefers the reading whose data rows have no text at all.
    ``stats`` are the rows' :func:`_row_stats` when already known.
    """
    if stats is None:
        stats = [_row_stats(r, decimal) for r in rows]
    filled = [i for i, st in enumerate(stats) if st[0] or st[1]]
    for pos, i in enumerate(filled):
        if not _data_like(stats[i]):
            continue
        n = stats[i][2]
        window = filled[pos + 1:pos + 6]
        same = [_data_like(stats[j]) and stats[j][2] == n for j in window]
        if window and not same[0]:
            continue
        if sum(same) < len(window) - 1:
            continue
        block = [stats[j] for j in filled[pos:] if stats[j][2] == n and _data_like(stats[j])]
        clean = sum(1 for st in block if st[1] == 0)
        numbers = sum(st[0] for st in block)
        return i, (clean, numbers)
    return None


def _split_line(line, sep):
    if sep == " ":
        return line.split()
    if '"' in line:
        return next(csv.reader([line], delimiter=sep))
    return line.split(sep)


def _clean(token):
    return str(token).strip().strip('"').strip("'").strip() if token is not None else ""


def _is_unit_row(tokens):
    """True for a line like ``kN;mm;s`` or ``[kN] [mm] [s]``."""
    units = [_strip_brackets(_clean(t)) for t in tokens if _clean(t)]
    if not units:
        return False
    known = [_unit_quantity(u) for u in units]
    return all(known) and any(q in ("load", "disp", "time") for q in known)


def _strip_brackets(text):
    text = text.strip()
    if len(text) >= 2 and text[0] in "([{<" and text[-1] in ")]}>":
        text = text[1:-1].strip()
    return text


def _header_and_units(rows, data_start, split_header):
    """Header tokens and unit tokens (or None) from the rows above the data."""
    above = [i for i in range(data_start) if any(_clean(t) for t in rows[i])]
    if not above:
        return None, None
    last = above[-1]
    if _is_unit_row(rows[last]) and len(above) >= 2:
        return split_header(above[-2]), [_strip_brackets(_clean(t)) for t in rows[last]]
    return split_header(last), None


def _make_columns(header, units, n_fields):
    """The columns of the data, named from the header line (padded to the data width)."""
    header = [_clean(h) for h in header] if header else []
    while header and not header[-1] and len(header) > n_fields:
        header.pop()
    width = max(n_fields, len(header))
    columns = []
    for i in range(width):
        text = header[i] if i < len(header) and header[i] else f"column {i + 1}"
        name, unit = _split_unit(text) if i < len(header) and header[i] else (text, None)
        if unit is None and units is not None and i < len(units) and units[i]:
            unit = units[i]
        columns.append(_Column(i, text, name, unit))
    return columns


def _whitespace_header(line, n):
    """Split a whitespace-separated header line into ``n`` names if possible.

    Names may hold single spaces (``Crack opening (mm)``), so the line is
    tried split at tabs or runs of spaces, then at each bracketed unit, then
    at every space with bracketed units joined to the word before.
    """
    tries = [
        [t for t in re.split(r"\t|\s{2,}", line.strip()) if t],
        [t.strip() for t in re.findall(r"[^\s(\[][^(\[]*?[(\[][^)\]]*[)\]]", line)],
    ]
    words = []
    for w in line.split():
        if words and w[0] in "([" and w[-1] in ")]":
            words[-1] += " " + w
        else:
            words.append(w)
    tries.append(words)
    for names in tries:
        if len(names) == n:
            return names
    return line.split()


# --------------------------------------------------------------------------
# channels: which column is load, displacement, time


def _norm_unit(unit):
    text = unit.strip().rstrip(".").strip()
    text = text.replace("\u03bc", "\u00b5")  # Greek mu -> micro sign
    return text.lower()


def _unit_quantity(unit):
    """'load', 'disp', 'time', 'other' for another known unit, or None."""
    if unit is None:
        return None
    u = _norm_unit(unit)
    for role, table in _UNIT_TABLE.items():
        if u in table:
            return role
    if u in STRESS_TO_MPA or u in {"-", "°c", "degc", "c", "°f", "k", "v", "mv", "%", "1", "kn/s",
                                   "n/s", "mm/s", "mm/min", "1/s", "mpa", "kn/mm", "n/mm"}:
        return "other"
    return None


def _split_unit(header):
    """(name, unit) from a header such as ``Load (kN)``, ``load_kN``, ``F in kN``."""
    text = header.strip()
    m = re.match(r"(.*?)\s*[(\[{<]\s*([^)\]}>]*?)\s*[)\]}>]\s*\Z", text)
    if m and m.group(1):
        return m.group(1).strip(), (m.group(2) or None)
    m = re.match(r"(.*\S)\s+in\s+(\S+)\Z", text, flags=re.IGNORECASE)
    if m and _unit_quantity(m.group(2)) in ("load", "disp", "time"):
        return m.group(1), m.group(2)
    m = re.match(r"(.*?)\s*/\s*([^/\s]+)\Z", text)
    if m and m.group(1) and _unit_quantity(m.group(2)):
        return m.group(1), m.group(2)
    m = re.match(r"(.*?)[\s_,:\-]+([^\s_,:\-]+)\Z", text)
    if m and m.group(1) and _unit_quantity(m.group(2)) in ("load", "disp", "time"):
        return m.group(1), m.group(2)
    return text, None


def _name_words(name):
    words = re.findall(r"[a-zäöüß]+", name.lower())
    for i in range(len(words) - 1):
        if words[i] == "load" and words[i + 1] == "line":
            words[i:i + 2] = ["loadline"]
            break
    return words


def _rank(column, role):
    """How well a column fits a role: (rank, unit fit), or None if it does not."""
    quantity = _unit_quantity(column.unit)
    if column.unit is None:
        unit_fit = 1
    elif quantity == role:
        unit_fit = 2
    elif quantity is None:
        unit_fit = 0  # a unit nobody knows: may still be the channel, say so later
    else:
        return None  # a unit of another quantity
    words = set(_name_words(column.name))
    if words & _EXCLUDE_WORDS:
        return None
    whole = column.name.strip().lower().rstrip("0123456789")
    if role == "load":
        rank = _RANK_WORD if (words & _LOAD_WORDS or whole in _LOAD_NAMES) else 0
    elif role == "time":
        rank = _RANK_WORD if (words & _TIME_WORDS or whole in _TIME_NAMES) else 0
    elif words & _OPENING_WORDS:
        rank = _RANK_OPENING
    elif words & _MACHINE_WORDS:
        rank = _RANK_MACHINE
    elif words & _GENERIC_DISP_WORDS or whole in _DISP_NAMES:
        rank = _RANK_GENERIC
    else:
        rank = 0
    if rank == 0:
        if unit_fit != 2:
            return None
        rank = _RANK_UNIT_ONLY
    return rank, unit_fit


def _listing(columns):
    return ", ".join(f"{c.index + 1}: '{c.header}'" for c in columns)


def _pick_by_override(path, columns, role, wanted):
    setting = _SETTLE[role]
    if isinstance(wanted, bool):
        raise RecordError(f"{setting} must be a header or a column number", file=path, value=wanted)
    if isinstance(wanted, str):
        matches = [c for c in columns if c.header == wanted.strip()]
        if len(matches) == 1:
            return matches[0]
        if len(matches) > 1:
            raise RecordError(
                f"{setting} '{wanted}' names {len(matches)} columns; give its number instead "
                f"(columns found: {_listing(columns)})", file=path, column=wanted)
        if not wanted.strip().isdigit():
            raise RecordError(
                f"{setting} '{wanted}' is not a header of this record; columns found: "
                f"{_listing(columns)}; give the exact header or the 1-based column number",
                file=path, column=wanted)
        wanted = int(wanted.strip())
    if isinstance(wanted, float) and wanted.is_integer():
        wanted = int(wanted)
    if not isinstance(wanted, (int, np.integer)) or not 1 <= wanted <= len(columns):
        raise RecordError(
            f"{setting} {wanted!r} is not a column of this record; columns found: "
            f"{_listing(columns)}", file=path, value=wanted)
    return columns[int(wanted) - 1]


def _detect(path, columns, role, exclude):
    """The best column for a role, or an error that says how to settle it."""
    ranked = []
    for c in columns:
        if c.index in exclude:
            continue
        r = _rank(c, role)
        if r is not None:
            ranked.append((r, c))
    ranked.sort(key=lambda rc: rc[0], reverse=True)
    if not ranked:
        if role == "time":
            return None, []
        raise RecordError(
            f"no {_ROLE_WORD[role]} channel recognised among the columns found "
            f"({_listing(columns)}); set {_SETTLE[role]} in the test sheet to its header or "
            "1-based number"
            f" (and {_UNIT_SETTLE[role]} if its header has no unit)", file=path)
    if len(ranked) > 1 and ranked[0][0] == ranked[1][0]:
        if role == "time":
            return None, [f"time not used: {ranked[0][1].header!r} and {ranked[1][1].header!r} "
                          "are equally likely time channels"]
        tied = [c for r, c in ranked if r == ranked[0][0]]
        raise RecordError(
            f"cannot tell which column is the {_ROLE_WORD[role]}: "
            + ", ".join(f"'{c.header}'" for c in tied)
            + f" are equally good candidates (columns found: {_listing(columns)}); "
            f"set {_SETTLE[role]} in the test sheet to the header or 1-based number of the one "
            "to use", file=path)
    best = ranked[0][1]
    notes = []
    if role == "disp":
        passed = ", ".join(f"'{c.header}'" for _, c in ranked[1:])
        kind = {_RANK_OPENING: "crack-opening channel", _RANK_GENERIC: "channel"}
        if ranked[0][0][0] == _RANK_MACHINE:
            notes.append(f"displacement from machine channel '{best.header}': it includes the "
                         "machine's and fixture's compliance and is not crack opening")
        elif passed:
            notes.append(f"displacement from {kind.get(ranked[0][0][0], 'channel')} "
                         f"'{best.header}'; {passed} not used")
    return best, notes


def _factor(path, columns, column, role, unit_override):
    setting = _UNIT_SETTLE.get(role)
    table = _UNIT_TABLE[role]
    unit = unit_override if unit_override is not None else column.unit
    if unit is None:
        if role == "time":
            return None
        raise RecordError(
            f"the {_ROLE_WORD[role]} channel has no unit in its header or a unit line; "
            f"set {setting} in the test sheet ({_UNIT_EXAMPLES[role]}); columns found: "
            f"{_listing(columns)}", file=path,
            column=column.header)
    if not isinstance(unit, str):
        raise RecordError(f"{setting} must be a unit such as {_UNIT_EXAMPLES[role]}",
                          file=path, value=unit)
    if unit.strip() == "mN":
        # the table reads "mn" as meganewton; a lower-case m here means milli
        raise RecordError(f"unit 'mN' is not accepted (millinewton or meganewton?); "
                          f"set {setting} to N or kN", file=path, column=column.header, value=unit)
    factor = table.get(_norm_unit(unit))
    if factor is None:
        if role == "time":
            return None
        source = setting if unit_override is not None else "the header"
        raise RecordError(
            f"unit {unit!r} (from {source}) is not a {_ROLE_WORD[role]} unit; expected "
            f"{_UNIT_EXAMPLES[role]}; set {setting} in the test sheet (or "
            f"{_SETTLE[role]} if this is the wrong channel); columns found: {_listing(columns)}",
            file=path,
            column=column.header, value=unit)
    return factor


def _choose_channels(path, columns, overrides):
    """Load, displacement and time channels with their unit factors."""
    notes = []
    chosen = {}
    for role in ("load", "disp"):
        wanted, unit = overrides[role]
        taken = {ch.column.index for ch in chosen.values()}
        if wanted is not None:
            column = _pick_by_override(path, columns, role, wanted)
            if column.index in taken:
                raise RecordError("load_column and displacement_column name the same column",
                                  file=path, column=column.header)
        else:
            column, more = _detect(path, columns, role, taken)
            notes += more
        chosen[role] = _Channel(column, _factor(path, columns, column, role, unit))
    taken = {ch.column.index for ch in chosen.values()}
    time_column, more = _detect(path, columns, "time", taken)
    notes += more
    time = None
    if time_column is not None:
        factor = _factor(path, columns, time_column, "time", None)
        if factor is None:
            unit = f"unit {time_column.unit!r}" if time_column.unit else "no unit"
            notes.append(f"time column '{time_column.header}' has {unit}; time not used")
        else:
            time = _Channel(time_column, factor)
    return _Choice(chosen["load"], chosen["disp"], time, notes)


# --------------------------------------------------------------------------
# text records


def _decode_head(path, head, truncated):
    """The head as lines, the codec for pandas and a note on the encoding."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        if truncated:
            head = head[: len(head) - len(head) % 2]
        return _lines(head.decode("utf-16", errors="replace"), truncated), "utf-16", None
    if b"\x00" in head:
        raise RecordError("contains NUL bytes: a binary file (or UTF-16 without byte-order mark), "
                          "not a text record; expected CSV, TSV, text or XLSX", file=path)
    head, complete = _first_lines(head, _HEAD_LINES)
    controls = len(head) - len(head.translate(None, _CONTROL_BYTES))
    if controls > 0.01 * len(head):
        raise RecordError("contains control bytes: a binary file, not a text record; "
                          "expected CSV, TSV, text or XLSX", file=path)
    if truncated and not complete:
        cut = max(head.rfind(b"\n"), head.rfind(b"\r"))
        if cut < 0:
            raise RecordError(f"no line break in the first {_HEAD_BYTES} bytes; not a record",
                              file=path)
        head = head[: cut + 1]
    truncated = truncated and not complete
    try:
        text, note = head.decode("utf-8-sig"), None
    except UnicodeDecodeError:
        text = head.decode("cp1252", errors="replace")
        note = "header read as Latin-1/cp1252 (not UTF-8)"
    # The data lines are ASCII either way, and pandas's own UTF-8 decoder is
    # about three times as fast as a Python codec (see the module notes).
    return _lines(text, truncated), "utf-8-sig", note


def _first_lines(head, n):
    """The bytes of the first n lines (through the n-th line feed) and whether there were n."""
    end = -1
    for _ in range(n):
        end = head.find(b"\n", end + 1)
        if end < 0:
            return head, False
    return head[: end + 1], True


def _lines(text, truncated):
    lines = _LINE_BREAK.split(text)
    if lines and lines[-1] == "":
        lines.pop()
    elif truncated and lines:
        lines.pop()
    return lines[:_HEAD_LINES]


def _text_row_stats(lines, rows, sep, decimal):
    """:func:`_row_stats` of text rows, with the two common cases done in place:
    a line of numbers only, and a line that does not split at all."""
    numbers_only, number = _NUMBERS_LINE[(sep, decimal)].match, _NUMBER[decimal].match
    out = []
    for line, r in zip(lines, rows):
        if numbers_only(line):
            out.append((len(r), 0, len(r)))
        elif len(r) == 1:
            t = r[0].strip()
            out.append((1, 0, 1) if number(t) else (0, 0, 1) if t.lower() in _MISSING else (0, 1, 1))
        else:
            out.append(_row_stats(r, decimal))
    return out


def _text_layout(path, lines):
    """Delimiter, decimal mark, first data line and the rows split by that delimiter."""
    best = None
    text = "\n".join(lines)
    for sep, decimal in _TEXT_LAYOUTS:
        if (sep != " " and sep not in text) or (decimal == "," and "," not in text):
            continue
        rows = [_split_line(line, sep) for line in lines]
        found = _find_data(rows, decimal, _text_row_stats(lines, rows, sep, decimal))
        if found and (best is None or found[1] > best[0]):
            best = (found[1], sep, decimal, found[0], rows)
    if best is None:
        if not any(line.strip() for line in lines):
            raise RecordError("has no text; expected a header and rows of numbers", file=path)
        where = (f"the first {len(lines)} lines" if len(lines) == _HEAD_LINES
                 else f"its {len(lines)} line{'s' if len(lines) > 1 else ''}")
        raise RecordError(
            f"no data rows (lines of two or more numbers) in {where}; "
            "expected a header line followed by rows of numbers", file=path)
    _, sep, decimal, start, rows = best
    return sep, decimal, start, rows


def _read_text(path, head, choose):
    truncated = len(head) == _HEAD_BYTES
    lines, encoding, encoding_note = _decode_head(path, head, truncated)
    sep, decimal, start, rows = _text_layout(path, lines)
    n_fields = len(rows[start])

    def split_header(i):
        if sep == " ":
            return _whitespace_header(lines[i], n_fields)
        return rows[i]

    header, units = _header_and_units(rows, start, split_header)
    columns = _make_columns(header, units, n_fields)
    choice = choose(columns)
    used = _used_indices(choice)
    for i in used:
        if i >= n_fields:
            raise RecordError(f"the header names more columns than the data rows have "
                              f"({n_fields} fields in line {start + 1})", file=path,
                              column=columns[i].header)

    notes = [encoding_note] if encoding_note else []
    wide = [start + 1 + k for k, r in enumerate(rows[start:]) if len(r) > n_fields]
    if wide:
        notes.append(f"{_line_list(wide)}: more fields than the {n_fields} of the first data "
                     "row; the extra fields are ignored")

    def line_numbers(idx):
        # 1-based file line of data row idx (blank lines are kept as rows)
        return start + 1 + np.asarray(idx, dtype=np.int64)

    data = None
    if _scan is not None and encoding != "utf-16" and not wide:
        data = head if not truncated else _read_bytes(path)
        scanned = _scan_text(data, _line_offset(data, start), sep, decimal, n_fields, used)
        if scanned is not None:
            values, n_rows = scanned
            return (columns, choice, values, _Rows(n_rows, line_numbers, "line"), notes), data

    import pandas as pd

    data_rows = [r for r in rows[start:] if any(_clean(t) for t in r)]
    widths = {len(r) for r in data_rows}
    # usecols is slow in the C parser (module notes): only worth it when the
    # other columns hold text, or the lines do not all have the same width
    numbers_only = _NUMBERS_LINE[(sep, decimal)].match
    all_numeric = len(widths) == 1 and all(
        numbers_only(line) or _row_stats(r, decimal)[1] == 0
        for line, r in zip(lines[start:], rows[start:]) if any(_clean(t) for t in r))
    options = dict(
        sep=r"\s+" if sep == " " else sep, decimal=decimal, header=None, skiprows=start,
        engine="c", encoding=encoding, encoding_errors="replace", skip_blank_lines=False,
        quotechar='"',
    )
    if encoding != "utf-16" and any('"' in line for line in lines[:start]):
        options["data_offset"] = _line_offset(head, start)
    if all_numeric:
        try:
            frame = _parse(path, options, sep, decimal, start, retry_long_lines=True)
        except _LongLine as long_line:
            notes.append(f"line {long_line.line} (and maybe more): more fields than the "
                         f"{n_fields} of the first data row; the extra fields are ignored")
            all_numeric = False
    if not all_numeric:
        frame = _parse(path, dict(options, usecols=used), sep, decimal, start)
    values = {}
    for i in used:
        if i not in frame.columns:
            raise RecordError("no data in this column", file=path, column=columns[i].header)
        values[i] = _series_values(frame[i], decimal, pd, shared=frame.shape[1] > len(used))
    n_rows = len(frame)
    del frame
    return (columns, choice, values, _Rows(n_rows, line_numbers, "line"), notes), data


def _read_bytes(path):
    try:
        with open(path, "rb") as f:
            return f.read()
    except OSError as exc:
        raise RecordError(f"cannot be read ({exc.strerror or exc})", file=path) from None


def _line_offset(data, line):
    """Byte offset of a 0-based line, counted as the sniffing counted them
    (a line ends at CR LF, CR or LF)."""
    pos = 0
    for _ in range(line):
        m = _BYTE_LINE_BREAK.search(data, pos)
        if m is None:
            return len(data)
        pos = m.end()
    return pos


def _scan_text(data, begin, sep, decimal, n_fields, used):
    """The used columns of a plain numeric text record by the compiled fast path.

    Returns the values of each used column and the number of rows, or None
    when any line is not plain (a text, empty or NaN cell, a quote, a blank,
    short or long line, a number beyond the exact conversion; see
    reduce/_scan.c): then pandas reads the file and reports what it finds.
    A record above ``_SPLIT_BYTES`` is scanned in parts, one thread each
    (the scan releases the GIL).
    """
    end = len(data)
    tail = data[-4096:].rstrip(_TRAILING)
    end -= min(len(data), 4096) - len(tail)
    if not tail and len(data) > 4096:
        end = len(data.rstrip(_TRAILING))
    if end <= begin:
        return None
    if n_fields > 256:
        return None
    slots = tuple(used.index(f) if f in used else -1 for f in range(n_fields))
    n_parts = min(len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity")
                  else (os.cpu_count() or 1), 4) if end - begin > _SPLIT_BYTES else 1
    bounds = [begin]
    for k in range(1, n_parts):
        cut = data.find(b"\n", begin + (end - begin) * k // n_parts, end)
        if cut < 0 or cut + 1 <= bounds[-1]:
            continue
        bounds.append(cut + 1)
    bounds.append(end)
    parts = list(zip(bounds[:-1], bounds[1:]))
    # rows of each part: its line feeds, and one more for the last line, which
    # has none as the trailing line breaks were cut off
    counts = _threaded([(_scan.count_lines, (data, b, e)) for b, e in parts])
    counts[-1] += 1
    total = sum(counts)
    out = np.empty((len(used), total))
    row0 = [sum(counts[:k]) for k in range(len(parts))]
    done = _threaded([(_scan.scan, (data, b, e, sep, decimal, slots, out, total, r))
                      for (b, e), r in zip(parts, row0)])
    if any(stop != -1 or rows != n for (rows, stop), n in zip(done, counts)):
        return None
    return {f: _Values(out[k], None) for k, f in enumerate(used)}, total


def _threaded(calls):
    """Results of calls [(function, args)], all but the first in threads of their own."""
    results = [None] * len(calls)

    def run(k):
        fn, args = calls[k]
        try:
            results[k] = fn(*args)
        except Exception as exc:  # raised again in the calling thread
            results[k] = exc

    threads = [threading.Thread(target=run, args=(k,), daemon=True) for k in range(1, len(calls))]
    for t in threads:
        t.start()
    run(0)
    for t in threads:
        t.join()
    for r in results:
        if isinstance(r, Exception):
            raise r
    return results


class _LongLine(Exception):
    """A data line with more fields than the first one (whole-file parse only)."""

    def __init__(self, line):
        super().__init__(line)
        self.line = line


def _parse(path, options, sep, decimal, start, retry_long_lines=False):
    """One call of ``pandas.read_csv``; its errors become RecordError."""
    import pandas as pd

    options = dict(options)
    offset = options.pop("data_offset", None)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # mixed-type chunks are handled after parsing
            if offset is None:
                return pd.read_csv(path, **options)
            # a quoted line break before the data: pandas would count that quoted
            # field as one line, the sniffing counted two; start at the data's byte
            with open(path, "rb") as f:
                f.seek(offset)
                return pd.read_csv(f, **dict(options, skiprows=0))
    except pd.errors.ParserError as exc:
        m = _LONG_LINE.search(str(exc))
        if retry_long_lines and m:  # pandas counts lines from where it began
            raise _LongLine(int(m.group(1)) + (start if offset is not None else 0)) from None
        problem = str(exc).strip()
    except (pd.errors.EmptyDataError, ValueError, UnicodeError, OverflowError, MemoryError) as exc:
        problem = str(exc).strip() or type(exc).__name__
    except OSError as exc:
        raise RecordError(f"cannot be read ({exc.strerror or exc})", file=path) from None
    raise RecordError(f"cannot be parsed as {_layout_words(sep, decimal)} text: {problem}",
                      file=path, row=start + 1)


def _layout_words(sep, decimal):
    name = {",": "comma", "\t": "tab", ";": "semicolon", "|": "bar", " ": "whitespace"}[sep]
    return f"{name}-separated, decimal {'comma' if decimal == ',' else 'point'}"


def _series_values(series, decimal, pd, shared):
    if pd.api.types.is_numeric_dtype(series.dtype) and not pd.api.types.is_bool_dtype(series.dtype):
        if series.dtype == np.float64:
            return _Values(series.to_numpy(), None, shared=shared)  # a view into the frame
        return _Values(series.to_numpy(dtype=np.float64, na_value=np.nan), None)
    as_text = series.astype(str)
    present = (series.notna() & (as_text.str.strip() != "")).to_numpy()  # blanks are empty
    if decimal == ",":
        as_text = as_text.str.replace(",", ".", regex=False)
    numbers = pd.to_numeric(as_text, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    text = present & np.isnan(numbers)
    first = series.iloc[int(np.argmax(text))] if text.any() else None
    return _Values(numbers, text if text.any() else None, first)


# --------------------------------------------------------------------------
# XLSX records


def _check_container(path, handle):
    """Refuse a ZIP container whose declared contents are too large (a ZIP bomb)."""
    import zipfile

    try:
        members = zipfile.ZipFile(handle).infolist()
    except (zipfile.BadZipFile, zipfile.LargeZipFile, OSError, EOFError, ValueError) as exc:
        raise RecordError(f"not a readable XLSX workbook (damaged ZIP container: {exc})",
                          file=path) from None
    if len(members) > _XLSX_MAX_MEMBERS:
        raise RecordError(f"the XLSX container holds {len(members)} parts, more than "
                          f"{_XLSX_MAX_MEMBERS}; refused as a possible ZIP bomb", file=path)
    total = 0
    for m in members:
        total += m.file_size
        if m.file_size > _XLSX_RATIO_FROM and m.file_size > _XLSX_MAX_RATIO * max(m.compress_size, 1):
            raise RecordError(
                f"the XLSX part '{m.filename}' would inflate from {m.compress_size} to "
                f"{m.file_size} bytes (ratio {m.file_size / max(m.compress_size, 1):.0f}, more "
                f"than {_XLSX_MAX_RATIO}); refused as a possible ZIP bomb", file=path)
        if total > _XLSX_MAX_UNPACKED:
            raise RecordError(f"the XLSX container declares more than "
                              f"{_XLSX_MAX_UNPACKED / 2**30:.0f} GiB of contents; refused as a "
                              "possible ZIP bomb", file=path)
    handle.seek(0)


def check_workbook(path) -> None:
    """Refuse an XLSX file before it is opened if it could be a ZIP bomb.

    Parameters
    ----------
    path : str or os.PathLike
        The workbook.

    Raises
    ------
    RecordError
        When the ZIP container is damaged, declares more than 1 GiB of
        contents or 10,000 parts, or a part above 16 MiB inflates more than
        100-fold; or when openpyxl would parse its XML without defusedxml.

    References
    ----------
    PKWARE, "APPNOTE.TXT - .ZIP File Format Specification", sect. 4.3.12
    (central directory: compressed and uncompressed sizes), from memory.
    """
    path = os.fspath(path)
    _require_hardened_xml(path)
    try:
        with open(path, "rb") as handle:
            _check_container(path, handle)
    except OSError as exc:
        raise RecordError(f"cannot be read ({exc.strerror or exc})", file=path) from None


def _require_hardened_xml(path):
    import openpyxl

    if not openpyxl.DEFUSEDXML:
        raise RecordError("XLSX files are read only with defusedxml's hardened XML parser, which "
                          "openpyxl is not using (is defusedxml installed, and OPENPYXL_DEFUSEDXML "
                          "unset?); save the file as CSV or install defusedxml", file=path)


def _read_xlsx(path, choose):
    import openpyxl

    _require_hardened_xml(path)
    try:
        handle = open(path, "rb")  # a file object: openpyxl then does not judge by the extension
    except OSError as exc:
        raise RecordError(f"cannot be read ({exc.strerror or exc})", file=path) from None
    with handle:
        _check_container(path, handle)
        try:
            # read-only, cached values only, external links not loaded:
            # nothing in the workbook is evaluated or followed [2]
            book = openpyxl.load_workbook(handle, read_only=True, data_only=True, keep_links=False)
        except Exception as exc:  # openpyxl raises many types for a bad container
            raise _workbook_error(path, "not a readable XLSX workbook", exc) from None
        try:
            return _read_sheet(path, book, choose)
        except RecordError:
            raise
        except Exception as exc:  # a damaged sheet part deep inside the ZIP
            raise _workbook_error(path, "the first sheet cannot be read", exc) from None
        finally:
            book.close()


def _workbook_error(path, what, exc):
    """A RecordError for openpyxl's exception, saying so when defusedxml refused the XML."""
    from defusedxml import DefusedXmlException

    cause = exc
    while cause is not None and not isinstance(cause, DefusedXmlException):
        cause = cause.__cause__ or cause.__context__
    if cause is not None:
        return RecordError(f"{what}: its XML declares entities or external references "
                           f"({cause!r}), which are never expanded or followed; refused as a "
                           "possible XML bomb", file=path)
    return RecordError(f"{what} ({type(exc).__name__}: {exc})", file=path)


def _read_sheet(path, book, choose):
    if not book.worksheets:
        raise RecordError("the workbook has no worksheet", file=path)
    sheet = book.worksheets[0]
    sheet.reset_dimensions()  # some writers store a wrong sheet size; read what is there
    rows = sheet.iter_rows(values_only=True)
    head = [list(r) for r in islice(rows, _HEAD_LINES)]
    best = None
    for decimal in (".", ","):
        found = _find_data(head, decimal)
        if found and (best is None or found[1] > best[0]):
            best = (found[1], decimal, found[0])
    if best is None:
        raise RecordError(f"no data rows (rows of two or more numbers) in the first {len(head)} "
                          f"rows of sheet '{sheet.title}'", file=path)
    _, decimal, start = best
    n_fields = max(len(r) for r in head[start:])
    header, units = _header_and_units(head, start, lambda i: head[i])
    columns = _make_columns(header, units, n_fields)
    choice = choose(columns)
    used = _used_indices(choice)
    cells = {i: [] for i in used}
    texts = {i: [] for i in used}
    n_rows = 0
    for row in chain(head[start:], rows):
        for i in used:
            value, is_text = _cell_value(row[i] if i < len(row) else None, decimal)
            cells[i].append(value)
            if is_text:
                texts[i].append((n_rows, row[i]))
        n_rows += 1
    values = {}
    for i in used:
        text = None
        if texts[i]:
            text = np.zeros(n_rows, dtype=bool)
            text[[k for k, _ in texts[i]]] = True
        values[i] = _Values(np.array(cells[i], dtype=np.float64), text,
                            texts[i][0][1] if texts[i] else None)
    notes = []
    rows_info = _Rows(n_rows, lambda idx: start + 1 + np.asarray(idx, dtype=np.int64), "row")
    return columns, choice, values, rows_info, notes


def _cell_value(cell, decimal):
    """(float, is_text) of a worksheet cell; NaN when empty or not a number."""
    kind = _token_class(cell, decimal)
    if kind == _NUM:
        if isinstance(cell, str):
            return float(cell.strip().replace(",", ".")), False
        return float(cell), False
    return math.nan, kind == _TEXT


# --------------------------------------------------------------------------
# common end: bad rows, units, notes


@dataclass
class _Rows:
    count: int  # data rows parsed
    line_numbers: object  # callable: row indices -> 1-based line (or sheet row) numbers
    word: str  # "line" for text, "row" for a sheet


def _used_indices(choice):
    used = [choice.load.column.index, choice.disp.column.index]
    if choice.time is not None:
        used.append(choice.time.column.index)
    return sorted(used)


def _line_list(lines, more=0, word="line"):
    lines = [int(x) for x in lines]
    shown = ", ".join(str(x) for x in lines[:_LINES_LISTED])
    rest = len(lines) - min(len(lines), _LINES_LISTED) + more
    plural = word + "s" if len(lines) + more > 1 else word
    return f"{plural} {shown}" + (f" and {rest} more" if rest > 0 else "")


def _trim_empty_tail(used, n):
    """Rows before a run of trailing rows that are empty in every used channel."""
    last = n
    while last > 0 and all(np.isnan(v.values[last - 1]) and (v.text is None or not v.text[last - 1])
                           for v in used):
        last -= 1
    return last


def _first_text(used):
    for channel, v in used:
        if v.text is not None:
            return channel.column.header, v.first_text
    return None, None


def _finite(raw, n):
    """None when the first n values are all finite, else the mask of finite ones.

    One sum answers the common all-finite case: NaN and inf propagate through
    it (an overflow to inf only sends a record down the slower, exact path).
    """
    head = raw[:n]
    with np.errstate(all="ignore"):
        if math.isfinite(float(np.sum(head))):
            return None
    return np.isfinite(head)


def _both(a, b):
    if a is None:
        return b
    return a if b is None else a & b


def _converted(column, n, good, factor):
    """The good values in the internal unit, as a read-only float64 array.

    A view of the parsed data is kept as it is when it holds nothing but the
    channels used (no copy, no extra memory); otherwise a new array is made.
    """
    raw = column.values[:n]
    if good is None:
        out = raw * factor if factor != 1.0 else (raw.copy() if column.shared else raw)
    else:
        out = raw[good]
        if factor != 1.0:
            out *= factor
    out.flags.writeable = False
    return out


def _time_notes(time_s):
    later, earlier = time_s[1:], time_s[:-1]
    if np.all(later > earlier):
        return []
    notes = []
    repeated = int(np.count_nonzero(later == earlier))
    backwards = int(np.count_nonzero(later < earlier))
    if repeated:
        notes.append(f"{repeated} repeated time stamps (samples are used in file order)")
    if backwards:
        notes.append(f"time goes backwards {backwards} times (samples are used in file order)")
    return notes


def _bad_row_notes(good, used, n, rows):
    text_rows = np.zeros(n, dtype=bool)
    for _, v in used:
        if v.text is not None:
            text_rows |= v.text[:n]
    text_rows &= ~good
    notes = []
    for mask, what in ((text_rows, "with text in numeric columns"),
                       (~good & ~text_rows, "with empty or NaN cells")):
        idx = np.flatnonzero(mask)
        if idx.size:
            shown = rows.line_numbers(idx[:_LINES_LISTED])
            listed = _line_list(shown, idx.size - shown.size, rows.word)
            rows_word = "rows" if idx.size > 1 else "row"
            notes.append(f"{idx.size} {rows_word} {what} skipped ({listed})")
    return notes


def _positive_sense(load, disp, choice, notes):
    """Load and opening as positive numbers, whatever sign the rig writes.

    Many frames write a compressive (bend) load or a closing gauge as
    negative.  A load channel whose largest magnitude is negative is reversed,
    and so is a displacement that falls while the load rises to its peak;
    each reversal is noted.
    """
    if load.size and -float(load.min()) > float(load.max()):
        load = np.negative(load)
        load.flags.writeable = False
        notes.append(f"load channel '{choice.load.column.header}' is negative (compression "
                     "counted negative by the rig): its sign was reversed")
    if load.size:
        i_peak = int(np.argmax(load))
        rising = disp[: i_peak + 1]
        rising = rising[:: max(1, rising.size // 10_000)]  # a median of at most ~20,000 samples
        if float(disp[i_peak]) < float(disp[0]) and float(np.median(rising)) < float(disp[0]):
            disp = np.negative(disp)
            disp.flags.writeable = False
            notes.append(f"displacement channel '{choice.disp.column.header}' decreases as the load "
                         "rises: its sign was reversed")
    return load, disp


def _finish(path, digest, columns, choice, values, rows, notes):
    notes = list(notes) + choice.notes
    load = values[choice.load.column.index]
    disp = values[choice.disp.column.index]
    time = values[choice.time.column.index] if choice.time is not None else None
    n = _trim_empty_tail([load, disp] + ([time] if time else []), rows.count)

    good = _both(_finite(load.values, n), _finite(disp.values, n))
    if time is not None:
        time_ok = _finite(time.values, n)
        if time_ok is not None:
            n_ld = n if good is None else int(np.count_nonzero(good))
            n_lost = n_ld - int(np.count_nonzero(time_ok if good is None else time_ok & good))
            if n_lost > 0.5 * n_ld:
                notes.append(f"time column '{choice.time.column.header}' is mostly empty or not "
                             "numeric; time not used")
                time = None
            else:
                good = _both(good, time_ok)
    used = [(choice.load, load), (choice.disp, disp)] + ([(choice.time, time)] if time else [])

    n_good = n if good is None else int(np.count_nonzero(good))
    n_bad = n - n_good
    if n_bad > _MAX_BAD_FRACTION * n:
        bad_idx = np.flatnonzero(~good)
        shown = rows.line_numbers(bad_idx[:_LINES_LISTED])
        column, value = _first_text(used)
        raise RecordError(
            f"{n_bad} of {n} data rows have empty or non-numeric cells in the channels used "
            f"(first at {_line_list(shown, bad_idx.size - shown.size, rows.word)}); more than "
            f"half, so the record is refused; check the channels chosen (load "
            f"'{choice.load.column.header}', displacement '{choice.disp.column.header}') and "
            "the file's delimiter and decimal mark", file=path, column=column, value=value)
    if n_good < _MIN_VALID_ROWS:
        raise RecordError(f"only {n_good} valid data rows; at least {_MIN_VALID_ROWS} are needed",
                          file=path)
    if good is not None:
        notes += _bad_row_notes(good, used, n, rows)

    time_s = None
    if time is not None:
        time_s = _converted(time, n, good, choice.time.factor)
        notes += _time_notes(time_s)
    load_kN, disp_mm = _positive_sense(_converted(load, n, good, choice.load.factor),
                                       _converted(disp, n, good, choice.disp.factor), choice, notes)
    return Record(
        path=path,
        load_kN=load_kN,
        disp_mm=disp_mm,
        time_s=time_s,
        load_header=choice.load.column.header,
        disp_header=choice.disp.column.header,
        time_header=choice.time.column.header if time is not None else None,
        columns=[c.header for c in columns],
        _sha256=digest,
        notes=notes,
    )
