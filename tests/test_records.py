"""Tests of reduce.records: reading raw load-displacement records as rigs write them.

The records are synthetic, with known answers: sample i has time 0.05*i s,
load 0.25*i kN and crack opening 0.0025*i mm (each the double nearest a short
decimal, so ``repr`` writes it and the parser reads it back bit for bit), and a
crosshead channel that is deliberately different, so picking the wrong
channel shows.
"""

from __future__ import annotations

import hashlib
import os

import numpy as np
import openpyxl
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reduce import units
from reduce.errors import CracktipError, RecordError
from reduce.records import Record, read_record, sha256_file

N = 40


def decimals(step, digits, offset=0.0):
    """offset + i*step as the doubles nearest the short decimals a rig would write."""
    return np.array([float(f"{offset + i * step:.{digits}f}") for i in range(N)])


T = decimals(0.05, 2)  # s
P = decimals(0.25, 2)  # kN
V = decimals(0.0025, 4)  # mm, crack opening
X = decimals(0.01, 2, offset=0.1)  # mm, crosshead (not crack opening)

#: 1 lbf = 0.45359237 kg (international avoirdupois pound, 1959 agreement)
#: x 9.80665 m/s^2 (standard gravity, 3rd CGPM 1901): exact by definition.
LBF_N_BY_DEFINITION = 0.45359237 * 9.80665
#: 1 in = 25.4 mm exactly (same 1959 agreement)
INCH_MM_BY_DEFINITION = 25.4


def num(x, decimal="."):
    text = repr(float(x))
    return text.replace(".", ",") if decimal == "," else text


def table(columns, sep=",", decimal=".", n=N):
    """Data lines of the given columns (arrays), joined by sep."""
    return "".join(sep.join(num(c[i], decimal) for c in columns) + "\n" for i in range(n))


def write(tmp_path, name, text, encoding="utf-8"):
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return str(path)


def write_xlsx(tmp_path, name, rows):
    book = openpyxl.Workbook()
    sheet = book.active
    sheet.title = "Test 1"
    for row in rows:
        sheet.append(row)
    path = tmp_path / name
    book.save(path)
    return str(path)


def assert_channels(rec, load=P, disp=V, time=T):
    assert rec.load_kN.dtype == np.float64 and rec.disp_mm.dtype == np.float64
    np.testing.assert_array_equal(rec.load_kN, load)
    np.testing.assert_array_equal(rec.disp_mm, disp)
    if time is None:
        assert rec.time_s is None
    else:
        np.testing.assert_array_equal(rec.time_s, time)


# ---------------------------------------------------------------- formats


def test_csv_below_preamble(tmp_path):
    path = write(tmp_path, "r.csv", "Test machine: servo-hydraulic 100 kN\nDate: 2024-03-05\n"
                 "Time (s),Load (kN),COD (mm)\n" + table([T, P, V]))
    rec = read_record(path)
    assert isinstance(rec, Record) and rec.path == path
    assert rec.columns == ["Time (s)", "Load (kN)", "COD (mm)"]
    assert rec.load_header == "Load (kN)"
    assert rec.disp_header == "COD (mm)" and rec.time_header == "Time (s)"
    assert_channels(rec)


def test_tsv(tmp_path):
    path = write(tmp_path, "r.tsv", "Time (s)\tLoad (kN)\tCOD (mm)\n" + table([T, P, V], "\t"))
    assert_channels(read_record(path))


def test_semicolon_decimal_comma_with_preamble_and_unit_line(tmp_path):
    text = ("Test machine;R-7\nOperator;J. Doe\nSpecimen;CT-12\n\n"
            "Time;Load;COD\ns;kN;mm\n" + table([T, P, V], ";", ","))
    assert "0,0025" in text  # the file really has decimal commas
    rec = read_record(write(tmp_path, "r.csv", text))
    assert rec.columns == ["Time", "Load", "COD"]
    assert_channels(rec)


