"""The E399 construction on a load–displacement record.

Arrays in, numbers out: the initial slope, the origin correction, the 95 %
secant, P_5, P_Q, P_max and the curve type; and, before it, the checks that
keep a bad record from giving a wrong P_Q (non-finite values, a constant
channel, a saturated load channel, unloading–reloading cycles).  No I/O.

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

The steepest band is then narrowed from the top (to 25 %, 20 %, 15 %, 10 %
of P_max wide) while its displacement still curves upward against load
beyond the scatter (t statistic of a quadratic term above 3): a record that
bends gradually from the start has no straight part 30 % wide, and its
tangent is best taken low.  (Common practice, no source.)

The bands are fractions of P_max.  A record loaded far beyond P_Q (P_Q
below 85 % of P_max, as in a tough material) would have its upper bands in
the curved part, which lowers the fitted slope and raises P_5; the fit is
then made again with the bands scaled by P_Q instead, at most three times,
until P_Q changes by less than 0.1 %.  The band is reported as fractions of
P_max either way.  (Common practice, no source.)

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

Long records
------------
The smoothed record is computed only where it is needed: block by block
from the end of the fit window until the first crossing of the secant, and
around the raw samples that could make the smoothed load before P_5 exceed
P_5 (a moving average never exceeds the largest sample in its window).  The
slopes of the six windows are ranked from plain sums and the window kept is
fitted again with centred sums, which give the numbers reported.  The
result is the one the whole smoothed record gives, up to rounding.

Records that must not give a P_Q as they are
--------------------------------------------
- **Saturated load channel** (:func:`flat_top`): at least ten consecutive
  samples exactly at the maximum (to 1e-9 of it) while the record elsewhere
  scatters by more than the channel's resolution.  A transducer or
  amplifier at its limit repeats its limit; a real maximum scatters like the
  rest of the record.  Such a record is refused: its P_max is not known.
  A record without scatter (a simulation, a smoothed export) cannot be told
  from a plastic plateau this way and is not refused.
- **Unloading–reloading cycles** (:func:`loading_envelope`): a stretch in
  which the displacement goes back below the largest value it had reached,
  the load falls by more than 2 % of P_max, the displacement goes back by
  more than a quarter of what the secant from the first sample predicts for
  that fall, and which ends when the displacement passes its earlier largest
  value again (reloading).  A pop-in or softening
  does not qualify, as the displacement there goes on increasing.  The
  construction is made on the loading envelope, the record with these
  stretches removed, so P_Q never comes from an unloading line.
- **A constant channel**, NaN or infinite values: refused with a message
  that says which.

(Thresholds of this section: common practice, no source.)
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from reduce.errors import ReductionError

_WINDOW_WIDTH = 0.30
_WINDOW_STARTS = (0.05, 0.10, 0.15, 0.20, 0.25, 0.30)
_MIN_FIT_POINTS = 8
_NOISE_SIGMAS = 4.0
_NOISE_FLOOR = 0.001
_SMOOTH_DIVISOR, _SMOOTH_MAX = 200, 25
#: narrow the band (widths tried in turn) while the displacement curves upward
#: with a t statistic above 3 (module notes; common practice, no source)
_NARROW_WIDTHS, _CURVATURE_T, _CURVATURE_SAMPLES = (0.25, 0.20, 0.15, 0.10), 3.0, 20000
#: refit the initial slope with bands scaled by P_Q when P_Q < 0.85 P_max, at
#: most three times, until P_Q changes by less than 0.1 % (module notes)
_REFIT_BELOW, _REFIT_ROUNDS, _REFIT_SETTLED = 0.85, 3, 0.001
#: samples per block where a long record is scanned block by block
_BLOCK = 1 << 16
#: a flat top: this many consecutive samples equal to the maximum, to this
#: fraction of it (module notes; common practice, no source)
_FLAT_MIN_SAMPLES = 10
_FLAT_REL = 1e-9
#: an unloading-reloading cycle: the load falls by more than this fraction of
#: P_max, and the displacement goes back by more than this fraction of the
#: elastic recovery of that fall on the secant from the start of the record
#: (module notes; common practice, no source)
_CYCLE_DROP = 0.02
_CYCLE_BACK = 0.25
#: a displacement whose spread is below this fraction of its mean is constant:
#: rounding in the centred sums (1e-12), in the raw sums used for ranking (1e-7)
_CONSTANT_REL, _SUMS_CONSTANT_REL = 1e-12, 1e-7


def smoothing_window(n: int) -> int:
    """Width of the moving average used for the secant search (odd, 1…25)."""
    w = int(min(max(n // _SMOOTH_DIVISOR, 1), _SMOOTH_MAX))
    return w if w % 2 else w + 1 if w > 1 else 1


def moving_average(x: np.ndarray, w: int, start: int = 0) -> np.ndarray:
    """Centred moving average of width w (odd); shorter windows at the ends.

    Only the means of samples ``start`` onwards are returned (all by default).
    """
    if w <= 1:
        return x[start:]
    return _centred_means(x, w // 2, start, x.size)


def _centred_means(x, h, a, b):
    """Means of x over [i-h, i+h] (clipped to the array) for i in [a, b).

    One cumulative sum; the whole windows are differences of two slices of
    it, only the few clipped at the array's ends need their own indices.
    """
    n = x.size
    lo, hi = max(a - h, 0), min(b + h, n)
    c = np.empty(hi - lo + 1)
    c[0] = 0.0
    np.cumsum(x[lo:hi], out=c[1:])
    out = np.empty(b - a)
    i0, i1 = max(a, h), min(b, n - h)  # whole windows: i - h >= 0 and i + h < n
    if i1 > i0:
        w = 2 * h + 1
        out[i0 - a:i1 - a] = (c[i0 + h + 1 - lo:i1 + h + 1 - lo] - c[i0 - h - lo:i1 - h - lo]) / w
    for part in (np.arange(a, min(i0, b)), np.arange(max(i1, i0, a), b)):
        if part.size:
            left = np.maximum(part - h, 0) - lo
            right = np.minimum(part + h + 1, n) - lo
            out[part - a] = (c[right] - c[left]) / (right - left)
    return out


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


@dataclass(frozen=True)
class Envelope:
    """The loading envelope of a record (:func:`loading_envelope`).

    Attributes
    ----------
    keep : numpy.ndarray of int or None
        Indices of the samples on the envelope, in order; ``None`` when the
        record has no unloading–reloading cycle (every sample is kept).
    cycles : tuple of (int, int, float, float)
        Each cycle removed: first and one-past-last sample index, the load
        where unloading began and the lowest load of the cycle, kN.
    note : str
        The cycles in words ("" when there are none).
    """

    keep: np.ndarray | None
    cycles: tuple
    note: str


def _checked(load, disp):
    load = np.asarray(load, dtype=float)
    disp = np.asarray(disp, dtype=float)
    if load.ndim != 1 or load.shape != disp.shape:
        raise ReductionError("load and displacement must be 1-D arrays of the same length, "
                             f"got shapes {load.shape} and {disp.shape}")
    for name, x in (("load", load), ("displacement", disp)):
        with np.errstate(all="ignore"):
            total = float(np.sum(x))
        if not math.isfinite(total):  # NaN or inf somewhere, or only a huge sum
            bad = int(np.count_nonzero(~np.isfinite(x)))
            if bad:
                raise ReductionError(
                    f"the {name} holds {bad} NaN or infinite value{'s' if bad > 1 else ''} of "
                    f"{x.size}; remove them (reduce.records.read_record skips such rows)")
    return load, disp


def _dot(x, y) -> float:
    """x · y of two 1-D arrays in this thread.

    Not ``x @ y``: the BLAS dot hands long vectors to its own threads, and
    when the other core is busy (the record's hash runs beside the
    reduction, reduce.records) it waits for them, a hundred times slower.
    """
    return float(np.einsum("i,i->", x, y))


def _fit_line(v, P):
    n = v.size
    vm, Pm = float(v.mean()), float(P.mean())
    dv = v - vm
    sxx = _dot(dv, dv)
    if not sxx > n * (_CONSTANT_REL * vm) ** 2:  # v constant but for rounding
        return None
    dP = P - Pm
    k = _dot(dv, dP) / sxx
    c = Pm - k * vm
    resid = dP - k * dv
    ss_res = _dot(resid, resid)
    ss_tot = _dot(dP, dP)
    r2 = 1.0 - ss_res / ss_tot if ss_tot > 0 else 0.0
    sd = (ss_res / max(n - 2, 1)) ** 0.5
    if not all(math.isfinite(x) for x in (k, c, r2, sd)):
        return None
    return k, c, r2, sd


def _first_reaches(x, levels) -> list[int]:
    """For each level (ascending), the first index i with x[i] >= level, else x.size.

    The same as searching the running maximum, without computing it: each
    search goes on from where the one before stopped, in growing blocks.
    """
    n, pos, out = x.size, 0, []
    for level in levels:
        step = 4096
        while pos < n:
            e = min(pos + step, n)
            hit = x[pos:e] >= level
            if hit.any():
                pos += int(np.argmax(hit))
                break
            pos, step = e, min(2 * step, _BLOCK)
        out.append(pos)
    return out


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
        If the record has no rising linear part with enough samples; the
        message says when a channel is constant or the displacement does
        not change while the load rises.

    References
    ----------
    ASTM E399 clause 9.1.1 (tangent OA to the initial linear portion).
    """
    return _initial_slope(*_checked(load, disp))


