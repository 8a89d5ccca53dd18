"""Reading the test sheet: units, metadata and per-row errors."""

import pytest

from reduce.errors import SheetError
from reduce.sheet import BadRow, read_sheet, safe_name
from reduce.units import INCH_MM, KSI_MPA

from conftest import write_sheet


def test_si_row(tmp_path, ct_row):
    ct_row["lab_ref"] = "LR-77"
    p = write_sheet(tmp_path / "s.csv", [ct_row])
    (s,) = read_sheet(p)
    assert s.B == 25 and s.W == 50 and s.E_MPa == 72000
    assert s.a_readings == (25.1, 25.3, 25.0)
    assert s.metadata == {"lab_ref": "LR-77"}
    assert s.row == 2


def test_us_units_are_converted(tmp_path):
    row = {"specimen": "U1", "geometry": "SE(B)", "record": "r.csv", "B_in": 1.0, "W_in": 2.0,
           "S_in": 8.0, "a1_in": 1.0, "a2_in": 1.0, "a3_in": 1.0, "yield_ksi": 100, "E_ksi": 29000,
           "temperature_F": 212, "precrack_Kmax_ksi_sqrt_in": 20}
    (s,) = read_sheet(write_sheet(tmp_path / "s.csv", [row]))
    assert s.B == pytest.approx(INCH_MM) and s.S == pytest.approx(8 * INCH_MM)
    assert s.yield_MPa == pytest.approx(100 * KSI_MPA)
    assert s.temperature_C == pytest.approx(100.0)
    # 1 ksi·in^½ = 1.0988 MPa·m^½ (definitions of inch and pound-force)
    assert s.precrack_Kmax == pytest.approx(20 * 1.0988, rel=1e-4)


@pytest.mark.parametrize("column,value,words", [
    ("W_mm", "0", "greater than zero"),
    ("W_mm", "-5", "greater than zero"),
    ("a2_mm", "50", "less than W"),
    ("yield_MPa", "-300", "greater than zero"),
    ("yield_MPa", "", "required value is missing"),
    ("B_mm", "abc", "expected a number"),
    ("geometry", "banana", "unknown geometry"),
])
def test_bad_row_names_column_and_keeps_others(tmp_path, ct_row, column, value, words):
    bad = dict(ct_row, specimen="T2", **{column: value})
    p = write_sheet(tmp_path / "s.csv", [ct_row, bad, dict(ct_row, specimen="T3")])
    rows = read_sheet(p)
    assert [type(r).__name__ for r in rows] == ["Specimen", "BadRow", "Specimen"]
    err = rows[1].error
    assert isinstance(err, SheetError)
    assert err.column == column and err.row == 3
    assert words in str(err) and "s.csv" in str(err) and "row 3" in str(err)


def test_net_thickness_above_B(tmp_path, ct_row):
    rows = read_sheet(write_sheet(tmp_path / "s.csv", [dict(ct_row, BN_mm=26)]))
    assert isinstance(rows[0], BadRow) and rows[0].error.column == "BN_mm"


def test_bend_needs_span(tmp_path, ct_row):
    rows = read_sheet(write_sheet(tmp_path / "s.csv", [dict(ct_row, geometry="SE(B)")]))
    assert isinstance(rows[0], BadRow) and "S_mm" in str(rows[0].error)


def test_repeated_specimen_id(tmp_path, ct_row):
    rows = read_sheet(write_sheet(tmp_path / "s.csv", [ct_row, ct_row]))
    assert isinstance(rows[1], BadRow) and "row 2" in str(rows[1].error)


def test_missing_required_column_is_a_sheet_error(tmp_path, ct_row):
    del ct_row["yield_MPa"]
    with pytest.raises(SheetError, match="yield_<unit>"):
        read_sheet(write_sheet(tmp_path / "s.csv", [ct_row]))


def test_quantity_in_two_units_is_refused_in_that_row(tmp_path, ct_row):
    rows = read_sheet(write_sheet(tmp_path / "s.csv", [dict(ct_row, W_in=2), dict(ct_row, specimen="T2", W_in="")]))
    assert isinstance(rows[0], BadRow) and "given twice" in str(rows[0].error)
    assert rows[0].error.column == "W_in" and rows[0].error.row == 2


def test_empty_column_in_other_unit_is_harmless(tmp_path, ct_row):
    # regression: an empty B_in column beside B_mm rejected the whole sheet
    (s,) = read_sheet(write_sheet(tmp_path / "s.csv", [dict(ct_row, B_in="")]))
    assert s.B == 25


def test_xlsx_sheet(tmp_path, ct_row):
    import openpyxl

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(list(ct_row))
    ws.append(list(ct_row.values()))
    wb.save(tmp_path / "s.xlsx")
    (s,) = read_sheet(tmp_path / "s.xlsx")
    assert s.specimen == "T1" and s.W == 50


def test_semicolon_sheet(tmp_path, ct_row):
    text = ";".join(ct_row) + "\n" + ";".join(str(v).replace(".", ",") for v in ct_row.values()) + "\n"
    (tmp_path / "s.csv").write_text(text)
    (s,) = read_sheet(tmp_path / "s.csv")
    assert s.a_readings == (25.1, 25.3, 25.0)


@pytest.mark.parametrize("bad", ["../x", "a/b", "..", "/etc/passwd", "c:\\\\evil"])
def test_safe_name_never_a_path(bad):
    name = safe_name(bad)
    assert "/" not in name and "\\" not in name and name not in ("", ".", "..")


def test_knife_edge_height_reaches_the_dimensions(tmp_path, ct_row):
    # regression: the sheet had no column for z, so CTOD always assumed z = 0
    (s,) = read_sheet(write_sheet(tmp_path / "s.csv", [dict(ct_row, z_mm=1.5)]))
    assert s.dims["z"] == 1.5
    rows = read_sheet(write_sheet(tmp_path / "t.csv", [dict(ct_row, z_in=-0.1)]))
    assert isinstance(rows[0], BadRow) and rows[0].error.column == "z_in"


def test_xlsx_sheet_zip_bomb_is_refused(tmp_path):
    # regression: test sheets were opened without the container checks records get
    import zipfile

    bomb = tmp_path / "bomb.xlsx"
    with zipfile.ZipFile(bomb, "w", compression=zipfile.ZIP_DEFLATED) as z:
        z.writestr("[Content_Types].xml", "<Types/>")
        z.writestr("xl/worksheets/sheet1.xml", b"\0" * (40 * 1024 * 1024))
    with pytest.raises(SheetError, match="bomb.xlsx"):
        read_sheet(bomb)