def test_unit_line_converts(tmp_path):
    text = "Time;Force;CMOD\nms;N;µm\n" + table([T * 1e3, P * 1e3, V * 1e3], ";", ",")
    rec = read_record(write(tmp_path, "r.csv", text))
    np.testing.assert_allclose(rec.load_kN, P, rtol=1e-12, atol=0)
    np.testing.assert_allclose(rec.disp_mm, V, rtol=1e-12, atol=0)
    np.testing.assert_allclose(rec.time_s, T, rtol=1e-12, atol=0)


def test_whitespace_separated_with_multiword_headers(tmp_path):
    lines = ["Rig 4 export", "Time (s) Load (kN) Crack opening (mm)"]
    lines += ["   ".join(num(c[i]) for c in (T, P, V)) for i in range(N)]
    rec = read_record(write(tmp_path, "r.txt", "\n".join(lines) + "\n"))
    assert rec.columns == ["Time (s)", "Load (kN)", "Crack opening (mm)"]
    assert_channels(rec)


def test_whitespace_with_bracketed_unit_line(tmp_path):
    text = "t Load COD\n[s] [kN] [mm]\n" + table([T, P, V], "  ")
    assert_channels(read_record(write(tmp_path, "r.dat", text)))


def test_xlsx_header_below_preamble_rows(tmp_path):
    rows = [["Test machine:", "R-7"], ["Date", "2024-03-05"], [],
            ["Time", "Force", "CMOD"], ["s", "lbf", "in"]]
    rows += [[T[i], P[i], V[i]] for i in range(N)]
    rec = read_record(write_xlsx(tmp_path, "r.xlsx", rows))
    assert rec.columns == ["Time", "Force", "CMOD"]
    np.testing.assert_allclose(rec.load_kN, P * LBF_N_BY_DEFINITION / 1000.0, rtol=1e-15)
    np.testing.assert_allclose(rec.disp_mm, V * INCH_MM_BY_DEFINITION, rtol=1e-15)
    np.testing.assert_array_equal(rec.time_s, T)


def test_xlsx_formula_is_not_evaluated(tmp_path):
    # openpyxl writes a formula without a cached value: a reader that
    # evaluated it would find 1001 kN, a reader of cached values finds nothing
    rows = [["Load (kN)", "COD (mm)"]] + [[P[i], V[i]] for i in range(N)]
    rows[5][0] = "=1000+1"
    rec = read_record(write_xlsx(tmp_path, "r.xlsx", rows))
    np.testing.assert_array_equal(rec.load_kN, np.delete(P, 4))
    assert "1 row with empty or NaN cells skipped (row 6)" in rec.notes


def test_xlsx_by_content_not_by_name(tmp_path):
    rows = [["Load (kN)", "COD (mm)"]] + [[P[i], V[i]] for i in range(N)]
    path = write_xlsx(tmp_path, "r.xlsx", rows)
    renamed = tmp_path / "record.dat"
    os.replace(path, renamed)
    assert_channels(read_record(str(renamed)), time=None)


def test_latin1_micro_sign_header(tmp_path):
    text = "Prüfmaschine: R-7\nLoad (kN);Displacement [µm]\n" + table([P, V * 1e3], ";", ",")
    path = write(tmp_path, "r.csv", text, encoding="latin-1")
    with open(path, "rb") as f:
        assert b"\xb5m" in f.read()  # the Latin-1 micro sign, not UTF-8
    rec = read_record(path)
    assert rec.disp_header == "Displacement [µm]"
    np.testing.assert_allclose(rec.disp_mm, V, rtol=1e-12, atol=0)
    assert any("Latin-1" in note for note in rec.notes)


@pytest.mark.parametrize("encoding", ["utf-8-sig", "utf-16"])
def test_byte_order_marks(tmp_path, encoding):
    text = "Time (s),Load (kN),COD (µm)\n" + table([T, P, V * 1e3])
    rec = read_record(write(tmp_path, "r.csv", text, encoding=encoding))
    assert rec.columns[0] == "Time (s)"  # no BOM left in the first header
    np.testing.assert_allclose(rec.disp_mm, V, rtol=1e-12, atol=0)


def test_quoted_csv(tmp_path):
    header = '"Time (s)","Load, axial (kN)","COD (mm)"\n'
    body = "".join(f'"{num(T[i])}","{num(P[i])}","{num(V[i])}"\n' for i in range(N))
    rec = read_record(write(tmp_path, "r.csv", header + body))
    assert rec.load_header == "Load, axial (kN)"
    assert_channels(rec)


