"""Hostile input: files that arrive empty, truncated, mislabelled, in odd encodings,
with bad cells, stuck or saturated channels, unloading cycles, as ZIP bombs.

Every hostile record sits in one sheet with good rows, reduced by the command
itself (`cracktip reduce`, in this process): each bad row must carry a clear
error that names its file and the problem (or be reduced, with a note, where
that is right), the good rows must still be reduced, and nothing may print a
traceback.  The records are synthetic (reduce.synthetic), with known answers;
they are invented, not measured.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import zipfile
from pathlib import Path

import numpy as np
import pytest

from reduce.cli import main
from reduce.construction import secant_construction
from reduce.errors import RecordError
from reduce.records import read_record
from reduce.synthetic import make_record

from conftest import write_csv_record, write_sheet

ROOT = Path(__file__).resolve().parents[1]
ROW = {"heat": "H1", "geometry": "C(T)", "B_mm": 25, "W_mm": 50, "a1_mm": 25.1, "a2_mm": 25.3,
       "a3_mm": 25.0, "yield_MPa": 500, "E_GPa": 72}
#: the clean record every hostile text record is made from (Type I, noisy)
CLEAN = make_record("I", noise_kN=0.02, offset_mm=0.01, seed=11)


def lines_of(rec, time=True):
    head = "Time (s),Load (kN),COD (mm)" if time else "Load (kN),COD (mm)"
    cols = ([rec.time_s] if time else []) + [rec.load_kN, rec.disp_mm]
    return [head] + [",".join(f"{x:.6f}" for x in row) for row in zip(*cols)]


# ------------------------------------------------------------ hand-made XLSX


def _cell(ref, value):
    if isinstance(value, tuple):  # (formula, cached value or None)
        formula, cached = value
        return f'<c r="{ref}"><f>{formula}</f>' + ("" if cached is None else f"<v>{cached!r}</v>") + "</c>"
    if isinstance(value, str):
        return f'<c r="{ref}" t="inlineStr"><is><t>{value}</t></is></c>'
    return f'<c r="{ref}"><v>{value!r}</v></c>'


def write_xlsx_parts(path, rows, merges=(), external=None, doctype="", extra=()):
    """A minimal XLSX written part by part, so tests control what openpyxl cannot
    write: cached formula values, external links, entity declarations, ZIP sizes."""
    rels = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
    main_ns = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
    body = "".join(f'<row r="{r + 1}">' + "".join(_cell(f"{'ABCDEF'[c]}{r + 1}", v)
                                                    for c, v in enumerate(row) if v is not None)
                   + "</row>" for r, row in enumerate(rows))
    merged = (f'<mergeCells count="{len(merges)}">' + "".join(f'<mergeCell ref="{m}"/>' for m in merges)
              + "</mergeCells>") if merges else ""
    sheet = (f'<?xml version="1.0" encoding="UTF-8"?>{doctype}<worksheet xmlns="{main_ns}">'
             f"<sheetData>{body}</sheetData>{merged}</worksheet>")
    link_type = "application/vnd.openxmlformats-officedocument.spreadsheetml.externalLink+xml"
    parts = {
        "[Content_Types].xml":
            '<?xml version="1.0" encoding="UTF-8"?><Types xmlns="http://schemas.openxmlformats.org/'
            'package/2006/content-types"><Default Extension="rels" ContentType="application/'
            'vnd.openxmlformats-package.relationships+xml"/><Default Extension="xml" ContentType='
            '"application/xml"/><Override PartName="/xl/workbook.xml" ContentType="application/'
            'vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/><Override PartName='
            '"/xl/worksheets/sheet1.xml" ContentType="application/vnd.openxmlformats-'
            'officedocument.spreadsheetml.worksheet+xml"/>'
            + (f'<Override PartName="/xl/externalLinks/externalLink1.xml" ContentType="{link_type}"/>'
               if external else "") + "</Types>",
        "_rels/.rels":
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.'
            'openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type='
            f'"{rels}/officeDocument" Target="xl/workbook.xml"/></Relationships>',
        "xl/workbook.xml":
            f'<?xml version="1.0" encoding="UTF-8"?><workbook xmlns="{main_ns}" xmlns:r="{rels}">'
            '<sheets><sheet name="Test" sheetId="1" r:id="rId1"/></sheets>'
            + ('<externalReferences><externalReference r:id="rId2"/></externalReferences>'
               if external else "") + "</workbook>",
        "xl/_rels/workbook.xml.rels":
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.'
            'openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type='
            f'"{rels}/worksheet" Target="worksheets/sheet1.xml"/>'
            + (f'<Relationship Id="rId2" Type="{rels}/externalLink" '
               'Target="externalLinks/externalLink1.xml"/>' if external else "")
            + "</Relationships>",
        "xl/worksheets/sheet1.xml": sheet,
    }
    if external:
        parts["xl/externalLinks/externalLink1.xml"] = (
            f'<?xml version="1.0" encoding="UTF-8"?><externalLink xmlns="{main_ns}" '
            f'xmlns:r="{rels}"><externalBook r:id="rId1"><sheetNames><sheetName val="Sheet1"/>'
            "</sheetNames></externalBook></externalLink>")
        parts["xl/externalLinks/_rels/externalLink1.xml.rels"] = (
            '<?xml version="1.0" encoding="UTF-8"?><Relationships xmlns="http://schemas.'
            'openxmlformats.org/package/2006/relationships"><Relationship Id="rId1" Type='
            f'"{rels}/externalLinkPath" Target="{external}" TargetMode="External"/></Relationships>')
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in parts.items():
            z.writestr(name, text)
        for name, data in extra:
            z.writestr(name, data)
    return path


def record_rows(rec, header=("Load (kN)", "COD (mm)")):
    return [list(header)] + [[float(P), float(v)] for P, v in zip(rec.load_kN, rec.disp_mm)]


# ------------------------------------------------------------ the hostile records


def _saturated():
    rec = make_record("I", noise_kN=0.02, seed=12)
    limit = 0.97 * float(rec.load_kN.max())
    return np.minimum(rec.load_kN, limit), rec.disp_mm, rec.time_s


def unload_reload_record():
    """CLEAN with an unloading to 30 % and reloading at 97 % of P_5, on lines of slope k.

    Returns the arrays and the index range of the cycle.
    """
    rec = make_record("I", noise_kN=0.0, seed=13)
    P, v, k = rec.load_kN, rec.disp_mm, 40.0
    i = int(np.argmax(P >= 0.97 * rec.P_5))
    P_u, v_u = P[i], v[i]
    down = np.linspace(P_u, 0.3 * P_u, 120)
    cycle_P = np.concatenate([down, down[::-1][1:]])
    cycle_v = v_u - (P_u - cycle_P) / k
    load = np.concatenate([P[:i + 1], cycle_P[1:-1], P[i:]])
    disp = np.concatenate([v[:i + 1], cycle_v[1:-1], v[i:]])
    return load, disp, rec


def _text_cells():
    lines = lines_of(CLEAN)
    for n in (300, 700, 1100):
        t, _, v = lines[n].split(",")
        lines[n] = f"{t},OVERLOAD,{v}"
    for n in (500, 900):
        t, P, _ = lines[n].split(",")
        lines[n] = f"{t},{P},NaN"
    return "\n".join(lines) + "\n"


def _time_glitches():
    lines = lines_of(CLEAN)
    for n in (200, 800):  # a repeated stamp
        lines[n] = lines[n - 1].split(",")[0] + "," + ",".join(lines[n].split(",")[1:])
    for n in (1200,):  # a stamp out of order
        lines[n] = lines[n - 5].split(",")[0] + "," + ",".join(lines[n].split(",")[1:])
    return "\n".join(lines) + "\n"


def _duplicated_block():
    lines = lines_of(CLEAN)
    return "\n".join(lines[:1001] + lines[801:1001] + lines[1001:]) + "\n"


def _mostly_text():
    lines = lines_of(CLEAN)
    lines[100:] = [line.split(",")[0] + ",ERR,ERR" for line in lines[100:]]
    return "\n".join(lines) + "\n"


def _latin1():
    text = "Prüfmaschine: R-7\nKraft (kN);Aufweitung [µm]\n" + "".join(
        f"{P:.6f};{v * 1000:.3f}\n".replace(".", ",") for P, v in zip(CLEAN.load_kN, CLEAN.disp_mm))
    return text.encode("latin-1")


def _write_records(d: Path) -> dict:
    """Every hostile record by specimen ID -> file name (written into d)."""
    files = {}

    def text(name, content, spec):
        (d / name).write_bytes(content if isinstance(content, bytes) else content.encode())
        files[spec] = name

    def arrays(name, load, disp, time, spec):
        write_csv_record(d / name, load, disp, time)
        files[spec] = name

    arrays("good.csv", CLEAN.load_kN, CLEAN.disp_mm, CLEAN.time_s, "GOOD")
    text("empty.csv", b"", "EMPTY")
    text("header.csv", "Time (s),Load (kN),COD (mm)\n", "HEADER")
    text("binary.csv", np.random.default_rng(3).integers(0, 256, 5000, dtype=np.uint8).tobytes(), "BINARY")
    text("latin1.csv", _latin1(), "LATIN1")
    text("cells.csv", _text_cells(), "CELLS")
    text("mostly_text.csv", _mostly_text(), "MOSTLYTEXT")
    text("time.csv", _time_glitches(), "TIME")
    text("dup.csv", _duplicated_block(), "DUPBLOCK")
    arrays("stuck.csv", CLEAN.load_kN, np.full(CLEAN.load_kN.size, 0.1234), CLEAN.time_s, "STUCK")
    arrays("saturated.csv", *_saturated(), "SATURATED")
    load, disp, _ = unload_reload_record()
    arrays("cycle.csv", load, disp, None, "CYCLE")
    lines = lines_of(CLEAN)
    text("truncated.csv", ("\n".join(lines[:1500]) + "\n" + lines[1500][:7]), "TRUNCATED")
    # workbooks
    rows = record_rows(CLEAN)
    rows[11][0] = ("A11+1000", float(CLEAN.load_kN[10]))  # cached value: the one the rig wrote
    rows[12][0] = ("A12+1000", None)  # no cached value: skipped, never computed
    write_xlsx_parts(d / "formulas.xlsx", rows)
    files["FORMULAS"] = "formulas.xlsx"
    merged = [["Channels of test 7", None], ["Load (kN)", "COD"], [None, "mm"]] + record_rows(CLEAN)[1:]
    write_xlsx_parts(d / "merged.xlsx", merged, merges=["A1:B1", "A2:A3"])
    files["MERGED"] = "merged.xlsx"
    other = d / "linked_source.xlsx"
    write_xlsx_parts(other, [["x"], [999.0]])
    rows = record_rows(CLEAN)
    rows[21][0] = ("[1]Sheet1!A2", float(CLEAN.load_kN[20]))
    write_xlsx_parts(d / "links.xlsx", rows, external=other.as_uri())
    files["LINKS"] = "links.xlsx"
    write_bomb(d / "bomb.xlsx")
    files["BOMB"] = "bomb.xlsx"
    laughs = ('<!DOCTYPE lolz [<!ENTITY lol "lol"><!ENTITY lol2 "&lol;&lol;&lol;&lol;&lol;&lol;">'
              '<!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">]>')
    rows = record_rows(CLEAN)
    rows[5][0] = "&lol3;"
    write_xlsx_parts(d / "entities.xlsx", rows, doctype=laughs)
    files["ENTITIES"] = "entities.xlsx"
    good_xlsx = write_xlsx_parts(d / "tmp.xlsx", record_rows(CLEAN))
    data = good_xlsx.read_bytes()
    (d / "truncated.xlsx").write_bytes(data[:len(data) // 2])
    files["TRUNCXLSX"] = "truncated.xlsx"
    os.replace(good_xlsx, d / "really_a_workbook.csv")
    files["MISLABELLED"] = "really_a_workbook.csv"
    return files


def write_bomb(path, inflated=300 << 20):
    """A workbook whose sheet inflates from about 300 kB to ``inflated`` bytes."""
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED, compresslevel=9) as z:
        z.writestr("[Content_Types].xml", "<Types/>")
        with z.open("xl/worksheets/sheet1.xml", "w") as f:
            block = b" " * (1 << 20)
            for _ in range(inflated >> 20):
                f.write(block)
    return path


@pytest.fixture(scope="module")
def reduced(tmp_path_factory):
    """The command run once on a sheet of every hostile record (plus good rows)."""
    d = tmp_path_factory.mktemp("hostile")
    files = _write_records(d)
    rows = [dict(ROW, specimen=spec, record=name) for spec, name in files.items()]
    rows.append(dict(ROW, specimen="GOOD2", record="good.csv"))
    sheet = write_sheet(d / "sheet.csv", rows)
    out = d / "out.json"
    import contextlib
    import io

    stdout, stderr = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        code = main(["reduce", str(sheet), "--json", str(out), "--jobs", "1"])
    results = {d_["specimen"]: d_ for d_ in json.loads(out.read_text())}
    return {"code": code, "results": results, "dir": d, "printed": stdout.getvalue() + stderr.getvalue()}


def error_of(reduced, spec):
    r = reduced["results"][spec]
    assert r["error"], f"{spec} was reduced but should have been refused"
    assert r["K_Q_MPa_sqrt_m"] is None and r["P_max_kN"] is None
    return r["error"]


def names_file(reduced, spec, message):
    assert str(reduced["dir"] / reduced["results"][spec]["record"]) in message


# ------------------------------------------------------------ the batch as a whole


def test_good_rows_still_reduced_and_no_traceback(reduced):
    assert reduced["code"] == 2  # some rows failed
    for spec in ("GOOD", "GOOD2"):
        assert reduced["results"][spec]["error"] is None
        assert reduced["results"][spec]["P_Q_kN"] == pytest.approx(CLEAN.P_Q, rel=0.01)
    assert "Traceback" not in reduced["printed"]
    assert "could not be reduced" in reduced["printed"]


# ------------------------------------------------------------ refused, with the file and the problem


@pytest.mark.parametrize("spec, words", [
    ("EMPTY", "the file is empty"),
    ("HEADER", "no data rows"),
    ("BINARY", "binary file"),
    ("MOSTLYTEXT", "1901 of 2000 data rows have empty or non-numeric cells"),
    ("STUCK", "the displacement channel is constant (0.1234 mm in all 2000 samples)"),
    ("SATURATED", "the load channel is saturated"),
    ("BOMB", "possible ZIP bomb"),
    ("ENTITIES", "its XML declares entities or external references (EntitiesForbidden"),
    ("TRUNCXLSX", "not a readable XLSX workbook"),
])
def test_refused_with_a_clear_error(reduced, spec, words):
    message = error_of(reduced, spec)
    assert words in message
    names_file(reduced, spec, message)
    assert "Traceback" not in message


def test_saturated_top_gives_no_P_max(reduced):
    message = error_of(reduced, "SATURATED")
    assert "P_max (and P_Q) are not known" in message


def test_saturation_is_not_claimed_for_a_real_maximum():
    # the same record unclipped: its top scatters like the rest
    rec = make_record("III", noise_kN=0.02, seed=12)
    assert secant_construction(rec.load_kN, rec.disp_mm).P_max == float(rec.load_kN.max())


# ------------------------------------------------------------ read, with what was done said


def test_latin1_micro_sign_header_is_read(reduced):
    r = reduced["results"]["LATIN1"]
    assert r["error"] is None
    assert r["P_Q_kN"] == pytest.approx(CLEAN.P_Q, rel=0.01)  # µm converted to mm
    assert any("Latin-1" in n for n in r["record_notes"])


def test_text_and_nan_cells_are_skipped_and_counted(reduced):
    r = reduced["results"]["CELLS"]
    assert r["error"] is None
    assert "3 rows with text in numeric columns skipped (lines 301, 701, 1101)" in r["record_notes"]
    assert "2 rows with empty or NaN cells skipped (lines 501, 901)" in r["record_notes"]
    assert r["P_Q_kN"] == pytest.approx(reduced["results"]["GOOD"]["P_Q_kN"], rel=1e-3)


def test_time_stamps_out_of_order_are_noted(reduced):
    r = reduced["results"]["TIME"]
    assert r["error"] is None
    assert "2 repeated time stamps (samples are used in file order)" in r["record_notes"]
    assert "time goes backwards 1 times (samples are used in file order)" in r["record_notes"]
    assert r["P_Q_kN"] == reduced["results"]["GOOD"]["P_Q_kN"]  # time does not enter P_Q


def test_duplicated_block_of_rows_is_taken_off_by_the_envelope(reduced):
    r = reduced["results"]["DUPBLOCK"]
    assert r["error"] is None
    assert any("repeated time stamps" in n or "backwards" in n for n in r["record_notes"])
    assert "loading envelope" in r["curve_note"] and any("loading envelope" in w for w in r["warnings"])
    assert r["P_Q_kN"] == pytest.approx(reduced["results"]["GOOD"]["P_Q_kN"], rel=1e-3)


def test_unloading_cycle_before_P_Q_never_gives_P_Q_from_the_unloading_line(reduced):
    load, disp, rec = unload_reload_record()
    # the hazard is real: on the raw record the secant is met on the unloading line
    raw = secant_construction(load, disp)
    assert raw.P_5 < 0.9 * rec.P_5 and raw.P_Q != pytest.approx(rec.P_Q, rel=0.01)
    r = reduced["results"]["CYCLE"]
    assert r["error"] is None
    assert r["P_Q_kN"] == pytest.approx(rec.P_Q, rel=0.01)
    assert "1 unloading-reloading cycle removed" in r["curve_note"]
    assert any("loading envelope" in w for w in r["warnings"])
    assert "loading envelope" in reduced["printed"]  # the table says so too


def test_truncated_last_line_is_skipped(reduced):
    r = reduced["results"]["TRUNCATED"]
    assert r["error"] is None
    assert any("1 row with empty or NaN cells skipped (line 1501)" in n for n in r["record_notes"])


def test_workbook_formulas_are_not_evaluated(reduced):
    r = reduced["results"]["FORMULAS"]
    assert r["error"] is None
    assert "1 row with empty or NaN cells skipped (row 13)" in r["record_notes"]
    assert r["P_max_kN"] < 100  # "=A11+1000" would be over 1000 kN if computed


def test_workbook_formula_cached_value_is_used(tmp_path):
    rows = record_rows(CLEAN)
    rows[11][0] = ("A11+1000", float(CLEAN.load_kN[10]))
    rec = read_record(write_xlsx_parts(tmp_path / "f.xlsx", rows))
    assert rec.load_kN[10] == float(CLEAN.load_kN[10])


def test_workbook_merged_header_cells(reduced):
    r = reduced["results"]["MERGED"]
    assert r["error"] is None
    assert r["P_Q_kN"] == pytest.approx(CLEAN.P_Q, rel=0.01)


def test_workbook_external_link_is_not_followed(reduced, tmp_path):
    r = reduced["results"]["LINKS"]
    assert r["error"] is None
    assert r["P_max_kN"] < 999  # the linked book holds 999 kN; its cached value is kept
    rec = read_record(reduced["dir"] / "links.xlsx")
    assert rec.load_kN[20] == float(CLEAN.load_kN[20])


def test_mislabelled_workbook_is_read_by_content(reduced):
    assert reduced["results"]["MISLABELLED"]["error"] is None


# ------------------------------------------------------------ ZIP containers


def test_zip_bomb_is_refused_before_inflating(tmp_path):
    path = write_bomb(tmp_path / "b.xlsx")
    assert path.stat().st_size < 2 << 20
    with pytest.raises(RecordError, match="ZIP bomb"):
        read_record(path)


def test_zip_with_understated_sizes_is_not_inflated_past_them(tmp_path):
    # a container whose directory says its sheet is small while the data inflate to 64 MiB:
    # zipfile stops at the declared size and the CRC check fails
    path = write_bomb(tmp_path / "b.xlsx", inflated=64 << 20)
    import struct

    data = bytearray(path.read_bytes())
    cd = data.rfind(b"PK\x01\x02")  # the sheet's entry is the last in the central directory
    assert data[cd + 46:cd + 46 + 24] == b"xl/worksheets/sheet1.xml"
    assert struct.unpack_from("<I", data, cd + 24)[0] == 64 << 20  # its uncompressed size
    struct.pack_into("<I", data, cd + 24, 1000)  # declare 1000 bytes instead
    path.write_bytes(bytes(data))
    with zipfile.ZipFile(path) as z, z.open("xl/worksheets/sheet1.xml") as member:
        # the CRC stored is that of all 64 MiB: a reader that inflated them all would match
        # it; zipfile stops at the declared 1000 bytes, whose CRC does not
        with pytest.raises(zipfile.BadZipFile, match="CRC"):
            member.read()
    with pytest.raises(RecordError):
        read_record(path)


# ------------------------------------------------------------ where output goes


def test_specimen_ids_with_path_characters_do_not_steer_output(tmp_path, monkeypatch):
    work = tmp_path / "work"
    work.mkdir()
    write_csv_record(work / "r.csv", CLEAN.load_kN, CLEAN.disp_mm, CLEAN.time_s)
    ids = ["../x", "a/b", "..", "/etc/evil", "c:\\temp\\y", "ok"]
    write_sheet(work / "s.csv", [dict(ROW, specimen=i, record="r.csv") for i in ids])
    out = work / "out"
    monkeypatch.chdir(work)
    before = sorted(p for p in tmp_path.rglob("*"))
    assert main(["reduce", "s.csv", "--json", str(out / "r.json"), "--xlsx", str(out / "r.xlsx"),
                 "--jobs", "2"]) == 0
    created = sorted(set(tmp_path.rglob("*")) - set(before))
    assert created == [out, out / "r.json", out / "r.xlsx"]
    assert [d["specimen"] for d in json.loads((out / "r.json").read_text())] == ids
    import openpyxl

    names = openpyxl.load_workbook(out / "r.xlsx", read_only=True).sheetnames
    assert all("/" not in n and "\\" not in n and ".." not in n for n in names)


# ------------------------------------------------------------ a 200 MB record


def write_long_record(path, n, noise=0.01, seed=0):
    """A Type I record of n samples written fast as fixed-width text (about 33 bytes a row)."""
    from reduce.synthetic import curve_load, secant_point

    rng = np.random.default_rng(seed)
    v5, _ = secant_point(40.0, 30.0, 6.0)
    v = np.linspace(0, 1.6 * v5, n)
    P = np.clip(curve_load(v, 40.0, 30.0, 6.0) + rng.normal(0, noise, n) + 0.5, 0, None)
    t = np.linspace(0, 600.0, n)

    def digits(x):  # '%010.6f' as bytes, 0 <= x < 1000
        q = np.rint(x * 1e6).astype(np.int64)
        out = np.empty((n, 10), dtype=np.uint8)
        for k in range(9, -1, -1):
            if k == 3:
                out[:, k] = ord(".")
                continue
            out[:, k] = 48 + q % 10
            q //= 10
        return out

    comma, newline = np.full((n, 1), ord(","), np.uint8), np.full((n, 1), ord("\n"), np.uint8)
    body = np.hstack([digits(t), comma, digits(P), comma, digits(v), newline])
    with open(path, "wb") as f:
        f.write(b"Time (s),Load (kN),COD (mm)\n")
        f.write(body.tobytes())
    return path


@pytest.mark.slow
def test_200_MB_record_is_reduced_within_bounded_memory(tmp_path):
    n = 6_100_000
    path = write_long_record(tmp_path / "long.csv", n)
    size = path.stat().st_size
    assert size > 200e6
    # the peak resident size (Linux VmHWM), reset at the baseline (clear_refs); a
    # child's ru_maxrss would start from its parent's
    probe = (
        "import json, sys\n"
        "import numpy, pandas\n"
        "from reduce.models import Specimen\n"
        "from reduce.pipeline import reduce_specimen\n"
        "def status(key):\n"
        "    with open('/proc/self/status') as f:\n"
        "        return next(int(l.split()[1]) for l in f if l.startswith(key + ':'))\n"
        "open('/proc/self/clear_refs', 'w').write('5')\n"
        "base = status('VmRSS')\n"
        "s = Specimen('L', 'C(T)', B=25, W=50, a_readings=(25, 25.2, 25.1), yield_MPa=500,\n"
        "             E_MPa=205000, record=sys.argv[1])\n"
        "r, rec = reduce_specimen(s)\n"
        "peak = status('VmHWM')\n"
        "print(json.dumps({'error': r.error, 'n': int(rec.load_kN.size), 'type': r.curve_type,\n"
        "                  'above_kB': peak - base}))\n")
    done = subprocess.run([sys.executable, "-c", probe, str(path)], capture_output=True, text=True,
                          cwd=ROOT, timeout=300, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert done.returncode == 0, done.stderr
    out = json.loads(done.stdout)
    assert out["error"] is None and out["n"] == n and out["type"] == "I"
    # three float64 channels are 24 bytes a sample; the whole read and reduction
    # stays within a few times that (measured 2.7 times on the project machine, 3.4 with
    # pandas alone)
    assert out["above_kB"] * 1024 < 5 * 24 * n


def test_text_record_above_the_size_limit_is_refused_before_parsing(tmp_path, monkeypatch):
    import reduce.records as records

    path = write_csv_record(tmp_path / "r.csv", CLEAN.load_kN, CLEAN.disp_mm, CLEAN.time_s)
    monkeypatch.setattr(records, "_MAX_RECORD_BYTES", path.stat().st_size - 1)
    monkeypatch.setattr(records, "_read_text", lambda *a: pytest.fail("the file was parsed"))
    with pytest.raises(RecordError, match="text records above .* are refused"):
        read_record(path)
