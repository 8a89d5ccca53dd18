"""The certificate, its embedded results, ``verify`` and ``plot``.

The campaign is invented: synthetic records (reduce.synthetic, known
answers) for two heats.  Heat H1 reduces completely; heat H2 has a row whose
record does not exist, so it is refused unless failed rows are included.
"""

from __future__ import annotations

import hashlib
import json
import shutil
import subprocess

import numpy as np
import pytest
from pypdf import PdfReader, PdfWriter

import specimens
from reduce.certify import verify_certificate
from reduce.cli import main
from reduce.errors import ReportError
from reduce.pipeline import reduce_sheet
from reduce.synthetic import make_record
from reports.certificate import (ATTACHMENT_NAME, _plain, build_certificate, certificate_number,
                                 load_lab_profile)

from conftest import write_csv_record, write_sheet

BASE = {"geometry": "C(T)", "B_mm": 25, "W_mm": 50, "a1_mm": 25.1, "a2_mm": 25.3, "a3_mm": 25.0,
        "yield_MPa": 500, "E_GPa": 72, "temperature_C": 21, "orientation": "L-T",
        "material": "invented alloy plate"}
KINDS = {"T1": "I", "T2": "III", "T3": "III", "U1": "I"}


@pytest.fixture(scope="module")
def campaign(tmp_path_factory):
    """Sheet, records and the result of one `cracktip certify` run on them."""
    d = tmp_path_factory.mktemp("campaign")
    (d / "records").mkdir()
    known = {}
    for i, (sid, kind) in enumerate(KINDS.items()):
        rec = make_record(kind, k=40.0, P_y=8.0, noise_kN=0.004, offset_mm=0.02, seed=i)
        write_csv_record(d / "records" / f"{sid}.csv", rec.load_kN, rec.disp_mm, rec.time_s)
        known[sid] = rec
    rows = [dict(BASE, specimen="T1", heat="H1", record="records/T1.csv"),
            dict(BASE, specimen="T2", heat="H1", record="records/T2.csv"),
            # a/W = 0.58: K_Q cannot qualify
            dict(BASE, specimen="T3", heat="H1", record="records/T3.csv", a1_mm=29, a2_mm=29, a3_mm=29),
            dict(BASE, specimen="U1", heat="H2", record="records/U1.csv"),
            dict(BASE, specimen="U2", heat="H2", record="records/missing.csv")]
    sheet = write_sheet(d / "sheet.csv", rows)
    out = d / "certs"
    # QA store (issue 6): a certificate is numbered only once its heat is accepted and approved
    (d / "spec.toml").write_text('[specification]\nname = "T-CERT"\n[[requirement]]\norientation = "L-T"\n'
                                 'temperature_C = 21\nmin_K_Ic_MPa_sqrt_m = 1.0\nmin_valid = 1\n')
    assert main(["accept", str(sheet), "--spec", str(d / "spec.toml")]) == 2  # U2's record is missing
    assert main(["approve", "H1", "--by", "A. Tester", "--decision", "accept", "--db", str(d / "cracktip.db")]) == 0
    code = main(["certify", str(sheet), "--out", str(out), "--date", "2026-01-15"])
    results = reduce_sheet(sheet)
    sha = hashlib.sha256(sheet.read_bytes()).hexdigest()
    number = certificate_number(load_lab_profile()["certificate_prefix"], "H1", sha)
    return {"dir": d, "sheet": sheet, "out": out, "code": code, "rows": results, "sha": sha,
            "known": known, "pdf": out / f"{number}.pdf", "number": number}


def _text(pdf) -> list[str]:
    return [p.extract_text() for p in PdfReader(str(pdf)).pages]


def _payload(pdf) -> dict:
    return json.loads(PdfReader(str(pdf)).attachments[ATTACHMENT_NAME][0])


def _heat(campaign, heat):
    return [row for row in campaign["rows"] if row[0].heat == heat]


def test_one_certificate_for_the_clean_heat_none_for_the_failed_one(campaign, capsys):
    assert campaign["code"] == 2
    assert campaign["pdf"].is_file()
    names = sorted(p.name for p in campaign["out"].iterdir())
    assert names == [campaign["pdf"].name], names  # no H2 certificate, no temporary file left


