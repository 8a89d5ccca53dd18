"""The secant construction on synthetic records with known answers.

The records come from reduce.synthetic, whose 5 % secant point is known in
closed form (see its docstring); they are invented, not measured.
"""

import numpy as np
import pytest

from reduce.construction import initial_slope, secant_construction
from reduce.errors import ReductionError
from reduce.synthetic import curve_load, make_record, secant_point


def test_closed_form_secant_point_against_root_finder():
    # independent path: scipy's brentq on P(v) - 0.95 k v
    from scipy.optimize import brentq

    k, P_y, m = 40.0, 30.0, 6.0
    v5, P5 = secant_point(k, P_y, m)
    root = brentq(lambda v: curve_load(v, k, P_y, m) - 0.95 * k * v, 1e-6, 10.0)
    assert v5 == pytest.approx(root, rel=1e-9)


@pytest.mark.parametrize("kind", ["I", "II", "III"])
@pytest.mark.parametrize("noise", [0.0, 0.03])
def test_curve_types_and_P_Q(kind, noise):
    rec = make_record(kind, noise_kN=noise, offset_mm=0.05, toe_mm=0.02, seed=7)
    res = secant_construction(rec.load_kN, rec.disp_mm)
    assert res.curve_type == kind
    assert res.P_Q == pytest.approx(rec.P_Q, rel=0.01)
    assert res.P_max >= res.P_Q


def test_type_one_P5_close_to_closed_form():
    rec = make_record("I", m=8.0)
    res = secant_construction(rec.load_kN, rec.disp_mm)
    assert res.P_5 == pytest.approx(rec.P_5, rel=0.005)


@pytest.mark.parametrize("seed", range(12))
def test_noise_does_not_turn_type_I_into_type_II(seed):
    # noise of 0.3 % of P_max on a smooth record, 3000 samples
    rec = make_record("I", n=3000, noise_kN=0.09, seed=seed)
    res = secant_construction(rec.load_kN, rec.disp_mm)
    assert res.curve_type == "I"
    assert res.P_Q == pytest.approx(rec.P_Q, rel=0.01)


def test_a_real_pop_in_is_still_found_with_noise():
    rec = make_record("II", noise_kN=0.05, pop_drop=0.04, seed=1)
    res = secant_construction(rec.load_kN, rec.disp_mm)
    assert res.curve_type == "II"


def test_origin_offset_is_removed():
    rec = make_record("I", offset_mm=0.3)
    fit = initial_slope(rec.load_kN, rec.disp_mm)
    assert fit.origin_mm == pytest.approx(0.3, abs=0.003)
    assert fit.slope == pytest.approx(40.0, rel=0.01)


def test_fracture_before_secant_is_type_III_with_P_Q_P_max():
    rec = make_record("III", fracture_fraction=0.7)
    res = secant_construction(rec.load_kN, rec.disp_mm)
    assert res.curve_type == "III"
    assert res.P_5 is None
    assert res.P_Q == pytest.approx(rec.P_max, rel=1e-9)


def test_record_without_rising_part_is_refused():
    with pytest.raises(ReductionError, match="linear rising part"):
        initial_slope(np.array([1.0, 1.0, 1.0]), np.array([0.0, 1.0, 2.0]))
    with pytest.raises(ReductionError, match="no positive load"):
        initial_slope(np.zeros(50), np.linspace(0, 1, 50))


def _power_law_record(k=55.0, c=0.02, P0=20.0, n_exp=5.0, P_end=24.0, n=1500, noise=0.02, seed=0):
    """A record from a different curve family than reduce.synthetic: displacement as a
    power law of load, v = P/k + c (P/P0)^n (a Ramberg–Osgood-like form), sampled in
    load, with noise and an offset.  Its 5 % secant load solves
    P/k + c (P/P0)^n = P/(0.95 k), found here with scipy's brentq."""
    from scipy.optimize import brentq

    rng = np.random.default_rng(seed)
    P = np.linspace(0.0, P_end, n)
    v = P / k + c * (P / P0) ** n_exp + 0.07
    P5 = brentq(lambda p: p / k + c * (p / P0) ** n_exp - p / (0.95 * k), 1.0, 100.0)
    return P + rng.normal(0.0, noise, n), v, P5


@pytest.mark.parametrize("seed", range(5))
def test_other_curve_family_type_I(seed):
    load, disp, P5 = _power_law_record(seed=seed)
    assert P5 < 24.0  # the record passes the secant
    res = secant_construction(load, disp)
    assert res.curve_type == "I"
    assert res.P_Q == pytest.approx(P5, rel=0.01)


def test_other_curve_family_stopped_before_secant_is_type_III():
    load, disp, P5 = _power_law_record(P_end=15.0)
    assert P5 > 15.0
    # the specimen breaks at 15 kN: the load falls to zero at constant opening
    load = np.concatenate([load, [6.0, 0.5, 0.0]])
    disp = np.concatenate([disp, [disp[-1] + 0.001] * 3])
    res = secant_construction(load, disp)
    assert res.curve_type == "III"
    assert res.P_Q == pytest.approx(15.0, rel=0.01)


def test_record_far_beyond_P_Q_refits_the_slope_low():
    # regression: a tough, gradually bending record loaded to 2.2 P_5 had its fit
    # bands (scaled by P_max) in the curved part, and P_Q came out 24 % high
    load, disp, P5 = _power_law_record(n_exp=3.0, c=0.04, P_end=30.0, noise=0.0)
    res = secant_construction(load, disp)
    assert res.curve_type == "I"
    assert res.P_Q == pytest.approx(P5, rel=0.02)


def test_pop_in_P_Q_is_the_raw_peak():
    # regression: P_Q was taken one sample before the pop-in peak, because the
    # smoothed secant crossing lies a few samples before the raw jump
    rec = make_record("II", noise_kN=0.0)
    res = secant_construction(rec.load_kN, rec.disp_mm)
    assert res.curve_type == "II"
    assert res.P_Q == pytest.approx(rec.P_Q, rel=1e-9)


def _with_final_unload(load, disp, k):
    """Append an elastic unloading to zero load along the initial slope k."""
    P_end, v_end = load[-1], disp[-1]
    P_un = np.linspace(P_end, 0.0, 60)[1:]
    return np.concatenate([load, P_un]), np.concatenate([disp, v_end - (P_end - P_un) / k])


@pytest.mark.parametrize("kind", ["I", "II"])
def test_final_unloading_does_not_hide_P5(kind):
    # regression: a record still rising when the operator unloads was taken as
    # Type III with P_Q = P_max, because the crossing looked like the end of the test
    rec = make_record(kind, noise_kN=0.02, seed=3)
    load, disp = _with_final_unload(rec.load_kN, rec.disp_mm, 40.0)
    res = secant_construction(load, disp)
    assert res.curve_type == kind
    assert res.P_Q == pytest.approx(rec.P_Q, rel=0.01)


def test_unloading_before_the_secant_gives_no_P5_from_the_unloading_line():
    # stopped at 80 % of P_5 and unloaded: the unloading line crosses the secant,
    # but that is not P_5
    rec = make_record("I", overshoot=0.8)
    load, disp = _with_final_unload(rec.load_kN, rec.disp_mm, 40.0)
    res = secant_construction(load, disp)
    assert res.P_5 is None and res.curve_type == "III"
    assert res.P_Q == pytest.approx(rec.load_kN.max(), rel=1e-9)
