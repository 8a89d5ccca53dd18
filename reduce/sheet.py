"""The lab's test sheet: one row per specimen, CSV or XLSX.

Column names are the standard's symbol and a unit suffix, e.g. ``W_mm`` or
``W_in``, ``yield_MPa`` or ``yield_ksi``.  Values are converted to the
internal units on the way in (see :mod:`reduce.units`).  Columns the sheet
has and cracktip does not know are kept as metadata.

Crack-length readings: ``a1`` … ``a3`` (ASTM E399 three-point) or ``a1`` …
``a9`` (ASTM E1820 nine-point), no gaps; the count chooses the scheme.
``displacement_type`` (``cmod``, ``load_line`` or ``front_face``; spaces,
hyphens and case ignored) must be one the geometry allows; empty means the
geometry's default.

Every row is checked on its own: a row with a missing or impossible value
becomes a :class:`BadRow` carrying a :class:`~reduce.errors.SheetError`
that names the sheet, the row (as a spreadsheet counts it: the header is
row 1) and the column; the other rows are unaffected.
"""

from __future__ import annotations

import csv
import math
import re
from dataclasses import dataclass
from pathlib import Path

from reduce.errors import SheetError
from reduce.models import Specimen
from reduce.units import (INCH_MM, K_TO_MPA_SQRT_M, STRESS_TO_MPA, fahrenheit_to_celsius)

_LENGTH = {"mm": 1.0, "in": INCH_MM}
_STRESS = {"MPa": 1.0, "ksi": STRESS_TO_MPA["ksi"]}
_MODULUS = {"GPa": 1000.0, "MPa": 1.0, "ksi": STRESS_TO_MPA["ksi"]}
_K = {"MPa_sqrt_m": 1.0, "ksi_sqrt_in": K_TO_MPA_SQRT_M["ksi_sqrt_in"]}
_TEMP = {"C": None, "F": None}

#: numeric quantities: symbol -> accepted unit suffixes
QUANTITIES = {
    "B": _LENGTH, "BN": _LENGTH, "W": _LENGTH, "S": _LENGTH,
    **{f"a{i}": _LENGTH for i in range(1, 10)},
    "as1": _LENGTH, "as2": _LENGTH, "X": _LENGTH, "r1": _LENGTH, "r2": _LENGTH, "z": _LENGTH,
    "yield": _STRESS, "tensile": _STRESS, "E": _MODULUS,
    "temperature": _TEMP, "precrack_Kmax": _K,
}
TEXT_COLUMNS = ("specimen", "heat", "geometry", "record", "orientation", "material",
                "load_column", "displacement_column", "load_unit", "displacement_unit",
                "displacement_type")
PLAIN_NUMBERS = ("poisson",)
REQUIRED = ("specimen", "geometry", "record", "B", "W", "a1", "a2", "a3", "yield", "E")


@dataclass
class BadRow:
    """A sheet row that could not be turned into a specimen description."""

    specimen: str
    heat: str | None
    row: int
    error: SheetError
    geometry: str | None = None
    record: str | None = None


def _split_column(name: str):
    """(symbol, unit) for a quantity column, or ``None``."""
    for symbol, units in QUANTITIES.items():
        for unit in units:
            if name == f"{symbol}_{unit}":
                return symbol, unit
    return None


def _read_rows(path: Path) -> tuple[list[str], list[list[str]]]:
    if not path.is_file():
        raise SheetError("the test sheet does not exist or is not a file", file=str(path))
    if path.suffix.lower() in (".xlsx", ".xlsm"):
        return _read_xlsx(path)
    raw = path.read_bytes()
    if b"\x00" in raw[:4096]:
        raise SheetError("the test sheet is not a text file (CSV) or an .xlsx workbook", file=str(path))
    for enc in ("utf-8-sig", "cp1252", "latin-1"):
        try:
            text = raw.decode(enc)
            break
        except UnicodeDecodeError:
            continue
    lines = [ln for ln in text.splitlines() if ln.strip()]
    if not lines:
        raise SheetError("the test sheet is empty", file=str(path))
    try:
        dialect = csv.Sniffer().sniff(lines[0], delimiters=",;\t")
        delim = dialect.delimiter
    except csv.Error:
        delim = ","
    rows = list(csv.reader(lines, delimiter=delim))
    return [h.strip() for h in rows[0]], [[c.strip() for c in r] for r in rows[1:]]