def test_pdf_pages_text_ids_K_values_and_verdicts(campaign):
    results = [r for r, _, _ in _heat(campaign, "H1")]
    assert any(r.valid for r in results) and any(not r.valid for r in results)  # both verdicts shown
    pages = _text(campaign["pdf"])
    # page 1 results, page 2 statements, two pages per specimen
    assert len(pages) == 2 + 2 * len(results)
    for i, t in enumerate(pages, start=1):
        assert f"page {i} of {len(pages)}" in t
        assert campaign["number"] in t and "DRAFT" not in t
    first = pages[0]
    for r in results:
        assert r.specimen in first
        assert any(ln.strip() == r.specimen for ln in first.splitlines())  # its own table cell
        assert f"{r.K_Q_MPa_sqrt_m:.1f}" in first
        assert f"{r.P_Q_kN:.2f}" in first
    invalid = next(r for r in results if not r.valid)
    valid = next(r for r in results if r.valid)
    spec_page = {r.specimen: pages[2 + 2 * i] for i, r in enumerate(results)}
    assert "a/W is outside the permitted range" in "".join(pages)
    assert (f"KQ = {valid.K_Q_MPa_sqrt_m:.1f} MPa·√m qualifies: KIc = {valid.K_Ic_MPa_sqrt_m:.1f} MPa·√m"
            in spec_page[valid.specimen])
    assert f"KQ = {invalid.K_Q_MPa_sqrt_m:.1f} MPa·√m does not qualify as KIc" in spec_page[invalid.specimen]
    statements = pages[1]
    assert "results apply only to the specimens tested" in statements.lower()
    assert "qualified personnel" in statements
    assert campaign["sha"] in statements
    for r in results:
        assert r.record_sha256 in statements


def test_K_on_certificate_matches_the_synthetic_answer(campaign):
    # independent path: the closed-form P_Q of the synthetic curve (reduce/synthetic.py docstring)
    # times the C(T) K calibration; 1.5 % covers the noise added to the record
    K_per_kN = specimens.geometry("C(T)").K_per_load(25.0, 50.0, (25.1 + 25.3 + 25.0) / 3)
    got = {d["specimen"]: d for d in _payload(campaign["pdf"])["results"]}
    for sid in ("T1", "T2"):
        assert got[sid]["K_Q_MPa_sqrt_m"] == pytest.approx(campaign["known"][sid].P_Q * K_per_kN, rel=0.015)


def test_embedded_json_equals_the_reduction(campaign):
    payload = _payload(campaign["pdf"])
    rows = _heat(campaign, "H1")
    assert payload["results"] == _plain([r.to_dict() for r, _, _ in rows])
    assert payload["sheet"]["sha256"] == campaign["sha"]
    assert payload["rule_set"]["name"] == "e399"
    assert payload["certificate"]["number"] == campaign["number"]
    assert payload["certificate"]["issue_date"] == "2026-01-15"
    for entry, (r, _, _) in zip(payload["records"], rows):
        assert entry["sha256"] == hashlib.sha256((campaign["dir"] / r.record).read_bytes()).hexdigest()


def test_verify_matches_an_untouched_certificate(campaign, capsys):
    assert main(["verify", str(campaign["pdf"]), "--records", str(campaign["dir"])]) == 0
    out = capsys.readouterr().out
    assert "MATCHES" in out and "MISMATCH" not in out
    assert out.count("re-reduction gives the same results") == 3
    # without --records the folder of the sheet named in the certificate is used
    ok, lines = verify_certificate(campaign["pdf"])
    assert ok and sum("same results" in ln for ln in lines) == 3


def test_verify_detects_a_changed_record_byte(campaign, tmp_path, capsys):
    shutil.copytree(campaign["dir"] / "records", tmp_path / "records")
    shutil.copy(campaign["sheet"], tmp_path / "sheet.csv")
    target = tmp_path / "records" / "T2.csv"
    data = bytearray(target.read_bytes())
    i = data.rindex(b"1")  # one digit near the end of the record
    data[i:i + 1] = b"2"
    target.write_bytes(bytes(data))
    assert main(["verify", str(campaign["pdf"]), "--records", str(tmp_path)]) == 2
    out = capsys.readouterr().out
    assert "MISMATCH T2" in out and "SHA-256 differs" in out
    assert "ok T1" in out and "DOES NOT MATCH" in out


def _tampered(src, dst, change):
    reader = PdfReader(str(src))
    payload = json.loads(reader.attachments[ATTACHMENT_NAME][0])
    change(payload)
    w = PdfWriter()
    for page in reader.pages:
        w.add_page(page)
    w.add_metadata(dict(reader.metadata))
    w.add_attachment(ATTACHMENT_NAME, json.dumps(payload).encode())
    w.write(str(dst))
    return dst


