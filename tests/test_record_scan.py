"""The compiled fast path of the text-record reader (reduce/_scan.c).

It must give exactly what the pandas path gives wherever it takes a file, and
hand every doubtful file back to the pandas path.  The reference for each
number is Python's float() of its text, which rounds correctly (Python
Language Reference, "Floating point literals"; David Gay's correctly rounded
conversion, from memory): the fast path converts only where one IEEE 754
operation is exact (Clinger 1990, "How to read floating point numbers
accurately", the fast path: at most 2**53 and |exponent| <= 22).
"""

from __future__ import annotations

import glob
import os
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reduce import records
from reduce.errors import RecordError
from reduce.records import read_record

ROOT = Path(__file__).resolve().parents[1]

#: CI sets this: there the extension must have been built, or these tests would all skip
REQUIRED = os.environ.get("CRACKTIP_REQUIRE_SCAN") == "1"


def test_the_fast_path_is_built_where_required():
    if records._scan is None and REQUIRED:
        pytest.fail("reduce._scan was not built (a C compiler and the Python headers are needed); "
                    "CRACKTIP_REQUIRE_SCAN=1 asks for it")
    if records._scan is None:
        pytest.skip("reduce._scan is not built here: text records are read by pandas only")


needs_scan = pytest.mark.skipif(records._scan is None, reason="reduce._scan is not built here")


def _scan_one(token, decimal_mark="."):
    """(accepted, value) of one token as a one-field, one-row record."""
    data = token.encode("ascii")
    out = np.empty((1, 1))
    sep = "," if decimal_mark == "." else ";"  # a delimiter other than the decimal mark
    rows, stop = records._scan.scan(data, 0, len(data), sep, decimal_mark, (0,), out, 1, 0)
    return (stop == -1 and rows == 1), float(out[0, 0])


def _fast_path_takes(text, decimal_mark="."):
    """Whether a number text is inside the fast path's exact range (module docstring)."""
    t = text.replace(decimal_mark, ".")
    mantissa, _, exponent = t.lower().partition("e")
    digits = mantissa.lstrip("+-").replace(".", "")
    significant = digits.lstrip("0")
    n_frac = len(mantissa.partition(".")[2])
    if len(significant) > 19:
        return False
    m = int(significant or "0")
    e10 = (int(exponent) if exponent else 0) - n_frac
    return m == 0 or (m <= 2**53 and -22 <= e10 <= 22)


number_texts = st.builds(
    lambda sign, ip, fp, has_point, exp: (
        sign + ip + ("." + fp if has_point else "") + (exp if exp is not None else "")),
    st.sampled_from(["", "-", "+"]),
    st.text("0123456789", min_size=0, max_size=12),
    st.text("0123456789", min_size=0, max_size=12),
    st.booleans(),
    st.none() | st.builds(lambda c, s, d: c + s + d, st.sampled_from("eE"),
                          st.sampled_from(["", "+", "-"]), st.text("0123456789", min_size=1,
                                                                     max_size=3)),
).filter(lambda t: any(c.isdigit() for c in t.partition("e")[0].partition("E")[0]))


@needs_scan
@settings(max_examples=3000, deadline=None)
@given(number_texts)
def test_each_number_is_the_correctly_rounded_value_or_refused(text):
    accepted, value = _scan_one(text)
    assert accepted == _fast_path_takes(text), text
    if accepted:
        assert value == float(text), text
        assert np.signbit(value) == np.signbit(float(text)), text


@needs_scan
@settings(max_examples=500, deadline=None)
@given(number_texts.filter(lambda t: "." in t))
def test_decimal_comma_reads_the_same_number(text):
    comma = text.replace(".", ",")
    accepted, value = _scan_one(comma, ",")
    assert accepted == _fast_path_takes(text), comma
    if accepted:
        assert value == float(text)


@pytest.mark.parametrize("text, expected", [
    ("12.345678", 12.345678), ("-0.0012", -0.0012), (".5", 0.5), ("5.", 5.0), ("1e3", 1000.0),
    ("2.5E-3", 0.0025), ("+7", 7.0), ("0000000000000000000000123", 123.0), ("-0", -0.0),
    ("9007199254740992", 2.0**53),
])
@needs_scan
def test_hand_picked_numbers(text, expected):
    accepted, value = _scan_one(text)
    assert accepted and value == expected and np.signbit(value) == np.signbit(expected)


@pytest.mark.parametrize("text", [
    "", "-", ".", "e5", "1e", "1.2.3", "nan", "NaN", "inf", "1,5", '"1.5"', "0x10", "1_000",
    "9007199254740993",  # above 2**53: left to pandas
    "1e23", "1e-23", "12345678901234567890",  # 20 significant digits
])
@needs_scan
def test_texts_left_to_pandas(text):
    accepted, _ = _scan_one(text)
    assert not accepted, text