def test_same_record_in_every_format_reads_the_same(tmp_path):
    header = ["Time (s)", "Load (kN)", "COD (mm)"]
    paths = [
        write(tmp_path, "a.csv", ",".join(header) + "\n" + table([T, P, V])),
        write(tmp_path, "b.tsv", "\t".join(header) + "\n" + table([T, P, V], "\t")),
        write(tmp_path, "c.csv", ";".join(header) + "\n" + table([T, P, V], ";", ",")),
        write(tmp_path, "d.txt", "  ".join(header) + "\n" + table([T, P, V], " ")),
        write_xlsx(tmp_path, "e.xlsx", [header] + [[T[i], P[i], V[i]] for i in range(N)]),
    ]
    first = read_record(paths[0])
    for path in paths[1:]:
        rec = read_record(path)
        np.testing.assert_array_equal(rec.load_kN, first.load_kN)
        np.testing.assert_array_equal(rec.disp_mm, first.disp_mm)
        np.testing.assert_array_equal(rec.time_s, first.time_s)


# ------------------------------------------------------- channels and units


@pytest.mark.parametrize("header, to_kN", [
    ("Load (kN)", 1.0), ("Force [N]", 1e-3), ("load_kN", 1.0), ("Load/kN", 1.0),
    ("F in kN", 1.0), ("Force [lbf]", LBF_N_BY_DEFINITION / 1000.0),
    ("Load (kip)", LBF_N_BY_DEFINITION), ("P (kN)", 1.0), ("Kraft in N", 1e-3),
])
def test_load_header_styles(tmp_path, header, to_kN):
    path = write(tmp_path, "r.csv", f"{header},COD (mm)\n" + table([P / to_kN, V]))
    rec = read_record(path)
    assert rec.load_header == header
    np.testing.assert_allclose(rec.load_kN, P, rtol=1e-14, atol=0)


@pytest.mark.parametrize("header, to_mm", [
    ("COD (mm)", 1.0), ("CMOD [in]", INCH_MM_BY_DEFINITION), ("Crack opening (mm)", 1.0),
    ("LLD (mm)", 1.0), ("Displacement [µm]", 1e-3), ("Displacement [μm]", 1e-3),
    ("Extension (mm)", 1.0), ("Clip gauge (mm)", 1.0), ("cod_um", 1e-3),
    ("Load line displacement (mm)", 1.0),
])
def test_displacement_header_styles(tmp_path, header, to_mm):
    path = write(tmp_path, "r.csv", f"Load (kN),{header}\n" + table([P, V / to_mm]))
    rec = read_record(path)
    assert rec.disp_header == header and rec.load_header == "Load (kN)"
    np.testing.assert_allclose(rec.disp_mm, V, rtol=1e-14, atol=0)


@pytest.mark.parametrize("header, to_s", [
    ("Time (s)", 1.0), ("t [s]", 1.0), ("Time (ms)", 1e-3), ("Time [min]", 60.0),
])
def test_time_header_styles(tmp_path, header, to_s):
    path = write(tmp_path, "r.csv", f"{header},Load (kN),COD (mm)\n" + table([T / to_s, P, V]))
    rec = read_record(path)
    assert rec.time_header == header
    np.testing.assert_allclose(rec.time_s, T, rtol=1e-14, atol=0)


def test_lbf_factor_is_the_exact_definition():
    assert units.LBF_N == pytest.approx(LBF_N_BY_DEFINITION, rel=1e-15, abs=0)
    assert units.LOAD_TO_KN["kip"] == pytest.approx(LBF_N_BY_DEFINITION, rel=1e-15, abs=0)
    assert units.LENGTH_TO_MM["in"] == INCH_MM_BY_DEFINITION


