"""The results workbook (Excel, written with openpyxl).

Sheets: ``Results`` (one row per specimen), ``Checks`` (one row per check,
with its unit), ``Records`` (one row per record sheet: which specimen, the
file, its SHA-256, the origin offset subtracted, the construction's loads,
the samples written) and one sheet per reduced specimen with nothing but its
origin-corrected record, so ``pandas.read_excel`` returns clean columns.
Units are in the headers, the header row is frozen, numbers carry number
formats, long texts wrap.  Values that are not finite are left empty (Excel
has no NaN).  The file is written atomically.
"""

from __future__ import annotations

import math

import numpy as np

from reduce.atomic import atomic_path
from reduce.sheet import safe_name

#: (header, result key, number format)
RESULT_COLUMNS = [
    ("Specimen", "specimen", None), ("Heat", "heat", None), ("Geometry", "geometry", None),
    ("Rule set", "rule_set", None),
    ("Temperature (°C)", ("specimen_data", "temperature_C"), "0.0"),
    ("Orientation", ("specimen_data", "orientation"), None),
    ("B (mm)", ("specimen_data", "B_mm"), "0.00"), ("B_N (mm)", ("specimen_data", "B_N_mm"), "0.00"),
    ("W (mm)", ("specimen_data", "W_mm"), "0.00"), ("S (mm)", ("specimen_data", "S_mm"), "0.00"),
    ("a (mm)", "a_mm", "0.00"), ("a/W", "a_over_W", "0.000"), ("f(a/W)", "f_a_over_W", "0.000"),
    ("Yield (MPa)", ("specimen_data", "yield_MPa"), "0"),
    ("Initial slope (kN/mm)", "initial_slope_kN_per_mm", "0.00"),
    ("P_5 (kN)", "P_5_kN", "0.000"), ("P_Q (kN)", "P_Q_kN", "0.000"), ("P_max (kN)", "P_max_kN", "0.000"),
    ("P_max/P_Q", "P_max_over_P_Q", "0.000"), ("Curve type", "curve_type", None),
    ("K_Q (MPa·m^½)", "K_Q_MPa_sqrt_m", "0.00"), ("K_Q (ksi·in^½)", "K_Q_ksi_sqrt_in", "0.00"),
    ("Valid K_Ic", "valid", None), ("K_Ic (MPa·m^½)", "K_Ic_MPa_sqrt_m", "0.00"),
    # elastic-plastic group (reduce/elastic_plastic.py)
    ("EP point", ("elastic_plastic", "point"), None),
    ("J (kJ/m²)", ("elastic_plastic", "J_kJ_per_m2"), "0.0"),
    ("J size check passed (E1820)", ("elastic_plastic", "verdicts", "J", "passed"), None),
    ("K_J (MPa·m^½)", ("elastic_plastic", "K_J_MPa_sqrt_m"), "0.0"),
    ("K_J size check passed (E1921)", ("elastic_plastic", "verdicts", "K_J", "passed"), None),
    ("CTOD (mm)", ("elastic_plastic", "CTOD_mm"), "0.0000"),
    ("CTOD size check passed", ("elastic_plastic", "verdicts", "CTOD", "passed"), None),
    ("EP checks all passed", ("elastic_plastic", "valid"), None),
    ("Reasons", "reasons", None), ("Caveats", "caveats", None), ("Warnings", "warnings", None),
    ("Record", "record", None), ("Record SHA-256", "record_sha256", None), ("Error", "error", None),
]

#: column widths (characters) of the long texts
_WIDE = {"Reasons": 60, "Caveats": 40, "Warnings": 40, "Record": 24, "Record SHA-256": 68, "Error": 60}

#: most samples written per specimen sheet (Excel holds about a million rows)
MAX_RECORD_ROWS = 20000


def _cell(v):
    """A value as a cell takes it: NaN and infinities empty, numpy scalars plain."""
    if hasattr(v, "item"):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


#: verdict columns, where an empty cell would hide that the check was not assessed
_VERDICT_KEYS = {"passed"}


def _get(d, key):
    path = key if isinstance(key, tuple) else (key,)
    for k in path[:-1]:
        d = d.get(k) if isinstance(d, dict) else None
        d = d if isinstance(d, dict) else {}
    v = d.get(path[-1])
    if v is None and path[-1] in _VERDICT_KEYS and d:
        return "not assessed"
    if isinstance(v, list):
        return "; ".join(str(x) for x in v) or None
    if isinstance(v, bool):
        return "yes" if v else "no"
    return _cell(v)


def value_format(v) -> str | None:
    """The number format that shows ``v`` to 4 significant digits (None for a non-number).

    >>> value_format(24.87), value_format(0.5485), value_format(0.0001199), value_format(8.639e-6)
    ('0.00', '0.0000', '0.0000000', '0.000E+00')
    """
    if not isinstance(v, (int, float)) or isinstance(v, bool) or not math.isfinite(v):
        return None
    if v == 0:
        return "0"
    e = int(f"{v:.3e}".split("e")[1])
    if not -4 <= e < 5:
        return "0.000E+00"
    nd = max(0, 3 - e)
    return "0." + "0" * nd if nd else "0"


def _sheet_name(specimen: str, used: set) -> str:
    """A unique sheet name (Excel: at most 31 characters, compared without case).

    >>> used = {"results", "checks"}
    >>> _sheet_name("Results", used), _sheet_name("results", used), _sheet_name("A/1", used)
    ('Results_2', 'results_3', 'A_1')
    """
    name = safe_name(specimen)[:28] or "specimen"
    base, n = name, 2
    while name.lower() in used:
        name = f"{base[:25]}_{n}"
        n += 1
    used.add(name.lower())
    return name


