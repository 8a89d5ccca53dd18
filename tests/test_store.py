"""The QA store: transactions, versions, approvals and certificates."""

import json
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest

from reduce.errors import ApprovalError, StoreError
from reduce.models import Result
from reduce.qa import CertificateSession, approve, history_events, rule_set_content
from reduce.store import SCHEMA_VERSION, Store

REPO = Path(__file__).resolve().parent.parent
RULES = rule_set_content("e399")


class Clock:
    """A clock that moves one second per call, so times are distinct and known."""

    def __init__(self):
        self.t = 0

    def __call__(self):
        self.t += 1
        return f"2031-03-0{1 + self.t // 86400}T09:{self.t // 60 % 60:02d}:{self.t % 60:02d}+00:00"


def result(specimen, K, heat="H1", valid=True, a_mm=25.1, sha="ab" * 32):
    return Result(specimen=specimen, geometry="C(T)", rule_set="e399", heat=heat, K_Q_MPa_sqrt_m=K,
                  valid=valid, K_Ic_MPa_sqrt_m=K if valid else None, a_mm=a_mm, record=f"{specimen}.csv",
                  record_sha256=sha,
                  specimen_data={"orientation": "L-T", "temperature_C": 21.0, "metadata": {"material": "7075"}})


def add(store, r):
    return store.add_reduction(r.to_dict(), rule_set="e399", rule_set_content=RULES, sheet="/lab/sheet.csv",
                               sheet_sha256="cd" * 32, sheet_row=2, record_path=f"/lab/{r.specimen}.csv")


def verdict(store, heat, reds, outcome="accepted"):
    return store.add_verdict(heat=heat, verdict=outcome, reason="constructed for the test", detail={},
                             specification={"name": "T-1 rev. A", "file": "t1.toml", "text": "name = 'T-1'"},
                             rule_set="e399", rule_set_content=RULES,
                             reductions=[(r.id, "counted") for r in reds])


@pytest.fixture
def store(tmp_path):
    with Store.open(tmp_path / "qa.db", clock=Clock()) as st:
        yield st


def _accepted_heat(store, Ks=(28.0, 29.0, 30.0)):
    with store.transaction("accept"):
        reds = [add(store, result(f"S{i}", K)) for i, K in enumerate(Ks, start=1)]
        vid = verdict(store, "H1", reds)
    return reds, vid


# ---------------------------------------------------------------- transactions

def test_a_run_that_raises_part_way_leaves_no_partial_rows(store):
    _accepted_heat(store)
    before = store.counts()
    with pytest.raises(RuntimeError, match="power cut"):
        with store.transaction("accept"):
            reds = [add(store, result("S1", 27.0)), add(store, result("S9", 31.0))]
            verdict(store, "H1", reds)
            assert store.counts()["reductions"] == before["reductions"] + 2  # written, not yet kept
            raise RuntimeError("power cut")
    assert store.counts() == before
    assert store.latest_reduction("H1", "S1").version == 1


def test_a_process_killed_inside_the_transaction_leaves_the_database_as_it_was(tmp_path):
    db = tmp_path / "qa.db"
    with Store.open(db) as st:
        with st.transaction("accept"):
            add(st, result("S1", 28.0))
        before = st.counts()
    script = (f"import os, sys, json\nsys.path.insert(0, {str(REPO)!r})\n"
              "from reduce.store import Store\nfrom reduce.qa import rule_set_content\n"
              f"st = Store.open({str(db)!r})\n"
              "with st.transaction('accept'):\n"
              f"    st.add_reduction(json.loads({json.dumps(json.dumps(result('S2', 30.0).to_dict()))}),"
              " rule_set='e399', rule_set_content=rule_set_content('e399'))\n"
              "    os._exit(9)\n")
    proc = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 9, proc.stderr
    with Store.open(db) as st:
        assert st.counts() == before
        assert st.latest_reduction("H1", "S2") is None


def test_writes_outside_a_transaction_are_refused(store):
    with pytest.raises(StoreError, match="only inside"):
        add(store, result("S1", 28.0))


def test_rows_are_never_changed_or_deleted(tmp_path):
    db = tmp_path / "qa.db"
    with Store.open(db) as st, st.transaction("accept"):
        add(st, result("S1", 28.0))
    con = sqlite3.connect(db)
    for sql in ("UPDATE reductions SET K_Ic = 99", "DELETE FROM reductions", "DELETE FROM runs"):
        with pytest.raises(sqlite3.DatabaseError, match="append-only"):
            con.execute(sql)
    con.close()


# ---------------------------------------------------------------- versions