def test_unit_invariance(tmp_path):
    si = write(tmp_path, "a.csv", "Time (s),Load (kN),COD (mm)\n" + table([T, P, V]))
    small = write(tmp_path, "b.csv", "Time (ms),Load (N),COD (µm)\n"
                  + table([T * 1e3, P * 1e3, V * 1e3]))
    a, b = read_record(si), read_record(small)
    for x, y in ((a.load_kN, b.load_kN), (a.disp_mm, b.disp_mm), (a.time_s, b.time_s)):
        np.testing.assert_allclose(y, x, rtol=1e-12, atol=0)


@pytest.mark.parametrize("order", [(0, 1, 2), (0, 2, 1)])
def test_cod_preferred_over_crosshead(tmp_path, order):
    headers = ["Load (kN)", "Crosshead (mm)", "COD (mm)"]
    data = [P, X, V]
    text = ",".join(headers[i] for i in order) + "\n" + table([data[i] for i in order])
    rec = read_record(write(tmp_path, "r.csv", text))
    assert rec.disp_header == "COD (mm)"
    np.testing.assert_array_equal(rec.disp_mm, V)
    assert any("'Crosshead (mm)' not used" in note for note in rec.notes)


def test_crosshead_alone_is_used_and_flagged(tmp_path):
    rec = read_record(write(tmp_path, "r.csv", "Load (kN),Stroke (mm)\n" + table([P, X])))
    assert rec.disp_header == "Stroke (mm)"
    np.testing.assert_array_equal(rec.disp_mm, X)
    assert any("not crack opening" in note for note in rec.notes)


def test_rate_and_setpoint_channels_are_not_taken(tmp_path):
    text = ("Load rate (kN/s),Load setpoint (kN),Load (kN),COD (mm)\n"
            + table([P * 0 + 0.5, P * 2, P, V]))
    rec = read_record(write(tmp_path, "r.csv", text))
    assert rec.load_header == "Load (kN)"
    np.testing.assert_array_equal(rec.load_kN, P)


def test_arrays_are_read_only(tmp_path):
    rec = read_record(write(tmp_path, "r.csv", "Time (s),Load (kN),COD (mm)\n" + table([T, P, V])))
    for array in (rec.load_kN, rec.disp_mm, rec.time_s):
        with pytest.raises(ValueError):
            array[0] = 1.0


def test_no_time_channel(tmp_path):
    rec = read_record(write(tmp_path, "r.csv", "Load (kN),COD (mm)\n" + table([P, V])))
    assert rec.time_s is None and rec.time_header is None


def test_time_without_unit_is_not_guessed(tmp_path):
    rec = read_record(write(tmp_path, "r.csv", "Time,Load (kN),COD (mm)\n" + table([T, P, V])))
    assert rec.time_s is None
    assert any("'Time'" in note and "time not used" in note for note in rec.notes)


# ---------------------------------------------------------------- overrides


@pytest.fixture
def two_gauges(tmp_path):
    return write(tmp_path, "r.csv", "Load (kN),COD front (mm),COD back (mm)\n"
                 + table([P, V, X]))


def test_ambiguous_displacement_names_columns_and_setting(two_gauges):
    with pytest.raises(RecordError) as err:
        read_record(two_gauges)
    message = str(err.value)
    assert message.startswith(two_gauges)
    for header in ("Load (kN)", "COD front (mm)", "COD back (mm)"):
        assert header in message
    assert "displacement_column" in message


@pytest.mark.parametrize("wanted", ["COD back (mm)", 3, "3", 3.0])
def test_displacement_column_override(two_gauges, wanted):
    rec = read_record(two_gauges, displacement_column=wanted)
    assert rec.disp_header == "COD back (mm)"
    np.testing.assert_array_equal(rec.disp_mm, X)


def test_override_not_a_column(two_gauges):
    with pytest.raises(RecordError) as err:
        read_record(two_gauges, displacement_column="COD (mm)")
    assert "COD front (mm)" in str(err.value) and "displacement_column" in str(err.value)
    with pytest.raises(RecordError):
        read_record(two_gauges, displacement_column=4)
    with pytest.raises(RecordError):
        read_record(two_gauges, load_column=2, displacement_column=2)


def test_ambiguous_load(tmp_path):
    path = write(tmp_path, "r.csv", "Load (kN),Force (kN),COD (mm)\n" + table([P, P, V]))
    with pytest.raises(RecordError, match="load_column"):
        read_record(path)
    assert read_record(path, load_column="Force (kN)").load_header == "Force (kN)"