def test_verify_detects_a_changed_result(campaign, tmp_path, capsys):
    def bump(payload):
        payload["results"][0]["K_Q_MPa_sqrt_m"] *= 1.01
    bad = _tampered(campaign["pdf"], tmp_path / "bad.pdf", bump)
    assert main(["verify", str(bad), "--records", str(campaign["dir"])]) == 2
    out = capsys.readouterr().out
    assert "not the ones issued" in out
    assert "MISMATCH T1: re-reduction differs: K_Q_MPa_sqrt_m" in out
    # an untampered copy made the same way passes: the check is on the data, not the file
    same = _tampered(campaign["pdf"], tmp_path / "same.pdf", lambda p: None)
    assert main(["verify", str(same), "--records", str(campaign["dir"])]) == 0


def test_verify_refuses_a_pdf_without_results(tmp_path, capsys):
    w = PdfWriter()
    w.add_blank_page(200, 200)
    w.write(str(tmp_path / "plain.pdf"))
    assert main(["verify", str(tmp_path / "plain.pdf")]) == 2
    assert "no embedded 'cracktip-results.json'" in capsys.readouterr().err


def test_include_failed_lists_the_failed_rows(campaign, tmp_path, capsys):
    assert main(["certify", str(campaign["sheet"]), "--heat", "H2", "--include-failed",
                 "--out", str(tmp_path)]) == 0
    (pdf,) = tmp_path.glob("*.pdf")
    text = "\n".join(_text(pdf))
    assert "Specimens not reduced (1)" in text and "U2" in text and "missing.csv" in text
    assert len(PdfReader(str(pdf)).pages) == 2 + 2  # one reduced specimen
    payload = _payload(pdf)
    assert [d["specimen"] for d in payload["results"]] == ["U1", "U2"]
    assert payload["results"][1]["error"]
    ok, lines = verify_certificate(pdf, campaign["dir"])
    assert ok, lines


def test_refusal_names_the_failed_row(campaign, tmp_path, capsys):
    assert main(["certify", str(campaign["sheet"]), "--heat", "H2", "--out", str(tmp_path)]) == 2
    err = capsys.readouterr().err
    assert "heat H2: no certificate" in err and "U2" in err and "--include-failed" in err
    assert list(tmp_path.iterdir()) == []


def test_draft_says_draft_on_every_page_and_has_no_number(campaign, tmp_path):
    assert main(["certify", str(campaign["sheet"]), "--heat", "H1", "--draft", "--out", str(tmp_path)]) == 0
    pdf = tmp_path / "DRAFT-H1.pdf"
    pages = _text(pdf)
    assert all("DRAFT" in t for t in pages)
    assert not any(campaign["number"] in t for t in pages)
    assert _payload(pdf)["certificate"]["number"] is None
    assert _payload(pdf)["certificate"]["draft"] is True


def test_builder_refuses_failed_rows_and_numberless_issue(campaign, tmp_path):
    lab = load_lab_profile()
    rows = _heat(campaign, "H2")
    with pytest.raises(ReportError, match="U2"):
        build_certificate(tmp_path / "x.pdf", "H2", rows, lab, "e399", campaign["sheet"], campaign["sha"],
                          certificate_number="N-1")
    with pytest.raises(ReportError, match="needs a certificate number"):
        build_certificate(tmp_path / "x.pdf", "H1", _heat(campaign, "H1"), lab, "e399", campaign["sheet"],
                          campaign["sha"])
    assert list(tmp_path.iterdir()) == []


def test_a_crash_midway_leaves_no_pdf_and_keeps_the_old_one(campaign, tmp_path, monkeypatch):
    import reports.plots

    lab = load_lab_profile()
    target = tmp_path / "c.pdf"
    target.write_bytes(b"old certificate")

    def boom(*a, **k):
        raise RuntimeError("plotting failed")
    monkeypatch.setattr(reports.plots, "plot_bytes", boom)
    with pytest.raises(RuntimeError):
        build_certificate(target, "H1", _heat(campaign, "H1"), lab, "e399", campaign["sheet"], campaign["sha"],
                          certificate_number="N-1")
    assert target.read_bytes() == b"old certificate"
    assert [p.name for p in tmp_path.iterdir()] == ["c.pdf"]


