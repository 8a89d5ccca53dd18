"""The reduction gives the same numbers as before it was made faster.

``tests/data/reduction_reference.json`` holds the results of a corpus of
records reduced by the reduction as it was before the speed work on the
construction and the elastic-plastic hook (computed once from that code and
frozen).  The corpus: synthetic records of every curve type
(reduce.synthetic.make_record) at 2,000 to 1,000,000 samples, with noise,
offsets and seating toes, records with unloading-reloading cycles, a final
unloading, a saturated load channel, a record loaded far beyond P_Q (the
refit with bands scaled by P_Q), all five geometries and both rule sets, and
the sample campaign read through reduce.pipeline.reduce_sheet.

Every number of each result is compared with a relative tolerance of 1e-9
(summation order may move the last bits, nothing more); types, booleans,
strings, verdicts and error messages must be equal.  What the record reader
adds (``record_sha256``, ``record_notes``) is left out: it is not the
reduction's.

Regenerate the fixture only from code whose results are meant to be the
reference (``python tests/test_reduction_speed_equivalence.py --write``);
a faster reduction must pass against the old file unchanged.

The fast paths are also checked against the plain computations they stand
for, on records built here: the block searches against numpy's searches,
the secant search that skips blocks against the search of every block, the
window ranking from block sums and the orthogonalised curvature t against
the plain sums and least squares (they must decide alike or not decide),
the work integral and the rate-of-loading slope summed in pieces against
the plain sums (relative 1e-12).  No timing is asserted.
"""

from __future__ import annotations

import json
import math
import sys
from pathlib import Path

import numpy as np
import pytest

HERE = Path(__file__).resolve().parent
FIXTURE = HERE / "data" / "reduction_reference.json"
CAMPAIGN = HERE.parent / "sample_data" / "campaign.csv"
REL = 1e-9
#: fields of a result that come from the record reader, not from the reduction
READER_FIELDS = ("record_sha256", "record_notes")


def _specimen(geometry="C(T)", **kw):
    from reduce.models import Specimen

    dims = {"C(T)": {}, "SE(B)": {"S": 200.0}, "DC(T)": {}, "A(T)": {"X": 25.0, "r1": 60.0, "r2": 110.0},
            "A(B)": {"S": 200.0, "r1": 60.0, "r2": 110.0}}[geometry]
    S = dims.pop("S", None)
    d = dict(specimen="X", geometry=geometry, B=25.0, W=50.0, a_readings=(25.1, 25.3, 25.0),
             yield_MPa=500.0, E_MPa=72000.0, S=S, dims=dims)
    d.update(kw)
    return Specimen(**d)


def _with_cycle(load, disp, k, at=0.6, depth=0.3):
    """An unloading to ``depth`` of the load at ``at`` of the record and a reloading, slope k."""
    i = int(at * load.size)
    P_u, v_u = load[i], disp[i]
    down = np.linspace(P_u, depth * P_u, 40)
    cyc_P = np.concatenate([down, down[::-1][1:]])
    cyc_v = v_u - (P_u - cyc_P) / k
    return (np.concatenate([load[:i + 1], cyc_P[1:-1], load[i:]]),
            np.concatenate([disp[:i + 1], cyc_v[1:-1], disp[i:]]))


def _with_final_unload(load, disp, k):
    P_end, v_end = load[-1], disp[-1]
    P_un = np.linspace(P_end, 0.0, 60)[1:]
    return np.concatenate([load, P_un]), np.concatenate([disp, v_end - (P_end - P_un) / k])


def _power_law(n, noise, seed, n_exp=3.0, c=0.04, P_end=30.0, k=55.0):
    """v = P/k + c (P/20)^n_exp + 0.07, sampled in load: bends from the start (refit path)."""
    rng = np.random.default_rng(seed)
    P = np.linspace(0.0, P_end, n)
    v = P / k + c * (P / 20.0) ** n_exp + 0.07
    return P + rng.normal(0.0, noise, n), v