def test_missing_unit_names_setting_and_columns(tmp_path):
    path = write(tmp_path, "r.csv", "Load,COD\n" + table([P * 1e3, V]))
    with pytest.raises(RecordError) as err:
        read_record(path, displacement_unit="mm")
    message = str(err.value)
    assert "load_unit" in message and "'Load'" in message and "'COD'" in message
    rec = read_record(path, load_unit="N", displacement_unit="mm")
    np.testing.assert_allclose(rec.load_kN, P, rtol=1e-14, atol=0)


def test_unit_override_beats_header(tmp_path):
    # the header says kN, the sheet knows the rig wrote N
    path = write(tmp_path, "r.csv", "Load (kN),COD (mm)\n" + table([P * 1e3, V]))
    rec = read_record(path, load_unit="N")
    np.testing.assert_allclose(rec.load_kN, P, rtol=1e-14, atol=0)


def test_unknown_units_are_refused(tmp_path):
    path = write(tmp_path, "r.csv", "Load (V),COD (mm)\n" + table([P, V]))
    with pytest.raises(RecordError, match="load_unit"):
        read_record(path)
    with pytest.raises(RecordError, match="load_unit"):
        read_record(path, load_unit="kg")
    path = write(tmp_path, "m.csv", "Load (mN),COD (mm)\n" + table([P, V]))
    with pytest.raises(RecordError, match="mN"):
        read_record(path)


def test_no_load_channel_names_setting(tmp_path):
    path = write(tmp_path, "r.csv", "Channel A,COD (mm)\n" + table([P, V]))
    with pytest.raises(RecordError) as err:
        read_record(path)
    assert "load_column" in str(err.value) and "Channel A" in str(err.value)
    rec = read_record(path, load_column=1, load_unit="kN")
    np.testing.assert_array_equal(rec.load_kN, P)


def test_empty_sheet_cells_mean_no_override(tmp_path):
    path = write(tmp_path, "r.csv", "Load (kN),COD (mm)\n" + table([P, V]))
    rec = read_record(path, load_column="", displacement_column=float("nan"), load_unit=None)
    assert_channels(rec, time=None)


# ---------------------------------------------------------------- bad cells


def test_text_cells_are_skipped_and_listed(tmp_path):
    lines = ["Time (s),Load (kN),COD (mm)"] + table([T, P, V]).splitlines()
    lines[10] = f"{num(T[9])},OVERLOAD,{num(V[9])}"  # file line 11, sample 9
    lines[20] = f"{num(T[19])},{num(P[19])},---"  # file line 21, sample 19
    lines[30] = f"{num(T[29])},NaN,{num(V[29])}"  # file line 31, sample 29
    lines[35] = f"{num(T[34])},,{num(V[34])}"  # file line 36, sample 34
    rec = read_record(write(tmp_path, "r.csv", "\n".join(lines) + "\n"))
    keep = np.ones(N, dtype=bool)
    keep[[9, 19, 29, 34]] = False
    assert_channels(rec, P[keep], V[keep], T[keep])
    assert "2 rows with text in numeric columns skipped (lines 11, 21)" in rec.notes
    assert "2 rows with empty or NaN cells skipped (lines 31, 36)" in rec.notes


def test_text_cell_with_decimal_comma(tmp_path):
    lines = ["Load (kN);COD (mm)"] + table([P, V], ";", ",").splitlines()
    lines[5] = "Fehler;" + num(V[4], ",")
    rec = read_record(write(tmp_path, "r.csv", "\n".join(lines) + "\n"))
    keep = np.arange(N) != 4
    assert_channels(rec, P[keep], V[keep], None)
    assert "1 row with text in numeric columns skipped (line 6)" in rec.notes


def test_line_with_extra_fields_near_the_top(tmp_path):
    lines = ["Load (kN),COD (mm)"] + table([P, V]).splitlines()
    lines[25] += ",999,comment"
    rec = read_record(write(tmp_path, "r.csv", "\n".join(lines) + "\n"))
    assert_channels(rec, time=None)
    assert "line 26: more fields than the 2 of the first data row; the extra fields are ignored" \
        in rec.notes


