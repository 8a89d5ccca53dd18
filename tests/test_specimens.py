"""Specimen definitions, compliance relations and crack-front averages.

Every published value below names its source; "from memory" means it was
written down from the developers' knowledge and not checked against a
printed copy.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from numpy.polynomial import Polynomial

import specimens
from specimens import compliance as comp
from specimens import crack_front as cf
from specimens.arc_bend import CAVEAT
from specimens.bend import bend_f
from specimens.compact import compact_f

GRID_045_055 = np.linspace(0.45, 0.55, 21)
GRID_03_07 = np.linspace(0.30, 0.70, 41)

ARC_DIMS = {"X": 25.0, "r1": 60.0, "r2": 110.0}


def dims_for(designation, W=50.0):
    return {"C(T)": {}, "DC(T)": {}, "SE(B)": {"S": 4 * W},
            "A(T)": dict(ARC_DIMS), "A(B)": {"S": 4 * W, "r1": 60.0, "r2": 110.0}}[designation]


# --- f(a/W) against published values -----------------------------------------

# ASTM E399, tables of f(a/W) beside Annex A4 (C(T)) and A3 (SE(B), S/W = 4),
# printed to two decimals (from memory).
E399_TABLE = {
    "C(T)": {0.45: 8.34, 0.50: 9.66, 0.55: 11.36},
    "SE(B)": {0.45: 2.29, 0.50: 2.66, 0.55: 3.14},
}


@pytest.mark.parametrize("designation", sorted(E399_TABLE))
def test_f_matches_e399_table(designation):
    g = specimens.geometry(designation)
    for alpha, printed in E399_TABLE[designation].items():
        # the table is rounded to 0.01: the formula must round to it
        assert abs(g.f(alpha, dims_for(designation)) - printed) <= 0.005 + 1e-12, alpha


def brown_srawley_compact(alpha):
    """C(T) boundary-collocation polynomial, W.F. Brown and J.E. Srawley,
    ASTM STP 410 (1966), as printed in the 1970s editions of ASTM E399
    (from memory): f = 29.6 α^½ − 185.5 α^{3/2} + 655.7 α^{5/2}
    − 1017.0 α^{7/2} + 638.9 α^{9/2}."""
    c = (29.6, -185.5, 655.7, -1017.0, 638.9)
    return sum(ci * alpha ** (i + 0.5) for i, ci in enumerate(c))


def brown_srawley_bend(alpha):
    """SE(B) S/W = 4 polynomial, Brown and Srawley, ASTM STP 410 (1966), as
    printed in the 1970s editions of ASTM E399 (from memory):
    f = 2.9 α^½ − 4.6 α^{3/2} + 21.8 α^{5/2} − 37.6 α^{7/2} + 38.7 α^{9/2}."""
    c = (2.9, -4.6, 21.8, -37.6, 38.7)
    return sum(ci * alpha ** (i + 0.5) for i, ci in enumerate(c))


def test_compact_f_agrees_with_brown_srawley():
    # Stated accuracy ±0.5 % for each form (Srawley 1976 for the current E399
    # form, Brown & Srawley for theirs; both from memory): allow the sum, 1 %.
    # The older form was fitted to a specimen of slightly different height,
    # which is why the two part by up to ~0.9 % here.
    for alpha in GRID_045_055:
        assert compact_f(alpha) == pytest.approx(brown_srawley_compact(alpha), rel=0.01), alpha


def test_bend_f_agrees_with_brown_srawley():
    # Srawley's S/W = 4 form is stated accurate to ±0.5 % for any a/W (from memory)
    for alpha in GRID_045_055:
        assert bend_f(alpha) == pytest.approx(brown_srawley_bend(alpha), rel=0.005), alpha


def test_bend_K_matches_tada_stress_form_in_si_units():
    """Tada, Paris & Irwin, The Stress Analysis of Cracks Handbook, three-point
    bend S/b = 4: K = σ √(πa) F(a/b), σ = 6M/(B b²), M = PS/4,
    F = [1.99 − α(1−α)(2.15 − 3.93α + 2.7α²)] / [√π (1+2α)(1−α)^{3/2}]
    (from memory).  Evaluated in N and m, so the kN/mm → MPa·m^½ path of
    Geometry.stress_intensity is checked too."""
    g = specimens.geometry("SE(B)")
    P_kN, B, W, S = 12.0, 12.5, 25.0, 100.0
    for alpha in GRID_045_055:
        a = alpha * W
        P, Bm, Wm, Sm, am = P_kN * 1e3, B / 1e3, W / 1e3, S / 1e3, a / 1e3
        sigma = 6 * (P * Sm / 4) / (Bm * Wm**2)
        F = (1.99 - alpha * (1 - alpha) * (2.15 - 3.93 * alpha + 2.7 * alpha**2)) / (
            math.sqrt(math.pi) * (1 + 2 * alpha) * (1 - alpha) ** 1.5)
        K_si = sigma * math.sqrt(math.pi * am) * F / 1e6
        assert g.stress_intensity(P_kN, B, W, a, dims={"S": S}) == pytest.approx(K_si, rel=1e-12)


def test_compact_K_in_si_units():
    """K = P/(B W^½) f(a/W), ASTM E399 Annex A4, evaluated in N and m."""
    g = specimens.geometry("C(T)")
    P_kN, B, W, a = 30.0, 25.0, 50.0, 25.0
    K_si = P_kN * 1e3 / (B / 1e3 * math.sqrt(W / 1e3)) * compact_f(a / W) / 1e6
    assert g.stress_intensity(P_kN, B, W, a) == pytest.approx(K_si, rel=1e-12)


# DC(T) and A(T): one source each (ASTM E399 Annex A6, A5, from memory).  The
# check values are the printed coefficients evaluated by numpy's Polynomial,
# an implementation separate from the module's.

def test_disk_compact_f_against_separate_evaluation():
    g = specimens.geometry("DC(T)")
    poly = Polynomial([0.76, 4.8, -11.58, 11.43, -4.08])
    for alpha in GRID_03_07:
        expected = (2 + alpha) * poly(alpha) / (1 - alpha) ** 1.5
        assert g.f(alpha) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("X, r1, r2", [(25.0, 60.0, 110.0), (0.0, 60.0, 110.0), (25.0, 0.0, 50.0)])
def test_arc_tension_f_against_separate_evaluation(X, r1, r2):
    g = specimens.geometry("A(T)")
    W = 50.0
    poly = Polynomial([3.74, -6.30, 6.32, -2.43])
    for alpha in GRID_03_07:
        core = math.sqrt(alpha) * poly(alpha) / (1 - alpha) ** 1.5
        expected = ((3 * X / W + 1.9 + 1.1 * alpha)
                    * (1 + 0.25 * (1 - alpha) ** 2 * (1 - r1 / r2)) * core)
        got = g.f(alpha, {"W": W, "X": X, "r1": r1, "r2": r2})
        assert got == pytest.approx(expected, rel=1e-12)


def test_arc_tension_K_is_linear_in_the_offset():
    # the X bracket is the only place X enters: K(X) is a straight line
    g = specimens.geometry("A(T)")
    K = [g.K_per_load(25.0, 50.0, 25.0, dims={"X": X, "r1": 60.0, "r2": 110.0})
         for X in (0.0, 12.5, 25.0)]
    assert K[1] - K[0] == pytest.approx(K[2] - K[1], rel=1e-12)
    assert K[2] > K[0]


def test_arc_bend_is_the_straight_beam_limit_and_says_so():
    g = specimens.geometry("A(B)")
    assert g.caveat == CAVEAT and "Annex A9" in g.caveat
    for alpha in GRID_045_055:
        assert g.f(alpha, dims_for("A(B)")) == bend_f(alpha)
    K_ab = g.K_per_load(12.5, 25.0, 12.5, dims={"S": 100.0, "r1": 60.0, "r2": 85.0})
    K_seb = specimens.geometry("SE(B)").K_per_load(12.5, 25.0, 12.5, dims={"S": 100.0})
    assert K_ab == pytest.approx(K_seb, rel=1e-12)


@pytest.mark.parametrize("designation", ["C(T)", "SE(B)", "DC(T)", "A(T)"])
def test_verified_geometries_carry_no_caveat(designation):
    assert specimens.geometry(designation).caveat == ""


# --- K from load: side grooves, dimensions ------------------------------------

@pytest.mark.parametrize("designation", ["C(T)", "SE(B)", "DC(T)", "A(T)", "A(B)"])
@settings(max_examples=25, deadline=None)
@given(B=st.floats(5, 100), groove=st.floats(0.5, 0.95), alpha=st.floats(0.3, 0.7))
def test_side_grooved_K_ratio_is_sqrt_B_over_BN(designation, B, groove, alpha):
    # ASTM E399 / E1820: B in K becomes (B B_N)^½ for side-grooved specimens
    g = specimens.geometry(designation)
    W = 2 * B
    B_N = groove * B
    d = dims_for(designation, W)
    plain = g.K_per_load(B, W, alpha * W, None, d)
    grooved = g.K_per_load(B, W, alpha * W, B_N, d)
    assert grooved / plain == pytest.approx(math.sqrt(B / B_N), rel=1e-12)


@pytest.mark.parametrize("designation, given, missing", [
    ("SE(B)", {}, "S"),
    ("A(T)", {"X": 25.0, "r1": 60.0}, "r2"),
    ("A(T)", {"r1": 60.0, "r2": 110.0}, "X"),
    ("A(B)", {"S": 200.0, "r2": 110.0}, "r1"),
])
def test_missing_dimension_is_named(designation, given, missing):
    g = specimens.geometry(designation)
    with pytest.raises(ValueError, match=rf"\b{missing}\b"):
        g.K_per_load(25.0, 50.0, 25.0, dims=given)


@pytest.mark.parametrize("designation", ["A(T)", "A(B)"])
def test_impossible_radii_are_refused(designation):
    g = specimens.geometry(designation)
    d = dims_for(designation)
    d.update(r1=110.0, r2=60.0)
    with pytest.raises(ValueError, match="r1 < r2"):
        g.K_per_load(25.0, 50.0, 25.0, dims=d)


# --- lookup -------------------------------------------------------------------

@pytest.mark.parametrize("text, designation", [
    ("C(T)", "C(T)"), ("ct", "C(T)"), ("SE(B)", "SE(B)"), ("senb", "SE(B)"),
    ("DC(T)", "DC(T)"), ("dct", "DC(T)"), ("Disk", "DC(T)"),
    ("A(T)", "A(T)"), ("at", "A(T)"), ("arc tension", "A(T)"), ("C-shaped", "A(T)"),
    ("A(B)", "A(B)"), ("ab", "A(B)"), ("Arc Bend", "A(B)"), (" a ( b ) ", "A(B)"),
])
def test_lookup_by_designation_and_alias(text, designation):
    assert specimens.geometry(text).designation == designation


def test_unknown_geometry_lists_the_known_ones():
    with pytest.raises(KeyError, match="A\\(B\\)"):
        specimens.geometry("M(T)")


def test_aliases_are_unambiguous():
    keys = {}
    for g in specimens.GEOMETRIES.values():
        for k in (g.designation,) + g.aliases:
            k = "".join(k.upper().split()).replace("-", "")
            assert keys.setdefault(k, g.designation) == g.designation, k


@pytest.mark.parametrize("designation", ["C(T)", "SE(B)", "DC(T)", "A(T)", "A(B)"])
def test_definition_is_complete(designation):
    g = specimens.geometry(designation)
    assert "ASTM E399 Annex" in g.reference
    assert g.displacement_types and g.alpha_range[0] < 0.45 and g.alpha_range[1] > 0.55
    d = dict(dims_for(designation), W=50.0)
    assert all(np.isfinite(g.f(x, d)) and g.f(x, d) > 0 for x in GRID_03_07)


# --- compliance ---------------------------------------------------------------

RELATIONS = [("C(T)", "load_line"), ("C(T)", "front_face"), ("SE(B)", "cmod")]


@pytest.mark.parametrize("designation, kind", RELATIONS)
@pytest.mark.parametrize("B_N", [None, 20.0])
def test_forward_and_inverse_agree(designation, kind, B_N):
    """The forward and inverse relations come from different publications
    (C(T) load line: Saxena & Hudak 1978 vs ASTM E1820 A2; C(T) front face:
    19.75/(1 − a/W)² form vs ASTM E647; SE(B) CMOD: Tada, Paris & Irwin V1 vs
    ASTM E1820 A1; all from memory): they must agree to 0.1 % in a/W."""
    g = specimens.geometry(designation)
    B, W, E = 25.0, 50.0, 205000.0
    S = 200.0 if designation == "SE(B)" else None
    for alpha in GRID_03_07:
        C = comp.compliance_from_crack_length(g, alpha * W, B, W, E, B_N, S, kind)
        a = comp.crack_length_from_compliance(g, C, B, W, E, B_N, S, kind)
        assert a / W == pytest.approx(alpha, rel=1e-3), alpha


def test_e1820_and_e647_load_line_inverses_agree():
    # ASTM E647 C(T) load-line coefficients, printed to 5 figures (from memory)
    e647 = Polynomial([1.0002, -4.0632, 11.242, -106.04, 464.33, -650.68])
    e1820 = Polynomial(comp.E1820_CT_LOAD_LINE)
    for alpha in GRID_03_07:
        u = 1 / (math.sqrt(comp.compact_load_line_Z(alpha)) + 1)
        assert e647(u) == pytest.approx(e1820(u), rel=5e-4)


def test_compliance_dimensionless_groups_hand_computed():
    # Z = E B_e C (C(T)) and E' B_e C 4W/S (SE(B)); E in MPa, C in mm/kN
    ct, seb = specimens.geometry("C(T)"), specimens.geometry("SE(B)")
    C = comp.compliance_from_crack_length(ct, 25.0, 25.0, 50.0, 200000.0)
    assert C * 200000.0 * 25.0 / 1000 == pytest.approx(comp.compact_load_line_Z(0.5), rel=1e-12)
    C = comp.compliance_from_crack_length(seb, 15.0, 25.0, 30.0, 200000.0, 20.0, 100.0, nu=0.3)
    B_e = 25.0 - 5.0**2 / 25.0
    Z = C * 200000.0 / (1 - 0.09) * B_e * (4 * 30.0 / 100.0) / 1000
    assert Z == pytest.approx(comp.bend_cmod_Z(0.5), rel=1e-12)


def test_bend_cmod_uses_plane_strain_modulus():
    seb = specimens.geometry("SE(B)")
    args = (12.5, 12.5, 25.0, 205000.0, None, 100.0, "cmod", 0.3)
    C_prime = comp.compliance_from_crack_length(seb, *args)
    C_plain = comp.compliance_from_crack_length(seb, *args, plane_strain=False)
    assert C_prime / C_plain == pytest.approx(1 - 0.3**2, rel=1e-12)


@settings(max_examples=60, deadline=None)
@given(alpha=st.floats(0.3, 0.7), W=st.floats(10, 200), k=st.floats(0.1, 10),
       groove=st.floats(0.7, 1.0), rel=st.sampled_from(RELATIONS))
def test_compliance_scales_with_size(alpha, W, k, groove, rel):
    # a geometrically similar specimen k times larger has 1/k the compliance
    g = specimens.geometry(rel[0])
    B = W / 2
    B_N = groove * B if groove < 1 else None
    S = 4 * W if rel[0] == "SE(B)" else None
    C = comp.compliance_from_crack_length(g, alpha * W, B, W, 205000.0, B_N, S, rel[1])
    C_k = comp.compliance_from_crack_length(g, alpha * W * k, k * B, k * W, 205000.0,
                                            None if B_N is None else k * B_N,
                                            None if S is None else k * S, rel[1])
    assert C_k == pytest.approx(C / k, rel=1e-9)
    a_k = comp.crack_length_from_compliance(g, C_k, k * B, k * W, 205000.0,
                                            None if B_N is None else k * B_N,
                                            None if S is None else k * S, rel[1])
    assert a_k / (k * W) == pytest.approx(alpha, rel=1e-3)


def test_side_grooves_enter_through_effective_thickness():
    ct = specimens.geometry("C(T)")
    plain = comp.compliance_from_crack_length(ct, 25.0, 25.0, 50.0, 205000.0)
    grooved = comp.compliance_from_crack_length(ct, 25.0, 25.0, 50.0, 205000.0, B_N=20.0)
    assert grooved / plain == pytest.approx(25.0 / specimens.effective_thickness(25.0, 20.0))


def test_relations_attached_only_where_published():
    assert specimens.geometry("C(T)").compliance.displacement_types == ("load_line", "front_face")
    assert specimens.geometry("SE(B)").compliance.displacement_types == ("cmod",)
    for d in ("DC(T)", "A(T)", "A(B)"):
        g = specimens.geometry(d)
        assert g.compliance is None
        with pytest.raises(ValueError, match=re.escape(d)):
            comp.crack_length_from_compliance(g, 0.01, 25.0, 50.0, 205000.0)


def test_default_displacement_type_is_the_geometry_default():
    ct = specimens.geometry("C(T)")
    C_default = comp.compliance_from_crack_length(ct, 25.0, 25.0, 50.0, 205000.0)
    C_ll = comp.compliance_from_crack_length(ct, 25.0, 25.0, 50.0, 205000.0,
                                             displacement_type="load_line")
    C_ff = comp.compliance_from_crack_length(ct, 25.0, 25.0, 50.0, 205000.0,
                                             displacement_type="front_face")
    assert C_default == C_ll and C_ff > C_ll


def test_unsupported_displacement_type_names_the_held_ones():
    seb = specimens.geometry("SE(B)")
    with pytest.raises(ValueError, match="held: cmod"):
        comp.crack_length_from_compliance(seb, 0.01, 12.5, 25.0, 205000.0, S=100.0,
                                          displacement_type="load_line")


def test_bend_compliance_needs_the_span():
    seb = specimens.geometry("SE(B)")
    with pytest.raises(ValueError, match="span S"):
        comp.compliance_from_crack_length(seb, 12.5, 12.5, 25.0, 205000.0)


def test_compliance_outside_the_relation_range_is_refused():
    ct = specimens.geometry("C(T)")
    with pytest.raises(ValueError, match="outside"):
        comp.compliance_from_crack_length(ct, 5.0, 25.0, 50.0, 205000.0)  # a/W = 0.1
    with pytest.raises(ValueError, match="outside"):  # a tiny compliance means a/W near 0
        comp.crack_length_from_compliance(ct, 1e-5, 25.0, 50.0, 205000.0)
    with pytest.raises(ValueError, match="> 0"):
        comp.crack_length_from_compliance(ct, -0.01, 25.0, 50.0, 205000.0)


# --- crack front --------------------------------------------------------------

def test_three_point_average_and_spread():
    avg = cf.three_point_average([24.8, 25.4, 25.0])
    assert avg.average == pytest.approx(25.066666666666666)
    assert avg.scheme == cf.THREE_POINT and "E399" in avg.source
    d = cf.three_point_spread([24.8, 25.4, 25.0])
    assert d.measure == pytest.approx(0.6 / 25.066666666666666)
    assert d.within and d.tolerance == 0.10 and "from memory" in d.source
    bad = cf.three_point_spread([24.0, 27.0, 25.0])
    assert bad.measure == pytest.approx(3.0 / 25.333333333333332) and not bad.within
    own = cf.three_point_spread([24.0, 27.0, 25.0], max_spread=0.2, source="customer spec 7")
    assert own.within and own.source == "customer spec 7"


def test_nine_point_average_hand_computed():
    r = [23.0, 25.0, 25.5, 26.0, 26.2, 26.0, 25.5, 25.0, 24.0]
    expected = ((23.0 + 24.0) / 2 + 25.0 + 25.5 + 26.0 + 26.2 + 26.0 + 25.5 + 25.0) / 8
    avg = cf.nine_point_average(r)
    assert avg.average == pytest.approx(expected) and avg.scheme == cf.NINE_POINT


@settings(max_examples=50, deadline=None)
@given(base=st.floats(5, 50), i=st.integers(0, 8), delta=st.floats(-1, 1))
def test_nine_point_weights(base, i, delta):
    # outer readings weigh 1/16, inner ones 1/8 (E1820 nine-point formula)
    r = [base] * 9
    r[i] += delta
    weight = 1 / 16 if i in (0, 8) else 1 / 8
    assert cf.nine_point_average(r).average == pytest.approx(base + weight * delta, abs=1e-9)


def test_nine_point_deviation_and_tolerance():
    r = [23.0, 25.0, 25.5, 26.0, 27.5, 26.0, 25.5, 25.0, 24.0]
    d = cf.nine_point_deviation(r, B=25.0, W=50.0)
    a0 = cf.nine_point_average(r).average
    assert len(d.deviations) == 7
    assert d.measure == pytest.approx(27.5 - a0)
    assert d.tolerance == pytest.approx(0.1 * math.sqrt((50.0 - a0) * 25.0))
    assert d.within == (27.5 - a0 <= 0.1 * math.sqrt((50.0 - a0) * 25.0))
    f = cf.nine_point_deviation(r, B=25.0, W=50.0, rule="fraction")
    assert f.tolerance == pytest.approx(0.05 * a0) and "earlier editions" in f.source
    # the outer readings are not among those checked
    r_outer = [10.0] + [25.0] * 7 + [10.0]
    assert cf.nine_point_deviation(r_outer, 25.0, 50.0).measure == pytest.approx(
        25.0 - cf.nine_point_average(r_outer).average)
    with pytest.raises(ValueError, match="ligament"):
        cf.nine_point_deviation(r, 25.0, 50.0, rule="median")


def test_scheme_chosen_by_number_of_readings():
    assert cf.crack_front_average([25.0] * 3).scheme == cf.THREE_POINT
    assert cf.crack_front_average([25.0] * 9).scheme == cf.NINE_POINT
    with pytest.raises(ValueError, match="got 5"):
        cf.crack_front_average([25.0] * 5)


def test_bad_reading_is_named():
    with pytest.raises(ValueError, match="reading 2"):
        cf.three_point_average([25.0, float("nan"), 25.0])
    with pytest.raises(ValueError, match="reading 9"):
        cf.nine_point_average([25.0] * 8 + [-1.0])


def test_measurement_positions():
    assert cf.measurement_positions(20.0, 40.0, 3) == (5.0, 10.0, 15.0)
    p = cf.measurement_positions(20.0, 40.0, 9)
    assert p[0] == pytest.approx(0.2) and p[-1] == pytest.approx(19.8)
    assert np.allclose(np.diff(p), (20.0 - 0.4) / 8)
    with pytest.raises(ValueError):
        cf.measurement_positions(20.0, 40.0, 4)