def _read_xlsx(path: Path):
    import openpyxl  # loaded only for workbooks

    from reduce.errors import RecordError
    from reduce.records import check_workbook

    try:  # the same container checks as for records: no ZIP bomb, hardened XML
        check_workbook(path)
    except RecordError as exc:
        raise SheetError(exc.problem, file=str(path)) from None
    try:
        wb = openpyxl.load_workbook(path, read_only=True, data_only=True, keep_links=False)
    except Exception as exc:  # openpyxl raises many types for a bad file
        raise SheetError(f"cannot open the workbook: {exc}", file=str(path)) from None
    try:
        ws = wb.worksheets[0]
        rows = [["" if c is None else str(c).strip() for c in r] for r in ws.iter_rows(values_only=True)]
    finally:
        wb.close()
    rows = [r for r in rows if any(r)]
    if not rows:
        raise SheetError("the test sheet is empty", file=str(path))
    return rows[0], rows[1:]


def _number(text: str, sheet, row, column) -> float:
    try:
        x = float(text.replace(",", ".")) if text.count(",") == 1 and "." not in text else float(text)
    except ValueError:
        raise SheetError("expected a number", file=sheet, row=row, column=column, value=text) from None
    if not math.isfinite(x):
        raise SheetError("expected a finite number", file=sheet, row=row, column=column, value=text)
    return x


def read_sheet(path) -> list:
    """Read a test sheet into specimen descriptions.

    Parameters
    ----------
    path : str or Path
        A ``.csv`` (comma, semicolon or tab separated) or ``.xlsx`` sheet.

    Returns
    -------
    list of Specimen or BadRow
        In sheet order, one entry per non-empty row.

    Raises
    ------
    SheetError
        If the sheet itself cannot be used (missing file, no header, a
        required column absent, one quantity given in two units).
    """
    path = Path(path)
    sheet = str(path)
    header, rows = _read_rows(path)
    columns = {}
    for name in header:
        if not name:
            continue
        if name in columns:
            raise SheetError("the column appears twice in the header", file=sheet, row=1, column=name)
        columns[name] = _split_column(name)
    given = {sym for sym, _ in filter(None, columns.values())} | set(columns)
    missing = [c for c in REQUIRED if c not in given]
    if missing:
        hint = ", ".join(f"{m}_<unit>" if m in QUANTITIES else m for m in missing)
        raise SheetError(f"required column(s) missing: {hint}; found: {', '.join(columns)}", file=sheet)
    out, seen_ids = [], {}
    for i, cells in enumerate(rows):
        row_no = i + 2
        values = {name: (cells[k] if k < len(cells) else "") for k, name in enumerate(header) if name}
        if not any(values.values()):
            continue
        try:
            spec = _row_to_specimen(values, columns, sheet, row_no)
            if spec.specimen in seen_ids:
                raise SheetError(f"specimen ID repeats the one in row {seen_ids[spec.specimen]}",
                                 file=sheet, row=row_no, column="specimen", value=spec.specimen)
            seen_ids[spec.specimen] = row_no
            out.append(spec)
        except SheetError as err:
            out.append(BadRow(values.get("specimen") or f"(row {row_no})", values.get("heat") or None,
                              row_no, err, values.get("geometry") or None, values.get("record") or None))
    return out


