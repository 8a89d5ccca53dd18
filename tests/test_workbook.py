"""The results workbook reads back, with pandas, to the numbers of the reduction."""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import openpyxl
import pandas as pd
import pytest

from reduce.cli import main
from reduce.models import Specimen
from reduce.pipeline import reduce_arrays, reduce_sheet
from reduce.synthetic import make_record
from reports.workbook import RESULT_COLUMNS, write_workbook

from conftest import write_csv_record, write_sheet

BASE = {"heat": "H1", "geometry": "C(T)", "B_mm": 25, "W_mm": 50, "a1_mm": 25.1, "a2_mm": 25.3,
        "a3_mm": 25.0, "yield_MPa": 500, "E_GPa": 72, "temperature_C": 21, "orientation": "L-T"}


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    d = tmp_path_factory.mktemp("wb")
    rows = []
    # "results" would clash with the Results sheet: Excel compares sheet names without case
    for i, (sid, kind) in enumerate([("T1", "I"), ("T2", "II"), ("results", "III")]):
        rec = make_record(kind, k=40.0, P_y=8.0, noise_kN=0.004, offset_mm=0.03, seed=i)
        write_csv_record(d / f"{sid}.csv", rec.load_kN, rec.disp_mm, rec.time_s)
        rows.append(dict(BASE, specimen=sid, record=f"{sid}.csv"))
    rows.append(dict(BASE, specimen="BAD", record="missing.csv"))
    sheet = write_sheet(d / "sheet.csv", rows)
    path = d / "out.xlsx"
    assert main(["reduce", str(sheet), "--xlsx", str(path)]) == 2  # BAD fails, the rest are written
    return {"path": path, "rows": reduce_sheet(sheet)}


def test_results_sheet_reads_back_to_the_same_numbers(book):
    df = pd.read_excel(book["path"], sheet_name="Results")
    assert list(df["Specimen"]) == ["T1", "T2", "results", "BAD"]
    for (r, _, _), (_, row) in zip(book["rows"], df.iterrows()):
        for header, key in [("P_Q (kN)", "P_Q_kN"), ("P_max (kN)", "P_max_kN"), ("a/W", "a_over_W"),
                            ("K_Q (MPa·m^½)", "K_Q_MPa_sqrt_m"), ("Initial slope (kN/mm)", "initial_slope_kN_per_mm")]:
            want = getattr(r, key)
            if want is None:
                assert math.isnan(row[header]), (r.specimen, header)
            else:
                assert row[header] == pytest.approx(want, rel=1e-12), (r.specimen, header)
        assert row["Valid K_Ic"] == ("yes" if r.valid else "no")
    bad = df[df["Specimen"] == "BAD"].iloc[0]
    assert "missing.csv" in bad["Error"] and math.isnan(bad["K_Q (MPa·m^½)"])


def test_checks_sheet_has_every_check(book):
    df = pd.read_excel(book["path"], sheet_name="Checks")
    for r, _, _ in book["rows"]:
        ep = r.extra.get("elastic_plastic") or {}
        mine = df[df["Specimen"] == r.specimen]
        assert len(mine) == len(r.checks) + len(ep.get("checks") or [])
        for c in r.checks:
            got = mine[mine["Check"] == c.name].iloc[0]
            assert got["Result"] == {True: "pass", False: "fail", None: "not assessed"}[c.passed]
            if c.value is not None:
                assert got["Value"] == pytest.approx(c.value, rel=1e-12)


def test_record_sheets_hold_the_origin_corrected_record(book):
    sheets = pd.read_excel(book["path"], sheet_name=None)
    assert "results_2" in sheets and "BAD" not in sheets
    info = sheets["Records"].set_index("Sheet")
    for (r, rec, _), name in zip(book["rows"][:3], ["T1", "T2", "results_2"]):
        df = sheets[name]
        v = df["Displacement, origin-corrected (mm)"].to_numpy()
        assert v.size == rec.disp_mm.size
        np.testing.assert_allclose(v, rec.disp_mm - r.origin_offset_mm, rtol=0, atol=1e-12)
        np.testing.assert_allclose(df["Load (kN)"].to_numpy(), rec.load_kN, rtol=0, atol=1e-12)
        np.testing.assert_allclose(df["Time (s)"].to_numpy(), rec.time_s, rtol=0, atol=1e-12)
        # the Records sheet says what was subtracted and which file it is
        assert info.loc[name, "Specimen"] == r.specimen
        assert info.loc[name, "Origin offset subtracted, v0 (mm)"] == pytest.approx(r.origin_offset_mm, rel=1e-12)
        assert info.loc[name, "Record SHA-256"] == r.record_sha256
        assert info.loc[name, "Samples written"] == f"all {rec.load_kN.size}"


def test_record_sheets_read_back_as_clean_columns_without_a_side_panel(book):
    # regression: a panel beside the data made read_excel return 'Unnamed: 3' and 'Specimen' columns
    sheets = pd.read_excel(book["path"], sheet_name=None)
    for name in ("T1", "T2", "results_2"):
        assert list(sheets[name].columns) == ["Time (s)", "Displacement, origin-corrected (mm)", "Load (kN)"]
        assert not sheets[name].isna().all().any()


