"""The certificate, its embedded results, ``verify`` and ``plot``.

The campaign is invented: synthetic records (reduce.synthetic, known
answers) for two heats.  Heat H1 reduces completely; heat H2 has a row whose
record does not exist, so it is refused unless failed rows are included.
"""

from __future__ import annotations

import datetime
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
from reduce.store import Store
from reduce.synthetic import make_record
from reports.certificate import (ATTACHMENT_NAME, _plain, build_certificate,
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
    code = main(["certify", str(sheet), "--out", str(out)])
    results = reduce_sheet(sheet)
    sha = hashlib.sha256(sheet.read_bytes()).hexdigest()
    # first issues are numbered PREFIX-YEAR-NNNN from the QA store's sequence
    number = f"{load_lab_profile()['certificate_prefix']}-{datetime.date.today().year}-0001"
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
    # the front pages (results, statements; as many as their text needs), then two pages per specimen
    front = next(i for i, t in enumerate(pages) if f"Specimen {results[0].specimen} C(T)" in t)
    assert 2 <= front <= 3 and len(pages) == front + 2 * len(results)
    for i, r in enumerate(results):
        assert f"Specimen {r.specimen} C(T)" in pages[front + 2 * i]
        assert f"Specimen {r.specimen} (continued)" in pages[front + 2 * i + 1]
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
    spec_page = {r.specimen: pages[front + 2 * i] for i, r in enumerate(results)}
    assert "a/W is outside the permitted range" in "".join(pages)
    assert (f"KQ = {valid.K_Q_MPa_sqrt_m:.1f} MPa·√m qualifies: KIc = {valid.K_Ic_MPa_sqrt_m:.1f} MPa·√m"
            in spec_page[valid.specimen])
    assert f"KQ = {invalid.K_Q_MPa_sqrt_m:.1f} MPa·√m does not qualify as KIc" in spec_page[invalid.specimen]
    statements = next(t for t in pages[:front] if "Cautions" in t)
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
    with Store.open(campaign["dir"] / "cracktip.db", create=False) as st:
        (issue,) = st.certificates("H1")
    assert payload["certificate"]["issue_date"] == issue.issued_at[:10]  # the date the store keeps
    for entry, (r, _, _) in zip(payload["records"], rows):
        assert entry["sha256"] == hashlib.sha256((campaign["dir"] / r.record).read_bytes()).hexdigest()


def test_verify_matches_an_untouched_certificate(campaign, capsys):
    assert main(["verify", str(campaign["pdf"]), "--records", str(campaign["dir"])]) == 0
    out = capsys.readouterr().out
    assert "MATCHES" in out and "MISMATCH" not in out
    assert out.count("re-reduction from the sheet gives the same results") == 3
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
    assert "MISMATCH T1: re-reduction from the sheet differs: K_Q_MPa_sqrt_m" in out
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
    first = next(i for i, t in enumerate(_text(campaign["pdf"]), start=1) if "Specimen T1 C(T)" in t)
    subprocess.run(["pdftoppm", "-png", "-r", "60", "-f", "1", "-l", str(first + 1), str(campaign["pdf"]),
                    str(tmp_path / "page")], check=True)
    pngs = sorted(tmp_path.glob("page-*.png"))
    assert len(pngs) == first + 1
    secant = []
    for png in pngs:
        img = matplotlib.image.imread(str(png))[..., :3]
        dark = float((img.mean(axis=2) < 0.8).mean())
        assert 0.01 < dark < 0.5, (png.name, dark)
        # pixels of the secant's colour (#c0561b in reports/plots.py)
        secant.append(int((np.abs(img - np.array([0xC0, 0x56, 0x1B]) / 255).max(axis=2) < 0.15).sum()))
    # the first specimen page shows the secant in its plot; the page of its checks has none
    assert secant[first - 1] > 30 and secant[first] < 5, secant


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
    # regression: this test checked Result arithmetic, not the plot; it now reads the drawn artists
    from reports.plots import load_displacement_figure

    result, rec, _ = next(row for row in campaign["rows"] if row[0].specimen == "T1")
    assert result.curve_type == "I"
    ax = load_displacement_figure(result, rec.load_kN, rec.disp_mm).axes[0]
    line = {ln.get_label().split(",")[0]: ln for ln in ax.lines if not ln.get_label().startswith("_")}
    secant, initial, record = line["95 % secant"], line["initial line"], line["record"]
    (p5,) = [ln for ln in ax.lines if ln.get_marker() == "o"]  # P_5 is drawn as an open circle
    (v5,), (P5,) = p5.get_xdata(), p5.get_ydata()
    xs, ys = np.asarray(secant.get_xdata()), np.asarray(secant.get_ydata())
    xi, yi = np.asarray(initial.get_xdata()), np.asarray(initial.get_ydata())
    # the drawn secant runs through the origin with 0.95 times the drawn initial slope (ASTM E399 9.1.1)
    assert ys[0] == pytest.approx(0.0, abs=1e-12) and xs[0] == pytest.approx(0.0, abs=1e-12)
    assert np.polyfit(xs, ys, 1)[0] == pytest.approx(0.95 * np.polyfit(xi, yi, 1)[0], rel=1e-9)
    # the marker sits on the drawn secant and on the drawn record (within the record's noise, 0.004 kN)
    assert P5 == pytest.approx(np.interp(v5, xs, ys), rel=1e-9)
    assert P5 == pytest.approx(np.interp(v5, record.get_xdata(), record.get_ydata()), abs=0.03)
    assert P5 == pytest.approx(result.P_5_kN, rel=1e-12)


def test_plot_of_a_record_that_cannot_be_reduced_shows_the_raw_record(tmp_path, capsys):
    v = np.linspace(0.0, 0.5, 200)
    write_csv_record(tmp_path / "flat.csv", np.zeros_like(v), v)  # no positive load: no construction
    sheet = write_sheet(tmp_path / "s.csv", [dict(BASE, specimen="F1", heat="H9", record="flat.csv")])
    out = tmp_path / "f1.png"
    assert main(["plot", str(sheet), "--specimen", "F1", "--out", str(out)]) == 2
    assert out.read_bytes()[:4] == b"\x89PNG"
    assert "could not be reduced" in capsys.readouterr().err


# ------------------------------------------------------------------ tampering (review of issues 3/5/6, blocker 1)

def _rewrite(src, dst, *, page_edits=(), drop_pages=(), payload_change=None, recompute_digest=False):
    """A copy of a certificate with its content streams, pages or attachment altered.

    ``page_edits``: (page index, old bytes, new bytes) replaced in that page's
    content stream.  With ``recompute_digest`` the digest of the changed
    attachment is written into the document information and over the
    printed digest, as a forger would.
    """
    from pypdf.generic import NameObject, TextStringObject

    from reports.certificate import DIGEST_KEY, payload_digest

    w = PdfWriter(clone_from=str(src))
    old_payload = json.loads(w.attachments[ATTACHMENT_NAME][0])
    edits = list(page_edits)
    if payload_change is not None:
        payload = json.loads(json.dumps(old_payload))
        payload_change(payload)
        blob = json.dumps(payload, indent=2).encode()
        # pypdf keeps one embedded file per name: replace its bytes in place
        for obj in (w._objects[i] for i in range(len(w._objects))):
            if hasattr(obj, "get") and obj.get("/Type") == "/EmbeddedFile":
                obj.set_data(blob)
        if recompute_digest:
            new, old = payload_digest(payload), payload_digest(old_payload)
            w._info.get_object()[NameObject(DIGEST_KEY)] = TextStringObject(new)
            edits += [(i, old.encode(), new.encode()) for i in range(len(w.pages))]
    for i, old, new in edits:
        page = w.pages[i]
        c = page.get_contents()
        data = c.get_data()
        if old in data:
            c.set_data(data.replace(old, new))
            page.replace_contents(c)
    for i in sorted(drop_pages, reverse=True):
        w.remove_page(i)
    w.write(str(dst))
    return dst


def test_verify_reports_a_printed_K_changed_in_the_content_stream(campaign, tmp_path, capsys):
    # regression: a K_Q/K_Ic changed on page 1 only (attachment and digest untouched) verified as MATCHES
    payload = _payload(campaign["pdf"])
    target = next(d for d in payload["results"] if d["valid"])
    old = f"({target['K_Q_MPa_sqrt_m']:.1f}) Tj".encode()
    bad = _rewrite(campaign["pdf"], tmp_path / "k.pdf", page_edits=[(0, old, b"(99.9) Tj")])
    assert "99.9" in PdfReader(str(bad)).pages[0].extract_text()  # the change is what a reader sees
    assert main(["verify", str(bad), "--records", str(campaign["dir"])]) == 2
    out = capsys.readouterr().out
    assert "embedded results intact" in out  # the attachment was not touched
    assert (f"results table, {target['specimen']}: K_Q printed 99.9, embedded "
            f"{target['K_Q_MPa_sqrt_m']:.1f}") in out
    assert out.rstrip().endswith("DOES NOT MATCH")


def test_verify_reports_removed_pages(campaign, tmp_path, capsys):
    # regression: deleting the pages of a non-qualifying specimen left "of 8" in the footers and MATCHES
    pages = len(PdfReader(str(campaign["pdf"])).pages)
    payload = _payload(campaign["pdf"])
    gone = [d["specimen"] for d in payload["results"] if not d["valid"]][-1]
    text = _text(campaign["pdf"])
    idx = [i for i, t in enumerate(text) if f"Specimen {gone} " in t]  # its page and its continuation
    assert len(idx) == 2
    bad = _rewrite(campaign["pdf"], tmp_path / "cut.pdf", drop_pages=idx)
    assert main(["verify", str(bad), "--records", str(campaign["dir"])]) == 2
    out = capsys.readouterr().out
    assert f"page 1 of the {pages - 2} in the file says 'page 1 of {pages}'" in out
    assert f"no specimen page for {gone}" in out


def test_verify_compares_an_edited_specimen_description_with_the_sheet(campaign, tmp_path, capsys):
    # regression: the embedded description edited, the specimen re-reduced from it and the digest
    # recomputed in the document information and the page text gave "MATCHES"
    from reduce.models import Specimen
    from reduce.pipeline import reduce_specimen

    def forge(payload):
        i = next(i for i, d in enumerate(payload["results"]) if d["specimen"] == "T3")
        desc = dict(payload["results"][i]["specimen_data"], a_readings_mm=[25.1, 25.3, 25.0])
        spec = Specimen.from_description(desc, sheet=str(campaign["sheet"]))
        new, _ = reduce_specimen(spec)
        payload["results"][i] = _plain(new.to_dict())
    bad = _rewrite(campaign["pdf"], tmp_path / "forged.pdf", payload_change=forge, recompute_digest=True)
    assert main(["verify", str(bad), "--records", str(campaign["dir"])]) == 2
    out = capsys.readouterr().out
    assert "embedded results intact" in out  # the forger's digest is consistent
    assert ("MISMATCH T3: the embedded specimen description differs from the sheet (row 4): "
            "specimen_data.a_readings_mm[0]: certificate 25.1, sheet 29.0") in out


def test_verify_compares_a_description_change_that_leaves_the_printed_values(campaign, tmp_path, capsys):
    # only the sheet comparison can see this one: the yield strength is not in the printed checks read back
    from reduce.models import Specimen
    from reduce.pipeline import reduce_specimen

    def forge(payload):
        d = payload["results"][0]
        spec = Specimen.from_description(dict(d["specimen_data"], yield_MPa=510.0), sheet=str(campaign["sheet"]))
        payload["results"][0] = _plain(reduce_specimen(spec)[0].to_dict())
    bad = _rewrite(campaign["pdf"], tmp_path / "forged.pdf", payload_change=forge, recompute_digest=True)
    ok, lines = verify_certificate(bad, campaign["dir"])
    assert not ok
    assert any(ln.startswith("MISMATCH T1: the embedded specimen description differs from the sheet")
               and "specimen_data.yield_MPa: certificate 510.0, sheet 500.0" in ln for ln in lines), lines


def test_verify_reports_a_specimen_dropped_from_the_certificate(campaign, tmp_path):
    def drop(payload):
        payload["results"] = [d for d in payload["results"] if d["specimen"] != "T2"]
        payload["records"] = [e for e in payload["records"] if e["specimen"] != "T2"]
    bad = _rewrite(campaign["pdf"], tmp_path / "less.pdf", payload_change=drop, recompute_digest=True)
    ok, lines = verify_certificate(bad, campaign["dir"])
    assert not ok and "MISMATCH T2: in the sheet as heat H1, but not on the certificate" in lines


# ------------------------------------------------------------------ verify --db, reprints, dates

@pytest.fixture
def revised(campaign, tmp_path):
    """A copy of the campaign whose heat H1 was approved again and re-issued as revision 1."""
    d = tmp_path / "camp"
    shutil.copytree(campaign["dir"], d)
    sheet, db = d / "sheet.csv", d / "cracktip.db"
    assert main(["accept", str(sheet), "--spec", str(d / "spec.toml")]) == 2
    assert main(["approve", "H1", "--by", "B. Second", "--decision", "accept", "--db", str(db)]) == 0
    assert main(["certify", str(sheet), "--heat", "H1", "--out", str(d / "certs")]) == 0
    rev0 = d / "certs" / campaign["pdf"].name
    rev1 = rev0.with_name(rev0.stem + "-rev1.pdf")
    assert rev1.is_file()
    return {"dir": d, "sheet": sheet, "db": db, "rev0": rev0, "rev1": rev1}


def test_verify_db_reports_a_superseded_issue(revised, capsys):
    # regression: rev. 0, superseded, verified as MATCHES without a word about it
    capsys.readouterr()
    assert main(["verify", str(revised["rev0"]), "--db", str(revised["db"])]) == 2
    out = capsys.readouterr().out
    number = _payload(revised["rev0"])["certificate"]["number"]
    assert "the PDF is byte for byte the " + f"{number} rev. 0" in out
    assert f"SUPERSEDED by {number} rev. 1" in out
    assert out.rstrip().endswith(f"MATCHES its data, but it is SUPERSEDED by {number} rev. 1 "
                                 f"(issued {_payload(revised['rev1'])['certificate']['issue_date']})")
    assert main(["verify", str(revised["rev1"]), "--db", str(revised["db"])]) == 0
    assert capsys.readouterr().out.rstrip().endswith("MATCHES; the current issue in the QA store")


def test_verify_db_reports_a_pdf_that_is_not_the_stored_issue(revised, tmp_path, capsys):
    same_data = _rewrite(revised["rev1"], tmp_path / "resaved.pdf")  # the same content, other bytes
    assert main(["verify", str(same_data), "--db", str(revised["db"])]) == 2
    assert "is not the one issued as" in capsys.readouterr().out


def test_verify_db_says_a_draft_is_a_draft(campaign, tmp_path, capsys):
    # regression: a draft verified as MATCHES and "issued"
    assert main(["certify", str(campaign["sheet"]), "--heat", "H1", "--draft", "--out", str(tmp_path)]) == 0
    capsys.readouterr()
    assert main(["verify", str(tmp_path / "DRAFT-H1.pdf"), "--db", str(campaign["dir"] / "cracktip.db")]) == 2
    out = capsys.readouterr().out
    assert "draft (no certificate number), heat H1, drafted" in out and "issued 20" not in out
    assert out.rstrip().endswith("MATCHES its data, but it is a DRAFT, not an issued certificate "
                                 "(the QA store keeps no drafts)")


def test_a_reprint_writes_the_stored_pdf_without_building_one(revised, monkeypatch, capsys):
    # regression: a reprint built a fresh PDF at the issued path, then overwrote it with the stored bytes
    import reports.certificate

    def no_build(*a, **k):
        raise AssertionError("a reprint must not build a certificate")
    monkeypatch.setattr(reports.certificate, "build_certificate", no_build)
    revised["rev1"].write_bytes(b"damaged copy")
    assert main(["certify", str(revised["sheet"]), "--heat", "H1", "--out", str(revised["dir"] / "certs")]) == 0
    assert "written again exactly as issued" in capsys.readouterr().out
    with Store.open(revised["db"], create=False) as st:
        stored = st.certificate_pdf(st.certificates("H1")[-1].id)
    assert revised["rev1"].read_bytes() == stored


@pytest.mark.parametrize("bad", ["2025-13-45", "hello world", "15.01.2026", "2999-01-01"])
def test_certify_date_must_be_a_past_iso_date(campaign, tmp_path, capsys, bad):
    # regression: --date 2025-13-45 and "hello world" were printed as the date of issue
    with pytest.raises(SystemExit) as exc:
        main(["certify", str(campaign["sheet"]), "--heat", "H1", "--draft", "--date", bad, "--out", str(tmp_path)])
    assert exc.value.code == 2
    assert "argument --date" in capsys.readouterr().err
    assert list(tmp_path.iterdir()) == []


def test_numbered_certificate_refuses_a_backdated_date(revised, capsys):
    # regression: an issued rev. 3 was printed "issued 2019-02-30" while the store said today
    sheet, out = revised["sheet"], revised["dir"] / "new"
    capsys.readouterr()
    assert main(["certify", str(sheet), "--heat", "H1", "--out", str(out), "--date", "2019-02-28"]) == 2
    err = capsys.readouterr().err
    assert "--date 2019-02-28 is refused for the numbered certificate" in err and "drafts only" in err
    assert not out.exists() or list(out.iterdir()) == []


def test_draft_is_drafted_not_issued(campaign, tmp_path):
    assert main(["certify", str(campaign["sheet"]), "--heat", "H1", "--draft", "--date", "2026-01-15",
                 "--out", str(tmp_path)]) == 0
    pages = _text(tmp_path / "DRAFT-H1.pdf")
    assert all("drafted 2026-01-15" in t for t in pages)
    assert "Drafted\n2026-01-15" in pages[0]
    assert not any("Date of issue" in t or "issued 2026" in t for t in pages)


# ------------------------------------------------------------------ what is printed

def test_certificate_prints_every_input_needed_to_recheck(tmp_path):
    # regression: E, the tensile strength, nu, precrack K_max and the knife-edge z were not printed
    rec = make_record("I", k=40.0, P_y=8.0, noise_kN=0.004, offset_mm=0.02, seed=0)
    write_csv_record(tmp_path / "i1.csv", rec.load_kN, rec.disp_mm, rec.time_s)
    sheet = write_sheet(tmp_path / "s.csv", [
        dict(BASE, specimen="I1", heat="HI", record="i1.csv", E_GPa=71.7, tensile_MPa=560,
             precrack_Kmax_MPa_sqrt_m=5.5, poisson=0.33),
        dict(BASE, specimen="I2", heat="HI", record="i1.csv", tensile_MPa="", precrack_Kmax_MPa_sqrt_m="",
             poisson="")])
    assert main(["certify", str(sheet), "--draft", "--out", str(tmp_path / "c")]) == 0
    text = [" ".join(t.split()) for t in _text(tmp_path / "c" / "DRAFT-HI.pdf")]
    given, assumed = text[2], text[4]  # the first page of each specimen
    for want in ("E 71.7 GPa", "σTS 560 MPa", "ν 0.33 (given)", "Precrack Kmax 5.5 MPa·√m",
                 "Knife-edge z not given: 0 used for the CTOD", "Displacement load-line displacement",
                 "σYS 500 MPa"):
        assert want in given, want
    for want in ("E 72 GPa", "σTS not given: σY = σYS used", "Precrack Kmax not given",
                 "ν 0.3 (assumed: not given)"):
        assert want in assumed, want


def test_check_table_values_have_four_significant_digits_and_a_unit(campaign):
    # regression: the value column mixed 0.0001199, 0.000008639 and a unitless 0.5485
    from reports.certificate import significant

    result = next(r for r, _, _ in campaign["rows"] if r.specimen == "T1")
    checks_page = next(t for t in _text(campaign["pdf"]) if "Specimen T1 (continued)" in t)
    page = " ".join(checks_page.split())
    for c in result.checks:
        if c.value is not None:
            assert significant(c.value) in page, c.name
    assert "Unit" in page and " mm " in page and " ratio " in page
    assert "straightness *" in checks_page  # the core mark no longer wraps onto a line of its own


def test_lab_profile_refuses_an_unknown_entry(tmp_path):
    # regression: a typo 'acreditation' dropped the accreditation line without a word
    p = tmp_path / "lab.toml"
    p.write_text('name = "L"\ncertificate_prefix = "X"\nacreditation = "No. 1"\n'
                 '[[signatories]]\nname = "A"\nrole = "B"\n')
    with pytest.raises(ReportError, match=r"lab.toml: unknown entry 'acreditation'; did you mean 'accreditation'"):
        load_lab_profile(p)
    p.write_text('name = "L"\ncertificate_prefix = "X"\n[[signatories]]\nname = "A"\nrol = "B"\n')
    with pytest.raises(ReportError, match=r"lab.toml: \[\[signatories\]\] 1: unknown entry 'rol'"):
        load_lab_profile(p)


def test_reading_a_non_pdf_logs_nothing_from_pypdf(tmp_path, capsys, caplog):
    # regression: "invalid pdf header" and "EOF marker not found" leaked before the clean message
    import logging

    (tmp_path / "x.pdf").write_bytes(b"this is a text file, not a PDF\n")
    caplog.set_level(logging.WARNING)
    assert main(["verify", str(tmp_path / "x.pdf")]) == 2
    assert "not a readable PDF" in capsys.readouterr().err
    assert not [r for r in caplog.records if r.name.startswith("pypdf")]


def test_embedded_sheet_path_is_relative_to_the_certificate(campaign):
    # regression: an absolute sheet path put the local folder into the embedded JSON
    sheet = _payload(campaign["pdf"])["sheet"]
    assert sheet["path"] == "../sheet.csv" and sheet["name"] == "sheet.csv"
    assert str(campaign["dir"]) not in json.dumps(_payload(campaign["pdf"]))


def test_heats_H_slash_1_and_H_underscore_1_get_distinct_numbers(tmp_path, capsys):
    # regression: both got the same number and the store's UNIQUE(number, revision) raised a traceback
    for seed in (1, 2):
        rec = make_record("III", k=40.0, P_y=8.0, noise_kN=0.004, offset_mm=0.02, seed=seed)
        write_csv_record(tmp_path / f"r{seed}.csv", rec.load_kN, rec.disp_mm, rec.time_s)
    sheet = write_sheet(tmp_path / "s.csv", [dict(BASE, specimen="S1", heat="H/1", record="r1.csv"),
                                             dict(BASE, specimen="S2", heat="H_1", record="r2.csv")])
    (tmp_path / "spec.toml").write_text('[specification]\nname = "T"\n[[requirement]]\norientation = "L-T"\n'
                                        'temperature_C = 21\nmin_K_Ic_MPa_sqrt_m = 1.0\nmin_valid = 1\n')
    assert main(["accept", str(sheet), "--spec", str(tmp_path / "spec.toml")]) == 0
    for heat in ("H/1", "H_1"):
        assert main(["approve", heat, "--by", "A", "--decision", "accept", "--db", str(tmp_path / "cracktip.db")]) == 0
    assert main(["certify", str(sheet), "--out", str(tmp_path / "c")]) == 0
    with Store.open(tmp_path / "cracktip.db", create=False) as st:
        numbers = {c.heat: c.number for c in st.certificates()}
    assert set(numbers) == {"H/1", "H_1"} and numbers["H/1"] != numbers["H_1"]
    assert len(list((tmp_path / "c").glob("*.pdf"))) == 2