def test_line_with_extra_fields_far_down(tmp_path):
    # beyond the lines sniffed, found by the parser, which is then run again
    n = 300
    i = np.arange(n)
    lines = ["Load (kN),COD (mm)"] + table([i * 0.25, i * 0.0025], n=n).splitlines()
    lines[250] += ",999"
    rec = read_record(write(tmp_path, "r.csv", "\n".join(lines) + "\n"))
    np.testing.assert_array_equal(rec.load_kN, i * 0.25)
    assert any(note.startswith("line 251 ") and "extra fields are ignored" in note
               for note in rec.notes)


def test_trailing_blank_lines_are_not_data(tmp_path):
    text = "Load (kN),COD (mm)\n" + table([P, V]) + "\n\n\n"
    rec = read_record(write(tmp_path, "r.csv", text))
    assert_channels(rec, time=None)
    assert not any("skipped" in note for note in rec.notes)


def test_more_than_half_bad_is_refused(tmp_path):
    lines = ["Load (kN),COD (mm)"] + table([P, V], n=N).splitlines()
    for i in range(8, N):
        lines[i + 1] = f"{num(P[i])},ERR"
    path = write(tmp_path, "r.csv", "\n".join(lines) + "\n")
    with pytest.raises(RecordError) as err:
        read_record(path)
    assert "32 of 40" in str(err.value) and "'ERR'" in str(err.value)


def test_time_out_of_order_is_noted_not_fatal(tmp_path):
    t = T.copy()
    t[10] = t[9]  # a repeated stamp
    t[20] = t[18]  # a step back
    rec = read_record(write(tmp_path, "r.csv", "Time (s),Load (kN),COD (mm)\n" + table([t, P, V])))
    np.testing.assert_array_equal(rec.time_s, t)  # sample order kept
    assert any("repeated" in note for note in rec.notes)
    assert any("backwards" in note for note in rec.notes)


# ---------------------------------------------------------------- bad files


BAD_FILES = {
    "empty": b"",
    "blank": b" \n\n \n",
    "header only": b"Time (s),Load (kN),COD (mm)\n",
    "header and unit line only": b"Time;Load;COD\ns;kN;mm\n",
    "NUL bytes": b"Load (kN),COD (mm)\n\x00\x00\x01\x02" * 20,
    "random bytes": np.random.default_rng(1).integers(0, 256, 4000, dtype=np.uint8).tobytes(),
    "ZIP that is not a workbook": b"PK\x03\x04" + b"\x00garbage" * 50,
    "legacy xls": b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 500,
    "too few rows": ("Load (kN),COD (mm)\n" + table([P, V], n=12)).encode(),
    "prose": b"This is a letter.\nIt has no numbers in it.\n",
}


@pytest.mark.parametrize("kind", list(BAD_FILES))
def test_bad_files_give_record_error(tmp_path, kind):
    path = tmp_path / "bad.csv"
    path.write_bytes(BAD_FILES[kind])
    with pytest.raises(RecordError) as err:
        read_record(str(path))
    assert str(err.value).startswith(str(path))
    assert isinstance(err.value, CracktipError) and isinstance(err.value, ValueError)