def _both_ways(path, monkeypatch):
    fast = read_record(path)
    with monkeypatch.context() as m:
        m.setattr(records, "_scan", None)
        slow = read_record(path)
    return fast, slow


def _same_record(fast, slow):
    for name in ("load_kN", "disp_mm", "time_s"):
        a, b = getattr(fast, name), getattr(slow, name)
        if a is None or b is None:
            assert a is None and b is None, name
            continue
        assert a.shape == b.shape, name
        # pandas's own conversion may differ from the correctly rounded value
        # by one unit in the last place (no source: seen on this project's data)
        np.testing.assert_array_max_ulp(a, b, maxulp=1)
    for name in ("load_header", "disp_header", "time_header", "columns", "notes", "sha256"):
        assert getattr(fast, name) == getattr(slow, name), name


@pytest.mark.parametrize("path", sorted(glob.glob(str(ROOT / "sample_data" / "records" / "*"))),
                         ids=os.path.basename)
@needs_scan
def test_sample_records_read_the_same_both_ways(path, monkeypatch):
    fast, slow = _both_ways(path, monkeypatch)
    _same_record(fast, slow)


def _spy(monkeypatch):
    taken = []
    original = records._scan_text

    def spy(*args):
        result = original(*args)
        taken.append(result is not None)
        return result

    monkeypatch.setattr(records, "_scan_text", spy)
    return taken


@needs_scan
def test_the_sample_text_records_take_the_fast_path(monkeypatch):
    taken = _spy(monkeypatch)
    for path in sorted(glob.glob(str(ROOT / "sample_data" / "records" / "*"))):
        if not path.endswith(".xlsx"):
            read_record(path)
    assert taken and all(taken)


LINE_KINDS = ["plain", "blank", "nan", "text", "quoted", "long", "short", "cr", "spaces", "huge",
              "glued"]


def _line(kind, i, sep, dec, rng):
    vals = [f"{0.01 * i:.3f}", f"{rng.uniform(-1, 30):.4f}", f"{1e-3 * i + rng.uniform(0, 1e-4):.6f}"]
    if kind == "blank":
        return ""
    if kind == "nan":
        vals[1] = "NaN"
    elif kind == "text":
        vals[2] = "err"
    elif kind == "quoted":
        vals[1] = f'"{vals[1]}"'
    elif kind == "long":
        vals.append("7")
    elif kind == "short":
        vals = vals[:2]
    elif kind == "spaces":
        vals = [f"  {v} " for v in vals]
    elif kind == "huge":
        vals[1] = "1" * 21
    elif kind == "glued":  # one text field that starts like a number or two
        vals[1] = rng.choice(["1.2.3", "9.5-0.1", "5.0x"])
    text = (sep if sep != " " else "   ").join(v.replace(".", dec) for v in vals)
    return text + ("\r" if kind == "cr" else "")


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(layout=st.sampled_from([(",", "."), ("\t", "."), (";", ","), (" ", "."), ("\t", ",")]),
       kinds=st.lists(st.sampled_from(LINE_KINDS), min_size=0, max_size=4),
       n=st.integers(25, 300), seed=st.integers(0, 2**16), crlf=st.booleans(),
       trailing=st.sampled_from(["", "\n", "\n\n", "\n  \n", "\n\x1a"]), split=st.booleans())
@needs_scan
def test_fast_path_equals_the_pandas_path(tmp_path_factory, monkeypatch, layout, kinds, n, seed,
                                          crlf, trailing, split):
    """Odd lines anywhere: the fast path either reads the file exactly as the
    pandas path does, or hands it over; errors are the same errors."""
    sep, dec = layout
    rng = np.random.default_rng(seed)
    lines = [_line("plain", i, sep, dec, rng) for i in range(n)]
    for kind in kinds:
        lines[int(rng.integers(0, n))] = _line(kind, int(rng.integers(0, n)), sep, dec, rng)
    header = (sep if sep != " " else "  ").join(["Time (s)", "Load (kN)", "COD (mm)"])
    nl = "\r\n" if crlf else "\n"
    path = tmp_path_factory.mktemp("scan") / "r.txt"
    path.write_bytes((f"Rig 7 export{nl}{header}{nl}" + nl.join(lines) + trailing).encode())
    if split:
        monkeypatch.setattr(records, "_SPLIT_BYTES", 0)  # scan in parts even a small file
    taken = _spy(monkeypatch)
    try:
        fast = read_record(path)
    except RecordError as exc:
        with monkeypatch.context() as m:
            m.setattr(records, "_scan", None)
            with pytest.raises(RecordError) as slow_exc:
                read_record(path)
        assert str(slow_exc.value) == str(exc)
        return
    with monkeypatch.context() as m:
        m.setattr(records, "_scan", None)
        slow = read_record(path)
    _same_record(fast, slow)
    plain = all(k in ("plain", "spaces") for k in kinds) and "\x1a" not in trailing  # 0x1A: pandas
    if plain:
        assert taken == [True]  # nothing odd: the fast path took it


