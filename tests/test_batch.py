"""The batch runner (reduce/batch.py) and `cracktip reduce` over several sheets.

Parallel runs must give the results of a sequential run, row for row; a row
that raises or kills its worker must cost only that row.  The records are
synthetic (reduce.synthetic), invented, not measured.
"""

from __future__ import annotations

import io
import json
import os

import pytest

from reduce import batch
from reduce.batch import find_sheets, progress_wanted, reduce_rows, reduce_sheets
from reduce.cli import main, results_json
from reduce.sheet import read_sheet
from reduce.synthetic import make_record

from conftest import write_csv_record, write_sheet

ROW = {"heat": "H1", "geometry": "C(T)", "B_mm": 25, "W_mm": 50, "a1_mm": 25.1, "a2_mm": 25.3,
       "a3_mm": 25.0, "yield_MPa": 500, "E_GPa": 72}


def campaign(d, prefix="S", n=8):
    """A sheet of n rows of all three curve types, one bad row and one missing record."""
    d.mkdir(parents=True, exist_ok=True)
    rows = []
    for i in range(n):
        rec = make_record("I II III".split()[i % 3], noise_kN=0.01 * (i % 4), offset_mm=0.01 * i,
                          n=1000 + 300 * (i % 10), seed=i)
        write_csv_record(d / f"{prefix}{i}.csv", rec.load_kN, rec.disp_mm, rec.time_s)
        rows.append(dict(ROW, specimen=f"{prefix}{i}", record=f"{prefix}{i}.csv"))
    rows.insert(3, dict(ROW, specimen=f"{prefix}-BADW", record=f"{prefix}0.csv", W_mm=0))
    rows.append(dict(ROW, specimen=f"{prefix}-MISSING", record="nowhere.csv"))
    return write_sheet(d / f"{prefix}_sheet.csv", rows)


def as_json(pairs):
    return results_json([r for r, _ in pairs])


def test_parallel_equals_sequential_row_for_row(tmp_path, starter):
    rows = read_sheet(campaign(tmp_path))
    one = reduce_rows(rows, jobs=1)
    two = reduce_rows(rows, jobs=2)
    assert as_json(two) == as_json(one)
    assert [r.specimen for r, _ in two] == [getattr(x, "specimen") for x in rows]
    assert sum(r.error is None for r, _ in one) == 8
    for (r1, rec1), (r2, rec2) in zip(one, two):
        assert (rec1 is None) == (rec2 is None)
        if rec1 is not None:
            assert rec2.sha256 == rec1.sha256 and (rec2.load_kN == rec1.load_kN).all()


def test_records_are_dropped_when_not_wanted(tmp_path):
    rows = read_sheet(campaign(tmp_path, n=3))
    assert all(rec is None for _, rec in reduce_rows(rows, jobs=2, keep_records=False))


def boom_for(name, how):
    """A reduce_specimen that fails (raises, or kills its process) on one specimen."""
    from reduce import pipeline

    real = pipeline.reduce_specimen

    def reduce_specimen(specimen, rules="e399"):
        if specimen.specimen == name:
            if how == "raise":
                raise RuntimeError("a bug")
            os._exit(3)
        return real(specimen, rules)

    return reduce_specimen


@pytest.mark.parametrize("jobs", [1, 2])
def test_unexpected_exception_costs_only_its_row(tmp_path, monkeypatch, jobs, starter):
    from reduce import pipeline

    rows = read_sheet(campaign(tmp_path))
    monkeypatch.setattr(pipeline, "reduce_specimen", boom_for("S2", "raise"))
    out = {r.specimen: r for r, _ in reduce_rows(rows, jobs=jobs)}
    assert out["S2"].error == "internal error while reducing: RuntimeError: a bug"
    assert all(out[f"S{i}"].error is None for i in (0, 1, 3, 4, 5, 6, 7))


@pytest.fixture(params=["fork", "executor"])
def starter(request, monkeypatch):
    """Both ways of starting workers: forked children, and the executor used where there is no fork."""
    monkeypatch.setattr(batch, "_CAN_FORK", request.param == "fork")
    return request.param


