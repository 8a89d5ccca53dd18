"""The results workbook (Excel, written with openpyxl).

Sheets: ``Results`` (one row per specimen), ``Checks`` (one row per check),
and one sheet per reduced specimen with its origin-corrected record.  Units
are in the headers, the header row is frozen, numbers carry number formats.
The file is written atomically.
"""

from __future__ import annotations

import numpy as np

from reduce.atomic import atomic_path
from reduce.sheet import safe_name

#: (header, result key, number format)
RESULT_COLUMNS = [
    ("Specimen", "specimen", None), ("Heat", "heat", None), ("Geometry", "geometry", None),
    ("Rule set", "rule_set", None),
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
    ("J qualifies (E1820 size)", ("elastic_plastic", "J_valid"), None),
    ("K_J (MPa·m^½)", ("elastic_plastic", "K_J_MPa_sqrt_m"), "0.0"),
    ("K_J qualifies (E1921 size)", ("elastic_plastic", "K_J_valid"), None),
    ("CTOD (mm)", ("elastic_plastic", "CTOD_mm"), "0.0000"),
    ("CTOD qualifies", ("elastic_plastic", "CTOD_valid"), None),
    ("EP valid", ("elastic_plastic", "valid"), None),
    ("Reasons", "reasons", None), ("Record SHA-256", "record_sha256", None), ("Error", "error", None),
]

#: most samples written per specimen sheet (Excel holds about a million rows)
MAX_RECORD_ROWS = 20000


def _get(d, key):
    if isinstance(key, tuple):
        d = d.get(key[0]) or {}
        key = key[1]
    v = d.get(key)
    if isinstance(v, list):
        return "; ".join(str(x) for x in v)
    if isinstance(v, bool):
        return "yes" if v else "no"
    return v


def _header(ws, headers, widths=None):
    from openpyxl.styles import Alignment, Font, PatternFill

    ws.append(headers)
    for i, cell in enumerate(ws[1], start=1):
        cell.font = Font(bold=True)
        cell.fill = PatternFill("solid", fgColor="DDE3EA")
        cell.alignment = Alignment(wrap_text=True, vertical="top")
        ws.column_dimensions[cell.column_letter].width = (widths or {}).get(i, max(10, len(str(cell.value)) + 2))
    ws.freeze_panes = "A2"


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
    _header(ws, [h for h, _, _ in columns])
    for d in dicts:
        ws.append([_get(d, key) for _, key, _ in columns])
    for j, (_, _, fmt) in enumerate(columns, start=1):
        if fmt:
            for row in ws.iter_rows(min_row=2, min_col=j, max_col=j):
                row[0].number_format = fmt

    wc = wb.create_sheet("Checks")
    _header(wc, ["Specimen", "Check", "Result", "Value", "Limit", "Clause", "Note"],
            {5: 40, 6: 60, 7: 30})
    for d in dicts:
        # K_Ic checks, then the elastic-plastic ones (reduce/elastic_plastic.py)
        for c in (d.get("checks") or []) + ((d.get("elastic_plastic") or {}).get("checks") or []):
            verdict = {True: "pass", False: "fail", None: "not assessed"}[c["passed"]]
            wc.append([d["specimen"], c["name"], verdict, c["value"], c["limit"], c["clause"], c.get("note", "")])
    for row in wc.iter_rows(min_row=2, min_col=4, max_col=4):
        row[0].number_format = "0.0000"

    used = set(wb.sheetnames)
    for result, rec, _ in rows:
        if rec is None or result.error:
            continue
        name = safe_name(result.specimen)[:28] or "specimen"
        base, n = name, 2
        while name in used:
            name = f"{base[:25]}_{n}"
            n += 1
        used.add(name)
        wr = wb.create_sheet(name)
        has_t = rec.time_s is not None
        heads = (["Time (s)"] if has_t else []) + ["Displacement, origin-corrected (mm)", "Load (kN)"]
        _header(wr, heads, {1: 14, 2: 22, 3: 14})
        step = max(1, int(np.ceil(rec.load_kN.size / MAX_RECORD_ROWS)))
        v = rec.disp_mm[::step] - (result.origin_offset_mm or 0.0)
        P = rec.load_kN[::step]
        cols = ([rec.time_s[::step]] if has_t else []) + [v, P]
        for vals in zip(*cols):
            wr.append([float(x) for x in vals])
        fmts = (["0.000"] if has_t else []) + ["0.00000", "0.0000"]
        for j, fmt in enumerate(fmts, start=1):
            for row in wr.iter_rows(min_row=2, min_col=j, max_col=j):
                row[0].number_format = fmt
        if step > 1:
            wr.cell(row=1, column=len(heads) + 2, value=f"every {step}th sample of {rec.load_kN.size}")
    with atomic_path(path) as tmp:
        wb.save(tmp)