def test_re_reduction_keeps_both_versions(store):
    with store.transaction("accept"):
        v1 = add(store, result("S1", 28.0, a_mm=25.1))
    with store.transaction("accept"):
        v2 = add(store, result("S1", 27.6, a_mm=25.3))  # crack length corrected
        same = add(store, result("S1", 27.6, a_mm=25.3))
    assert (v1.version, v2.version, v1.new, v2.new) == (1, 2, True, True)
    assert same.id == v2.id and not same.new  # nothing changed: no third version
    both = store.reductions(specimen="S1")
    assert [(r.version, r.K_Ic, r.result["a_mm"]) for r in both] == [(1, 28.0, 25.1), (2, 27.6, 25.3)]
    assert store.latest_reduction("H1", "S1").id == v2.id
    _, events = history_events(store, "S1")
    assert [e.version for kind, e in events if kind == "reduction"] == [1, 2]


def test_a_reduction_keeps_its_record_rule_set_and_program_version(store):
    with store.transaction("accept"):
        r = add(store, result("S1", 28.0))
    assert (r.record_path, r.record_sha256, r.rule_set, r.sheet_path) == ("/lab/S1.csv", "ab" * 32, "e399",
                                                                          "/lab/sheet.csv")
    assert r.program_version and r.created_at.startswith("2031-03-01")
    assert r.result["K_Ic_MPa_sqrt_m"] == 28.0


# ---------------------------------------------------------------- approvals

def test_an_approval_records_the_reduction_versions_it_saw(store):
    reds, vid = _accepted_heat(store)
    with store.transaction("approve"):
        a, v = approve(store, "H1", by="R. Lindqvist", decision="accept", comment="ok")
    assert a.verdict_id == vid == v.id
    assert sorted(a.reduction_ids) == sorted(r.id for r in reds)
    # a later correction adds a version; the approval still names the old ones
    with store.transaction("accept"):
        new = add(store, result("S2", 28.7, a_mm=25.4))
    assert store.approval(a.id).reduction_ids == a.reduction_ids and new.id not in a.reduction_ids
    with pytest.raises(ApprovalError, match="S2: the verdict saw v1, the latest is v2"):
        with store.transaction("approve"):
            approve(store, "H1", by="R. Lindqvist", decision="accept")


def test_only_an_accepted_verdict_can_be_approved_for_acceptance(store):
    with store.transaction("accept"):
        verdict(store, "H1", [add(store, result("S1", 20.0))], outcome="rejected")
    with pytest.raises(ApprovalError, match="only an accepted heat"):
        with store.transaction("approve"):
            approve(store, "H1", by="R. Lindqvist", decision="accept")
    with store.transaction("approve"):
        a, _ = approve(store, "H1", by="R. Lindqvist", decision="reject")
    assert a.decision == "reject"


def test_approving_a_heat_without_verdict_is_refused(store):
    with pytest.raises(ApprovalError, match="no verdict on heat 'H7'"):
        with store.transaction("approve"):
            approve(store, "H7", by="R. Lindqvist", decision="accept")


# ---------------------------------------------------------------- certificates

def test_a_certificate_cannot_be_issued_before_approval(store):
    _accepted_heat(store)
    with pytest.raises(ApprovalError, match="no accepting approval"):
        with store.transaction("certify"):
            store.add_certificate(heat="H1", approval_id=1, number="CT-1", revision=0, supersedes_id=None,
                                  pdf=b"%PDF", file=None)
    with store.transaction("approve"):
        a, _ = approve(store, "H1", by="R. Lindqvist", decision="reject")
    with pytest.raises(ApprovalError, match="no accepting approval"):
        with store.transaction("certify"):
            store.add_certificate(heat="H1", approval_id=a.id, number="CT-1", revision=0, supersedes_id=None,
                                  pdf=b"%PDF", file=None)
    assert store.counts()["certificates"] == 0


def _rows(results):
    return [(r, None, None) for r in results]


def _certify(store, rows, tmp_path, name):
    with store.transaction("certify"):
        session = CertificateSession(store, "e399")
        opts = session.options("H1", rows)
        path = tmp_path / name
        path.write_bytes(b"%PDF-" + name.encode())  # stands for the PDF the builder writes
        session.record("H1", path)
    return opts, path


