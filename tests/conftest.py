"""Shared helpers for the tests: synthetic campaigns written to tmp_path."""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest

import specimens
from reduce.synthetic import make_record

SHEET_COLUMNS = ["specimen", "heat", "geometry", "record", "B_mm", "W_mm", "S_mm", "a1_mm", "a2_mm",
                 "a3_mm", "yield_MPa", "E_GPa", "temperature_C", "orientation"]


def write_csv_record(path: Path, load_kN, disp_mm, time_s=None, *, sep=",", decimal=".",
                     preamble=(), load_header="Load (kN)", disp_header="COD (mm)",
                     load_factor=1.0, disp_factor=1.0):
    """Write a record in one of the styles rigs use (factors convert from kN/mm)."""
    lines = list(preamble)
    heads = ([("Time (s)")] if time_s is not None else []) + [load_header, disp_header]
    lines.append(sep.join(heads))
    cols = ([time_s] if time_s is not None else []) + [np.asarray(load_kN) * load_factor,
                                                      np.asarray(disp_mm) * disp_factor]
    for row in zip(*cols):
        cells = [f"{x:.6f}" for x in row]
        if decimal != ".":
            cells = [c.replace(".", decimal) for c in cells]
        lines.append(sep.join(cells))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def write_sheet(path: Path, rows: list[dict], columns=None):
    columns = columns or list(dict.fromkeys(k for r in rows for k in r))
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=columns)
        w.writeheader()
        for r in rows:
            w.writerow(r)
    return path


def scaled_record(kind, P_Q_target, k=40.0, **kw):
    """A synthetic record scaled so its known P_Q equals P_Q_target (kN)."""
    base = make_record(kind, k=k, **kw)
    c = P_Q_target / base.P_Q
    # scaling the load by c at constant displacement scales P_Q by c
    return base, c


@pytest.fixture
def ct_row():
    return {"specimen": "T1", "heat": "H1", "geometry": "C(T)", "record": "t1.csv", "B_mm": 25,
            "W_mm": 50, "a1_mm": 25.1, "a2_mm": 25.3, "a3_mm": 25.0, "yield_MPa": 500,
            "E_GPa": 72, "temperature_C": 21, "orientation": "L-T"}


@pytest.fixture
def ct_specimen_K():
    """K per kN of the ct_row specimen, MPa·m^½/kN."""
    return specimens.geometry("C(T)").K_per_load(25.0, 50.0, (25.1 + 25.3 + 25.0) / 3)


def write_xlsx_record(path: Path, load_kN, disp_mm, time_s=None, *, preamble=(),
                      load_header="Load (kN)", disp_header="COD (mm)"):
    """Write a record as an Excel workbook with preamble rows above the header."""
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    for line in preamble:
        ws.append([line])
    ws.append((["Time (s)"] if time_s is not None else []) + [load_header, disp_header])
    cols = ([time_s] if time_s is not None else []) + [load_kN, disp_mm]
    for row in zip(*cols):
        ws.append([float(x) for x in row])
    wb.save(path)
    return path