def corpus():
    """(name, load kN, disp mm, time s or None, specimen, rules) of every case, in order."""
    from reduce.synthetic import make_record

    cases = []
    seed = 0
    for n in (2000, 20000, 200000):
        for kind in ("I", "II", "III"):
            for noise, offset, toe in ((0.0, 0.0, 0.0), (0.01, 0.01, 0.0), (0.05, 0.2, 0.02),
                                       (0.09, -0.05, 0.0)):
                seed += 1
                r = make_record(kind, n=n, noise_kN=noise, offset_mm=offset, toe_mm=toe, seed=seed)
                cases.append((f"{kind}-n{n}-noise{noise}-off{offset}-toe{toe}", r.load_kN, r.disp_mm,
                              r.time_s, _specimen(), "e399"))
    for kind, kw in (("I", dict(m=8.0)), ("I", dict(overshoot=0.8)), ("I", dict(overshoot=2.5, m=3.0)),
                     ("II", dict(pop_drop=0.04, noise_kN=0.05)), ("II", dict(pop_fraction=0.95)),
                     ("III", dict(fracture_fraction=0.7)), ("III", dict(fracture_fraction=0.95))):
        for n in (3000, 50000):
            seed += 1
            r = make_record(kind, n=n, seed=seed, **({"noise_kN": 0.02} | kw))
            cases.append((f"{kind}-n{n}-{kw}", r.load_kN, r.disp_mm, r.time_s, _specimen(), "e399"))
    # the long record of the speed benchmark (tests/perf/bench_speed.py), as arrays
    r = make_record("I", n=1_000_000, noise_kN=0.01, offset_mm=0.01, seed=1)
    cases.append(("bench-long", r.load_kN, r.disp_mm, r.time_s, _specimen(), "e399"))
    r = make_record("II", n=300_000, noise_kN=0.02, offset_mm=0.03, seed=2)
    cases.append(("long-II", r.load_kN, r.disp_mm, r.time_s, _specimen(), "iso12737"))
    r = make_record("III", n=300_000, noise_kN=0.02, toe_mm=0.01, seed=3)
    cases.append(("long-III", r.load_kN, r.disp_mm, None, _specimen(), "e399"))
    # unloading-reloading cycles, a final unloading, a saturated load channel
    for n in (2000, 100000):
        r = make_record("I", n=n, noise_kN=0.02, seed=n)
        cases.append((f"cycle-n{n}", *_with_cycle(r.load_kN, r.disp_mm, 40.0), None, _specimen(), "e399"))
        load, disp = _with_cycle(r.load_kN, r.disp_mm, 40.0, at=0.3, depth=0.6)
        load, disp = _with_cycle(load, disp, 40.0, at=0.8, depth=0.1)
        cases.append((f"two-cycles-n{n}", load, disp, None, _specimen(), "e399"))
        for kind in ("I", "II"):
            r = make_record(kind, n=n, noise_kN=0.02, seed=3)
            cases.append((f"final-unload-{kind}-n{n}", *_with_final_unload(r.load_kN, r.disp_mm, 40.0),
                          None, _specimen(), "e399"))
        r = make_record("I", n=n, noise_kN=0.05, seed=5)
        cases.append((f"saturated-n{n}", np.minimum(r.load_kN, 0.9 * r.load_kN.max()), r.disp_mm, None,
                      _specimen(), "e399"))
    # bending from the start, loaded far beyond P_Q: the refit with bands scaled by P_Q
    for n, noise in ((1500, 0.0), (1500, 0.02), (40000, 0.02), (400000, 0.01)):
        load, disp = _power_law(n, noise, seed=n)
        cases.append((f"power-law-n{n}-noise{noise}", load, disp, None, _specimen(), "e399"))
    # a purely linear record (every window equally steep) and a short one
    v = np.linspace(0, 0.5, 200)
    cases.append(("linear", 40 * v, v, None, _specimen(), "e399"))
    v = np.linspace(0, 0.5, 30)
    cases.append(("short-linear", 40 * v + 0.001 * np.sin(7 * v), v, None, _specimen(), "e399"))
    # every geometry, both rule sets, material data the elastic-plastic hook uses
    steel = dict(yield_MPa=450.0, tensile_MPa=600.0, E_MPa=205000.0,
                 metadata={"material": "ferritic pressure-vessel steel"})
    for geo in ("C(T)", "SE(B)", "DC(T)", "A(T)", "A(B)"):
        for kind, n, rules in (("I", 5000, "e399"), ("II", 30000, "iso12737"), ("III", 5000, "e399")):
            seed += 1
            r = make_record(kind, n=n, noise_kN=0.03, offset_mm=0.02, seed=seed)
            cases.append((f"{geo}-{kind}-{rules}", r.load_kN, r.disp_mm, r.time_s,
                          _specimen(geo, **steel), rules))
    r = make_record("I", n=8000, noise_kN=0.02, seed=77)
    cases.append(("CT-front-face-sidegrooved", r.load_kN, r.disp_mm, r.time_s,
                  _specimen(displacement_type="front_face", B_N=20.0, poisson=0.33), "e399"))
    cases.append(("SEB-load-line", r.load_kN, r.disp_mm, r.time_s,
                  _specimen("SE(B)", displacement_type="load_line", dims={"z": 2.0}, **steel), "e399"))
    return cases