def test_checks_value_format_shows_small_values_and_each_check_has_its_unit(tmp_path):
    # regression: format 0.0000 showed 8.6e-6 as 0.0000, and there was no units column
    from reduce.rules import Check

    rec = make_record("I", k=40.0, P_y=8.0, seed=3)
    spec = Specimen("N1", "C(T)", B=25, W=50, a_readings=(25.1, 25.3, 25.0), yield_MPa=500, E_MPa=72000)
    result = reduce_arrays(rec.load_kN, rec.disp_mm, spec, rec.time_s)
    # a dimensionless check value of the size the reviewer saw shown as 0.0000
    result.checks.append(Check("small_ratio", True, 8.6391e-6, "x <= 0.001", "invented for this test"))
    write_workbook(tmp_path / "n.xlsx", [(result, SimpleNamespace(load_kN=rec.load_kN, disp_mm=rec.disp_mm,
                                                                   time_s=rec.time_s), spec)])
    ws = openpyxl.load_workbook(tmp_path / "n.xlsx")["Checks"]
    heads = [c.value for c in ws[1]]
    col = {h: heads.index(h) + 1 for h in heads}
    seen = set()
    for row in range(2, ws.max_row + 1):
        value = ws.cell(row=row, column=col["Value"])
        name, unit = ws.cell(row=row, column=col["Check"]).value, ws.cell(row=row, column=col["Unit"]).value
        if value.value is None:
            continue
        assert unit in ("mm", "MPa·√m/s", "ratio"), (name, unit)
        if name in ("ligament_size", "thickness_size", "crack_length_size"):
            assert unit == "mm"
        # the number as Excel shows it keeps 4 significant digits whatever the magnitude
        fmt = value.number_format
        shown = (f"{value.value:.3E}" if "E" in fmt else f"{value.value:.{len(fmt.partition('.')[2])}f}")
        assert float(shown) == pytest.approx(value.value, rel=1e-3), (name, value.value, fmt)
        seen.add(fmt)
    assert "0.000E+00" in seen and "0.00" in seen  # formats follow the magnitude: 8.611e-6 and 24.87 both read


def test_formatted_for_people(book):
    wb = openpyxl.load_workbook(book["path"])
    for ws in wb.worksheets:
        assert ws.freeze_panes == "A2", ws.title
        header = []
        for c in ws[1]:  # the header runs to the first empty cell; a record sheet's panel follows it
            if c.value is None:
                break
            header.append(c)
        assert header and all(c.font.bold for c in header), ws.title
    ws = wb["Results"]
    heads = [c.value for c in ws[1]]
    assert heads == [h for h, _, _ in RESULT_COLUMNS]
    assert all("(" in h for h in heads if h.startswith(("B ", "W ", "a (", "P_", "K_")) and "/" not in h)
    k_col = heads.index("K_Q (MPa·m^½)") + 1
    assert ws.cell(row=2, column=k_col).number_format == "0.00"
    assert wb["T1"].cell(row=2, column=2).number_format == "0.00000"


def test_non_finite_samples_become_empty_cells(tmp_path):
    rec = make_record("I", k=40.0, P_y=8.0, seed=3)
    spec = Specimen("N1", "C(T)", B=25, W=50, a_readings=(25.1, 25.3, 25.0), yield_MPa=500, E_MPa=72000)
    result = reduce_arrays(rec.load_kN, rec.disp_mm, spec, rec.time_s)
    t = rec.time_s.copy()
    t[5] = np.nan
    record = SimpleNamespace(load_kN=rec.load_kN, disp_mm=rec.disp_mm, time_s=t)
    write_workbook(tmp_path / "n.xlsx", [(result, record, spec)])
    ws = openpyxl.load_workbook(tmp_path / "n.xlsx")["N1"]
    assert ws.cell(row=7, column=1).value is None  # sample 5 is row 7 (header is row 1)
    assert ws.cell(row=7, column=3).value == pytest.approx(rec.load_kN[5])


def test_failed_save_leaves_no_file(tmp_path, monkeypatch):
    rec = make_record("I", k=40.0, P_y=8.0, seed=3)
    spec = Specimen("N1", "C(T)", B=25, W=50, a_readings=(25.1, 25.3, 25.0), yield_MPa=500, E_MPa=72000)
    result = reduce_arrays(rec.load_kN, rec.disp_mm, spec, rec.time_s)
    record = SimpleNamespace(load_kN=rec.load_kN, disp_mm=rec.disp_mm, time_s=rec.time_s)

    def boom(self, filename):
        with open(filename, "wb") as fh:
            fh.write(b"half a workbook")
        raise OSError("disk full")
    monkeypatch.setattr(openpyxl.Workbook, "save", boom)
    with pytest.raises(OSError):
        write_workbook(tmp_path / "n.xlsx", [(result, record, spec)])
    assert list(tmp_path.iterdir()) == []