def test_draft_until_approved_then_issued_then_revised_without_losing_the_original(store, tmp_path):
    fresh = [result(f"S{i}", K) for i, K in enumerate((28.0, 29.0, 30.0), start=1)]
    _accepted_heat(store)
    opts, _ = _certify(store, _rows(fresh), tmp_path, "draft.pdf")
    assert opts["draft"] and opts["certificate_number"] is None
    assert store.counts()["certificates"] == 0

    with store.transaction("approve"):
        approve(store, "H1", by="R. Lindqvist", decision="accept")
    opts, first = _certify(store, _rows(fresh), tmp_path, "first.pdf")
    assert not opts["draft"] and opts["revision"] == 0 and opts["supersedes"] is None
    assert opts["approval"]["approver"] == "R. Lindqvist"
    number = opts["certificate_number"]
    assert number == "CT-2031-0001"

    # certifying again under the same approval writes the issued PDF again, no new issue
    again, copy = _certify(store, _rows(fresh), tmp_path, "again.pdf")
    assert (again["certificate_number"], again["revision"]) == (number, 0)
    assert copy.read_bytes() == first.read_bytes() and store.counts()["certificates"] == 1

    # a corrected result makes the approved data stale: a draft until accepted and approved again
    fixed = [fresh[0], result("S2", 28.6, a_mm=25.4), fresh[2]]
    opts, _ = _certify(store, _rows(fixed), tmp_path, "stale.pdf")
    assert opts["draft"]
    with store.transaction("accept"):
        reds = [add(store, r) for r in fixed]
        verdict(store, "H1", reds)
    with store.transaction("approve"):
        approve(store, "H1", by="R. Lindqvist", decision="accept", comment="S2 crack length corrected")
    opts, second = _certify(store, _rows(fixed), tmp_path, "second.pdf")
    assert (opts["certificate_number"], opts["revision"], opts["supersedes"]) == (number, 1, f"{number} rev. 0")
    certs = store.certificates("H1")
    assert [(c.number, c.revision, c.supersedes) for c in certs] == [(number, 0, None),
                                                                    (number, 1, f"{number} rev. 0")]
    assert store.certificate_pdf(certs[0].id) == b"%PDF-first.pdf"  # the original is kept
    _, events = history_events(store, "H1")
    kinds = [k for k, _ in events]
    assert kinds.count("certificate") == 2 and kinds.count("approval") == 2 and kinds.count("verdict") == 2


def test_no_store_means_drafts_only(tmp_path):
    session = CertificateSession(None, "e399")
    assert session.options("H1", _rows([result("S1", 28.0)]))["draft"]
    assert "no QA store" in session.explain("H1")


# ---------------------------------------------------------------- the file itself

def test_a_database_from_a_newer_program_is_refused(tmp_path):
    db = tmp_path / "qa.db"
    Store.open(db).close()
    con = sqlite3.connect(db)
    con.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    con.close()
    with pytest.raises(StoreError, match="newer cracktip"):
        Store.open(db)


def test_files_that_are_not_a_cracktip_store_are_refused(tmp_path):
    other = tmp_path / "other.db"
    con = sqlite3.connect(other)
    con.execute("CREATE TABLE t (x)")
    con.close()
    with pytest.raises(StoreError, match="not a cracktip store"):
        Store.open(other)
    junk = tmp_path / "junk.db"
    junk.write_bytes(b"not a database at all, just some bytes " * 50)
    with pytest.raises(StoreError, match="not a usable cracktip store"):
        Store.open(junk)
    with pytest.raises(StoreError, match="no cracktip store here"):
        Store.open(tmp_path / "absent.db", create=False)


# ---------------------------------------------------------------- the whole QA workflow on the demo campaign