def _initial_slope(load, disp, P_ref=None):
    P_max = float(load.max()) if load.size else 0.0
    if not P_max > 0.0:
        raise ReductionError("the record has no positive load")
    # the bands are fractions of P_ref: P_max, or P_Q for a record far beyond P_Q
    P_ref = P_max if P_ref is None else min(float(P_ref), P_max)
    # first index at which the load reaches each window's ends
    ends = sorted({lo for lo in _WINDOW_STARTS} | {lo + _WINDOW_WIDTH for lo in _WINDOW_STARTS})
    reach = dict(zip(ends, _first_reaches(load, [e * P_ref for e in ends])))
    # rank the windows by slope from sums (cheap), then fit the steepest exactly
    best = None
    for lo in _WINDOW_STARTS:
        hi = lo + _WINDOW_WIDTH
        i0, i_hi = reach[lo], reach[hi]
        if i_hi - i0 < _MIN_FIT_POINTS:
            continue
        # samples of [i0, i_hi) below the band (scatter, dips) are left out
        out = i0 + np.flatnonzero(load[i0:i_hi] < lo * P_ref)
        k = _slope_from_sums(disp, load, i0, i_hi, out)
        if k is not None and k > 0.0 and (best is None or k > best[0]):
            best = (k, lo, hi, i0, i_hi, out)
    if best is not None:
        _, lo, hi, i0, i_hi, out = best
        lo, hi, i0, i_hi, out = _narrowed_band(load, disp, P_ref, reach, lo, hi, i0, i_hi, out)
        if out.size:
            keep = np.ones(i_hi - i0, dtype=bool)
            keep[out - i0] = False
            fitted = _fit_line(disp[i0:i_hi][keep], load[i0:i_hi][keep])
        else:
            fitted = _fit_line(disp[i0:i_hi], load[i0:i_hi])
        if fitted is not None and fitted[0] > 0.0:
            k, c, r2, sd = fitted
            band = (lo * P_ref / P_max, hi * P_ref / P_max)
            return LinearFit(k, c, -c / k, r2, sd, band, (i0, i_hi), i_hi - i0 - int(out.size))
    raise ReductionError(_why_no_slope(load, disp, P_max, reach[ends[-1]]))


