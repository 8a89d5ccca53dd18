"""The one-sided normal tolerance factor against a published table and two
independent paths (an approximation formula and a simulation)."""

import math

import numpy as np
import pytest
from scipy.stats import norm

from reduce.tolerance import heats_below, lower_tolerance_bound, one_sided_k_factor

# Natrella, "Experimental Statistics", NBS Handbook 91 (1963), Table A-7, factors K for
# one-sided normal tolerance limits, gamma = 0.95, P = 0.95 — values from memory.
NATRELLA_A7_95_95 = {5: 4.203, 6: 3.708, 8: 3.187, 10: 2.911, 15: 2.566, 20: 2.396, 30: 2.220, 50: 2.065}


@pytest.mark.parametrize("n, k_table", sorted(NATRELLA_A7_95_95.items()))
def test_factor_matches_natrella_table_a7_to_three_decimals(n, k_table):
    assert round(one_sided_k_factor(n, 0.95, 0.95), 3) == pytest.approx(k_table, abs=1e-9)


def test_factor_99_content_matches_natrella_table_a7():
    # same table, gamma = 0.95, P = 0.99, n = 10: 3.981 (from memory)
    assert round(one_sided_k_factor(10, 0.99, 0.95), 3) == pytest.approx(3.981, abs=1e-9)


@pytest.mark.parametrize("n", [10, 20, 50, 200])
def test_factor_close_to_the_nist_approximation(n):
    # NIST/SEMATECH e-Handbook of Statistical Methods, 7.2.6.3: the approximate one-sided factor
    # k = (z_p + sqrt(z_p^2 - a b)) / a, a = 1 - z_g^2 / (2 (n - 1)), b = z_p^2 - z_g^2 / n
    # (from memory); it is within about 1.5 % at n = 10 and closer for larger n.
    zp, zg = norm.ppf(0.95), norm.ppf(0.95)
    a = 1 - zg**2 / (2 * (n - 1))
    b = zp**2 - zg**2 / n
    approx = (zp + math.sqrt(zp**2 - a * b)) / a
    assert one_sided_k_factor(n) == pytest.approx(approx, rel=0.015)


def test_bound_covers_the_quantile_with_the_stated_confidence():
    # independent check by simulation: the bound mean - k s lies below the population's
    # 5 % quantile in 95 % of samples (binomial standard error 0.0015 at 20000 samples)
    rng = np.random.default_rng(20240601)
    n, reps = 10, 20000
    x = rng.normal(50.0, 4.0, size=(reps, n))
    lower = x.mean(axis=1) - one_sided_k_factor(n) * x.std(axis=1, ddof=1)
    hit = np.mean(lower <= 50.0 - norm.ppf(0.95) * 4.0)
    assert hit == pytest.approx(0.95, abs=0.008)


def test_factor_falls_with_n_towards_z_p():
    ks = [one_sided_k_factor(n) for n in (3, 5, 10, 30, 100, 1000)]
    assert all(a > b for a, b in zip(ks, ks[1:]))
    assert one_sided_k_factor(100000) == pytest.approx(norm.ppf(0.95), rel=0.01)


def test_bound_moves_with_a_change_of_unit_and_origin():
    x = [27.1, 29.4, 28.2, 30.5, 26.9, 28.8]
    b = lower_tolerance_bound(x)
    scaled = lower_tolerance_bound([1.098843 * v + 3.0 for v in x])
    assert scaled.lower == pytest.approx(1.098843 * b.lower + 3.0, rel=1e-12)
    assert b.lower == pytest.approx(b.mean - one_sided_k_factor(6) * b.sd, rel=1e-12)


def test_heats_below_the_bound_are_flagged():
    assert heats_below({"A": [30.0, 31.0], "B": [27.9, 35.0], "C": []}, 28.0) == ["B"]


@pytest.mark.parametrize("kw", [dict(n=1), dict(n=2.5), dict(n=10, content=1.0), dict(n=10, confidence=0.0)])
def test_bad_arguments_are_refused(kw):
    with pytest.raises(ValueError):
        one_sided_k_factor(**kw)


def test_bound_needs_two_finite_values():
    with pytest.raises(ValueError, match="at least two"):
        lower_tolerance_bound([30.0])
    with pytest.raises(ValueError, match="finite"):
        lower_tolerance_bound([30.0, float("nan")])