def _plain(x):
    """JSON-ready copy with numpy scalars as Python numbers and tuples as lists."""
    if isinstance(x, dict):
        return {str(k): _plain(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_plain(v) for v in x]
    if isinstance(x, np.generic):
        return x.item()
    return x


def summary(result) -> dict:
    """Everything the reduction produced for one record, JSON-ready."""
    d = result.to_dict()
    for key in READER_FIELDS + ("specimen_data",):
        d.pop(key, None)
    return _plain(d)


def reduce_case(load, disp, time, spec, rules):
    from reduce.errors import CracktipError
    from reduce.pipeline import failed_result, reduce_arrays

    try:
        return summary(reduce_arrays(load, disp, spec, time, rules))
    except CracktipError as exc:  # the error message is part of the behaviour
        return summary(failed_result(spec.specimen, rules, exc))


def campaign():
    """The sample campaign through reduce_sheet, specimen name -> summary."""
    from reduce.pipeline import reduce_sheet

    return {res.specimen: summary(res) for res, _rec, _row in reduce_sheet(CAMPAIGN)}


def differences(old, new, path="") -> list[str]:
    """Where two summaries differ beyond REL (numbers) or at all (everything else)."""
    if type(old) is not type(new):
        return [f"{path}: type {type(old).__name__} != {type(new).__name__} ({old!r} vs {new!r})"]
    if isinstance(old, dict):
        out = [f"{path}: keys {sorted(set(old) ^ set(new))} differ"] if set(old) != set(new) else []
        for k in old:
            if k in new:
                out += differences(old[k], new[k], f"{path}.{k}")
        return out
    if isinstance(old, list):
        if len(old) != len(new):
            return [f"{path}: length {len(old)} != {len(new)}"]
        return [d for i, (a, b) in enumerate(zip(old, new)) for d in differences(a, b, f"{path}[{i}]")]
    if isinstance(old, float):
        same = (old == new or (math.isnan(old) and math.isnan(new))
                or math.isclose(old, new, rel_tol=REL, abs_tol=0.0))
        return [] if same else [f"{path}: {old!r} != {new!r} (rel {abs(new - old) / abs(old):.3g})"]
    return [] if old == new else [f"{path}: {old!r} != {new!r}"]


# The fixture is compact: each result is flattened to its leaves; each
# distinct leaf path, each distinct list of paths (the shape of a result) and
# each distinct string is stored once; numbers keep 12 significant digits,
# far inside REL.

def _leaves(x, path=()):
    if isinstance(x, dict) and x:
        for k, v in x.items():
            yield from _leaves(v, path + (k,))
    elif isinstance(x, list) and x:
        for i, v in enumerate(x):
            yield from _leaves(v, path + (i,))
    else:
        yield path, x


def _ids(table: dict, key) -> int:
    return table.setdefault(key, len(table))


def _pack(x, store):
    shape, values = [], []
    for path, v in _leaves(x):
        if isinstance(v, str):
            kind, v = "s", _ids(store["strings"], v)
        elif isinstance(v, (list, dict)):
            kind, v = ("L" if isinstance(v, list) else "D"), 0
        else:
            kind, v = "v", (float(f"{v:.12g}") if isinstance(v, float) and math.isfinite(v) else v)
        shape.append(_ids(store["paths"], json.dumps([list(path), kind])))
        values.append(v)
    return [_ids(store["shapes"], json.dumps(shape)), values]


def _unpack(packed, shapes, paths, strings):
    sid, values = packed
    root = None
    for p, v in zip(shapes[sid], values):
        path, kind = paths[p]
        v = strings[v] if kind == "s" else [] if kind == "L" else {} if kind == "D" else v
        if not path:
            return v
        if root is None:
            root = [] if isinstance(path[0], int) else {}
        node = root
        for here, nxt in zip(path, path[1:]):
            if isinstance(node, list) and here == len(node):
                node.append([] if isinstance(nxt, int) else {})
            elif isinstance(node, dict) and here not in node:
                node[here] = [] if isinstance(nxt, int) else {}
            node = node[here]
        if isinstance(node, list):
            node.append(v)
        else:
            node[path[-1]] = v
    return root


def write_fixture(path=FIXTURE):
    store = {"strings": {}, "paths": {}, "shapes": {}}
    cases = {name: _pack(reduce_case(load, disp, t, spec, rules), store)
             for name, load, disp, t, spec, rules in corpus()}
    data = {"cases": cases, "campaign": {k: _pack(v, store) for k, v in campaign().items()},
            "strings": list(store["strings"]), "paths": [json.loads(k) for k in store["paths"]],
            "shapes": [json.loads(k) for k in store["shapes"]]}
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(data, separators=(",", ":")) + "\n")
    return path