def _row_to_specimen(values: dict, columns: dict, sheet: str, row: int) -> Specimen:
    q: dict[str, float] = {}
    text: dict[str, str] = {}
    meta: dict[str, str] = {}
    source: dict[str, str] = {}  # symbol -> the column its value came from
    for name, raw in values.items():
        su = columns.get(name)
        if su:
            if raw == "":
                continue
            symbol, unit = su
            x = _number(raw, sheet, row, name)
            if symbol == "temperature":
                x = fahrenheit_to_celsius(x) if unit == "F" else x
            else:
                x *= QUANTITIES[symbol][unit]
            if symbol in q:  # e.g. W_mm and W_in both filled in
                raise SheetError(f"{symbol} is given twice in this row, in '{source[symbol]}' and "
                                 f"'{name}'; keep one", file=sheet, row=row, column=name, value=raw)
            q[symbol] = x
            source[symbol] = name
        elif name in TEXT_COLUMNS:
            if raw != "":
                text[name] = raw
        elif name in PLAIN_NUMBERS:
            if raw != "":
                q[name] = _number(raw, sheet, row, name)
        elif raw != "":
            meta[name] = raw

    def col(symbol):
        return source.get(symbol) or next((n for n, su in columns.items() if su and su[0] == symbol), symbol)

    for req in REQUIRED:
        if req not in q and req not in text:
            raise SheetError("a required value is missing", file=sheet, row=row, column=col(req))
    for symbol in ("B", "W", "BN", "S", "yield", "E", "tensile", *(f"a{i}" for i in range(1, 10))):
        if symbol in q and q[symbol] <= 0:
            raise SheetError("must be greater than zero", file=sheet, row=row, column=col(symbol),
                             value=values[col(symbol)])
    readings = _readings(q, values, col, sheet, row)
    for i, a in enumerate(readings, start=1):
        if a >= q["W"]:
            raise SheetError(f"crack length must be less than W = {q['W']:.3f} mm", file=sheet, row=row,
                             column=col(f"a{i}"), value=values[col(f"a{i}")])
    if "BN" in q and q["BN"] > q["B"]:
        raise SheetError(f"net thickness B_N cannot exceed B = {q['B']:.3f} mm", file=sheet, row=row,
                         column=col("BN"), value=values[col("BN")])
    if "poisson" in q and not 0.0 <= q["poisson"] < 0.5:
        raise SheetError("Poisson's ratio must lie in [0, 0.5)", file=sheet, row=row, column="poisson",
                         value=values["poisson"])
    geometry = text["geometry"]
    import specimens

    try:
        geo = specimens.geometry(geometry)
    except KeyError as exc:
        raise SheetError(exc.args[0], file=sheet, row=row, column="geometry", value=geometry) from None
    for need in geo.required:
        if need not in q:
            raise SheetError(f"{geo.designation} needs this dimension", file=sheet, row=row,
                             column=f"{need}_mm")
    kind = _displacement_type(text.get("displacement_type"), geo, sheet, row)
    if "z" in q and q["z"] < 0:
        raise SheetError("the knife-edge height cannot be negative", file=sheet, row=row, column=col("z"),
                         value=values[col("z")])
    dims = {k: q[k] for k in ("X", "r1", "r2", "z") if k in q}
    surface = tuple(q[k] for k in ("as1", "as2") if k in q)
    return Specimen(
        specimen=text["specimen"], geometry=geo.designation, B=q["B"], W=q["W"],
        a_readings=readings, yield_MPa=q["yield"], E_MPa=q["E"], B_N=q.get("BN"), S=q.get("S"),
        surface=surface, precrack_Kmax=q.get("precrack_Kmax"), heat=text.get("heat"),
        temperature_C=q.get("temperature"), orientation=text.get("orientation"),
        tensile_MPa=q.get("tensile"), poisson=q.get("poisson"),
        displacement_type=kind, dims=dims, record=text["record"],
        load_column=text.get("load_column"), displacement_column=text.get("displacement_column"),
        load_unit=text.get("load_unit"), displacement_unit=text.get("displacement_unit"),
        metadata={**meta, **({"material": text["material"]} if "material" in text else {})},
        sheet=sheet, row=row,
    )


def _readings(q: dict, values: dict, col, sheet: str, row: int) -> tuple[float, ...]:
    """a1 … an in order; n must be 3 or 9 and the run must have no gap."""
    given = [i for i in range(1, 10) if f"a{i}" in q]
    gap = next((i for i in range(1, given[-1]) if i not in given), None)
    if gap is not None:
        name = col(f"a{gap}")
        raise SheetError(f"crack-length reading a{gap} is empty but a{given[-1]} is given; "
                         "readings must run from a1 without a gap", file=sheet, row=row,
                         column=name if name != f"a{gap}" else f"a{gap}_mm")
    n = len(given)
    if n not in (3, 9):
        name = col(f"a{n}")
        raise SheetError(f"{n} crack-length readings (a1 to a{n}); give 3 (a1 to a3, ASTM E399 "
                         "three-point) or 9 (a1 to a9, ASTM E1820 nine-point)", file=sheet, row=row,
                         column=name, value=values[name])
    return tuple(q[f"a{i}"] for i in given)


def _displacement_type(raw: str | None, geo, sheet: str, row: int) -> str | None:
    """The sheet's displacement type in canonical form, checked against the geometry."""
    if raw is None:
        return None
    kind = "_".join(raw.lower().replace("-", " ").split())
    if kind not in geo.displacement_types:
        allowed = ", ".join(geo.displacement_types)
        raise SheetError(f"{geo.designation} allows displacement_type {allowed} "
                         f"(empty: {geo.displacement_types[0]})", file=sheet, row=row,
                         column="displacement_type", value=raw)
    return kind


_SAFE = re.compile(r"[^A-Za-z0-9._-]+")


def safe_name(text: str) -> str:
    """A file-name-safe form of a specimen or heat ID (never a path).

    >>> safe_name("../x"), safe_name("a/b")
    ('x', 'a_b')
    """
    name = _SAFE.sub("_", str(text)).strip("._")
    return name or "unnamed"
