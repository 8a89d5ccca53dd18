"""Elastic–plastic J, K_J and CTOD from the record K_Q came from.

Arrays and a :class:`~reduce.models.Specimen` in, a JSON-ready dict out; no
I/O.  The method, step by step (units: load kN, displacement mm, work
kN·mm = J, J in kJ/m² = N/mm = MPa·mm, K MPa·m^½, stress MPa):

1. **Point of interest.** The record ends by instability (cleavage, or a
   pop-in the test ended with) when, after P_max, the load falls below half
   of its value within a steep drop and never comes back, while the
   displacement does not go back as it would on unloading; J is then taken
   at the last sample before the drop.  Otherwise J is taken at the first
   attainment of P_max.  (Detection thresholds: common practice, no source.)
2. **Work under the record**, origin-corrected: v = v_meas − v₀ with v₀ the
   zero-load intercept of the fitted initial slope k.  Below the start j of
   the initial-slope window the record is replaced by the straight line
   from the corrected origin (this is what the origin correction does to a
   seating toe); above it the actual samples are integrated by the
   trapezoidal rule up to the point of interest n:

   .. math:: A = \\tfrac12 P_j v_j
             + \\sum_{i=j}^{n-1} \\tfrac12 (P_i + P_{i+1})(v_{i+1} - v_i),
             \\qquad A_{pl} = A - \\frac{P_n^2}{2k}

   The trapezoidal rule converges as the square of the sample spacing, so
   thinning a dense record changes A very little (tests).
3. **J** (ASTM E1820, basic method):

   .. math:: J = \\frac{K^2 (1-\\nu^2)}{E} + \\frac{\\eta\\,A_{pl}}{B_N b_0},
             \\qquad K_J = \\sqrt{\\frac{J E}{1-\\nu^2}}

   with K at the load of the point of interest, b0 = W − a0, B_N = B for
   a plain specimen, η from :mod:`specimens.plasticity` for the geometry
   and the displacement recorded.
4. **CTOD** by the plastic hinge (BS 7448-1 / ISO 12135):
   δ = K²(1 − ν²)/(2 σ_YS E) + r_p b0 V_p / (r_p b0 + a0 + z), with
   V_p = v_n − P_n/k the plastic opening at the point of interest.  For
   SE(B) it needs the crack-mouth opening; z is the knife-edge height
   (``dims["z"]``, 0 when not given).  For C(T) the opening at the load
   line is used with z = 0 (front face: z = 0.25W + knife-edge height);
   this C(T) form is less certain (see the result note).
5. **Size rules** on J/σ from ``limits.toml`` ``[elastic_plastic]``.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

import specimens
from reduce.errors import ReductionError
from reduce.models import Specimen
from reduce.rules import Check
from specimens.plasticity import PLASTIC_FACTORS, ctod_elastic, ctod_plastic

#: kN/mm (= kN·mm per mm²) in kJ/m²: 1e3 N / 1e-3 m = 1e6 J/m²
KN_PER_MM_TO_KJ_PER_M2 = 1000.0
#: MPa·m (K²/E) in kJ/m²: 1e6 N/m² · m = 1e6 J/m²
MPA_M_TO_KJ_PER_M2 = 1000.0

# Instability at the end of the record (common practice, no source): the load
# ends below this fraction of its value at the start of the drop ...
_DROP_FRACTION = 0.5
# ... the drop starts where samples stop falling by more than this fraction each ...
_STEEP_STEP = 0.05
# ... the opening goes back by less than this fraction of the elastic opening P/k ...
_UNLOAD_FRACTION = 0.1
# ... and the load at the start of the drop is at least this fraction of P_max.
_MIN_FRACTION_OF_PMAX = 0.2
# A record whose last load is within 1 % of P_max has not shown a maximum (common practice, no source).
_END_FRACTION_OF_PMAX = 0.99

ASSUMPTION_NOTE = ("the elastic-plastic factors and size limits are written from memory of ASTM E1820, "
                   "ASTM E1921, BS 7448-1 and ISO 12135; confirm them against the editions in force")


class ElasticPlasticError(ReductionError):
    """J, K_J or CTOD cannot be determined for this record or specimen."""


@dataclass(frozen=True)
class PointOfInterest:
    """Where on the record J is evaluated.

    Attributes
    ----------
    index : int
        Sample index.
    kind : {"P_max", "instability"}
        First attainment of P_max, or the last sample before the final drop.
    P_kN : float
        Load there, kN.
    v_mm : float
        Origin-corrected displacement there, mm.
    """

    index: int
    kind: str
    P_kN: float
    v_mm: float


@lru_cache(maxsize=None)
def _limits() -> dict:
    with open(Path(__file__).with_name("limits.toml"), "rb") as fh:
        return tomllib.load(fh)["elastic_plastic"]


def _instability_index(load: np.ndarray, v: np.ndarray, slope: float) -> int | None:
    n = load.size
    i_max = int(np.argmax(load))
    if n < 2:
        return None
    later_max = np.full(n, -np.inf)
    later_max[:-1] = np.maximum.accumulate(load[::-1])[::-1][1:]
    P_max = float(load[i_max])
    ok = (later_max < _DROP_FRACTION * load) & (load >= _MIN_FRACTION_OF_PMAX * P_max)
    ok[-1] = False
    ok[:i_max] = False
    cand = np.nonzero(ok)[0]
    if cand.size == 0:
        return None
    i = int(cand[0])
    while i > i_max and load[i - 1] - load[i] > _STEEP_STEP * load[i - 1]:
        i -= 1
    m = i + 1 + int(np.nonzero(load[i + 1:] < _DROP_FRACTION * load[i])[0][0])
    if v[m] < v[i] - _UNLOAD_FRACTION * load[i] / slope:
        return None  # the load falls because the specimen is unloaded
    return i


def point_of_interest(load_kN, v_mm, slope: float) -> PointOfInterest:
    """The point of the record at which J, K_J and CTOD are evaluated.

    Parameters
    ----------
    load_kN : array_like
        Load, kN, in sample order.
    v_mm : array_like
        Origin-corrected displacement, mm.
    slope : float
        Fitted initial slope k, kN/mm.

    Returns
    -------
    PointOfInterest
        The last sample before a final instability that ends the record
        (cleavage or pop-in), otherwise the first attainment of P_max.

    Raises
    ------
    ElasticPlasticError
        If the record has no positive load or the slope is not positive.

    References
    ----------
    ASTM E1820 (J_c at the onset of cleavage); BS 7448-1 (δ_c, δ_u at
    instability, δ_m at the first attainment of the maximum force), from
    memory.  The detection thresholds: common practice, no source.

    Examples
    --------
    >>> P = [0, 10, 20, 30, 2, 0]; v = [0, 0.25, 0.5, 0.75, 0.76, 0.77]
    >>> point_of_interest(P, v, 40.0)
    PointOfInterest(index=3, kind='instability', P_kN=30.0, v_mm=0.75)
    """
    load = np.asarray(load_kN, dtype=float)
    v = np.asarray(v_mm, dtype=float)
    if load.size == 0 or not float(load.max()) > 0.0:
        raise ElasticPlasticError("the record has no positive load")
    if not slope > 0.0:
        raise ElasticPlasticError(f"the initial slope must be positive, got {slope!r} kN/mm")
    i = _instability_index(load, v, slope)
    kind = "instability"
    if i is None:
        i, kind = int(np.argmax(load)), "P_max"
    return PointOfInterest(i, kind, float(load[i]), float(v[i]))


def work_under_record(load_kN, v_mm, i_end: int, i_join: int = 0) -> float:
    """Work under the origin-corrected record up to sample ``i_end``, kN·mm = J.

    The line from the origin to sample ``i_join`` stands for the record
    below it; the samples from ``i_join`` to ``i_end`` are integrated by the
    trapezoidal rule (module docstring, step 2).

    Parameters
    ----------
    load_kN, v_mm : array_like
        Load, kN, and origin-corrected displacement, mm.
    i_end, i_join : int
        Last sample integrated; first sample of the actual record used.

    Raises
    ------
    ElasticPlasticError
        If not 0 <= i_join <= i_end < number of samples.

    References
    ----------
    ASTM E1820 (area under the load–displacement record); the trapezoidal
    rule, e.g. Press et al., Numerical Recipes, 3rd ed., eq. 4.1.3.

    Examples
    --------
    >>> work_under_record([0, 10, 20], [0, 0.5, 1.0], 2)   # triangle ½·20·1
    10.0
    """
    P = np.asarray(load_kN, dtype=float)
    v = np.asarray(v_mm, dtype=float)
    if not 0 <= i_join <= i_end < P.size:
        raise ElasticPlasticError(f"cannot integrate from sample {i_join} to {i_end} of {P.size}")
    seg_P, seg_v = P[i_join:i_end + 1], v[i_join:i_end + 1]
    trapezoids = 0.5 * (seg_P[1:] + seg_P[:-1]) * np.diff(seg_v)
    return float(0.5 * P[i_join] * v[i_join] + trapezoids.sum())


def plastic_work(load_kN, v_mm, i_end: int, slope: float, i_join: int = 0) -> tuple[float, float]:
    """Total and plastic work under the record up to ``i_end``, kN·mm = J.

    .. math:: A_{pl} = A - \\frac{P_n^2}{2k}

    Parameters
    ----------
    load_kN, v_mm : array_like
        Load, kN, and origin-corrected displacement, mm.
    i_end : int
        The point of interest n.
    slope : float
        Initial slope k, kN/mm (its inverse is the elastic compliance).
    i_join : int
        See :func:`work_under_record`.

    Returns
    -------
    (A, A_pl) : tuple of float
        A_pl may be slightly negative on a record that is linear within its
        scatter; the caller decides.

    Raises
    ------
    ElasticPlasticError
        If the slope is not positive or the indices are out of range.

    References
    ----------
    ASTM E1820 Annexes A1–A2, A_pl = A − C0 P²/2 (from memory).

    Examples
    --------
    >>> plastic_work([0, 20, 22], [0, 0.5, 1.5], 2, 40.0)   # 5 + 21 - 22²/80
    (26.0, 19.95)
    """
    if not slope > 0.0:
        raise ElasticPlasticError(f"the initial slope must be positive, got {slope!r} kN/mm")
    A = work_under_record(load_kN, v_mm, i_end, i_join)
    P_n = float(np.asarray(load_kN, dtype=float)[i_end])
    return A, A - P_n**2 / (2.0 * slope)


def elastic_J(K: float, E_MPa: float, nu: float) -> float:
    """Elastic part of J from K in plane strain, kJ/m².

    .. math:: J_{el} = \\frac{K^2 (1-\\nu^2)}{E}

    Parameters
    ----------
    K : float
        MPa·m^½.
    E_MPa : float
        Young's modulus, MPa.
    nu : float
        Poisson's ratio.

    Raises
    ------
    ElasticPlasticError
        If E is not positive.

    References
    ----------
    ASTM E1820 (J_el from K), from memory.

    Examples
    --------
    >>> round(elastic_J(100.0, 200000.0, 0.3), 3)   # 1e4 * 0.91 / 2e5 MPa·m
    45.5
    """
    if not E_MPa > 0.0:
        raise ElasticPlasticError(f"E must be positive, got {E_MPa!r} MPa")
    return K**2 * (1.0 - nu**2) / E_MPa * MPA_M_TO_KJ_PER_M2


def plastic_J(eta: float, A_pl_J: float, B_N: float, b0: float) -> float:
    """Plastic part of J, kJ/m².

    .. math:: J_{pl} = \\frac{\\eta\\,A_{pl}}{B_N\\,b_0}

    Parameters
    ----------
    eta : float
        Plastic η of the geometry and displacement.
    A_pl_J : float
        Plastic work, kN·mm (= J).
    B_N, b0 : float
        Net thickness and initial ligament, mm.

    Raises
    ------
    ElasticPlasticError
        If B_N or b0 is not positive.

    References
    ----------
    ASTM E1820 Annexes A1–A2, basic method (from memory).

    Examples
    --------
    >>> plastic_J(2.0, 10.0, 25.0, 25.0)   # 2·10 kN·mm / 625 mm² = 0.032 kN/mm
    32.0
    """
    if not (B_N > 0.0 and b0 > 0.0):
        raise ElasticPlasticError(f"B_N and b0 must be positive, got {B_N!r} mm and {b0!r} mm")
    return eta * A_pl_J / (B_N * b0) * KN_PER_MM_TO_KJ_PER_M2


def K_from_J(J: float, E_MPa: float, nu: float) -> float:
    """K_J from J in plane strain, MPa·m^½.

    .. math:: K_J = \\sqrt{\\frac{J E}{1-\\nu^2}}

    Raises
    ------
    ElasticPlasticError
        If J is negative or E is not positive.

    References
    ----------
    ASTM E1820 (K_J), ASTM E1921 (K_Jc), from memory.

    Examples
    --------
    >>> round(K_from_J(45.5, 200000.0, 0.3), 6)
    100.0
    """
    if J < 0.0 or not E_MPa > 0.0:
        raise ElasticPlasticError(f"need J >= 0 and E > 0, got J = {J!r} kJ/m2, E = {E_MPa!r} MPa")
    return math.sqrt(J / MPA_M_TO_KJ_PER_M2 * E_MPa / (1.0 - nu**2))


def effective_yield(yield_MPa: float, tensile_MPa: float | None) -> tuple[float, str]:
    """σ_Y = (σ_YS + σ_TS)/2 for the J size rules, MPa, with how it was found.

    Without a tensile strength σ_Y is taken as the yield strength, which
    makes the size rules stricter.

    References
    ----------
    ASTM E1820 (effective yield strength), from memory.

    Examples
    --------
    >>> effective_yield(500.0, 700.0)
    (600.0, 'mean of yield and tensile strength')
    """
    if tensile_MPa is None:
        return yield_MPa, "tensile strength not given: sigma_Y taken as the yield strength (stricter)"
    return 0.5 * (yield_MPa + tensile_MPa), "mean of yield and tensile strength"


def _size_check(name, value, required, label, clause, note):
    if required is None:
        return Check(name, None, value, f"{label} (not computed)", clause, note)
    return Check(name, bool(value >= required), value, f"{label} = {required:.2f} mm", clause, note)


def elastic_plastic_checks(*, a_over_W, B, b0, J, CTOD, sigma_Y, yield_MPa, E_MPa, nu,
                           sigma_note="") -> tuple[list[Check], float | None]:
    """The size checks of J, K_J and CTOD.

    Parameters
    ----------
    a_over_W : float
        a0/W.
    B, b0 : float
        Thickness and initial ligament W − a0, mm.
    J, CTOD : float or None
        J in kJ/m² and δ in mm; ``None`` when not determined (the checks
        on them are then not assessed).
    sigma_Y, yield_MPa, E_MPa : float
        Effective yield strength, 0.2 % yield strength and modulus, MPa.
    nu : float
        Poisson's ratio.

    Returns
    -------
    (list of Check, float or None)
        The checks and K_Jc(limit), MPa·m^½.

    References
    ----------
    ASTM E1820, ASTM E1921, ISO 12135 (clauses in ``limits.toml``).
    """
    L = _limits()
    r = L["a_over_W"]
    checks = [Check("ep_a_over_W", bool(r["min"] <= a_over_W <= r["max"]), a_over_W,
                    f"{r['min']:.3f} to {r['max']:.3f}", r["clause"])]
    stress = {"flow": sigma_Y, "yield": yield_MPa}
    j, kjc, c = L["j_size"], L["kjc_size"], L["ctod_size"]
    s_j, s_k = stress[j["stress"]], stress[kjc["stress"]]
    no_J = "" if J is not None else "J not determined"
    req_j = None if J is None else j["factor"] * J / s_j
    note_j = no_J or f"sigma_Y = {s_j:.0f} MPa ({sigma_note}); applied to J at the point of interest"
    checks.append(_size_check("j_thickness_size", B, req_j, f"B >= {j['factor']:g} J/sigma_Y",
                              j["clause"], note_j))
    checks.append(_size_check("j_ligament_size", b0, req_j, f"b0 >= {j['factor']:g} J/sigma_Y",
                              j["clause"], note_j))
    K_lim = math.sqrt(E_MPa * b0 / 1000.0 * s_k / (kjc["M"] * (1.0 - nu**2)))
    req_k = None if J is None else kjc["M"] * J / s_k
    checks.append(_size_check("kjc_ligament_size", b0, req_k, f"b0 >= {kjc['M']:g} J/sigma_ys",
                              kjc["clause"], no_J or f"K_Jc(limit) = {K_lim:.1f} MPa m^0.5 "
                              f"with sigma_ys = {s_k:.0f} MPa"))
    req_c = None if CTOD is None else c["factor"] * CTOD
    checks.append(_size_check("ctod_size", min(B, b0), req_c, f"min(B, W - a0) >= {c['factor']:g} delta",
                              c["clause"], "" if CTOD is not None else "CTOD not determined"))
    return checks, K_lim


def _qualifies(checks, names) -> bool:
    by = {ch.name: ch for ch in checks}
    return all(n in by and by[n].passed is True for n in names)


_KEYS = ("point", "point_note", "P_kN", "v_mm", "displacement_type", "work_total_J", "work_plastic_J", "eta",
         "eta_source", "J_el_kJ_per_m2", "J_pl_kJ_per_m2", "J_kJ_per_m2", "K_J_MPa_sqrt_m",
         "V_p_mm", "r_p", "r_p_source", "z_mm", "CTOD_el_mm", "CTOD_pl_mm", "CTOD_mm",
         "poisson", "poisson_assumed", "sigma_Y_MPa", "K_Jc_limit_MPa_sqrt_m")


def not_assessed(reason: str) -> dict:
    """The ``elastic_plastic`` object of a record on which nothing could be determined."""
    out = dict.fromkeys(_KEYS)
    out.update(checks=[], valid=False, J_valid=False, K_J_valid=False, CTOD_valid=False,
               notes=[reason], assumptions=[])
    return out


def elastic_plastic_result(load_kN, disp_mm, specimen: Specimen, sec, a_mm: float,
                           K_per_kN: float) -> dict:
    """J, K_J and CTOD of one record with their checks, as JSON-ready data.

    Parameters
    ----------
    load_kN, disp_mm : array_like
        The record: load, kN, and displacement as measured, mm.
    specimen : Specimen
        Dimensions (mm), yield, tensile strength and modulus (MPa), Poisson's
        ratio, displacement type and ``dims["z"]`` (knife-edge height, mm).
    sec : reduce.construction.SecantResult
        The secant construction of the same record (initial slope, origin).
    a_mm : float
        Crack length a0, mm.
    K_per_kN : float
        K per unit load of the specimen, MPa·m^½/kN.

    Returns
    -------
    dict
        The keys of :data:`_KEYS`, ``checks``, ``valid`` (every check
        assessed and passed), ``J_valid``, ``K_J_valid``, ``CTOD_valid``,
        ``notes`` (what was found) and ``assumptions`` (what was assumed
        or is uncertain; a certificate prints them).  When nothing can be
        determined the numbers are ``None`` and the notes say why; this
        function does not raise for such data.

    References
    ----------
    ASTM E1820 Annexes A1–A2; ASTM E1921; BS 7448-1; ISO 12135 (module docstring).
    """
    try:
        return _compute(np.asarray(load_kN, dtype=float), np.asarray(disp_mm, dtype=float),
                        specimen, sec, a_mm, K_per_kN)
    except ElasticPlasticError as exc:
        return not_assessed(str(exc))


def _compute(load, disp, specimen, sec, a, K_per_kN) -> dict:
    L = _limits()
    notes, assumptions = [], []
    geo = specimens.geometry(specimen.geometry)
    designation = geo.designation
    factors = PLASTIC_FACTORS.get(designation)
    if factors is None:
        raise ElasticPlasticError(f"no plastic eta or r_p factors are held for {designation}; "
                                  f"held: {', '.join(PLASTIC_FACTORS)}")
    dtype = specimen.displacement_type or geo.displacement_types[0]
    if dtype not in geo.displacement_types:
        raise ElasticPlasticError(f"displacement type {dtype!r} is not one of {designation}: "
                                  f"{', '.join(geo.displacement_types)}")
    nu = specimen.poisson
    assumed = nu is None
    if assumed:
        nu = float(L["poisson_default"])
        assumptions.append(f"Poisson's ratio not given: {nu:g} assumed (common practice for steels, no source)")
    sigma_Y, sigma_note = effective_yield(specimen.yield_MPa, specimen.tensile_MPa)
    if specimen.tensile_MPa is None:
        assumptions.append(sigma_note)

    k = sec.fit.slope
    v = disp - sec.fit.origin_mm
    poi = point_of_interest(load, v, k)
    if poi.kind == "instability":
        point_note = ("the record ends by instability (cleavage or pop-in); values at the last sample "
                      "before the drop (J_c, K_Jc; delta_c or delta_u depending on stable crack growth, "
                      "which is not measured here)")
    else:
        point_note = "values at the first attainment of P_max (J_m, delta_m)"
        if load[-1] >= _END_FRACTION_OF_PMAX * poi.P_kN:
            notes.append(f"the load had not fallen {1 - _END_FRACTION_OF_PMAX:.0%} below P_max when the "
                         "record ends: the maximum may not have been reached, the values are close to "
                         "those at the end of the test")
    if sec.curve_type == "II":
        notes.append("a pop-in before P_5 was found; its significance (BS 7448-1) is not assessed")
    B_N = specimen.B_N or specimen.B
    W, B = specimen.W, specimen.B
    b0 = W - a
    K = poi.P_kN * K_per_kN
    i_join = min(sec.fit.index_range[0], poi.index)
    A, A_pl = plastic_work(load, v, poi.index, k, i_join)
    if A_pl < 0.0:
        notes.append(f"plastic work {A_pl:.4g} J came out negative (linear within scatter): taken as 0")
        A_pl = 0.0
    J_el = elastic_J(K, specimen.E_MPa, nu)
    eta = eta_src = J_pl = J = K_J = None
    if dtype in factors.eta:
        eta_fn, eta_src = factors.eta[dtype]
        eta = eta_fn(a / W)
        J_pl = plastic_J(eta, A_pl, B_N, b0)
        J = J_el + J_pl
        K_J = K_from_J(J, specimen.E_MPa, nu)
    else:
        notes.append(f"J not determined: no plastic eta is held for {designation} with the "
                     f"{dtype} displacement (held: {', '.join(factors.eta)})")

    V_p = poi.v_mm - poi.P_kN / k
    r_p = z = d_el = d_pl = CTOD = None
    if dtype in factors.hinge_offset_over_W:
        z = factors.hinge_offset_over_W[dtype] * W + float(specimen.dims.get("z") or 0.0)
        if specimen.dims.get("z") is None:
            assumptions.append("knife-edge height z not given: taken as 0 for the CTOD")
        r_p = factors.r_p
        d_el = ctod_elastic(K, specimen.E_MPa, nu, specimen.yield_MPa)
        d_pl = ctod_plastic(W, a, max(V_p, 0.0), r_p, z)
        CTOD = d_el + d_pl
        if factors.ctod_caveat:
            assumptions.append(factors.ctod_caveat)
    else:
        notes.append(f"CTOD not determined: the plastic hinge of {designation} needs the "
                     f"{' or '.join(factors.hinge_offset_over_W)} displacement, the record is {dtype}")

    checks, K_lim = elastic_plastic_checks(a_over_W=a / W, B=B, b0=b0, J=J, CTOD=CTOD,
                                           sigma_Y=sigma_Y, yield_MPa=specimen.yield_MPa,
                                           E_MPa=specimen.E_MPa, nu=nu, sigma_note=sigma_note)
    q = L["qualifies"]
    assumptions.append(ASSUMPTION_NOTE)
    return {
        "point": poi.kind, "point_note": point_note, "P_kN": poi.P_kN, "v_mm": poi.v_mm,
        "displacement_type": dtype,
        "work_total_J": A, "work_plastic_J": A_pl, "eta": eta, "eta_source": eta_src,
        "J_el_kJ_per_m2": J_el, "J_pl_kJ_per_m2": J_pl, "J_kJ_per_m2": J, "K_J_MPa_sqrt_m": K_J,
        "V_p_mm": V_p, "r_p": r_p, "r_p_source": factors.r_p_source if r_p else None, "z_mm": z,
        "CTOD_el_mm": d_el, "CTOD_pl_mm": d_pl, "CTOD_mm": CTOD,
        "poisson": nu, "poisson_assumed": assumed, "sigma_Y_MPa": sigma_Y,
        "K_Jc_limit_MPa_sqrt_m": K_lim,
        "checks": [c.to_dict() for c in checks],
        "valid": _qualifies(checks, L["core_checks"]),
        "J_valid": _qualifies(checks, q["J"]) and J is not None,
        "K_J_valid": _qualifies(checks, q["K_J"]) and K_J is not None,
        "CTOD_valid": _qualifies(checks, q["CTOD"]) and CTOD is not None,
        "notes": notes, "assumptions": assumptions,
    }
