"""Fuzzing the record reader and the reduction (hypothesis), in bounded time.

Whatever the input - a record file mangled byte by byte, a synthetic curve
clipped, cut, cycled, scaled or spiked, or arbitrary numbers - the outcome
must be either a result whose numbers are finite and consistent (P_Q <= P_max,
0 < a/W < 1, K_Q > 0, and writable as the command's JSON) or a
:class:`~reduce.errors.CracktipError`; anything else is a bug.  Example
counts are fixed (no deadline), so the run time is bounded (a few seconds);
the database is off and the examples derandomised, so every run is the same.
For a longer hunt set CRACKTIP_FUZZ_EXAMPLES (default 150 per test), e.g.
``CRACKTIP_FUZZ_EXAMPLES=5000 python -m pytest tests/test_fuzz.py``.
"""

from __future__ import annotations

import math
import os

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from reduce.cli import results_json
from reduce.errors import CracktipError
from reduce.models import Specimen
from reduce.pipeline import reduce_arrays
from reduce.records import read_record
from reduce.synthetic import make_record

SPEC = Specimen("F1", "C(T)", B=25, W=50, a_readings=(25.1, 25.3, 25.0), yield_MPa=500, E_MPa=72000)
FUZZ = settings(max_examples=int(os.environ.get("CRACKTIP_FUZZ_EXAMPLES", 150)), deadline=None,
                database=None, derandomize=True,
                suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])


def assert_consistent(result):
    numbers = {k: getattr(result, k) for k in (
        "P_Q_kN", "P_max_kN", "K_Q_MPa_sqrt_m", "a_over_W", "initial_slope_kN_per_mm",
        "P_max_over_P_Q", "origin_offset_mm", "fit_r_squared", "fit_residual_sd_kN")}
    assert result.error is None
    assert all(isinstance(x, float) and math.isfinite(x) for x in numbers.values()), numbers
    assert result.P_Q_kN <= result.P_max_kN * (1 + 1e-12)
    assert 0.0 < result.a_over_W < 1.0
    assert result.K_Q_MPa_sqrt_m > 0.0
    assert result.initial_slope_kN_per_mm > 0.0
    results_json([result])  # no NaN or infinity anywhere in what the command writes


def reduce_or_refuse(load, disp, time=None):
    try:
        result = reduce_arrays(load, disp, SPEC, time)
    except CracktipError:
        return None
    assert_consistent(result)
    return result


# ------------------------------------------------------------ files, byte by byte

BASE = make_record("II", n=300, noise_kN=0.02, seed=1)
BASE_TEXT = ("Rig: fuzz\nTime (s);Force [N];COD (µm)\n" + "".join(
    f"{t:.4f};{P * 1000:.2f};{v * 1000:.3f}\n".replace(".", ",")
    for t, P, v in zip(BASE.time_s, BASE.load_kN, BASE.disp_mm))).encode("utf-8")

edits = st.lists(st.tuples(
    st.sampled_from(["delete", "insert", "replace", "repeat", "truncate", "swap_lines"]),
    st.floats(0, 1), st.binary(min_size=1, max_size=12), st.integers(1, 400)), max_size=6)


def mangle(data: bytes, plan) -> bytes:
    for op, where, chunk, length in plan:
        i = int(where * len(data))
        if op == "delete":
            data = data[:i] + data[i + length:]
        elif op == "insert":
            data = data[:i] + chunk + data[i:]
        elif op == "replace":
            data = data[:i] + chunk + data[i + len(chunk):]
        elif op == "repeat":
            data = data[:i + length] + data[i:i + length] + data[i + length:]
        elif op == "truncate":
            data = data[:i]
        else:
            lines = data.split(b"\n")
            k = int(where * (len(lines) - 1))
            j = min(k + 1 + length % 7, len(lines) - 1)
            lines[k], lines[j] = lines[j], lines[k]
            data = b"\n".join(lines)
    return data


@FUZZ
@given(edits, st.sampled_from([".csv", ".txt", ".xlsx"]))
def test_mangled_record_files(tmp_path_factory, plan, suffix):
    path = tmp_path_factory.mktemp("fz") / f"r{suffix}"
    path.write_bytes(mangle(BASE_TEXT, plan))
    try:
        rec = read_record(path)
    except CracktipError:
        return
    assert rec.load_kN.size == rec.disp_mm.size >= 20
    assert np.isfinite(rec.load_kN).all() and np.isfinite(rec.disp_mm).all()
    reduce_or_refuse(rec.load_kN, rec.disp_mm, rec.time_s)