def load_fixture(path=FIXTURE) -> dict:
    raw = json.loads(path.read_text())
    tables = raw["shapes"], raw["paths"], raw["strings"]
    return {part: {k: _unpack(v, *tables) for k, v in raw[part].items()} for part in ("cases", "campaign")}


@pytest.fixture(scope="module")
def reference():
    return load_fixture()


def test_fixture_covers_every_corpus_case_and_curve_type(reference):
    names = [c[0] for c in corpus()]
    assert sorted(reference["cases"]) == sorted(names)
    found = {d["curve_type"] for d in reference["cases"].values()}
    assert found == {"I", "II", "III", None}  # None: the refused (saturated) records
    assert sum(d["error"] is not None for d in reference["cases"].values()) >= 2
    assert len(reference["campaign"]) >= 10


@pytest.mark.parametrize("case", corpus(), ids=lambda c: c[0] if isinstance(c, tuple) else None)
def test_reduction_equals_reference(reference, case):
    name, load, disp, t, spec, rules = case
    diffs = differences(reference["cases"][name], reduce_case(load, disp, t, spec, rules))
    assert not diffs, "\n".join(diffs[:20])


def test_sample_campaign_equals_reference(reference):
    diffs = differences(reference["campaign"], campaign())
    assert not diffs, "\n".join(diffs[:20])


def test_comparison_sees_a_change_beyond_the_tolerance():
    # the comparison itself: a change of 1e-8 relative is a difference, 1e-12 is not
    old = {"P_Q_kN": 20.0, "checks": [{"passed": True, "value": 1.5}], "curve_type": "I"}
    assert differences(old, {"P_Q_kN": 20.0 * (1 + 1e-12), "checks": [{"passed": True, "value": 1.5}],
                             "curve_type": "I"}) == []
    assert differences(old, {"P_Q_kN": 20.0 * (1 + 1e-8), "checks": [{"passed": True, "value": 1.5}],
                             "curve_type": "I"})
    assert differences(old, {"P_Q_kN": 20.0, "checks": [{"passed": None, "value": 1.5}], "curve_type": "I"})
    assert differences(old, {"P_Q_kN": 20, "checks": [{"passed": True, "value": 1.5}], "curve_type": "I"})


# ------------------------------------------------ the fast paths against the plain ones

