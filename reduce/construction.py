"""The E399 construction on a load–displacement record.

Arrays in, numbers out: the initial slope, the origin correction, the 95 %
secant, P_5, P_Q, P_max and the curve type.  No I/O.

How the initial slope is found
------------------------------
The linear part is searched on the loading branch only: the samples before
the record first reaches the upper end of a window.  Windows are bands of
load, each 30 % of P_max wide, with lower ends from 5 % to 30 % of P_max
(six windows).  A least-squares line P = k·v + c is fitted to the samples in
each band and the steepest line is kept: a seating toe makes the start of a
record softer and plasticity or crack growth make the end softer, so the
stiffest band is the linear part.  The window used, the slope, the
coefficient of determination and the residual scatter are reported.
(Choice of bands: common practice, no source.)

The origin is moved to where the fitted line meets zero load, v₀ = −c/k,
so a channel offset or a seating toe does not shift the secant.

Noise
-----
The secant intersection is searched on the record smoothed by a centred
moving average of w samples, w = n/200 clipped to 1…25 (n the number of
samples), so scatter does not make the record touch the secant early; the
raw record is used for P_max and for the loads reported.
A load before P_5 counts as exceeding P_5 only when the smoothed record
exceeds it by more than four standard errors of the smoothed load (the
residual standard deviation of the initial fit, the record's electrical
scatter, divided by √w) or 0.1 % of P_5, whichever is larger; P_Q is then
the largest raw load before P_5.  Without this an
ordinary noisy Type I record would read as Type II.  (Common practice, no
source.)
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from reduce.errors import ReductionError

_WINDOW_WIDTH = 0.30
_WINDOW_STARTS = (0.05, 0.10, 0.15, 0.20, 0.25, 0.30)
_MIN_FIT_POINTS = 8
_NOISE_SIGMAS = 4.0
_NOISE_FLOOR = 0.001
_SMOOTH_DIVISOR, _SMOOTH_MAX = 200, 25


def smoothing_window(n: int) -> int:
    """Width of the moving average used for the secant search (odd, 1…25)."""
    w = int(min(max(n // _SMOOTH_DIVISOR, 1), _SMOOTH_MAX))
    return w if w % 2 else w + 1 if w > 1 else 1


def moving_average(x: np.ndarray, w: int) -> np.ndarray:
    """Centred moving average of width w (odd); shorter windows at the ends."""
    if w <= 1:
        return x
    h = w // 2
    c = np.concatenate(([0.0], np.cumsum(x)))
    idx = np.arange(x.size)
    lo = np.clip(idx - h, 0, x.size)
    hi = np.clip(idx + h + 1, 0, x.size)
    return (c[hi] - c[lo]) / (hi - lo)


@dataclass(frozen=True)
class LinearFit:
    """The initial-slope fit.

    Attributes
    ----------
    slope : float
        k, kN/mm.
    intercept : float
        c, kN (before the origin correction).
    origin_mm : float
        v₀ = −c/k, the displacement where the line meets zero load, mm.
    r_squared : float
        Coefficient of determination of the fit.
    residual_sd_kN : float
        Standard deviation of the fit residuals, kN.
    window_fraction : (float, float)
        The load band used, as fractions of P_max.
    index_range : (int, int)
        First and one-past-last sample index inside the band.
    n_points : int
        Samples in the fit.
    """

    slope: float
    intercept: float
    origin_mm: float
    r_squared: float
    residual_sd_kN: float
    window_fraction: tuple[float, float]
    index_range: tuple[int, int]
    n_points: int


@dataclass(frozen=True)
class SecantResult:
    """Outcome of the secant construction (all loads kN, displacements mm
    measured from the corrected origin)."""

    fit: LinearFit
    secant_slope: float
    P_5: float | None
    v_5: float | None
    P_Q: float
    v_Q: float
    i_Q: int
    P_max: float
    v_max: float
    curve_type: str
    tolerance_kN: float
    note: str


def _fit_line(v, P):
    n = v.size
    vm, Pm = v.mean(), P.mean()
    dv = v - vm
    sxx = float(dv @ dv)
    if sxx <= 0.0:
        return None
    k = float(dv @ (P - Pm)) / sxx
    c = Pm - k * vm
    resid = P - (k * v + c)
    ss_res = float(resid @ resid)
    dP = P - Pm
    ss_tot = float(dP @ dP)
    r2 = 1.0 - ss_res / ss_tot if ss_tot > 0 else 0.0
    sd = (ss_res / max(n - 2, 1)) ** 0.5
    return k, c, r2, sd


def initial_slope(load: np.ndarray, disp: np.ndarray) -> LinearFit:
    """Least-squares initial slope of a record's linear part.

    Parameters
    ----------
    load : ndarray
        Load, kN, in sample order.
    disp : ndarray
        Displacement, mm, same length.

    Returns
    -------
    LinearFit

    Raises
    ------
    ReductionError
        If the record has no rising linear part with enough samples.

    References
    ----------
    ASTM E399 clause 9.1.1 (tangent OA to the initial linear portion).
    """
    load = np.asarray(load, dtype=float)
    disp = np.asarray(disp, dtype=float)
    P_max = float(load.max()) if load.size else 0.0
    if not P_max > 0.0:
        raise ReductionError("the record has no positive load")
    # first index at which the load reaches each level (running maximum)
    running = np.maximum.accumulate(load)
    best = None
    for lo in _WINDOW_STARTS:
        hi = lo + _WINDOW_WIDTH
        i_hi = int(np.searchsorted(running, hi * P_max, side="left"))
        seg = slice(0, i_hi)
        sel = np.nonzero(load[seg] >= lo * P_max)[0]
        if sel.size < _MIN_FIT_POINTS:
            continue
        i0 = int(sel[0])
        fitted = _fit_line(disp[sel], load[sel])
        if fitted is None or fitted[0] <= 0.0:
            continue
        k, c, r2, sd = fitted
        if best is None or k > best.slope:
            best = LinearFit(k, c, -c / k, r2, sd, (lo, hi), (i0, i_hi), int(sel.size))
    if best is None:
        raise ReductionError(
            f"no linear rising part with at least {_MIN_FIT_POINTS} samples between "
            f"{_WINDOW_STARTS[0]:.0%} and {_WINDOW_STARTS[-1] + _WINDOW_WIDTH:.0%} of P_max "
            "was found: the record is too short, or the load does not rise with displacement")
    return best


def _is_end_of_test(load, disp, j, P_cross, slope, w) -> bool:
    """Does the crossing at sample j lie on the final drop (fracture or unloading)?

    The load then falls below half the crossing load within three samples, or
    before the displacement has advanced by the elastic displacement of the
    crossing load, and never comes back.
    """
    tail = load[j:]
    below = np.nonzero(tail < 0.5 * P_cross)[0]
    if below.size == 0:
        return False
    m = j + int(below[0])
    if load[m:].max() >= P_cross:
        return False
    quick = (m - (j - 1)) <= 3 + w
    short = (disp[m] - disp[j - 1]) < P_cross / slope
    return bool(quick or short)


def secant_construction(load: np.ndarray, disp: np.ndarray, ratio: float = 0.95) -> SecantResult:
    """The secant construction: P_5, P_Q, P_max and the curve type.

    Parameters
    ----------
    load : ndarray
        Load, kN.
    disp : ndarray
        Displacement, mm (any origin: it is corrected here).
    ratio : float
        Slope of the secant relative to the initial slope (0.95 for the
        5 % secant).

    Returns
    -------
    SecantResult
        Displacements in it are measured from the corrected origin.

    Raises
    ------
    ReductionError
        If no initial slope can be fitted.

    References
    ----------
    ASTM E399 clause 9.1.1 and its figure of the principal load–displacement
    record types: Type I, P_Q = P_5; Types II and III, P_Q is the largest
    load preceding P_5.
    """
    load = np.asarray(load, dtype=float)
    disp = np.asarray(disp, dtype=float)
    fit = initial_slope(load, disp)
    v = disp - fit.origin_mm
    ks = ratio * fit.slope
    i_max = int(np.argmax(load))
    P_max, v_max = float(load[i_max]), float(v[i_max])

    start = fit.index_range[1]
    w = smoothing_window(load.size)
    Ps, vs = moving_average(load, w), moving_average(v, w)
    g = Ps[start:] - ks * vs[start:]
    below = np.nonzero(g < 0.0)[0]
    P_5 = v_5 = None
    j = None
    note = ""
    if below.size:
        j = max(start + int(below[0]), 1)
        g0, g1 = Ps[j - 1] - ks * vs[j - 1], Ps[j] - ks * vs[j]
        t = g0 / (g0 - g1) if g0 != g1 else 0.0
        P_cross = float(Ps[j - 1] + t * (Ps[j] - Ps[j - 1]))
        v_cross = float(vs[j - 1] + t * (vs[j] - vs[j - 1]))
        if _is_end_of_test(load, disp, j, P_cross, fit.slope, w):
            j = None
            note = "the record ends at fracture (or unloading) before it reaches the secant"
        else:
            P_5, v_5 = P_cross, v_cross
    else:
        note = "the record never reaches the secant line"

    tol = max(_NOISE_SIGMAS * fit.residual_sd_kN / w**0.5, _NOISE_FLOOR * (P_5 or P_max))
    if j is None:
        return SecantResult(fit, ks, None, None, P_max, v_max, i_max, P_max, v_max, "III", tol,
                            note + "; P_Q = P_max (Type III)")
    i_before = int(np.argmax(load[:j]))
    P_before = float(load[i_before])
    if float(Ps[:j].max()) > P_5 + tol:
        is_overall_max = P_before >= P_max - tol
        curve = "III" if is_overall_max else "II"
        why = ("P_max precedes P_5" if is_overall_max
               else "a load before P_5 (pop-in) exceeds P_5")
        return SecantResult(fit, ks, P_5, v_5, P_before, float(v[i_before]), i_before,
                            P_max, v_max, curve, tol, f"{why}; P_Q is the largest load before P_5")
    return SecantResult(fit, ks, P_5, v_5, P_5, v_5, j, P_max, v_max, "I", tol,
                        "no load before P_5 exceeds it; P_Q = P_5")


def loading_rate(load: np.ndarray, time: np.ndarray, fit: LinearFit) -> float | None:
    """Rate of loading dP/dt over the initial-slope window, kN/s.

    Returns ``None`` when the window has no usable time stamps.

    References
    ----------
    ASTM E399 clause 8.3 (rate of increase of K within the elastic range).
    """
    i0, i1 = fit.index_range
    t = np.asarray(time[i0:i1], dtype=float)
    P = np.asarray(load[i0:i1], dtype=float)
    ok = np.isfinite(t) & np.isfinite(P)
    if ok.sum() < 2 or np.ptp(t[ok]) <= 0.0:
        return None
    fitted = _fit_line(t[ok], P[ok])
    return None if fitted is None else fitted[0]