def _header(ws, headers, widths=None):
    from openpyxl.styles import Alignment, Font, PatternFill

    ws.append(headers)
    for i, cell in enumerate(ws[1], start=1):
        cell.font = Font(bold=True)
        cell.fill = PatternFill("solid", fgColor="DDE3EA")
        cell.alignment = Alignment(wrap_text=True, vertical="top")
        ws.column_dimensions[cell.column_letter].width = (widths or {}).get(i, max(10, len(str(cell.value)) + 2))
    ws.freeze_panes = "A2"


def _wrap(ws, columns):
    from openpyxl.styles import Alignment

    for j in columns:
        for row in ws.iter_rows(min_row=2, min_col=j, max_col=j):
            row[0].alignment = Alignment(wrap_text=True, vertical="top")


#: (header, number format) of the Records sheet: what each record sheet holds
RECORD_COLUMNS = [
    ("Specimen", None), ("Sheet", None), ("Record", None), ("Record SHA-256", None),
    ("Origin offset subtracted, v0 (mm)", "0.00000"), ("Initial slope (kN/mm)", "0.000"),
    ("P_5 (kN)", "0.000"), ("P_Q (kN)", "0.000"), ("P_max (kN)", "0.000"), ("Samples written", None),
]


def _record_row(name, result, rec, step) -> list:
    n = rec.load_kN.size
    return [result.specimen, name, result.record, result.record_sha256, _cell(result.origin_offset_mm),
            _cell(result.initial_slope_kN_per_mm), _cell(result.P_5_kN), _cell(result.P_Q_kN),
            _cell(result.P_max_kN), f"all {n}" if step == 1 else f"1 in {step} of {n}"]


def write_workbook(path, rows) -> None:
    """Write the results workbook.

    Parameters
    ----------
    path : str or Path
        Target ``.xlsx`` file; written atomically.
    rows : list of (Result, Record or None, Specimen or BadRow)
        As returned by :func:`reduce.pipeline.reduce_sheet`.
    """
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Results"
    dicts = [r.to_dict() for r, _, _ in rows]
    columns = RESULT_COLUMNS
    _header(ws, [h for h, _, _ in columns], {j: _WIDE[h] for j, (h, _, _) in enumerate(columns, start=1)
                                             if h in _WIDE})
    for d in dicts:
        ws.append([_get(d, key) for _, key, _ in columns])
    for j, (_, _, fmt) in enumerate(columns, start=1):
        if fmt:
            for row in ws.iter_rows(min_row=2, min_col=j, max_col=j):
                row[0].number_format = fmt
    _wrap(ws, [j for j, (h, _, _) in enumerate(columns, start=1) if h in _WIDE])

    from reports.certificate import check_unit

    wc = wb.create_sheet("Checks")
    _header(wc, ["Specimen", "Check", "Result", "Value", "Unit", "Limit", "Clause", "Note"],
            {6: 40, 7: 60, 8: 30})
    for d in dicts:
        # K_Ic checks, then the elastic-plastic ones (reduce/elastic_plastic.py)
        for c in (d.get("checks") or []) + ((d.get("elastic_plastic") or {}).get("checks") or []):
            verdict = {True: "pass", False: "fail", None: "not assessed"}[c["passed"]]
            value = _cell(c["value"])
            wc.append([d["specimen"], c["name"], verdict, value,
                       check_unit(c["name"], c["limit"] or "") if value is not None else None,
                       c["limit"], c["clause"], c.get("note", "")])
            wc.cell(row=wc.max_row, column=4).number_format = value_format(value) or "General"
    _wrap(wc, [6, 7, 8])

    wi = wb.create_sheet("Records")
    _header(wi, [h for h, _ in RECORD_COLUMNS], {2: 14, 3: 24, 4: 68, 5: 18, 6: 14})
    used = {n.lower() for n in wb.sheetnames}
    for result, rec, _ in rows:
        if rec is None or result.error:
            continue
        name = _sheet_name(result.specimen, used)
        wr = wb.create_sheet(name)
        has_t = rec.time_s is not None
        heads = (["Time (s)"] if has_t else []) + ["Displacement, origin-corrected (mm)", "Load (kN)"]
        _header(wr, heads, {j: 14 if h != heads[-2] else 22 for j, h in enumerate(heads, start=1)})
        step = max(1, int(np.ceil(rec.load_kN.size / MAX_RECORD_ROWS)))
        v = rec.disp_mm[::step] - (result.origin_offset_mm or 0.0)
        P = rec.load_kN[::step]
        cols = ([rec.time_s[::step]] if has_t else []) + [v, P]
        for vals in zip(*cols):
            wr.append([_cell(float(x)) for x in vals])
        fmts = (["0.000"] if has_t else []) + ["0.00000", "0.0000"]
        for j, fmt in enumerate(fmts, start=1):
            for row in wr.iter_rows(min_row=2, min_col=j, max_col=j):
                row[0].number_format = fmt
        wi.append(_record_row(name, result, rec, step))
    for j, (_, fmt) in enumerate(RECORD_COLUMNS, start=1):
        if fmt:
            for row in wi.iter_rows(min_row=2, min_col=j, max_col=j):
                row[0].number_format = fmt
    with atomic_path(path) as tmp:
        wb.save(tmp)