def test_damaged_workbook(tmp_path):
    rows = [["Load (kN)", "COD (mm)"]] + [[P[i], V[i]] for i in range(N)]
    data = bytearray(open(write_xlsx(tmp_path, "r.xlsx", rows), "rb").read())
    data[len(data) // 2:len(data) // 2 + 200] = b"\xff" * 200
    path = tmp_path / "damaged.xlsx"
    path.write_bytes(bytes(data))
    with pytest.raises(RecordError):
        read_record(str(path))


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(RecordError, match="not found"):
        read_record(str(tmp_path / "nope.csv"))
    with pytest.raises(RecordError, match="directory"):
        read_record(str(tmp_path))
    with pytest.raises(RecordError):
        sha256_file(str(tmp_path / "nope.csv"))


# ---------------------------------------------------------------- hashing


def test_sha256_is_of_the_raw_bytes(tmp_path):
    path = write(tmp_path, "r.csv", "Load (kN);COD (µm)\n" + table([P, V * 1e3], ";", ","),
                 encoding="latin-1")
    raw = open(path, "rb").read()
    assert sha256_file(path) == hashlib.sha256(raw).hexdigest()
    assert read_record(path).sha256 == hashlib.sha256(raw).hexdigest()


def test_sha256_of_a_large_file(tmp_path):
    # above 1 MiB the hash runs beside the parse; the result must not change
    n = 40_000
    i = np.arange(n)
    path = write(tmp_path, "big.csv", "Time (s),Load (kN),COD (mm),Crosshead (mm)\n"
                 + table([i * 0.05, i * 0.25, i * 0.0025, i * 0.01], n=n))
    assert os.path.getsize(path) > 1 << 20
    rec = read_record(path)
    assert rec.sha256 == hashlib.sha256(open(path, "rb").read()).hexdigest()
    assert rec.load_kN.size == n and rec.load_kN[-1] == (n - 1) * 0.25
    assert rec.columns == ["Time (s)", "Load (kN)", "COD (mm)", "Crosshead (mm)"]


# ---------------------------------------------------------------- properties

finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)


@settings(max_examples=25, deadline=None, database=None)
@given(st.lists(st.tuples(finite, finite), min_size=20, max_size=60),
       st.sampled_from([(",", "."), ("\t", "."), (";", ","), (" ", ".")]))
def test_round_trip_of_any_numbers(tmp_path_factory, pairs, layout):
    sep, decimal = layout
    load, disp = (np.array(c) for c in zip(*pairs))
    path = tmp_path_factory.mktemp("rt") / "r.txt"
    header = "Load (kN)" + ("  " if sep == " " else sep) + "COD (mm)\n"
    path.write_text(header + table([load, disp], sep, decimal, n=len(pairs)))
    rec = read_record(str(path))
    # the values come back as written, or with the sign reversed and a note saying so
    for got, wrote, word in ((rec.load_kN, load, "load channel"), (rec.disp_mm, disp, "displacement channel")):
        reversed_ = any(n.startswith(word) and "sign was reversed" in n for n in rec.notes)
        np.testing.assert_array_equal(got, -wrote if reversed_ else wrote)


@settings(max_examples=40, deadline=None, database=None)
@given(st.binary(min_size=1, max_size=2000))
def test_any_bytes_give_a_record_or_a_record_error(tmp_path_factory, data):
    path = tmp_path_factory.mktemp("junk") / "r.csv"
    path.write_bytes(b"Load (kN),COD (mm)\n" + data)
    try:
        rec = read_record(str(path))
    except RecordError:
        return
    assert rec.load_kN.size == rec.disp_mm.size >= 20


def test_negative_load_and_closing_gauge_are_reversed(tmp_path):
    # a bend frame that writes compression and a gauge that closes as negative numbers
    # (regression: such a record had "no linear rising part")
    import numpy as np
    from reduce.pipeline import reduce_arrays
    from reduce.models import Specimen
    from reduce.synthetic import make_record

    rec = make_record("I", noise_kN=0.01, seed=2)
    lines = ["Force (kN),CMOD (mm)"] + [f"{-P:.6f},{-v:.6f}" for P, v in zip(rec.load_kN, rec.disp_mm)]
    (tmp_path / "neg.csv").write_text("\n".join(lines) + "\n")
    r = read_record(tmp_path / "neg.csv")
    assert r.load_kN.max() > 0 and r.disp_mm[np.argmax(r.load_kN)] > r.disp_mm[0]
    assert any("sign was reversed" in n for n in r.notes) and len(r.notes) >= 2
    spec = Specimen("N1", "C(T)", B=25, W=50, a_readings=(25, 25, 25), yield_MPa=500, E_MPa=205000)
    plain = reduce_arrays(rec.load_kN, rec.disp_mm, spec)
    flipped = reduce_arrays(r.load_kN, r.disp_mm, spec)
    assert flipped.P_Q_kN == pytest.approx(plain.P_Q_kN, rel=1e-5)