def test_rendered_pages_are_not_blank(campaign, tmp_path):
    import matplotlib.image

    assert shutil.which("pdftoppm"), "pdftoppm (poppler-utils) is needed to render the pages"
    subprocess.run(["pdftoppm", "-png", "-r", "60", "-f", "1", "-l", "4", str(campaign["pdf"]),
                    str(tmp_path / "page")], check=True)
    pngs = sorted(tmp_path.glob("page-*.png"))
    assert len(pngs) == 4
    secant = []
    for png in pngs:
        img = matplotlib.image.imread(str(png))[..., :3]
        dark = float((img.mean(axis=2) < 0.8).mean())
        assert 0.01 < dark < 0.5, (png.name, dark)
        # pixels of the secant's colour (#c0561b in reports/plots.py)
        secant.append(int((np.abs(img - np.array([0xC0, 0x56, 0x1B]) / 255).max(axis=2) < 0.15).sum()))
    # page 3 is the first specimen page: its plot shows the secant; page 4 (checks) has none
    assert secant[2] > 30 and secant[3] < 5, secant


def test_lab_profile_errors_name_the_file_and_entry(tmp_path):
    p = tmp_path / "lab.toml"
    p.write_text('certificate_prefix = "X"\n[[signatories]]\nname = "A"\nrole = "B"\n')
    with pytest.raises(ReportError, match=r"lab.toml: entry 'name'"):
        load_lab_profile(p)
    p.write_text('name = "L"\ncertificate_prefix = "X/Y"\n[[signatories]]\nname = "A"\nrole = "B"\n')
    with pytest.raises(ReportError, match="certificate_prefix"):
        load_lab_profile(p)
    assert load_lab_profile()["example"] is True


# ------------------------------------------------------------------ plot

def test_plot_command_writes_png_and_svg(campaign, tmp_path, capsys):
    png, svg = tmp_path / "t1.png", tmp_path / "t1.svg"
    assert main(["plot", str(campaign["sheet"]), "--specimen", "T1", "--out", str(png)]) == 0
    assert main(["plot", str(campaign["sheet"]), "--specimen", "T1", "--out", str(svg)]) == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert b"<svg" in svg.read_bytes()[:2000]
    assert main(["plot", str(campaign["sheet"]), "--specimen", "NOPE", "--out", str(png)]) == 2
    assert "'NOPE' not in the sheet" in capsys.readouterr().err
    assert main(["plot", str(campaign["sheet"]), "--specimen", "U2", "--out", str(png)]) == 2


@pytest.mark.parametrize("sid", ["T1", "T2"])
def test_plot_labels_inside_and_not_overlapping(campaign, sid):
    from matplotlib.text import Annotation, Text

    from reports.plots import load_displacement_figure

    result, rec, _ = next(row for row in campaign["rows"] if row[0].specimen == sid)
    fig = load_displacement_figure(result, rec.load_kN, rec.disp_mm)
    fig.canvas.draw()
    renderer = fig.canvas.get_renderer()
    ax = fig.axes[0]
    boxes = [Text.get_window_extent(a, renderer) for a in ax.texts if isinstance(a, Annotation)]
    # Type I: P_Q = P_5 share a label, P_max has its own; Type III: P_Q = P_max
    assert len(boxes) == (2 if result.curve_type == "I" else 1)
    axes_box = ax.get_window_extent(renderer)
    for i, b in enumerate(boxes):
        assert axes_box.x0 <= b.x0 and b.x1 <= axes_box.x1 and axes_box.y0 <= b.y0 and b.y1 <= axes_box.y1
        assert not any(b.overlaps(o) for o in boxes[i + 1:])
    # the record is drawn origin-corrected: it starts at v - v0 = offset - v0 (about zero)
    x = ax.lines[0].get_xdata()
    assert x[0] == pytest.approx(rec.disp_mm[0] - result.origin_offset_mm)


def test_plotted_P5_lies_on_the_plotted_secant(campaign):
    # the point the plot marks and the line it draws come from the same construction
    result = next(r for r, _, _ in campaign["rows"] if r.specimen == "T1")
    assert result.curve_type == "I"
    assert result.secant_slope_kN_per_mm * result.v_5_mm == pytest.approx(result.P_5_kN, rel=1e-9)
    assert result.secant_slope_kN_per_mm == pytest.approx(0.95 * result.initial_slope_kN_per_mm, rel=1e-12)


def test_plot_of_a_record_that_cannot_be_reduced_shows_the_raw_record(tmp_path, capsys):
    v = np.linspace(0.0, 0.5, 200)
    write_csv_record(tmp_path / "flat.csv", np.zeros_like(v), v)  # no positive load: no construction
    sheet = write_sheet(tmp_path / "s.csv", [dict(BASE, specimen="F1", heat="H9", record="flat.csv")])
    out = tmp_path / "f1.png"
    assert main(["plot", str(sheet), "--specimen", "F1", "--out", str(out)]) == 2
    assert out.read_bytes()[:4] == b"\x89PNG"
    assert "could not be reduced" in capsys.readouterr().err