def _curvature_t(v, P):
    """t statistic of the quadratic term of v = c0 + c1 P + c2 P² (at most 20 000 samples)."""
    step = max(1, v.size // _CURVATURE_SAMPLES)
    v, P = v[::step], P[::step]
    if v.size < _MIN_FIT_POINTS + 2:
        return 0.0
    x = (P - P.mean()) / (np.ptp(P) or 1.0)
    A = np.column_stack([np.ones_like(x), x, x * x - np.mean(x * x)])
    coef, *_ = np.linalg.lstsq(A, v, rcond=None)
    r = v - A @ coef
    s2 = float(r @ r) / (v.size - 3)
    try:
        var = s2 * np.linalg.inv(A.T @ A)[2, 2]
    except np.linalg.LinAlgError:
        return 0.0
    return float(coef[2] / var**0.5) if var > 0 else 0.0


def _narrowed_band(load, disp, P_ref, reach, lo, hi, i0, i_hi, out):
    """Narrow the chosen band from the top while its curvature stands out of the scatter."""
    for width in _NARROW_WIDTHS:
        keep = np.ones(i_hi - i0, dtype=bool)
        keep[out - i0] = False
        # the samples _curvature_t keeps of the band, taken without copying the band
        kept = i0 + np.flatnonzero(keep)
        kept = kept[::max(1, kept.size // _CURVATURE_SAMPLES)]
        t = _curvature_t(disp[kept], load[kept])
        # displacement growing faster than linear in load: the band reaches the curved part
        if t <= _CURVATURE_T:
            break
        new_hi = _first_reaches(load, [(lo + width) * P_ref])[0]
        if new_hi - i0 < 4 * _MIN_FIT_POINTS:
            break
        hi, i_hi = lo + width, new_hi
        out = i0 + np.flatnonzero(load[i0:i_hi] < lo * P_ref)
    return lo, hi, i0, i_hi, out


def _slope_from_sums(v, P, i0, i1, out):
    """Least-squares slope of the samples [i0, i1) without ``out``, from sums.

    Only ranks the windows (the one kept is fitted again with centred sums):
    raw sums lose about mean²/variance of v in relative precision, 1e-12 for
    an offset a hundred times the window's spread.
    """
    n = i1 - i0 - out.size
    if n < _MIN_FIT_POINTS:
        return None
    vs, Ps = v[i0:i1], P[i0:i1]
    sv, sP, svv, svP = float(vs.sum()), float(Ps.sum()), _dot(vs, vs), _dot(vs, Ps)
    if out.size:
        vo, Po = v[out], P[out]
        sv, sP, svv, svP = sv - vo.sum(), sP - Po.sum(), svv - _dot(vo, vo), svP - _dot(vo, Po)
    sxx = float(svv - sv * sv / n)
    if not sxx > n * (_SUMS_CONSTANT_REL * sv / n) ** 2:  # v constant but for the sums' rounding
        return None
    k = float(svP - sv * sP / n) / sxx
    return k if math.isfinite(k) else None


def _why_no_slope(load, disp, P_max, i_hi) -> str:
    n = load.size
    if n < _MIN_FIT_POINTS:
        return (f"only {n} samples: at least {_MIN_FIT_POINTS} are needed for the initial slope; "
                "no linear rising part can be fitted")
    if float(disp.min()) == float(disp.max()):
        return (f"the displacement channel is constant ({float(disp[0]):.6g} mm in all {n} "
                "samples): the gauge is stuck, disconnected or not the displacement channel")
    if float(load.min()) == P_max:
        return (f"the load channel is constant ({P_max:.6g} kN in all {n} samples): the "
                "transducer is disconnected or not the load channel")
    rising = np.flatnonzero(load[:i_hi] >= _WINDOW_STARTS[0] * P_max)
    if rising.size >= _MIN_FIT_POINTS and float(np.ptp(disp[rising])) == 0.0:
        return (f"the displacement does not change ({float(disp[rising[0]]):.6g} mm) while the "
                f"load rises from {_WINDOW_STARTS[0]:.0%} to "
                f"{_WINDOW_STARTS[-1] + _WINDOW_WIDTH:.0%} of P_max (samples {rising[0] + 1} to "
                f"{rising[-1] + 1}): the gauge is stuck or not attached")
    return (f"no linear rising part with at least {_MIN_FIT_POINTS} samples between "
            f"{_WINDOW_STARTS[0]:.0%} and {_WINDOW_STARTS[-1] + _WINDOW_WIDTH:.0%} of P_max "
            "was found: the record is too short, or the load does not rise with displacement")


def flat_top(load: np.ndarray, fit: LinearFit) -> tuple[int, int] | None:
    """The flat top of a saturated load channel, or None.

    Parameters
    ----------
    load : ndarray
        Load, kN, in sample order.
    fit : LinearFit
        The initial-slope fit of the record; its residual scatter and its
        window are the record's scatter and resolution.

    Returns
    -------
    (int, int) or None
        First and one-past-last index of the longest run of at least
        ten consecutive samples equal to the maximum (to 1e-9 of it), when
        the record scatters elsewhere by more than the load channel's
        resolution (the smallest step between samples in the fit window);
        else None (module notes).

    References
    ----------
    Common practice, no source: a saturated transducer or amplifier holds
    its limit and stops scattering.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> P = np.minimum(np.linspace(0, 50, 400) + rng.normal(0, 0.05, 400), 40.0)
    >>> fit = initial_slope(P, np.linspace(0, 1.25, 400))
    >>> i0, i1 = flat_top(P, fit)
    >>> bool(np.all(P[i0:i1] == 40.0)), i1 - i0 > 10
    (True, True)
    """
    load = np.asarray(load, dtype=float)
    P_max = float(load.max())
    at_top = np.flatnonzero(load >= P_max - _FLAT_REL * abs(P_max))
    if at_top.size < _FLAT_MIN_SAMPLES:
        return None
    breaks = np.flatnonzero(np.diff(at_top) != 1)
    starts = np.concatenate(([0], breaks + 1))
    ends = np.concatenate((breaks + 1, [at_top.size]))
    k = int(np.argmax(ends - starts))
    if ends[k] - starts[k] < _FLAT_MIN_SAMPLES:
        return None
    i0, i1 = fit.index_range
    steps = np.abs(np.diff(load[i0:i1]))
    steps = steps[steps > _FLAT_REL * abs(P_max)]
    if steps.size == 0 or not fit.residual_sd_kN > float(steps.min()):
        return None  # no scatter above the resolution: a plateau cannot be told from a limit
    return int(at_top[starts[k]]), int(at_top[ends[k] - 1]) + 1


def loading_envelope(load: np.ndarray, disp: np.ndarray) -> Envelope:
    """The record without its unloading–reloading cycles.

    A cycle is a stretch of samples in which the displacement stays below
    the largest value it had reached before, the load falls by more than
    2 % of P_max below the load where the stretch began, the displacement
    goes back by more than a quarter of what the secant from the record's
    first sample predicts for that fall, and which ends when the
    displacement passes its earlier largest value again.  A final unloading
    that never comes back is not a cycle (the construction handles the end
    of a test).

    Parameters
    ----------
    load : ndarray
        Load, kN, in sample order.
    disp : ndarray
        Displacement, mm, same length.

    Returns
    -------
    Envelope

    Raises
    ------
    ReductionError
        If the arrays are not 1-D of one length or hold NaN or infinite values.

    References
    ----------
    ASTM E399 clause 9.1.1 (the construction is made on the loading
    record); common practice, no source, for the thresholds.

    Examples
    --------
    >>> v = np.r_[np.linspace(0, 0.5, 50), np.linspace(0.49, 0.3, 20), np.linspace(0.31, 1, 70)]
    >>> P = np.r_[40 * v[:50], 40 * v[50:70] - 1, np.minimum(40 * v[70:], 30)]
    >>> env = loading_envelope(P, v)
    >>> env.keep.size, env.cycles[0][:2]
    (101, (50, 89))
    """
    load, disp = _checked(load, disp)
    with np.errstate(all="ignore"):  # huge values overflow to inf, which compares as it should
        return _envelope(load, disp)


def _envelope(load, disp):
    n = load.size
    P_max = float(load.max()) if n else 0.0
    if n < 3 or not P_max > 0.0 or not _load_falls(load, _CYCLE_DROP * P_max):
        return Envelope(None, (), "")
    back = disp < np.maximum.accumulate(disp)
    edges = np.flatnonzero(np.diff(back.view(np.int8)))
    starts, ends = edges[0::2] + 1, edges[1::2] + 1  # back[0] is always False
    starts = starts[:ends.size]  # a last stretch that never comes back is not a cycle
    if starts.size == 0:
        return Envelope(None, (), "")
    bounds = np.empty(2 * starts.size, dtype=np.int64)
    bounds[0::2], bounds[1::2] = starts, ends
    P_low = np.minimum.reduceat(load, bounds)[0::2]
    v_low = np.minimum.reduceat(disp, bounds)[0::2]
    P_ref, v_ref = load[starts - 1], disp[starts - 1]
    drop = P_ref - P_low
    compliance = np.where(P_ref > 0, (v_ref - disp[0]) / P_ref, 0.0)
    cycle = (drop > _CYCLE_DROP * P_max) & (v_ref - v_low > _CYCLE_BACK * drop * compliance)
    if not cycle.any():
        return Envelope(None, (), "")
    keep = np.ones(n, dtype=bool)
    found = []
    for s, e, p0, p1 in zip(starts[cycle], ends[cycle], P_ref[cycle], P_low[cycle]):
        keep[s:e] = False
        found.append((int(s), int(e), float(p0), float(p1)))
    listed = "; ".join(f"samples {s + 1} to {e}, unloaded from {p0:.4g} kN to {p1:.4g} kN"
                       for s, e, p0, p1 in found[:5])
    more = f" and {len(found) - 5} more" if len(found) > 5 else ""
    note = (f"constructed on the loading envelope: {len(found)} unloading-reloading cycle"
            f"{'s' if len(found) > 1 else ''} removed ({listed}{more})")
    return Envelope(np.flatnonzero(keep), tuple(found), note)


def _load_falls(load, drop) -> bool:
    """Could the load anywhere fall by more than ``drop`` below an earlier value?

    Block maxima and minima answer it for a long rising record in a few
    passes; a True only means the exact search is needed.
    """
    n = load.size
    m = n // 1024 * 1024
    if m < 4 * 1024:
        return bool(np.any(np.maximum.accumulate(load) - load > drop))
    blocks = load[:m].reshape(-1, 1024)
    highest = np.maximum.accumulate(blocks.max(axis=1))
    if np.any(highest - blocks.min(axis=1) > drop):
        return True
    tail = load[m:]
    return bool(tail.size and float(highest[-1]) - float(tail.min()) > drop)


def _is_end_of_test(load, disp, j, P_cross, slope, w) -> bool:
    """Does the crossing at sample j lie on the end of the test, not on the loading?

    It does when the load never again reaches the crossing load (beyond the
    samples the smoothing at j already saw) and the record at the crossing is
    not advancing: the displacement runs back (an unloading) or the load
    falls faster than the elastic line would unload it, -dP > k·dv (a
    fracture).  A crossing while the opening grows, on the rising or the
    falling branch or at a pop-in, is a genuine P_5.
    """
    n, h = load.size, w // 2
    later = load[min(j + h + 1, n - 1):]
    if later.size and float(later.max()) >= P_cross:
        return False
    i0, i1 = max(j - h - 1, 0), min(j + h, n - 1)
    dP, dv = float(load[i1] - load[i0]), float(disp[i1] - disp[i0])
    advancing = dv > 0.0 and -dP < slope * dv
    return not advancing


def _first_crossing(load, disp, ks, v0, start, w):
    """First index j >= start where the smoothed record falls below the secant.

    Scans block by block; returns None when the record never does.
    """
    n, h = load.size, w // 2
    a = start
    while a < n:
        b = min(a + _BLOCK, n)
        lo, hi = max(a - h, 0), min(b + h, n)
        g_raw = load[lo:hi] - ks * (disp[lo:hi] - v0)
        # windows reach at most h beyond the block: only the record's ends clip them
        g = _centred_means(g_raw, h, a - lo, b - lo) if w > 1 else g_raw[a - lo:b - lo]
        below = np.flatnonzero(g < 0.0)
        if below.size:
            return a + int(below[0])
        a = b
    return None


def _smoothed_at(x, h, i):
    n = x.size
    L, R = max(i - h, 0), min(i + h + 1, n)
    return float(np.mean(x[L:R]))


def _smoothed_max_exceeds(load, h, j, level) -> bool:
    """Does the moving average of the load before sample j exceed ``level``?

    A mean never exceeds the largest sample in its window, so only the
    windows around raw samples above ``level`` are averaged.
    """
    raw = load[:j]
    if not float(raw.max()) > level:
        return False
    above = np.flatnonzero(raw > level)
    a, b = max(int(above[0]) - h, 0), min(int(above[-1]) + h + 1, j)
    return bool(float(_centred_means(load, h, a, b).max()) > level)


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
        If no initial slope can be fitted, the record holds NaN or infinite
        values or a constant channel, or the load channel is saturated (a
        flat top, :func:`flat_top`): P_max is then not known.  Cycles of
        unloading and reloading are not detected here: make the
        construction on :func:`loading_envelope`.

    References
    ----------
    ASTM E399 clause 9.1.1 and its figure of the principal load–displacement
    record types: Type I, P_Q = P_5; Types II and III, P_Q is the largest
    load preceding P_5.
    """
    load, disp = _checked(load, disp)
    out = _construction(load, disp, ratio, _initial_slope(load, disp))
    # a record loaded far beyond P_Q: the bands scaled by P_max reach into the
    # curved part, so fit again with bands scaled by P_Q until P_Q settles
    for _ in range(_REFIT_ROUNDS):
        if out.P_Q >= _REFIT_BELOW * out.P_max:
            break
        again = _construction(load, disp, ratio, _initial_slope(load, disp, out.P_Q))
        settled = abs(again.P_Q - out.P_Q) <= _REFIT_SETTLED * out.P_Q
        out = again
        if settled:
            break
    return out


def _construction(load, disp, ratio, fit):
    flat = flat_top(load, fit)
    if flat is not None:
        i0, i1 = flat
        raise ReductionError(
            f"the load channel is saturated: {i1 - i0} consecutive samples (samples {i0 + 1} to "
            f"{i1}) hold exactly {float(load[i0]):.6g} kN, the maximum, while the rest of the "
            "record scatters; the transducer or amplifier was at its limit, so P_max (and P_Q) "
            "are not known from this record")
    v0 = fit.origin_mm
    ks = ratio * fit.slope
    i_max = int(np.argmax(load))
    P_max, v_max = float(load[i_max]), float(disp[i_max] - v0)
    n = load.size
    w = smoothing_window(n)
    h = w // 2

    j = _first_crossing(load, disp, ks, v0, fit.index_range[1], w)
    P_5 = v_5 = None
    note = ""
    if j is not None:
        j = max(j, 1)
        Pa, Pb = _smoothed_at(load, h, j - 1), _smoothed_at(load, h, j)
        va, vb = _smoothed_at(disp, h, j - 1) - v0, _smoothed_at(disp, h, j) - v0
        g0, g1 = Pa - ks * va, Pb - ks * vb
        t = min(max(g0 / (g0 - g1), 0.0), 1.0) if g0 != g1 else 0.0
        P_cross, v_cross = float(Pa + t * (Pb - Pa)), float(va + t * (vb - va))
        if _is_end_of_test(load, disp, j, P_cross, fit.slope, w):
            j = None
            note = "the record ends at fracture (or unloading) before it reaches the secant"
        else:
            P_5, v_5 = P_cross, v_cross
    else:
        note = "the record never reaches the secant line"

    tol = max(_NOISE_SIGMAS * fit.residual_sd_kN / w**0.5, _NOISE_FLOOR * (P_5 or P_max))
    if j is None:
        out = SecantResult(fit, ks, None, None, P_max, v_max, i_max, P_max, v_max, "III", tol,
                           note + "; P_Q = P_max (Type III)")
    else:
        # the smoothed crossing at j reflects raw samples up to j + h: a sharp
        # pop-in peak may lie among them
        i_before = int(np.argmax(load[:min(j + h + 1, n)]))
        P_before = float(load[i_before])
        if _smoothed_max_exceeds(load, h, j, P_5 + tol):
            is_overall_max = P_before >= P_max - tol
            curve = "III" if is_overall_max else "II"
            why = ("P_max precedes P_5" if is_overall_max
                   else "a load before P_5 (pop-in) exceeds P_5")
            out = SecantResult(fit, ks, P_5, v_5, P_before, float(disp[i_before] - v0), i_before,
                               P_max, v_max, curve, tol,
                               f"{why}; P_Q is the largest load before P_5")
        else:
            out = SecantResult(fit, ks, P_5, v_5, P_5, v_5, j, P_max, v_max, "I", tol,
                               "no load before P_5 exceeds it; P_Q = P_5")
    numbers = (out.P_Q, out.v_Q, out.P_max, out.v_max, ks, fit.origin_mm, tol)
    if not all(math.isfinite(x) for x in numbers) or not out.P_Q > 0.0:
        raise ReductionError(f"the construction gives no usable P_Q (P_Q = {out.P_Q!r} kN): the "
                             "record's values are out of range")
    return out


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
    if not ok.all():  # copies only when some stamps are missing
        t, P = t[ok], P[ok]
    if t.size < 2 or np.ptp(t) <= 0.0:
        return None
    fitted = _fit_line(t, P)
    return None if fitted is None else fitted[0]