@needs_scan
def test_parts_meet_at_line_boundaries(tmp_path, monkeypatch):
    """A record scanned in one part and in many gives the same arrays."""
    rng = np.random.default_rng(3)
    rows = "\n".join(f"{i * 0.1:.1f},{rng.uniform(0, 20):.5f},{i * 1e-3:.6f}" for i in range(5000))
    path = tmp_path / "r.csv"
    path.write_text("Time (s),Load (kN),COD (mm)\n" + rows + "\n")
    whole = read_record(path)
    for parts in (2, 3, 4):
        monkeypatch.setattr(records, "_SPLIT_BYTES", 0)
        monkeypatch.setattr(records.os, "sched_getaffinity", lambda pid, k=parts: set(range(k)),
                            raising=False)
        split = read_record(path)
        assert np.array_equal(split.load_kN, whole.load_kN)
        assert np.array_equal(split.disp_mm, whole.disp_mm)
        assert np.array_equal(split.time_s, whole.time_s)


@needs_scan
def test_scan_refuses_bad_arguments():
    scan = records._scan.scan
    data = b"1,2\n3,4"
    out = np.empty((2, 2))
    with pytest.raises(ValueError, match="too small"):
        scan(data, 0, len(data), ",", ".", (0, 1), np.empty((2, 1)), 2, 0)
    with pytest.raises(ValueError, match="outside"):
        scan(data, 0, len(data) + 1, ",", ".", (0, 1), out, 2, 0)
    with pytest.raises(ValueError, match="slot"):
        scan(data, 0, len(data), ",", ".", (0, 5), out, 2, 0)
    with pytest.raises(ValueError, match="differ"):
        scan(data, 0, len(data), ",", ",", (0, 1), out, 2, 0)
    with pytest.raises(TypeError):
        scan(data, 0, len(data), ",", ".", (0, 1), b"read-only", 2, 0)
    assert scan(data, 0, len(data), ",", ".", (0, 1), out, 2, 0) == (2, -1)
    assert out.tolist() == [[1.0, 3.0], [2.0, 4.0]]
    # more rows than the capacity: stops, never writes past the buffer
    assert scan(data, 0, len(data), ",", ".", (0, 1), np.empty((2, 1)), 1, 0)[1] == 4


@needs_scan
def test_count_lines_matches_python():
    rng = np.random.default_rng(0)
    for n in (0, 1, 7, 8, 9, 2040, 2041, 70_000):
        data = bytes(rng.choice([10, 48, 44, 255], size=n).astype(np.uint8))
        for begin in range(0, min(n, 9)):
            assert records._scan.count_lines(data, begin, n) == data.count(b"\n", begin, n)


@needs_scan
@pytest.mark.parametrize("glued", ["1.2.3", "9.5-0.1", "5.0x", "-0.019-0.5"])
def test_whitespace_fields_must_be_apart(tmp_path, monkeypatch, glued):
    """In a whitespace layout "9.5-0.1" is one text field, never two numbers (a
    reviewer's case: it was once read as load 9.5 and the next field -0.1)."""
    rows = [f"{0.1 * i:.2f} {0.5 * i:.4f} 21.0 {0.001 * i:.5f}" for i in range(40)]
    rows[20] = f"2.00 {glued} 4.5"
    path = tmp_path / "w.txt"
    path.write_text("Time(s) Load(kN) Temp(C) COD(mm)\n" + "\n".join(rows) + "\n")
    fast, slow = _both_ways(path, monkeypatch)
    _same_record(fast, slow)
    assert fast.load_kN.size == 39 and "skipped (line 22)" in " ".join(fast.notes)


def test_quoted_line_break_in_the_header_keeps_every_data_row(tmp_path, monkeypatch):
    """A header cell with a line break inside quotes (Alt+Enter in a spreadsheet):
    pandas counts it as one line, the sniffing as two; both paths keep all rows and
    name the right lines (a reviewer's case)."""
    rows = [f"{0.1 * i:.1f},{0.5 * i:.2f},{0.001 * i:.4f}" for i in range(40)]
    rows[10] = "1.0,err,0.01"
    path = tmp_path / "q.csv"
    path.write_text('"Time\n(s)","Load (kN)","COD (mm)"\n' + "\n".join(rows) + "\n")
    with monkeypatch.context() as m:
        m.setattr(records, "_scan", None)
        rec = read_record(path)
    assert rec.load_kN.size == 39
    assert rec.notes == ["1 row with text in numeric columns skipped (line 13)"]
    assert rec.load_kN[0] == 0.0 and rec.load_kN[-1] == 19.5