@pytest.mark.parametrize("n", [8, 40])  # one row a task; several rows a task
def test_a_worker_that_dies_costs_only_its_row(tmp_path, monkeypatch, n, starter):
    from reduce import pipeline

    rows = read_sheet(campaign(tmp_path, n=n))
    monkeypatch.setattr(pipeline, "reduce_specimen", boom_for("S5", "exit"))
    out = reduce_rows(rows, jobs=2)
    by_id = {r.specimen: r for r, _ in out}
    assert "internal error while reducing: the worker process stopped" in by_id["S5"].error
    assert all(by_id[f"S{i}"].error is None for i in range(n) if i != 5)
    assert [r.specimen for r, _ in out] == [x.specimen for x in rows]


def test_thousands_of_tasks_come_back_in_order(tmp_path, monkeypatch, starter):
    # more task numbers than one write to the task pipe holds; each result lands in its row
    from reduce import pipeline

    import dataclasses

    def quick(specimen, rules="e399"):
        return pipeline.failed_result(specimen.specimen, rules, "quick"), None

    first = next(r for r in read_sheet(campaign(tmp_path)) if r.specimen == "S0")
    rows = [dataclasses.replace(first, specimen=f"Q{k}") for k in range(3000)]
    monkeypatch.setattr(pipeline, "reduce_specimen", quick)
    monkeypatch.setattr(batch, "_CHUNK_ROWS", 1)
    out = reduce_rows(rows, jobs=2)
    assert [r.specimen for r, _ in out] == [f"Q{k}" for k in range(3000)]


class _Unpicklable:
    def __reduce__(self):
        raise TypeError("cannot pickle this")


class _Unreadable:
    def __reduce__(self):
        return (_refuse, ())


def _refuse():
    raise ValueError("cannot read this back")


@pytest.mark.parametrize("payload, expect", [
    (_Unpicklable, "the result cannot be sent back (TypeError: cannot pickle this)"),
    (_Unreadable, "ValueError: cannot read this back"),
    ("exit", "internal error while reducing: SystemExit: 7"),
])
def test_a_result_that_cannot_travel_costs_only_its_row(tmp_path, monkeypatch, starter, payload,
                                                        expect):
    from reduce import pipeline

    if starter == "executor" and payload is _Unreadable:
        pytest.skip("the executor reports a result it cannot read back as a stopped worker")
    real = pipeline.reduce_specimen

    def odd(specimen, rules="e399"):
        result, rec = real(specimen, rules)
        if specimen.specimen == "S5":
            if payload == "exit":
                raise SystemExit(7)
            result.metadata = {"odd": payload()}
        return result, rec

    rows = read_sheet(campaign(tmp_path, n=16))
    monkeypatch.setattr(pipeline, "reduce_specimen", odd)
    by_id = {r.specimen: r for r, _ in reduce_rows(rows, jobs=2)}
    assert expect in (by_id["S5"].error or "")
    hit = [i for i in range(16) if by_id[f"S{i}"].error is not None]
    if payload is _Unreadable:  # found only when read back here: it costs its task, not the batch
        assert all(expect in by_id[f"S{i}"].error for i in hit) and len(hit) <= batch._CHUNK_ROWS
        assert len(hit) < 16
    else:
        assert hit == [5]


def test_rows_are_reduced_here_when_no_worker_can_be_forked(tmp_path, monkeypatch):
    def refuse():
        raise BlockingIOError(11, "Resource temporarily unavailable")

    monkeypatch.setattr(batch, "_CAN_FORK", True)
    monkeypatch.setattr(batch.os, "fork", refuse)
    rows = read_sheet(campaign(tmp_path))
    before = set(os.listdir("/proc/self/fd"))
    out = reduce_rows(rows, jobs=2)
    assert as_json(out) == as_json(reduce_rows(rows, jobs=1))
    assert set(os.listdir("/proc/self/fd")) == before  # no pipe left open


def test_several_sheets_and_a_folder(tmp_path):
    a = campaign(tmp_path / "a", "A", n=3)
    campaign(tmp_path / "lab" / "b", "B", n=2)
    campaign(tmp_path / "lab" / "c", "C", n=2)
    found, errors = find_sheets([a, tmp_path / "lab"])
    assert [p.name for p in found] == ["A_sheet.csv", "B_sheet.csv", "C_sheet.csv"] and not errors
    result = reduce_sheets([a, tmp_path / "lab"], jobs=2)
    assert [r.sheet for r in result.rows] == [str(a)] * 5 + [str(found[1])] * 4 + [str(found[2])] * 4
    assert [r.result.specimen for r in result.rows][:5] == ["A0", "A1", "A2", "A-BADW", "A-MISSING"]