def _rough_record(n, seed, plateau=False):
    """A rising noisy record with a dip and, optionally, a run of samples at the maximum."""
    from reduce.synthetic import make_record

    r = make_record("I", n=n, noise_kN=0.05, offset_mm=0.02, seed=seed)
    load, disp = r.load_kN.copy(), r.disp_mm.copy()
    load[2 * n // 3:2 * n // 3 + 50] -= 3.0  # a dip below earlier loads
    if plateau:
        load[-2000:-1000] = load.max()
    return load, disp


@pytest.mark.parametrize("n, plateau", [(20000, False), (50001, True), (131072, False)])
def test_block_searches_equal_the_plain_searches(n, plateau):
    from reduce.construction import BlockExtremes

    load, disp = _rough_record(n, seed=n, plateau=plateau)
    ext = BlockExtremes(load, disp)
    assert ext.blocked
    rng = np.random.default_rng(n)
    P_max = float(load.max())
    for _ in range(200):
        a, b = sorted(int(x) for x in rng.integers(0, n + 1, 2))
        if b - a < 1:
            continue
        level = float(rng.uniform(-0.1, 1.05) * P_max)
        seg = load[a:b]
        hit = np.flatnonzero(seg >= level)
        assert ext.max(a, b) == float(seg.max())
        assert type(ext.argmax(a, b)) is int and ext.argmax(a, b) == a + int(np.argmax(seg))
        assert ext.first_at_least(level, a, b) == (a + int(hit[0]) if hit.size else b)
        assert ext.last_at_least(level, a, b) == (a + int(hit[-1]) if hit.size else a - 1)
        assert np.array_equal(ext.indices_below(level, a, b), a + np.flatnonzero(seg < level))
        assert np.array_equal(ext.indices_at_least(level, a, b), a + hit)
    from reduce.construction import _first_reaches

    levels = sorted(rng.uniform(-0.1, 1.05, 12) * P_max)
    plain = [int(np.argmax(load >= x)) if (load >= x).any() else n for x in levels]
    assert _first_reaches(ext, levels) == plain
    assert _first_reaches(BlockExtremes(load[:9000], disp[:9000]), levels) == [
        int(np.argmax(load[:9000] >= x)) if (load[:9000] >= x).any() else 9000 for x in levels]


def test_block_extremes_search_plainly_when_the_load_is_not_finite():
    from reduce.construction import BlockExtremes

    load, disp = _rough_record(40000, seed=3)
    load[1234] = np.nan
    ext = BlockExtremes(load, disp)
    assert not ext.blocked
    assert ext.argmax() == int(np.argmax(load))  # the NaN, as np.argmax gives


@pytest.mark.parametrize("seed", range(4))
def test_secant_search_skipping_blocks_equals_the_block_by_block_search(seed):
    # the reference is the search over every block with _centred_means (no block skipped)
    from reduce import construction as C

    n = 300000
    load, disp = _rough_record(n, seed=seed)
    ext = C.BlockExtremes(load, disp)
    fit = C.initial_slope(load, disp)
    h = 12
    for ratio in (0.95, 0.99, 0.999):
        ks, v0 = ratio * fit.slope, fit.origin_mm
        want, a = None, fit.index_range[1]
        while a < n and want is None:
            b = min(a + C._BLOCK, n)
            lo, hi = max(a - h, 0), min(b + h, n)
            g = C._centred_means(load[lo:hi] - ks * (disp[lo:hi] - v0), h, a - lo, b - lo)
            below = np.flatnonzero(g < 0.0)
            want = a + int(below[0]) if below.size else None
            a = b
        assert want is not None  # the dip crosses every secant
        assert C._first_crossing(load, disp, ks, v0, fit.index_range[1], 2 * h + 1, ext) == want


def _windows(ext, P_ref):
    from reduce import construction as C

    ends = sorted({lo for lo in C._WINDOW_STARTS} | {lo + C._WINDOW_WIDTH for lo in C._WINDOW_STARTS})
    reach = dict(zip(ends, C._first_reaches(ext, [e * P_ref for e in ends])))
    return [(lo, lo + C._WINDOW_WIDTH, reach[lo], reach[lo + C._WINDOW_WIDTH],
             ext.indices_below(lo * P_ref, reach[lo], reach[lo + C._WINDOW_WIDTH]))
            for lo in C._WINDOW_STARTS if reach[lo + C._WINDOW_WIDTH] - reach[lo] >= C._MIN_FIT_POINTS]


@pytest.mark.parametrize("kind, noise, offset", [("I", 0.01, 0.0), ("II", 0.05, 2.0), ("III", 0.0, 0.0),
                                                 ("linear", 0.0, 0.0), ("linear", 0.0, 50.0)])
def test_window_ranking_from_block_sums_agrees_with_the_sums(kind, noise, offset):
    from reduce import construction as C
    from reduce.synthetic import make_record

    n = 100000
    if kind == "linear":  # every window equally steep: the bounds must not decide
        disp = np.linspace(0.0, 0.5, n) + offset
        load = 40.0 * (disp - offset)
    else:
        r = make_record(kind, n=n, noise_kN=noise, offset_mm=offset, seed=11)
        load, disp = r.load_kN, r.disp_mm
    ext = C.BlockExtremes(load, disp)
    windows = _windows(ext, float(load.max()))
    best = None
    for lo, hi, i0, i1, out in windows:
        k = C._slope_from_sums(disp, load, i0, i1, out)
        if k is not None and k > 0.0 and (best is None or k > best[0]):
            best = (k, lo, hi, i0, i1, out)
    fast = C._steepest_window(ext, windows)
    if kind == "linear":
        assert fast is C._UNSURE
    else:
        assert fast is not C._UNSURE and fast[1:5] == best[1:5]


@pytest.mark.parametrize("seed", range(6))
def test_orthogonal_curvature_t_equals_the_least_squares_t(seed):
    from reduce import construction as C

    rng = np.random.default_rng(seed)
    P = np.sort(rng.uniform(5.0, 12.0, 20000))
    v = 0.3 + P / 40.0 + rng.uniform(0, 2e-5) * (P - 8.0) ** 2 + rng.normal(0.0, 2e-4, P.size)
    x = (P - P.mean()) / np.ptp(P)
    q = x * x - np.mean(x * x)
    A = np.column_stack([np.ones_like(x), x, q])
    coef, *_ = np.linalg.lstsq(A, v, rcond=None)
    r = v - A @ coef
    t_lstsq = coef[2] / (float(r @ r) / (v.size - 3) * np.linalg.inv(A.T @ A)[2, 2]) ** 0.5
    t = C._curvature_t_orthogonal(v, x, q)
    assert t is not None and t == pytest.approx(t_lstsq, rel=1e-9)
    # a line without scatter: t is rounding only, the fast path must not decide
    assert C._curvature_t_orthogonal(0.3 + P / 40.0, x, q) is None


def test_work_by_blocks_equals_the_trapezoids():
    from reduce import elastic_plastic as E

    load, disp = _rough_record(400000, seed=5)
    v = E._Shifted(disp, 0.013)
    for i_join, i_end in ((0, 399999), (1234, 300001), (65536, 65536 * 3 + 5)):
        want = E.work_under_record(load, disp - 0.013, i_end, i_join)
        assert E._work_by_blocks(load, v, i_end, i_join) == pytest.approx(want, rel=1e-12)


def test_slope_by_pieces_equals_the_fit():
    from reduce import construction as C

    load, disp = _rough_record(200000, seed=9)
    t = np.linspace(0.0, 400.0, load.size) + 1000.0
    assert C._slope_by_pieces(t, load, t.mean(), load.mean()) == pytest.approx(C._fit_line(t, load)[0], rel=1e-12)
    stuck = np.full(load.size, 3.0)
    assert C._slope_by_pieces(stuck, load, 3.0, load.mean()) is C._UNSURE  # degenerate: the fit decides


def test_check_to_dict_equals_asdict():
    from dataclasses import asdict

    from reduce.rules import Check

    for c in (Check("a", True, 1.5, "x", "y"), Check("b", None, None, "", "", "n"),
              Check("c", False, np.float64(2.0), "l", "c"), Check("d", True, (1, 2), "l", "c")):
        assert c.to_dict() == asdict(c) and list(c.to_dict()) == list(asdict(c))


if __name__ == "__main__":
    if sys.argv[1:] == ["--write"]:
        print(write_fixture())
    else:
        sys.exit("usage: python tests/test_reduction_speed_equivalence.py --write")