# ------------------------------------------------------------ curves, bent out of shape

damage = st.fixed_dictionaries({
    "kind": st.sampled_from(["I", "II", "III"]),
    "n": st.integers(20, 3000),
    "noise": st.sampled_from([0.0, 0.001, 0.02, 0.5]),
    "offset": st.floats(-2, 2),
    "toe": st.sampled_from([0.0, 0.02]),
    "scale_P": st.sampled_from([1e-6, 1e-3, 1.0, 1e3, 1e6]),
    "scale_v": st.sampled_from([1e-4, 1.0, 1e4]),
    "clip": st.one_of(st.none(), st.floats(0.3, 1.0)),
    "cycle": st.one_of(st.none(), st.tuples(st.floats(0.05, 0.95), st.floats(0.0, 1.0))),
    "stuck": st.one_of(st.none(), st.tuples(st.floats(0, 1), st.floats(0, 1))),
    "spikes": st.lists(st.tuples(st.floats(0, 1), st.floats(-100, 100)), max_size=4),
    "reverse": st.sampled_from([False] * 7 + [True]),  # rarely: these are refused
    "negate": st.sampled_from([False] * 7 + [True]),
})


def bend(d):
    rec = make_record(d["kind"], n=max(d["n"], 20), noise_kN=d["noise"], offset_mm=d["offset"],
                      toe_mm=d["toe"], seed=d["n"])
    P, v = rec.load_kN.copy(), rec.disp_mm.copy()
    n = P.size
    if d["clip"] is not None:
        P = np.minimum(P, d["clip"] * P.max())
    if d["cycle"] is not None:  # unload at one sample and reload, on lines of slope k
        at, depth = d["cycle"]
        i = int(at * (n - 1))
        down = np.linspace(P[i], depth * P[i], 30)
        Pc = np.concatenate([down, down[::-1]])
        vc = v[i] - (P[i] - Pc) / 40.0
        P, v = np.concatenate([P[:i], Pc, P[i:]]), np.concatenate([v[:i], vc, v[i:]])
    if d["stuck"] is not None:
        a, b = sorted(int(x * (P.size - 1)) for x in d["stuck"])
        v[a:b + 1] = v[a]
    for where, size in d["spikes"]:
        P[int(where * (P.size - 1))] += size
    if d["reverse"]:
        P, v = P[::-1].copy(), v[::-1].copy()
    if d["negate"]:
        P = -P
    return P * d["scale_P"], v * d["scale_v"]


@FUZZ
@given(damage)
def test_bent_curves(d):
    P, v = bend(d)
    reduce_or_refuse(P, v)


# ------------------------------------------------------------ anything at all

numbers = st.floats(allow_nan=True, allow_infinity=True, width=64)


@FUZZ
@given(st.integers(0, 120).flatmap(lambda n: st.tuples(
    st.lists(numbers, min_size=n, max_size=n), st.lists(numbers, min_size=n, max_size=n))))
def test_arbitrary_numbers(pair):
    P, v = (np.array(x, dtype=float) for x in pair)
    reduce_or_refuse(P, v)


@FUZZ
@given(st.lists(st.tuples(st.floats(-1e300, 1e300), st.floats(-1e300, 1e300)), min_size=8,
                max_size=200))
def test_huge_finite_numbers(pairs):
    P, v = (np.array(c, dtype=float) for c in zip(*pairs))
    reduce_or_refuse(P, v)


# ------------------------------------------------------------ the reader's fast path

pieces = st.lists(st.sampled_from(["1", "-2.5", "3,25", ".5", "1e-3", "7.", " ", "\t", ",", ";",
                                   "|", "x", '"4"', "nan", "", "+0,1E+2", "--1"]), max_size=12)


@FUZZ
@given(st.lists(pieces.map("".join), min_size=1, max_size=8))
def test_line_statistics_fast_path_agrees_with_the_token_by_token_one(lines):
    from reduce import records as R

    for sep, decimal in R._TEXT_LAYOUTS:
        rows = [R._split_line(line, sep) for line in lines]
        assert R._text_row_stats(lines, rows, sep, decimal) == [R._row_stats(r, decimal) for r in rows]