def test_a_bad_sheet_does_not_stop_the_others(tmp_path):
    good = campaign(tmp_path / "g", "G", n=2)
    bad = tmp_path / "bad.csv"
    bad.write_text("specimen,geometry\nX,C(T)\n")
    empty = tmp_path / "empty_folder"
    empty.mkdir()
    result = reduce_sheets([bad, good, empty, tmp_path / "missing.csv"], jobs=1)
    assert [r.result.specimen for r in result.rows] == ["G0", "G1", "G-BADW", "G-MISSING"]
    assert len(result.errors) == 3
    assert any("required column(s) missing" in e and "bad.csv" in e for e in result.errors)
    assert any("no test sheet in this folder" in e for e in result.errors)


def test_command_over_sheets_json_carries_the_sheet(tmp_path, capsys):
    a = campaign(tmp_path / "a", "A", n=2)
    b = campaign(tmp_path / "b", "B", n=2)
    out1, out2 = tmp_path / "one.json", tmp_path / "two.json"
    assert main(["reduce", str(a), str(b), "--json", str(out1), "--jobs", "1"]) == 2
    printed = capsys.readouterr().out
    assert f"Sheet: {a}" in printed and f"Sheet: {b}" in printed
    assert main(["reduce", str(a), str(b), "--json", str(out2), "--jobs", "2", "--quiet"]) == 2
    assert out1.read_text() == out2.read_text()
    data = json.loads(out1.read_text())
    assert [(d["specimen"], d["sheet"]) for d in data] == (
        [(s, str(a)) for s in ("A0", "A1", "A-BADW", "A-MISSING")]
        + [(s, str(b)) for s in ("B0", "B1", "B-BADW", "B-MISSING")])


def test_jobs_must_be_a_positive_number(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["reduce", "x.csv", "--jobs", "0"])
    assert stop.value.code == 2
    assert "--jobs" in capsys.readouterr().err


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_only_on_a_terminal_and_not_when_quiet(tmp_path, monkeypatch):
    assert progress_wanted(False, _Terminal()) is True
    assert progress_wanted(True, _Terminal()) is False
    assert progress_wanted(False, io.StringIO()) is False
    terminal = _Terminal()
    monkeypatch.setattr("sys.stderr", terminal)
    assert main(["reduce", str(campaign(tmp_path, n=2)), "--jobs", "1"]) == 2
    assert "reducing" in terminal.getvalue() and "row" in terminal.getvalue()
    quiet = _Terminal()
    monkeypatch.setattr("sys.stderr", quiet)
    main(["reduce", str(campaign(tmp_path, n=2)), "--jobs", "1", "--quiet"])
    assert "reducing" not in quiet.getvalue()


def test_one_row_is_reduced_in_process(tmp_path, monkeypatch):
    # no pool is started for a single row (start-up time of `cracktip reduce`)
    for starter in ("_pool", "_forked", "_in_executor"):
        monkeypatch.setattr(batch, starter, lambda *a: pytest.fail("workers were started"))
    rows = [r for r in read_sheet(campaign(tmp_path, n=1)) if r.specimen == "S0"]
    (result, _), = reduce_rows(rows, jobs=None)
    assert result.error is None


def test_a_long_record_sent_between_processes_carries_its_hash(tmp_path):
    # above 1 MiB the hash is computed beside the reduction; a record sent back from a
    # worker must arrive with the finished digest
    import hashlib

    rec = make_record("I", n=40_000, noise_kN=0.01, seed=4)
    write_csv_record(tmp_path / "L.csv", rec.load_kN, rec.disp_mm, rec.time_s)
    assert (tmp_path / "L.csv").stat().st_size > 1 << 20
    write_sheet(tmp_path / "s.csv", [dict(ROW, specimen=s, record="L.csv") for s in ("L1", "L2")])
    want = hashlib.sha256((tmp_path / "L.csv").read_bytes()).hexdigest()
    for (result, record) in reduce_rows(read_sheet(tmp_path / "s.csv"), jobs=2):
        assert result.error is None
        assert result.record_sha256 == record.sha256 == want