def test_sheet_to_accepted_heat_approval_certificate_and_revision(tmp_path, capsys):
    import shutil

    from pypdf import PdfReader

    from reduce.cli import main

    camp = tmp_path / "camp"
    shutil.copytree(REPO / "sample_data", camp, ignore=shutil.ignore_patterns("*.db", "certificates", "*.py"))
    sheet, spec, db, out = camp / "campaign.csv", camp / "spec_example.toml", camp / "cracktip.db", tmp_path / "c"

    assert main(["accept", str(sheet), "--spec", str(spec)]) == 0
    assert "H-7A21: ACCEPTED" in capsys.readouterr().out
    assert main(["certify", str(sheet), "--heat", "H-7A21", "--out", str(out)]) == 0
    assert "DRAFT, no certificate number: heat H-7A21 is not approved" in capsys.readouterr().out
    (draft,) = out.glob("*.pdf")
    assert draft.name == "DRAFT-H-7A21.pdf"
    assert all("DRAFT" in p.extract_text() for p in PdfReader(str(draft)).pages)

    assert main(["approve", "H-7A21", "--by", "M. Ferreira", "--decision", "accept", "--db", str(db)]) == 0
    capsys.readouterr()
    assert main(["certify", str(sheet), "--heat", "H-7A21", "--out", str(out)]) == 0
    said = capsys.readouterr().out
    with Store.open(db, create=False) as st:
        (first,) = st.certificates("H-7A21")
    assert f"certificate {first.number} rev. 0" in said and "approved by M. Ferreira" in said
    issued = Path(first.file)
    text = PdfReader(str(issued)).pages[0].extract_text()
    assert first.number in text and "M. Ferreira" in text and "DRAFT" not in text

    # a correction: AL-03's middle crack-length reading was mistyped
    sheet.write_text(sheet.read_text().replace("25.25,25.55,25.35", "25.25,25.50,25.35"))
    assert main(["certify", str(sheet), "--heat", "H-7A21", "--out", str(out)]) == 0
    said = capsys.readouterr().out
    assert "the results differ from those approved" in said
    assert "AL-03 (approved v1): specimen_data.a_readings_mm[1] 25.55 → 25.5; K_Ic_MPa_sqrt_m" in said
    assert main(["accept", str(sheet), "--spec", str(spec)]) == 0
    assert "1 new reduction version(s), 11 unchanged" in capsys.readouterr().out
    assert main(["approve", "H-7A21", "--by", "M. Ferreira", "--decision", "accept", "--db", str(db),
                 "--comment", "AL-03 a2 corrected"]) == 0
    assert main(["certify", str(sheet), "--heat", "H-7A21", "--out", str(out)]) == 0
    with Store.open(db, create=False) as st:
        certs = st.certificates("H-7A21")
        assert [(c.revision, c.supersedes) for c in certs] == [(0, None), (1, f"{first.number} rev. 0")]
        assert st.certificate_pdf(certs[0].id) == issued.read_bytes()  # the original, unchanged
        revised = Path(certs[1].file)
    assert revised != issued and issued.is_file() and revised.name.endswith("-rev1.pdf")
    assert f"{first.number} rev. 0" in PdfReader(str(revised)).pages[0].extract_text()

    capsys.readouterr()
    assert main(["history", "H-7A21", "--db", str(db)]) == 0
    trail = capsys.readouterr().out
    assert "AL-03 v1" in trail and "[superseded by v2]" in trail and "AL-03 v2" in trail
    assert trail.count("approval    H-7A21") == 2 and trail.count("certificate ") == 2
    assert 'comment "AL-03 a2 corrected"' in trail

    assert main(["trend", "--material", "7075", "--orientation", "L-T", "--db", str(db),
                 "--out", str(tmp_path / "trend.png")]) == 0
    assert (tmp_path / "trend.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert "lower tolerance bound" in capsys.readouterr().out


def test_trend_uses_latest_valid_K_Ic_and_flags_heats_below_the_bound(store):
    import numpy as np

    from reduce.qa import trend_data
    from reduce.tolerance import one_sided_k_factor

    heats = {"H1": [30.1, 29.6, 30.4, 30.0, 29.8], "H2": [30.3, 29.9, 30.6, 29.7, 30.2],
             "H3": [29.5, 30.0, 30.8, 30.1, 29.9], "H5": [24.0, 30.2]}
    with store.transaction("accept"):
        for heat, Ks in heats.items():
            for i, K in enumerate(Ks):
                add(store, result(f"{heat}-{i}", K, heat=heat))
        add(store, result("H5-9", 15.0, heat="H5", valid=False))  # a K_Q: never in the trend
        add(store, result("H1-0", 10.0, heat="H1", a_mm=99.0))  # first a mistyped value …
    with store.transaction("accept"):
        add(store, result("H1-0", 30.1, heat="H1", a_mm=25.1))  # … then corrected: only v3 counts
    rows = store.trend_rows("7075", "L-T")
    assert store.trend_rows("7075", "T-L") == [] and store.trend_rows("4340") == []
    data = trend_data(rows, 0.95, 0.95)
    values = np.array([v for vs in heats.values() for v in vs])
    lower = values.mean() - one_sided_k_factor(values.size) * values.std(ddof=1)
    assert data["bound"].n == values.size and data["bound"].lower == pytest.approx(lower, rel=1e-12)
    assert data["flagged"] == ["H5"] and 24.0 < lower
    assert [h for h, _, _ in data["heats"]] == ["H1", "H2", "H3", "H5"]


def test_a_numbered_pdf_the_store_could_not_record_is_removed(store, tmp_path, monkeypatch):
    fresh = [result(f"S{i}", K) for i, K in enumerate((28.0, 29.0, 30.0), start=1)]
    _accepted_heat(store)
    with store.transaction("approve"):
        approve(store, "H1", by="R. Lindqvist", decision="accept")

    def disk_full(**kw):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(store, "add_certificate", disk_full)
    path = tmp_path / "CT-1.pdf"
    with pytest.raises(OSError):
        with store.transaction("certify"):
            session = CertificateSession(store, "e399")
            assert not session.options("H1", _rows(fresh))["draft"]
            path.write_bytes(b"%PDF-numbered")
            session.record("H1", path)
    assert not path.exists() and store.counts()["certificates"] == 0


# ---------------------------------------------------------------- review finding 3: no tracebacks

def _cli(argv, capsys):
    from reduce.cli import main

    code = main(argv)
    out = capsys.readouterr()
    assert "Traceback" not in out.err
    return code, out.out, out.err


@pytest.mark.parametrize("option, value", [("--content", "1.5"), ("--content", "0"), ("--confidence", "1"),
                                           ("--confidence", "ninety"), ("--content", "nan")])
def test_trend_content_or_confidence_outside_0_to_1_is_refused_by_the_parser(option, value, capsys):
    from reduce.cli import main

    with pytest.raises(SystemExit) as stop:
        main(["trend", "--material", "7075", option, value])
    assert stop.value.code == 2
    assert f"argument {option}: expected a fraction between 0 and 1" in capsys.readouterr().err


def _holding_lock(db, kind):
    con = sqlite3.connect(db, isolation_level=None)
    con.execute(f"BEGIN {kind}")
    return con


def test_a_locked_store_gives_a_store_error_naming_the_file_not_a_traceback(tmp_path, monkeypatch, capsys):
    import reduce.store

    db = tmp_path / "qa.db"
    with Store.open(db, clock=Clock()) as st:
        _accepted_heat(st)
    monkeypatch.setattr(reduce.store, "LOCK_TIMEOUT_S", 0.05)  # no 30 s wait in a test
    other = _holding_lock(db, "IMMEDIATE")  # another run is writing
    try:
        code, _, err = _cli(["approve", "H1", "--by", "R. Lindqvist", "--decision", "accept", "--db", str(db)],
                            capsys)
        assert code == 2
        assert str(db) in err and "in use by another cracktip run" in err and "try again" in err
    finally:
        other.rollback()
        other.close()
    other = _holding_lock(db, "EXCLUSIVE")  # another run is committing: even reads wait
    try:
        code, _, err = _cli(["history", "--db", str(db)], capsys)
        assert code == 2 and str(db) in err and "in use by another cracktip run" in err
    finally:
        other.rollback()
        other.close()
    with Store.open(db, create=False) as st:  # nothing was written by the refused runs
        assert st.counts()["approvals"] == 0


def test_sqlite_errors_inside_reads_and_writes_become_store_errors(tmp_path):
    db = tmp_path / "qa.db"
    st = Store.open(db, clock=Clock())
    _accepted_heat(st)
    st.close()
    with pytest.raises(StoreError, match=str(db).replace("\\", "\\\\")):
        st.heats()  # a read on a closed store
    with Store.open(db, clock=Clock()) as st:
        with st.transaction("approve"):
            a, _ = approve(st, "H1", by="R. Lindqvist", decision="accept")
        with st.transaction("certify"):
            st.add_certificate(heat="H1", approval_id=a.id, number="CT-1", revision=0, supersedes_id=None,
                               pdf=b"%PDF-1", file=None)
        with pytest.raises(StoreError, match="refused the operation .*UNIQUE"):
            with st.transaction("certify"):  # the same number and revision again
                st.add_certificate(heat="H1", approval_id=a.id, number="CT-1", revision=0, supersedes_id=None,
                                   pdf=b"%PDF-2", file=None)
        assert st.counts()["certificates"] == 1


@pytest.mark.parametrize("command", [["approve", "H1", "--by", "X", "--decision", "accept"], ["history"],
                                     ["trend", "--material", "7075"]])
def test_db_pointing_to_a_folder_or_a_file_that_is_no_store_is_a_clear_error(command, tmp_path, capsys):
    text = tmp_path / "notes.txt"
    text.write_text("minutes of the QA meeting\n" * 40)
    for db, expected in ((tmp_path, "is a folder, not a store"), (text, "not a usable cracktip store")):
        code, _, err = _cli(command + ["--db", str(db)], capsys)
        assert code == 2 and str(db) in err and expected in err


def test_accept_with_db_pointing_to_a_folder_or_a_file_that_is_no_store_is_a_clear_error(tmp_path, capsys):
    import shutil

    camp = tmp_path / "camp"
    shutil.copytree(REPO / "sample_data", camp, ignore=shutil.ignore_patterns("*.db", "certificates", "*.py"))
    text = camp / "notes.txt"
    text.write_text("minutes of the QA meeting\n" * 40)
    for db, expected in ((camp, "is a folder, not a store"), (text, "not a usable cracktip store")):
        code, _, err = _cli(["accept", str(camp / "campaign.csv"), "--spec", str(camp / "spec_example.toml"),
                             "--db", str(db)], capsys)
        assert code == 2 and expected in err
    assert text.read_text().startswith("minutes")  # left as it was


def test_approve_of_an_unknown_heat_and_history_of_an_unknown_id_are_clear_errors(tmp_path, capsys):
    db = tmp_path / "qa.db"
    with Store.open(db, clock=Clock()) as st:
        _accepted_heat(st)
    code, _, err = _cli(["approve", "H9", "--by", "X", "--decision", "accept", "--db", str(db)], capsys)
    assert code == 2 and "no verdict on heat 'H9' (heats in the store: H1)" in err
    code, _, err = _cli(["history", "S99", "--db", str(db)], capsys)
    assert code == 2 and "no heat or specimen named 'S99' (heats: H1)" in err
    code, _, err = _cli(["history", "--db", str(tmp_path / "absent.db")], capsys)
    assert code == 2 and "no cracktip store here" in err


# ---------------------------------------------------------------- review finding 6: what differs from the approval

def _approved(store, Ks=(28.0, 29.0, 30.0)):
    reds, _ = _accepted_heat(store, Ks)
    with store.transaction("approve"):
        approve(store, "H1", by="R. Lindqvist", decision="accept")
    return reds


def _options(store, results, **kw):
    with store.transaction("certify"):
        session = CertificateSession(store, "e399")
        opts = session.options("H1", _rows(results), **kw)
        return opts, session.explain("H1")


def test_certify_names_the_specimen_the_field_and_old_and_new_values_that_differ_from_the_approval(store):
    _approved(store)
    changed = [result("S1", 28.0), result("S2", 28.6, a_mm=25.4), result("S3", 30.0)]
    opts, said = _options(store, changed)
    assert opts["draft"]
    assert "the results differ from those approved (approval #1 by R. Lindqvist" in said
    assert "S2 (approved v1): K_Ic_MPa_sqrt_m 29 → 28.6; K_Q_MPa_sqrt_m 29 → 28.6; a_mm 25.1 → 25.4" in said
    assert "S1" not in said.split("\n", 1)[1] and "S3" not in said.split("\n", 1)[1]
    # a specimen added to or dropped from the sheet is named too
    opts, said = _options(store, [result("S1", 28.0), result("S2", 29.0)])
    assert opts["draft"] and "S3: approved (v1), but no longer in the sheet" in said
    opts, said = _options(store, [result(f"S{i}", K) for i, K in ((1, 28.0), (2, 29.0), (3, 30.0), (4, 31.0))])
    assert opts["draft"] and "S4: in the sheet now, but not among the approved results" in said


def test_results_equal_within_the_stated_tolerance_keep_the_approval(store):
    _approved(store)
    # P_5 in the 14th digit, as after an unrelated code change (review finding 6)
    same = [result("S1", 28.0 * (1 + 1e-13)), result("S2", 29.0), result("S3", 30.0)]
    assert not _options(store, same)[0]["draft"]
    off = [result("S1", 28.0 * (1 + 1e-8)), result("S2", 29.0), result("S3", 30.0)]
    opts, said = _options(store, off)
    assert opts["draft"] and "S1 (approved v1): K_Ic_MPa_sqrt_m 28 → 28.00000028" in said


def test_a_new_program_version_with_identical_results_keeps_the_approval_and_names_both_versions(store,
                                                                                                 monkeypatch):
    import reduce.store

    now = reduce.store.__version__
    monkeypatch.setattr(reduce.store, "__version__", "0.0.9+src.000000000000")
    _approved(store)  # reduced and approved under the older program
    monkeypatch.setattr(reduce.store, "__version__", now)
    fresh = [result(f"S{i}", K) for i, K in enumerate((28.0, 29.0, 30.0), start=1)]
    opts, said = _options(store, fresh)
    assert not opts["draft"]
    assert opts["approval"]["results_reduced_with"] == ["cracktip 0.0.9+src.000000000000"]
    assert "reduced with cracktip 0.0.9+src.000000000000" in said and f"this run (cracktip {now})" in said
    assert "approval #1 stands" in said


def test_certify_and_verify_compare_results_at_the_same_tolerance():
    from reduce import certify, qa

    assert (qa.RESULTS_REL_TOL, qa.RESULTS_ABS_TOL) == (certify.VERIFY_REL_TOL, certify.VERIFY_ABS_TOL)


# ---------------------------------------------------------------- certificate numbers

def test_first_issues_are_numbered_from_the_store_sequence_with_the_lab_prefix(store, tmp_path):
    for heat in ("H1", "H2"):
        with store.transaction("accept"):
            reds = [add(store, result(f"{heat}-{i}", 28.0 + i, heat=heat)) for i in range(3)]
            verdict(store, heat, reds)
        with store.transaction("approve"):
            approve(store, heat, by="R. Lindqvist", decision="accept")
    with store.transaction("certify"):
        session = CertificateSession(store, "e399")
        numbers = []
        for heat in ("H1", "H2"):
            rows = _rows([result(f"{heat}-{i}", 28.0 + i, heat=heat) for i in range(3)])
            numbers.append(session.options(heat, rows, prefix="AMTL")["certificate_number"])
            path = tmp_path / f"{heat}.pdf"
            path.write_bytes(b"%PDF-" + heat.encode())
            session.record(heat, path)
    # one more than the highest of the year; a recorded issue is not counted twice
    assert numbers == ["AMTL-2031-0001", "AMTL-2031-0002"]


def test_a_certificate_number_already_held_by_another_heat_makes_a_draft_not_a_traceback(store, tmp_path):
    _approved(store)
    with store.transaction("accept"):
        verdict(store, "H/1", [add(store, result("X1", 28.0, heat="H/1"))])
    with store.transaction("approve"):
        approve(store, "H/1", by="R. Lindqvist", decision="accept")
    with store.transaction("certify"):
        session = CertificateSession(store, "e399")
        session.options("H/1", _rows([result("X1", 28.0, heat="H/1")]), number="AMTL-H_1-3FA9C01D")
        (tmp_path / "a.pdf").write_bytes(b"%PDF-a")
        session.record("H/1", tmp_path / "a.pdf")
        opts = session.options("H1", _rows([result(f"S{i}", K) for i, K in enumerate((28.0, 29.0, 30.0), 1)]),
                               number="AMTL-H_1-3FA9C01D")  # "H_1" and "H/1" gave the same number
        assert opts["draft"]
        assert "certificate number AMTL-H_1-3FA9C01D is already used by heat H/1" in session.explain("H1")


# ---------------------------------------------------------------- review finding 7: trend

def _with(r, **sd):
    r.specimen_data = {**r.specimen_data, **sd}
    return r


def test_trend_selects_a_temperature_band_and_a_rule_set(store):
    with store.transaction("accept"):
        add(store, result("A1", 30.0, heat="HA"))                                # 21 °C
        add(store, _with(result("A2", 31.0, heat="HA"), temperature_C=23.5))     # 2.5 °C off
        add(store, _with(result("B1", 20.0, heat="HB"), temperature_C=-40.0))    # another temperature
        iso = _with(result("C1", 29.0, heat="HC"), temperature_C=21.0)
        store.add_reduction(iso.to_dict(), rule_set="iso12737", rule_set_content=rule_set_content("iso12737"))
    picked = lambda **kw: sorted(r["specimen"] for r in store.trend_rows("7075", "L-T", **kw))  # noqa: E731
    assert picked() == ["A1", "A2", "B1", "C1"]
    assert picked(temperature_C=21.0, band_C=2.0) == ["A1", "C1"]
    assert picked(temperature_C=21.0, band_C=3.0) == ["A1", "A2", "C1"]
    assert picked(temperature_C=21.0, band_C=0.0) == ["A1", "C1"]
    assert picked(temperature_C=21.0, band_C=3.0, rule_set="e399") == ["A1", "A2"]


def _trend_rows(heats):
    return [{"heat": h, "specimen": f"{h}-{i}", "K_Ic": K, "orientation": "L-T", "temperature_C": 21.0,
             "material": "7075", "heat_first_reduced": f"2031-0{1 + n}-15T09:00:0{i}+00:00", "rule_set": "e399"}
            for n, (h, Ks) in enumerate(heats.items()) for i, K in enumerate(Ks)]


def test_trend_warns_for_few_values_and_for_results_of_one_heat_pooled():
    from reduce.qa import trend_data
    from reports.qa import trend_text

    data = trend_data(_trend_rows({"H1": [30.0, 29.0, 31.0]}), 0.95, 0.95)
    text = trend_text(data, "t")
    assert data["bound"].k == pytest.approx(7.656, abs=5e-4)  # Natrella Table A-7, n = 3 (from memory)
    assert "WARNING: only 3 valid K_Ic results" in text and "k = 7.656 is large" in text
    assert "WARNING: the 3 values are pooled from 1 heat (H1 gives 3)" in text and "--per-heat-mean" in text
    many = {f"H{i}": [30.0 + 0.1 * i] for i in range(12)}  # 12 heats, one result each: nothing to warn
    assert trend_data(_trend_rows(many), 0.95, 0.95)["warnings"] == []


def test_per_heat_mean_takes_one_value_per_heat_as_the_sample():
    import statistics

    from reduce.qa import trend_data
    from reduce.tolerance import one_sided_k_factor

    heats = {"H1": [30.0, 31.0], "H2": [28.0, 29.0, 30.0], "H3": [32.0], "H4": [24.0, 34.0]}
    data = trend_data(_trend_rows(heats), 0.95, 0.95, per_heat_mean=True)
    means = [statistics.mean(v) for v in heats.values()]
    assert data["bound"].n == 4 and data["bound"].mean == pytest.approx(statistics.mean(means), rel=1e-12)
    assert data["bound"].lower == pytest.approx(statistics.mean(means) - one_sided_k_factor(4)
                                                * statistics.stdev(means), rel=1e-12)
    assert not any("pooled" in w for w in data["warnings"])
    with pytest.raises(StoreError, match="at least two heat means"):
        trend_data(_trend_rows({"H1": [30.0, 31.0]}), 0.95, 0.95, per_heat_mean=True)


def test_trend_refuses_a_jpg_and_writes_svg_and_pdf_in_their_own_format(tmp_path, capsys):
    db = tmp_path / "qa.db"
    with Store.open(db, clock=Clock()) as st:
        _accepted_heat(st)
    code, _, err = _cli(["trend", "--material", "7075", "--db", str(db), "--out", str(tmp_path / "t.jpg")], capsys)
    assert code == 2 and ".jpg is not one of them" in err and not (tmp_path / "t.jpg").exists()
    for suffix, magic in ((".svg", b"<?xml"), (".pdf", b"%PDF"), (".png", b"\x89PNG")):
        out = tmp_path / f"t{suffix}"
        code, said, _ = _cli(["trend", "--material", "7075", "--db", str(db), "--out", str(out)], capsys)
        assert code == 0 and out.read_bytes().startswith(magic), suffix
    code, _, err = _cli(["trend", "--material", "7075", "--db", str(db), "--band", "3"], capsys)
    assert code == 2 and "needs --temperature" in err


def test_trend_plot_keeps_the_legend_outside_the_data_dates_without_times_and_labels_inside():
    import re

    import matplotlib.pyplot as plt

    from reduce.qa import trend_data
    from reports.trend import trend_figure

    heats = {"H1": [30.0, 29.0], "H2": [31.0], "H3-LONG-NAME": [24.0, 30.5]}
    rows = _trend_rows(heats)
    for r in rows:  # three heats within one minute of one day (review: ticks read "06:21.000000")
        r["heat_first_reduced"] = f"2031-01-15T06:21:0{int(r['heat'][1])}+00:00"
    data = trend_data(rows, 0.95, 0.95)
    fig = trend_figure(data["heats"], data["bound"], data["flagged"], "t", notes=data["plot_notes"])
    try:
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        ax = fig.axes[0]
        axes_box = ax.get_window_extent(renderer)
        assert ax.get_legend().get_window_extent(renderer).y1 < axes_box.y0  # below the axes
        ticks = [t.get_text() for t in ax.get_xticklabels() if t.get_text()]
        assert ticks and all(re.fullmatch(r"\d{4}-\d{2}-\d{2}", t) for t in ticks)
        assert len(set(ticks)) == len(ticks)
        lo, hi = ax.get_ylim()
        assert lo < data["bound"].lower < hi and lo < min(min(v) for v in heats.values())
        names = [t for t in ax.texts if t.get_text().startswith("H")]
        assert len(names) == 3
        for t in names:  # every heat label lies inside the axes
            box = t.get_window_extent(renderer)
            assert axes_box.x0 <= box.x0 and box.x1 <= axes_box.x1 and box.y1 <= axes_box.y1
        boxes = sorted((t.get_window_extent(renderer) for t in names), key=lambda b: b.x0)
        assert not any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:])
    finally:
        plt.close(fig)
