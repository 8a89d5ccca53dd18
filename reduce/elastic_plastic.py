"""Elastic–plastic J, K_J and CTOD from the record K_Q came from.

Arrays and a :class:`~reduce.models.Specimen` in, a JSON-ready dict out; no
I/O.  The method, step by step (units: load kN, displacement mm, work
kN·mm = J, J in kJ/m² = N/mm = MPa·mm, K MPa·m^½, stress MPa):

1. **Event (point of interest)**, the first of these that the record shows:

   a. ``pop_in``: the first significant pop-in.  Significance is the E399
      one: the record is Type II (a load before P_5 exceeds P_5); the pop-in
      is the sample where the construction took P_Q.  E1820 and BS 7448-1
      take a significant pop-in as the event (J_c, δ_c), from memory.
   b. ``instability``: the record ends by instability (cleavage or unstable
      fracture) — after P_max the load falls below half of its value within a
      steep drop and never comes back, while the displacement does not go
      back as it would on unloading; values at the last sample before the
      drop (J_c, K_Jc, δ_c; δ_u if stable crack extension preceded it, which
      is not measured here).
   c. ``P_max``: a load maximum actually reached and followed by a falling
      load — the record smoothed as for the secant search falls, at
      displacements beyond that of its maximum, by more than 1 % of P_max
      and four standard errors of its scatter; values at the first
      attainment of P_max (J_m, δ_m, the maximum load plateau).
   d. ``end_of_record``: none of these — the load was still rising (or
      level) when the record ends.  Values at the highest load are reported
      "at end of record"; no event is defined, so their validity is not
      assessed.

   (Detection thresholds: common practice, no source.)
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
5. **Verdicts**, one per quantity, from named checks (``limits.toml``
   ``[elastic_plastic]``): the a0/W range, the crack-front, precrack and
   surface-trace checks of the K_Ic reduction carried over (``ep_…``, the
   E399 readings as a proxy for E1820's own), and the size rule of the
   method the quantity is used with — B, b0 ≥ 10 J/σ_Y for J (the E1820 J
   rule, applied to J_c and J_m as a size check), the E1921 K_Jc(limit) for
   K_Jc only at cleavage of a ferritic steel with 0.45 ≤ a0/W ≤ 0.55 and
   σ_YS in the E1921 range, the ISO 12135 capacity rule for δ.  A verdict
   is ``True`` (every requirement assessed and met), ``False`` (one failed)
   or ``None`` (not assessed: no defined event, the rule does not apply, or
   the quantity was not determined).
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

import numpy as np

import specimens
from reduce.construction import BlockExtremes, moving_average, smoothing_window
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
# A fall after the maximum must also exceed this many standard errors of the smoothed
# load (common practice, no source; the fraction of P_max is in limits.toml).
_FALL_SIGMAS = 4.0
# Samples per block of the work integral of a long record, and the least plastic
# work, as a fraction of the total, for which it is used (rounding, not a limit)
_WORK_BLOCK, _WORK_PLASTIC_MIN = 1 << 15, 1e-3

ASSUMPTION_NOTE = ("the elastic-plastic factors and size limits are written from memory of ASTM E1820, "
                   "ASTM E1921, BS 7448-1 and ISO 12135; confirm them against the editions in force")

#: the event of each point of interest in words, and the names of J, K and δ there
EVENTS = {
    "pop_in": ("the first significant pop-in (Type II record: a load before P_5 exceeds P_5)",
               ("J_c", "K_Jc", "delta_c")),
    "instability": ("the instability (cleavage or unstable fracture) that ends the record",
                    ("J_c", "K_Jc", "delta_c")),
    "P_max": ("the maximum load plateau (P_max reached, then the load falls)", ("J_m", "K_J", "delta_m")),
    "end_of_record": ("the end of the record, the load still rising (no maximum seen)", ("J", "K_J", "CTOD")),
}

#: the three quantities: output key of the value, of the verdict, and the limits.toml table of the rule
QUANTITIES = (("J", "J_kJ_per_m2", "J_valid", "j_size"),
              ("K_J", "K_J_MPa_sqrt_m", "K_J_valid", "kjc_size"),
              ("CTOD", "CTOD_mm", "CTOD_valid", "ctod_size"))


class ElasticPlasticError(ReductionError):
    """J, K_J or CTOD cannot be determined for this record or specimen."""


@dataclass(frozen=True)
class PointOfInterest:
    """Where on the record J is evaluated.

    Attributes
    ----------
    index : int
        Sample index.
    kind : {"pop_in", "instability", "P_max", "end_of_record"}
        The event (module docstring, step 1).
    P_kN : float
        Load there, kN.
    v_mm : float
        Origin-corrected displacement there, mm.
    fall : float or None
        For ``P_max``: how far the smoothed load fell after its maximum, as
        a fraction of it.
    """

    index: int
    kind: str
    P_kN: float
    v_mm: float
    fall: float | None = None

    @property
    def defined(self) -> bool:
        """Whether the point is a defined event (not merely the end of the record)."""
        return self.kind in _limits()["events"]["defined"]


@lru_cache(maxsize=None)
def _limits() -> dict:
    with open(Path(__file__).with_name("limits.toml"), "rb") as fh:
        return tomllib.load(fh)["elastic_plastic"]


class _Shifted:
    """The origin-corrected displacement v = disp - v0, computed only where it is read.

    ``v[i]`` and ``v[a:b]`` hold the values ``(disp - v0)[i]`` and
    ``(disp - v0)[a:b]`` would (a slice is a new array), without the whole
    shifted record being made.
    """

    def __init__(self, disp, v0):
        self.disp, self.v0, self.size = disp, v0, disp.size

    def __getitem__(self, i):
        return self.disp[i] - self.v0


def _instability_index(load, v, slope: float, extremes) -> int | None:
    n = load.size
    i_max = extremes.argmax()
    if n < 2:
        return None
    # the drop starts at or after P_max: only the samples from there are searched
    tail = load[i_max:]
    later_max = np.full(tail.size, -np.inf)
    later_max[:-1] = np.maximum.accumulate(tail[::-1])[::-1][1:]
    P_max = float(load[i_max])
    ok = (later_max < _DROP_FRACTION * tail) & (tail >= _MIN_FRACTION_OF_PMAX * P_max)
    ok[-1] = False
    cand = np.nonzero(ok)[0]
    if cand.size == 0:
        return None
    i = i_max + int(cand[0])
    while i > i_max and load[i - 1] - load[i] > _STEEP_STEP * load[i - 1]:
        i -= 1
    m = i + 1 + int(np.nonzero(load[i + 1:] < _DROP_FRACTION * load[i])[0][0])
    if v[m] < v[i] - _UNLOAD_FRACTION * load[i] / slope:
        return None  # the load falls because the specimen is unloaded
    return i


def load_fall_after_maximum(load_kN, v_mm, noise_sd_kN: float = 0.0) -> float | None:
    """How far the load falls after its maximum, as a fraction of it, or None.

    The record is smoothed by the moving average of the secant search
    (:func:`reduce.construction.smoothing_window`).  Only samples at a
    displacement beyond that of the smoothed maximum count, so an unloading
    (the opening goes back) is not a fall.  The fall counts when it exceeds
    both ``min_fall_fraction`` of the maximum (``limits.toml``) and four
    standard errors of the smoothed load.

    Parameters
    ----------
    load_kN, v_mm : array_like
        Load, kN, and displacement, mm, in sample order.
    noise_sd_kN : float
        Scatter of the load, kN (the residual standard deviation of the
        initial-slope fit).

    Returns
    -------
    float or None
        The fall (largest, at displacements beyond the maximum) over the
        smoothed maximum; ``None`` when the load does not fall by enough:
        no maximum was seen.

    References
    ----------
    BS 7448-1 (δ_m, J_m at the first attainment of a maximum force plateau),
    from memory; thresholds: common practice, no source.

    Examples
    --------
    >>> v = np.linspace(0.0, 2.0, 201)
    >>> round(load_fall_after_maximum(30 - 5 * (v - 1.0) ** 2, v), 3)   # 5 kN below 30 kN
    0.167
    >>> load_fall_after_maximum(30 * v / (1 + v), v) is None             # still rising
    True
    """
    load = np.asarray(load_kN, dtype=float)
    return _load_fall(load, np.asarray(v_mm, dtype=float), noise_sd_kN, BlockExtremes(load))


def _load_fall(load, v, noise_sd_kN, extremes):
    w = smoothing_window(load.size)
    start = _smoothed_max_start(load, w // 2, extremes)
    smooth = moving_average(load, w, start)  # samples start, start + 1, ...
    i = start + int(np.argmax(smooth))
    top = float(smooth[i - start])
    beyond = v[i + 1:] > v[i]
    if not (top > 0.0 and beyond.any()):
        return None
    low = float(smooth[i - start + 1:][beyond].min())
    # the end windows are clipped to half their width: their standard error is the larger
    need = max(_limits()["events"]["min_fall_fraction"] * top,
               _FALL_SIGMAS * noise_sd_kN / math.sqrt(w // 2 + 1))
    return (top - low) / top if top - low > need else None


def _smoothed_max_start(load, h, extremes):
    """A sample at or before the maximum of the load smoothed over 2h + 1 samples.

    A mean never exceeds the largest sample in its window: no window that
    ends before the first sample reaching the smoothed load at the raw
    maximum can hold the smoothed maximum, so the smoothing starts there.
    """
    if h == 0 or load.size == 0:
        return 0
    j = extremes.argmax()
    level = float(np.mean(load[max(j - h, 0):j + h + 1]))
    first = extremes.first_at_least(level)
    return max((0 if first == load.size else first) - h, 0)  # as np.argmax(load >= level)


def point_of_interest(load_kN, v_mm, slope: float, *, pop_in_index: int | None = None,
                      noise_sd_kN: float = 0.0) -> PointOfInterest:
    """The point of the record at which J, K_J and CTOD are evaluated, and its event.

    Parameters
    ----------
    load_kN : array_like
        Load, kN, in sample order.
    v_mm : array_like
        Origin-corrected displacement, mm.
    slope : float
        Fitted initial slope k, kN/mm.
    pop_in_index : int, optional
        Sample of the first significant pop-in (for a Type II record, the
        sample where the construction took P_Q); ``None`` when there is none.
    noise_sd_kN : float
        Scatter of the load, kN, for :func:`load_fall_after_maximum`.

    Returns
    -------
    PointOfInterest
        In this order: the pop-in; the last sample before a final
        instability; the first attainment of P_max when the load then falls
        (:func:`load_fall_after_maximum`); otherwise the first attainment of
        the highest load, of kind ``end_of_record`` (no event defined).

    Raises
    ------
    ElasticPlasticError
        If the record has no positive load, the slope is not positive or
        ``pop_in_index`` is not a sample of the record.

    References
    ----------
    ASTM E1820 (J_c at the onset of cleavage or a significant pop-in);
    BS 7448-1 (δ_c, δ_u at instability, δ_m at the first attainment of the
    maximum force plateau), from memory.  The detection thresholds: common
    practice, no source.

    Examples
    --------
    >>> P = [0, 10, 20, 30, 2, 0]; v = [0, 0.25, 0.5, 0.75, 0.76, 0.77]
    >>> point_of_interest(P, v, 40.0)
    PointOfInterest(index=3, kind='instability', P_kN=30.0, v_mm=0.75, fall=None)
    >>> point_of_interest([0, 10, 20, 30], [0, 0.25, 0.5, 0.75], 40.0).kind
    'end_of_record'
    """
    load = np.asarray(load_kN, dtype=float)
    return _point_of_interest(load, np.asarray(v_mm, dtype=float), slope, pop_in_index, noise_sd_kN,
                              BlockExtremes(load))


def _point_of_interest(load, v, slope, pop_in_index, noise_sd_kN, extremes) -> PointOfInterest:
    if load.size == 0 or not extremes.max() > 0.0:
        raise ElasticPlasticError("the record has no positive load")
    if not slope > 0.0:
        raise ElasticPlasticError(f"the initial slope must be positive, got {slope!r} kN/mm")
    if pop_in_index is not None:
        if not 0 <= pop_in_index < load.size:
            raise ElasticPlasticError(f"the pop-in sample {pop_in_index} is not one of the {load.size} samples")
        i = int(pop_in_index)
        return PointOfInterest(i, "pop_in", float(load[i]), float(v[i]))
    i = _instability_index(load, v, slope, extremes)
    if i is not None:
        return PointOfInterest(i, "instability", float(load[i]), float(v[i]))
    i = extremes.argmax()
    fall = _load_fall(load, v, noise_sd_kN, extremes)
    return PointOfInterest(i, "end_of_record" if fall is None else "P_max", float(load[i]), float(v[i]), fall)


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
    return _work(np.asarray(load_kN, dtype=float), np.asarray(v_mm, dtype=float), i_end, i_join)


def _work(P, v, i_end, i_join):
    """work_under_record of a load array and v, an array or a :class:`_Shifted`."""
    if not 0 <= i_join <= i_end < P.size:
        raise ElasticPlasticError(f"cannot integrate from sample {i_join} to {i_end} of {P.size}")
    seg_P, seg_v = P[i_join:i_end + 1], v[i_join:i_end + 1]
    # einsum, not @: the BLAS dot's threads wait on a busy core (reduce.construction._dot)
    trapezoids = 0.5 * float(np.einsum("i,i->", seg_P[1:] + seg_P[:-1], np.diff(seg_v)))
    return float(0.5 * P[i_join] * v[i_join] + trapezoids)


def _work_by_blocks(P, v, i_end, i_join):
    """:func:`_work` for a long record, block by block in the cache.

    The trapezoids are summed as Σ P_i Δd_i + Σ P_(i+1) Δd_i with Δd the
    steps of the measured displacement (the origin shift cancels in them):
    the same sum in another order and rounding, a few ε of the work apart.
    """
    if not 0 <= i_join <= i_end < P.size:
        raise ElasticPlasticError(f"cannot integrate from sample {i_join} to {i_end} of {P.size}")
    d = v.disp
    step = np.empty(min(_WORK_BLOCK, i_end - i_join))
    total = 0.0
    for s in range(i_join, i_end, _WORK_BLOCK):
        e = min(s + _WORK_BLOCK, i_end)
        dd = np.subtract(d[s + 1:e + 1], d[s:e], out=step[:e - s])
        total += float(np.einsum("i,i->", P[s:e], dd)) + float(np.einsum("i,i->", P[s + 1:e + 1], dd))
    return float(0.5 * P[i_join] * v[i_join] + 0.5 * total)


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


def _plastic_work(P, v, i_end, slope, i_join):
    """plastic_work of a load array and v, an array or a :class:`_Shifted`.

    A long segment is integrated by :func:`_work_by_blocks`; when the
    plastic work comes out below 1e-3 of the total (a record nearly linear,
    where the rounding of A would show in A_pl), A is integrated again as
    :func:`work_under_record` does.
    """
    if not slope > 0.0:
        raise ElasticPlasticError(f"the initial slope must be positive, got {slope!r} kN/mm")
    elastic = float(P[i_end])**2 / (2.0 * slope)
    if isinstance(v, _Shifted) and i_end - i_join > 2 * _WORK_BLOCK:
        A = _work_by_blocks(P, v, i_end, i_join)
        if abs(A - elastic) > _WORK_PLASTIC_MIN * abs(A):
            return A, A - elastic
    A = _work(P, v, i_end, i_join)
    return A, A - elastic


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


def _words_in(text: str, words) -> str | None:
    low = text.lower()
    return next((w for w in words if w in low), None)


def ferritic_steel(material: str | None) -> tuple[bool, str]:
    """Whether the sheet's material text names a ferritic steel, and why.

    A text that says "ferritic" counts; one that says "steel" counts unless
    it also names something else (austenitic, stainless, aluminium …, the
    list is ``kjc_scope.not_ferritic_words`` in ``limits.toml``).  This
    decides only whether the ASTM E1921 limit is applied.

    Returns
    -------
    (bool, str)
        The answer and the reason in words.

    References
    ----------
    ASTM E1921 scope (ferritic steels), from memory; the reading of the
    text is a cracktip rule, no standard.

    Examples
    --------
    >>> ferritic_steel("pressure-vessel steel plate, normalised")[0]
    True
    >>> ferritic_steel("7075-T7351 aluminium plate")
    (False, "the material '7075-T7351 aluminium plate' is not a ferritic steel (it says 'aluminium')")
    """
    s = _limits()["kjc_scope"]
    if not material:
        return False, "the sheet gives no material, so it is not known to be a ferritic steel"
    if _words_in(material, s["ferritic_words"]):
        return True, f"the material {material!r} is named ferritic"
    other = _words_in(material, s["not_ferritic_words"])
    if other:
        return False, f"the material {material!r} is not a ferritic steel (it says {other!r})"
    if _words_in(material, s["steel_words"]):
        return True, f"the material {material!r} is taken as a ferritic steel"
    return False, f"the material {material!r} is not named as a steel, so it is not known to be a ferritic steel"


def kjc_limit_applies(kind: str, a_over_W: float, yield_MPa: float, material: str | None) -> tuple[bool, str]:
    """Whether the ASTM E1921 K_Jc(limit) applies to this result, and if not, why.

    It applies to a cleavage event (instability or a significant pop-in) of a
    ferritic steel with a0/W and σ_YS in the ranges of ``kjc_scope`` in
    ``limits.toml``.

    References
    ----------
    ASTM E1921 scope, from memory (``limits.toml``).

    Examples
    --------
    >>> kjc_limit_applies("instability", 0.50, 470.0, "ferritic steel")
    (True, '')
    >>> for why in kjc_limit_applies("P_max", 0.579, 470.0, "ferritic steel")[1].split("; "):
    ...     print(why)
    the event is not a cleavage instability or pop-in (ASTM E1921 is a cleavage method)
    a0/W = 0.579 is outside 0.45 to 0.55
    """
    s = _limits()["kjc_scope"]
    why = []
    if kind not in s["events"]:
        why.append("the event is not a cleavage instability or pop-in (ASTM E1921 is a cleavage method)")
    ok, reason = ferritic_steel(material)
    if not ok:
        why.append(reason)
    if not s["a_over_W_min"] <= a_over_W <= s["a_over_W_max"]:
        why.append(f"a0/W = {a_over_W:.3f} is outside {s['a_over_W_min']:g} to {s['a_over_W_max']:g}")
    if not s["yield_min_MPa"] <= yield_MPa <= s["yield_max_MPa"]:
        why.append(f"the yield strength {yield_MPa:g} MPa is outside {s['yield_min_MPa']:g} to "
                   f"{s['yield_max_MPa']:g} MPa")
    return not why, "; ".join(why)


def _size_check(name, value, required, label, clause, note, assessed=True):
    if required is None:
        return Check(name, None, value, f"{label} (not computed)", clause, note)
    limit = f"{label} = {required:.2f} mm"
    if not assessed:
        return Check(name, None, value, limit, clause, note)
    return Check(name, bool(value >= required), value, limit, clause, note)


def carried_checks(kic_checks) -> list[Check]:
    """The K_Ic checks carried into the elastic–plastic verdicts, renamed ``ep_<name>``.

    Parameters
    ----------
    kic_checks : list of Check or None
        The checks of the K_Ic reduction of the same specimen; ``None`` when
        they were not given (the carried checks are then not assessed).

    Returns
    -------
    list of Check
        One per name in ``carried.checks`` of ``limits.toml``, with the
        value, limit and result of the K_Ic check and a clause that says it
        is applied as a proxy.

    References
    ----------
    ASTM E399 clauses 7.4, 9.1.4 (from memory), applied as a proxy for the
    ASTM E1820 requirements (``limits.toml``).
    """
    c = _limits()["carried"]
    by = {ch.name: ch for ch in (kic_checks or [])}
    out = []
    for name in c["checks"]:
        src = by.get(name)
        if src is None:
            out.append(Check(f"ep_{name}", None, None, "as for K_Ic", c["clause"],
                             f"the K_Ic check {name} was not available"))
            continue
        note = f"the K_Ic check {name}, carried over" + (f"; {src.note}" if src.note else "")
        out.append(Check(f"ep_{name}", src.passed, src.value, src.limit, f"{src.clause}; {c['clause']}", note))
    return out


def elastic_plastic_checks(*, kind, a_over_W, B, b0, J, CTOD, sigma_Y, yield_MPa, E_MPa, nu,
                           material=None, kic_checks=None, sigma_note="") -> tuple[list[Check], float]:
    """The checks the verdicts on J, K_J and CTOD are made from.

    Parameters
    ----------
    kind : str
        The event (:class:`PointOfInterest` ``kind``); a size rule is
        assessed only at the events its ``events`` list in ``limits.toml``
        names, otherwise it is reported not assessed.
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
    material : str, optional
        The sheet's material text (for the ASTM E1921 scope).
    kic_checks : list of Check, optional
        The K_Ic checks of the same specimen (:func:`carried_checks`).

    Returns
    -------
    (list of Check, float)
        The checks and K_Jc(limit), MPa·m^½ (computed whether or not the
        limit applies; the check says whether it was assessed).

    References
    ----------
    ASTM E1820, ASTM E1921, ISO 12135 (clauses in ``limits.toml``).
    """
    L = _limits()
    r = L["a_over_W"]
    checks = [Check("ep_a_over_W", bool(r["min"] <= a_over_W <= r["max"]), a_over_W,
                    f"{r['min']:.3f} to {r['max']:.3f}", r["clause"])]
    checks += carried_checks(kic_checks)
    stress = {"flow": sigma_Y, "yield": yield_MPa}
    j, kjc, c = L["j_size"], L["kjc_size"], L["ctod_size"]
    s_j, s_k = stress[j["stress"]], stress[kjc["stress"]]
    no_event = f"not assessed: no event is defined at {EVENTS[kind][0]}"

    req_j = None if J is None else j["factor"] * J / s_j
    at_j = kind in j["events"]
    note_j = ("J not determined" if J is None else
              f"sigma_Y = {s_j:.0f} MPa ({sigma_note})" + ("" if at_j else f"; {no_event}"))
    for name, value, sym in (("j_thickness_size", B, "B"), ("j_ligament_size", b0, "b0")):
        checks.append(_size_check(name, value, req_j, f"{sym} >= {j['factor']:g} J/sigma_Y", j["clause"],
                                  note_j, at_j))

    K_lim = math.sqrt(E_MPa * b0 / 1000.0 * s_k / (kjc["M"] * (1.0 - nu**2)))
    req_k = None if J is None else kjc["M"] * J / s_k
    applies, why = kjc_limit_applies(kind, a_over_W, yield_MPa, material)
    note_k = ("J not determined" if J is None else
              f"K_Jc(limit) = {K_lim:.1f} MPa m^0.5 with sigma_ys = {s_k:.0f} MPa"
              + ("" if applies else f"; not assessed: {why}"))
    checks.append(_size_check("kjc_ligament_size", b0, req_k, f"b0 >= {kjc['M']:g} J/sigma_ys",
                              f"{kjc['clause']}; {L['kjc_scope']['clause']}", note_k, applies))

    req_c = None if CTOD is None else c["factor"] * CTOD
    at_c = kind in c["events"]
    note_c = "CTOD not determined" if CTOD is None else ("" if at_c else no_event)
    checks.append(_size_check("ctod_size", min(B, b0), req_c, f"min(B, W - a0) >= {c['factor']:g} delta",
                              c["clause"], note_c, at_c))
    return checks, K_lim


def quantity_verdict(checks, names, may_be_unassessed=()) -> dict:
    """The verdict on one quantity from the checks named for it.

    Returns
    -------
    dict
        ``passed``: ``False`` if any named check failed, else ``None`` if
        one not in ``may_be_unassessed`` was not assessed, else ``True``;
        ``checks``, ``failed``, ``not_assessed`` (all of them) and
        ``undecided`` (those that leave the verdict ``None``): check names.

    Examples
    --------
    >>> ch = [Check("a", True, 1.0, "", ""), Check("b", None, None, "", ""), Check("c", True, 2.0, "", "")]
    >>> quantity_verdict(ch, ["a", "b", "c"], ["b"])["passed"]
    True
    >>> quantity_verdict(ch, ["a", "b"])["passed"] is None
    True
    """
    by = {c.name: c for c in checks}
    failed = [n for n in names if n in by and by[n].passed is False]
    unassessed = [n for n in names if n not in by or by[n].passed is None]
    undecided = [n for n in unassessed if n not in may_be_unassessed]
    passed = False if failed else None if undecided else True
    return {"passed": passed, "checks": list(names), "failed": failed, "not_assessed": unassessed,
            "undecided": undecided}


def poisson_note(nu: float, material: str | None) -> str:
    """The note on an assumed Poisson's ratio, naming the material where the text allows.

    References
    ----------
    Typical values: common practice, no source (``limits.toml``).

    Examples
    --------
    >>> import textwrap
    >>> print(textwrap.fill(poisson_note(0.3, "4340 steel bar"), 88))
    Poisson's ratio not given: 0.3 assumed (typical of metals such as steels, about 0.29 to
    0.30, and aluminium alloys, about 0.33; common practice, no source)
    >>> poisson_note(0.3, "7075 aluminium plate").split("no source); ")[-1]
    "for aluminium about 0.33 is typical: with 0.33, J_el would be 2.1 % lower; give the sheet's poisson column"
    """
    L = _limits()
    typ = L["poisson_typical"]
    note = (f"Poisson's ratio not given: {nu:g} assumed (typical of metals such as steels, "
            f"{typ['steel']['typical']}, and aluminium alloys, {typ['aluminium']['typical']}; "
            "common practice, no source)")
    for name, t in typ.items():
        if material and _words_in(material, t["words"]) and abs(t["value"] - nu) > 0.005:
            change = 1.0 - (1.0 - t["value"] ** 2) / (1.0 - nu**2)
            note += (f"; for {name} {t['typical']} is typical: with {t['value']:g}, J_el would be "
                     f"{abs(change):.1%} {'lower' if change > 0 else 'higher'}; give the sheet's poisson column")
            break
    return note.replace("%", " %")


_KEYS = ("point", "event", "event_defined", "point_note", "load_fall_fraction", "P_kN", "v_mm",
         "displacement_type", "work_total_J", "work_plastic_J", "eta",
         "eta_source", "J_el_kJ_per_m2", "J_pl_kJ_per_m2", "J_kJ_per_m2", "K_J_MPa_sqrt_m",
         "V_p_mm", "r_p", "r_p_source", "z_mm", "CTOD_el_mm", "CTOD_pl_mm", "CTOD_mm",
         "poisson", "poisson_assumed", "sigma_Y_MPa", "K_Jc_limit_MPa_sqrt_m", "names", "verdicts")


def not_assessed(reason: str) -> dict:
    """The ``elastic_plastic`` object of a record on which nothing could be determined."""
    out = dict.fromkeys(_KEYS)
    out.update(checks=[], valid=False, J_valid=None, K_J_valid=None, CTOD_valid=None, event_defined=False,
               notes=[reason], assumptions=[])
    return out


def elastic_plastic_result(load_kN, disp_mm, specimen: Specimen, sec, a_mm: float,
                           K_per_kN: float, kic_checks=None, extremes=None) -> dict:
    """J, K_J and CTOD of one record with their event, checks and verdicts, as JSON-ready data.

    Parameters
    ----------
    load_kN, disp_mm : array_like
        The record: load, kN, and displacement as measured, mm (the arrays
        the construction ``sec`` was made on).
    specimen : Specimen
        Dimensions (mm), yield, tensile strength and modulus (MPa), Poisson's
        ratio, displacement type, ``dims["z"]`` (knife-edge height, mm) and
        ``metadata["material"]`` (the sheet's material text).
    sec : reduce.construction.SecantResult
        The secant construction of the same record (initial slope, origin,
        curve type; for Type II the pop-in at ``i_Q``).
    a_mm : float
        Crack length a0, mm.
    K_per_kN : float
        K per unit load of the specimen, MPa·m^½/kN.
    kic_checks : list of Check, optional
        The K_Ic checks of the same specimen; ``crack_front``,
        ``precrack_kmax`` and ``surface_crack`` are carried into the
        verdicts.  Without them those checks are not assessed and no
        quantity can pass.
    extremes : reduce.construction.BlockExtremes, optional
        The block extremes of the same load array (from the construction),
        so the searches for the point of interest need not read the whole
        record again; made here when not given.

    Returns
    -------
    dict
        The keys of :data:`_KEYS`, ``checks``, ``notes`` (what was found)
        and ``assumptions`` (what was assumed or is uncertain; a certificate
        prints them).  ``point`` is the event code (``pop_in``,
        ``instability``, ``P_max``, ``end_of_record``), ``event`` the event
        in words, ``names`` the names of J, K_J and CTOD there (``J_c``,
        ``K_Jc``, ``delta_c`` …).  ``verdicts`` holds, per quantity
        (``J``, ``K_J``, ``CTOD``), ``passed``, the rule applied and its
        source, and the names of the checks applied, failed and not
        assessed.  ``J_valid``, ``K_J_valid``, ``CTOD_valid`` are those
        ``passed`` values: ``True`` (every requirement assessed and met),
        ``False`` (one failed), ``None`` (not assessed).  ``valid`` is
        ``True`` when at least one quantity passed and none failed.  When
        nothing can be determined the numbers are ``None`` and the notes
        say why; this function does not raise for such data.

    References
    ----------
    ASTM E1820 Annexes A1–A2; ASTM E1921; BS 7448-1; ISO 12135 (module docstring).
    """
    load = np.asarray(load_kN, dtype=float)
    if extremes is None or extremes.load is not load:
        extremes = BlockExtremes(load)
    try:
        return _compute(load, np.asarray(disp_mm, dtype=float), specimen, sec, a_mm, K_per_kN,
                        kic_checks, extremes)
    except ElasticPlasticError as exc:
        return not_assessed(str(exc))


def _point_note(poi: PointOfInterest) -> str:
    if poi.kind == "pop_in":
        return (f"values at the first significant pop-in, P = P_Q = {poi.P_kN:.4g} kN (the record is "
                "Type II: a load before P_5 exceeds P_5, the ASTM E399 significance); ASTM E1820 and "
                "BS 7448-1 take a significant pop-in as the event (from memory), so the values are J_c, "
                "K_Jc, delta_c; the BS 7448-1 pop-in significance criterion itself is not applied")
    if poi.kind == "instability":
        return ("the record ends by instability; values at the last sample before the drop (J_c, K_Jc; "
                "delta_c, or delta_u if stable crack extension preceded it, which is not measured here)")
    if poi.kind == "P_max":
        return (f"values at the first attainment of P_max (J_m, delta_m): the load then fell by "
                f"{poi.fall:.1%} of P_max, so a maximum was reached").replace("%", " %")
    return ("values at the highest load of a record that ends with the load still rising: no maximum "
            "was seen and no instability, so no event is defined; the values are 'at end of record', "
            "reported for information, and their validity is not assessed")


def _compute(load, disp, specimen, sec, a, K_per_kN, kic_checks, extremes) -> dict:
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
    material = (specimen.metadata or {}).get("material")
    nu = specimen.poisson
    assumed = nu is None
    if assumed:
        nu = float(L["poisson_default"])
        assumptions.append(poisson_note(nu, material))
    sigma_Y, sigma_note = effective_yield(specimen.yield_MPa, specimen.tensile_MPa)
    if specimen.tensile_MPa is None:
        assumptions.append(sigma_note)

    k = sec.fit.slope
    v = _Shifted(disp, sec.fit.origin_mm)  # disp - v0, only where it is read
    pop_in = sec.i_Q if sec.curve_type == "II" else None
    poi = _point_of_interest(load, v, k, pop_in, sec.fit.residual_sd_kN, extremes)
    B_N = specimen.B_N or specimen.B
    W, B = specimen.W, specimen.B
    b0 = W - a
    K = poi.P_kN * K_per_kN
    i_join = min(sec.fit.index_range[0], poi.index)
    A, A_pl = _plastic_work(load, v, poi.index, k, i_join)
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

    checks, K_lim = elastic_plastic_checks(kind=poi.kind, a_over_W=a / W, B=B, b0=b0, J=J, CTOD=CTOD,
                                           sigma_Y=sigma_Y, yield_MPa=specimen.yield_MPa,
                                           E_MPa=specimen.E_MPa, nu=nu, material=material,
                                           kic_checks=kic_checks, sigma_note=sigma_note)
    words, names = EVENTS[poi.kind]
    values = {"J": J, "K_J": K_J, "CTOD": CTOD}
    ver = L["verdict"]
    verdicts = {}
    for (q, _key, _vkey, table), name in zip(QUANTITIES, names):
        d = quantity_verdict(checks, ver[q], ver["may_be_unassessed"])
        if values[q] is None:
            d["passed"] = None
        clause = L[table]["clause"] + (f"; {L['kjc_scope']['clause']}" if table == "kjc_size" else "")
        d.update(name=name, rule=L[table]["rule"], rule_clause=clause)
        verdicts[q] = d
    passed = [d["passed"] for d in verdicts.values()]
    assumptions.append(ASSUMPTION_NOTE)
    out = {
        "point": poi.kind, "event": words, "event_defined": poi.defined, "point_note": _point_note(poi),
        "load_fall_fraction": poi.fall, "P_kN": poi.P_kN, "v_mm": poi.v_mm,
        "displacement_type": dtype,
        "work_total_J": A, "work_plastic_J": A_pl, "eta": eta, "eta_source": eta_src,
        "J_el_kJ_per_m2": J_el, "J_pl_kJ_per_m2": J_pl, "J_kJ_per_m2": J, "K_J_MPa_sqrt_m": K_J,
        "V_p_mm": V_p, "r_p": r_p, "r_p_source": factors.r_p_source if r_p else None, "z_mm": z,
        "CTOD_el_mm": d_el, "CTOD_pl_mm": d_pl, "CTOD_mm": CTOD,
        "poisson": nu, "poisson_assumed": assumed, "sigma_Y_MPa": sigma_Y,
        "K_Jc_limit_MPa_sqrt_m": K_lim,
        "names": dict(zip(values, names)), "verdicts": verdicts,
        "checks": [c.to_dict() for c in checks],
        "valid": any(p is True for p in passed) and not any(p is False for p in passed),
        "notes": notes, "assumptions": assumptions,
    }
    out.update({vkey: verdicts[q]["passed"] for q, _k, vkey, _t in QUANTITIES})
    return out
