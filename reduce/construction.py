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

On a record of 16 blocks of 1,024 samples or more, the largest and smallest
load and displacement of each block (:class:`BlockExtremes`) let the
searches skip the blocks that cannot hold what they look for (the first
sample at a load, the samples below a band, the samples at the maximum),
and let the secant search skip blocks lying so far above the secant that
no smoothed value there can fall below it; these give exactly what the
sample-by-sample searches give.  Where a faster way of computing a number
could differ from the plain one in rounding only, it is used only when the
decision that hangs on it is certain from a bound on that rounding (the
ranking of the windows, :func:`_steepest_window`; the curvature t against
3, :func:`_curvature_t_orthogonal`); otherwise the plain computation is
made.  The fit of the band is the plain one; only the rate of loading
(:func:`loading_rate`) and, in :mod:`reduce.elastic_plastic`, the work
under a long record are summed in another order, a few ε apart.

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
#: samples per block of the block extremes (BlockExtremes); records shorter
#: than _BLOCKED_FROM samples are searched sample by sample
_CHUNK = 1024
_BLOCKED_FROM = 16 * _CHUNK
#: samples per piece where a long pass is made piece by piece: temporaries of
#: this size stay in the cache and reuse their memory (a first touch of new
#: memory costs more than the arithmetic)
_PIECE = 8192
_EPS = float(np.finfo(float).eps)
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
    return _means_from_sums(c, lo, h, n, a, b)


def _means_from_sums(c, lo, h, n, a, b):
    """The means of _centred_means for i in [a, b) from its running sums c[k] = Σ x[lo:lo + k].

    Only c up to index min(b + h, n) - lo is read.
    """
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


def _extremes_of_blocks(x):
    """Largest and smallest value of each block of _CHUNK samples (the last may be shorter)."""
    n = x.size
    m = n // _CHUNK * _CHUNK
    nb = -(-n // _CHUNK)
    hi, lo = np.empty(nb), np.empty(nb)
    blocks = x[:m].reshape(-1, _CHUNK)
    np.max(blocks, axis=1, out=hi[:m // _CHUNK])
    np.min(blocks, axis=1, out=lo[:m // _CHUNK])
    if m < n:
        hi[-1], lo[-1] = x[m:].max(), x[m:].min()
    return hi, lo


class BlockExtremes:
    """The largest and smallest load (and displacement) of each block of 1,024 samples.

    The searches of the construction (the first sample at or above a load,
    the largest load of a range, the samples below a load) look at the
    blocks first and read sample by sample only the blocks that can hold
    the answer.  Only comparisons are involved, so every answer is the one
    the plain search over all samples gives.  Records shorter than 16
    blocks, and loads holding NaN or inf, are searched plainly
    (``blocked`` is False).  The displacement's extremes, the block sums
    and the work arrays are made when first needed and kept: one object
    serves all the searches on one record.

    Parameters
    ----------
    load : ndarray
        Load, kN, 1-D.
    disp : ndarray, optional
        Displacement, mm, same length (needed by the methods that use it).
    """

    def __init__(self, load, disp=None):
        self.load, self.disp, self.n = load, disp, load.size
        self.blocked = self.n >= _BLOCKED_FROM
        if self.blocked:
            self.load_max, self.load_min = _extremes_of_blocks(load)
            # NaN or inf: compare sample by sample, as the plain searches do
            self.blocked = bool(np.isfinite(self.load_max).all() and np.isfinite(self.load_min).all())
        self._disp = None
        self._flat = None
        self._work = None
        self._sums = None
        self._magnitudes = None
        self._secant = None
        self._running_max = None
        self._running_block_max = None

    def work_arrays(self, size):
        """Two float arrays of at least ``size`` samples for temporaries, kept for reuse.

        Their contents are overwritten by each user; reusing them spares the
        memory pages of a new array for each temporary of a long record.
        """
        if self._work is None or self._work[0].size < size:
            size = min(max(size, size + size // 4), max(size, self.n))  # room for a wider band later
            self._work = (np.empty(size), np.empty(size))
        return self._work

    def run_at_maximum(self):
        """((first, one-past-last index) of the longest run at the maximum or None, P_max).

        The run of :func:`flat_top`: at least ten consecutive samples at the
        maximum, to 1e-9 of it (kept).
        """
        if self._flat is None:
            P_max = self.max()
            at_top = self.indices_at_least(P_max - _FLAT_REL * abs(P_max))
            run = None
            if at_top.size >= _FLAT_MIN_SAMPLES:
                breaks = np.flatnonzero(np.diff(at_top) != 1)
                starts = np.concatenate(([0], breaks + 1))
                ends = np.concatenate((breaks + 1, [at_top.size]))
                k = int(np.argmax(ends - starts))
                if ends[k] - starts[k] >= _FLAT_MIN_SAMPLES:
                    run = int(at_top[starts[k]]), int(at_top[ends[k] - 1]) + 1
            self._flat = (run, P_max)
        return self._flat

    def running_max(self):
        """The running maximum of the load (kept; for short records)."""
        if self._running_max is None:
            self._running_max = np.maximum.accumulate(self.load)
        return self._running_max

    def running_block_max(self):
        """The running maximum of the block maxima (kept)."""
        if self._running_block_max is None:
            self._running_block_max = np.maximum.accumulate(self.load_max)
        return self._running_block_max

    def disp_extremes(self):
        """(largest, smallest) displacement of each block."""
        if self._disp is None:
            self._disp = _extremes_of_blocks(self.disp)
        return self._disp

    def _span(self, a, b):
        return a // _CHUNK, (b - 1) // _CHUNK + 1  # the blocks [c0, c1) that touch [a, b)

    def max(self, a=0, b=None) -> float:
        """Largest load of samples [a, b) (b > a)."""
        x, b = self.load, self.n if b is None else b
        if not self.blocked or b - a < 4 * _CHUNK:
            return float(x[a:b].max())
        c0, c1 = -(-a // _CHUNK), b // _CHUNK  # the blocks inside [a, b)
        parts = [self.load_max[c0:c1].max()]
        if a < c0 * _CHUNK:
            parts.append(x[a:c0 * _CHUNK].max())
        if c1 * _CHUNK < b:
            parts.append(x[c1 * _CHUNK:b].max())
        return float(np.max(parts))

    def argmax(self, a=0, b=None) -> int:
        """First index of the largest load of samples [a, b), as ``a + np.argmax(load[a:b])``."""
        b = self.n if b is None else b
        if not self.blocked or b - a < 4 * _CHUNK:
            return a + int(np.argmax(self.load[a:b]))
        return self.first_at_least(self.max(a, b), a, b)

    def first_at_least(self, level, a=0, b=None) -> int:
        """First index i in [a, b) with load[i] >= level, else b."""
        x, b = self.load, self.n if b is None else b
        if a >= b:
            return b
        if not self.blocked or b - a < 4 * _CHUNK:
            hit = x[a:b] >= level
            return a + int(np.argmax(hit)) if hit.any() else b
        c0, c1 = self._span(a, b)
        for c in (c0 + np.flatnonzero(self.load_max[c0:c1] >= level)).tolist():
            s, e = max(c * _CHUNK, a), min((c + 1) * _CHUNK, b)
            hit = x[s:e] >= level
            if hit.any():  # a block wholly inside [a, b) always has one
                return s + int(np.argmax(hit))
        return b

    def last_at_least(self, level, a=0, b=None) -> int:
        """Last index i in [a, b) with load[i] >= level, else a - 1."""
        x, b = self.load, self.n if b is None else b
        if a >= b:
            return a - 1
        if not self.blocked or b - a < 4 * _CHUNK:
            hit = np.flatnonzero(x[a:b] >= level)
            return a + int(hit[-1]) if hit.size else a - 1
        c0, c1 = self._span(a, b)
        for c in (c0 + np.flatnonzero(self.load_max[c0:c1] >= level))[::-1].tolist():
            s, e = max(c * _CHUNK, a), min((c + 1) * _CHUNK, b)
            hit = np.flatnonzero(x[s:e] >= level)
            if hit.size:
                return s + int(hit[-1])
        return a - 1

    def _indices(self, a, b, level, below):
        x = self.load

        def plain(s, e):
            return s + np.flatnonzero(x[s:e] < level if below else x[s:e] >= level)

        if not self.blocked or b - a < 4 * _CHUNK:
            return plain(a, b)
        c0, c1 = self._span(a, b)
        cand = c0 + np.flatnonzero(self.load_min[c0:c1] < level if below else self.load_max[c0:c1] >= level)
        if cand.size > max(8, (c1 - c0) // 4):
            return plain(a, b)
        parts = [plain(max(c * _CHUNK, a), min((c + 1) * _CHUNK, b)) for c in cand.tolist()]
        return np.concatenate(parts) if parts else np.flatnonzero(x[:0])

    def indices_below(self, level, a=0, b=None) -> np.ndarray:
        """``a + np.flatnonzero(load[a:b] < level)``."""
        return self._indices(a, self.n if b is None else b, level, True)

    def indices_at_least(self, level, a=0, b=None) -> np.ndarray:
        """``a + np.flatnonzero(load[a:b] >= level)``."""
        return self._indices(a, self.n if b is None else b, level, False)

    def window_sums(self, a, b):
        """Σv, ΣP, Σv², ΣvP over samples [a, b), from sums of whole blocks.

        The same sums as over the samples, in another order: they differ in
        rounding only (see :func:`_steepest_window`).
        """
        load, disp = self.load, self.disp
        c0, c1 = -(-a // _CHUNK), b // _CHUNK  # the blocks inside [a, b)
        if c1 - c0 < 2:
            return tuple(_sums(disp[a:b], load[a:b]).tolist())
        self._block_sums(c1)
        total = self._sums[:, c0:c1].sum(axis=1)
        for s, e in ((a, c0 * _CHUNK), (c1 * _CHUNK, b)):
            if e > s:
                total = total + _sums(disp[s:e], load[s:e])
        return tuple(total.tolist())

    def _block_sums(self, c1):
        """Make the sums of the blocks [0, c1) (rows Σv, ΣP, Σv², ΣvP; they are kept)."""
        have = 0 if self._sums is None else self._sums.shape[1]
        if c1 <= have:
            return
        c1 = min(max(c1, 2 * have), self.n // _CHUNK)  # grow by doubling, whole blocks only
        V = self.disp[have * _CHUNK:c1 * _CHUNK].reshape(-1, _CHUNK)
        P = self.load[have * _CHUNK:c1 * _CHUNK].reshape(-1, _CHUNK)
        new = np.stack([V.sum(axis=1), P.sum(axis=1), np.einsum("ij,ij->i", V, V),
                        np.einsum("ij,ij->i", V, P)])
        self._sums = new if self._sums is None else np.concatenate([self._sums, new], axis=1)

    def magnitudes(self, a, b):
        """(largest |v|, largest |P|) of the blocks that touch [a, b)."""
        if self._magnitudes is None:
            vmax, vmin = self.disp_extremes()
            self._magnitudes = (np.maximum(np.abs(vmax), np.abs(vmin)),
                                np.maximum(np.abs(self.load_max), np.abs(self.load_min)))
        c0, c1 = self._span(a, b)
        return float(self._magnitudes[0][c0:c1].max()), float(self._magnitudes[1][c0:c1].max())

    def above_secant(self, lo, hi, ks, v0) -> bool:
        """Is every smoothed value :func:`_first_crossing` computes from samples [lo, hi) positive?

        From the block extremes: the least of P - ks (v - v0) over the blocks,
        less the rounding of the samples' values, must exceed what the
        running sum over [lo, hi) can lose to rounding, (hi - lo)² ε times
        the largest value (positive terms summed in order).  ``False`` means
        the samples must be looked at, not that the record crosses.
        """
        if not self.blocked or not ks > 0.0 or self.disp is None:
            return False
        if self._secant is None or self._secant[0] != (ks, v0):
            vmax, vmin = self.disp_extremes()
            up, down = vmax - v0, vmin - v0
            with np.errstate(all="ignore"):  # the blocks' least and largest P - ks (v - v0), their size
                self._secant = ((ks, v0), self.load_min - ks * up, self.load_max - ks * down,
                                np.maximum(np.abs(self.load_max), np.abs(self.load_min))
                                + ks * np.maximum(np.abs(up), np.abs(down)))
        _, lows, highs, sizes = self._secant
        c0, c1 = self._span(lo, hi)
        low, high, size = float(lows[c0:c1].min()), float(highs[c0:c1].max()), float(sizes[c0:c1].max())
        margin = 8.0 * _EPS * size
        k = float(hi - lo)
        return low - margin > 4.0 * k * k * _EPS * (high + margin)


def _checked(load, disp, extremes=None):
    """The arrays as float, refused when not 1-D of one length or holding NaN or inf.

    With ``extremes`` (:class:`BlockExtremes` of the same arrays) the block
    extremes tell whether a value is not finite (NaN and inf reach the
    largest or the smallest value of their block), instead of a sum.
    """
    load = np.asarray(load, dtype=float)
    disp = np.asarray(disp, dtype=float)
    if load.ndim != 1 or load.shape != disp.shape:
        raise ReductionError("load and displacement must be 1-D arrays of the same length, "
                             f"got shapes {load.shape} and {disp.shape}")
    blocked = extremes is not None and extremes.blocked
    for name, x in (("load", load), ("displacement", disp)):
        if blocked:
            hi, lo = (extremes.load_max, extremes.load_min) if name == "load" else extremes.disp_extremes()
            finite = bool(np.isfinite(hi).all() and np.isfinite(lo).all())
        else:
            with np.errstate(all="ignore"):
                finite = math.isfinite(float(np.sum(x)))  # False: NaN or inf somewhere, or a huge sum
        if not finite:
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


def _fit_line(v, P, work=None):
    """(k, c, r², residual sd) of P = k v + c, or None.

    ``work``: two arrays of at least v.size samples (they may be v and P
    themselves) that take the deviations and residuals instead of new arrays.
    """
    n = v.size
    vm, Pm = float(v.mean()), float(P.mean())
    dv = np.subtract(v, vm, out=None if work is None else work[0][:n])
    sxx = _dot(dv, dv)
    if not sxx > n * (_CONSTANT_REL * vm) ** 2:  # v constant but for rounding
        return None
    dP = np.subtract(P, Pm, out=None if work is None else work[1][:n])
    k = _dot(dv, dP) / sxx
    c = Pm - k * vm
    ss_tot = _dot(dP, dP)
    resid = np.subtract(dP, np.multiply(dv, k, out=dv), out=dv)  # dP - k dv, in dv's place
    ss_res = _dot(resid, resid)
    r2 = 1.0 - ss_res / ss_tot if ss_tot > 0 else 0.0
    sd = (ss_res / max(n - 2, 1)) ** 0.5
    if not all(math.isfinite(x) for x in (k, c, r2, sd)):
        return None
    return k, c, r2, sd


def _first_reaches(extremes, levels, start=0) -> list[int]:
    """For each level (ascending), the first index i >= start with load[i] >= level, else n.

    ``start`` must be a sample before which the load stays below the first
    level.  The first index at which the load reaches a level is the first
    at which its running maximum does: a short record's running maximum is
    searched (it is kept), or for a long record the running maximum of the
    block maxima, and then the block found.
    """
    load = extremes.load
    if not extremes.blocked:
        running = extremes.running_max()
        if running.size and running[-1] == running[-1]:  # no NaN (it would stay to the end)
            return np.searchsorted(running, levels, side="left").tolist()
        pos, out = start, []
        for level in levels:
            pos = extremes.first_at_least(level, pos)
            out.append(pos)
        return out
    blocks = np.searchsorted(extremes.running_block_max(), levels, side="left").tolist()
    out = []
    for c, level in zip(blocks, levels):
        s = c * _CHUNK
        out.append(extremes.n if c == extremes.load_max.size else s + int(np.argmax(load[s:s + _CHUNK] >= level)))
    return out


def _without(x, i0, i1, out, into):
    """x[i0:i1] without the samples ``out`` (sorted indices inside [i0, i1)), in ``into``.

    Only the part up to the last sample left out goes through a mask; the
    rest is copied as it is.  Returns the filled part of ``into``.
    """
    last = int(out[-1]) + 1
    keep = np.ones(last - i0, dtype=bool)
    keep[out - i0] = False
    head = x[i0:last][keep]
    res = into[:head.size + i1 - last]
    res[:head.size] = head
    res[head.size:] = x[last:i1]
    return res


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


def _initial_slope(load, disp, P_ref=None, extremes=None):
    extremes = BlockExtremes(load, disp) if extremes is None else extremes
    P_max = extremes.max() if load.size else 0.0
    if not P_max > 0.0:
        raise ReductionError("the record has no positive load")
    # the bands are fractions of P_ref: P_max, or P_Q for a record far beyond P_Q
    P_ref = P_max if P_ref is None else min(float(P_ref), P_max)
    # first index at which the load reaches each window's ends
    ends = sorted({lo for lo in _WINDOW_STARTS} | {lo + _WINDOW_WIDTH for lo in _WINDOW_STARTS})
    reach = dict(zip(ends, _first_reaches(extremes, [e * P_ref for e in ends])))
    # rank the windows by slope from sums (cheap), then fit the steepest exactly
    windows = []
    for lo in _WINDOW_STARTS:
        hi = lo + _WINDOW_WIDTH
        i0, i_hi = reach[lo], reach[hi]
        if i_hi - i0 < _MIN_FIT_POINTS:
            continue
        # samples of [i0, i_hi) below the band (scatter, dips) are left out
        windows.append((lo, hi, i0, i_hi, extremes.indices_below(lo * P_ref, i0, i_hi)))
    best = _steepest_window(extremes, windows) if extremes.blocked else _UNSURE
    if best is _UNSURE:
        best = None
        for lo, hi, i0, i_hi, out in windows:
            k = _slope_from_sums(disp, load, i0, i_hi, out)
            if k is not None and k > 0.0 and (best is None or k > best[0]):
                best = (k, lo, hi, i0, i_hi, out)
    if best is not None:
        _, lo, hi, i0, i_hi, out = best
        # the band's samples without those below it, in order (a copy only when some are left out)
        work = extremes.work_arrays(i_hi - i0)
        if out.size:
            v, P = _without(disp, i0, i_hi, out, work[0]), _without(load, i0, i_hi, out, work[1])
        else:
            v, P = disp[i0:i_hi], load[i0:i_hi]
        lo, hi, i_hi, out = _narrowed_band(extremes, P_ref, lo, hi, i0, i_hi, out, v, P)
        m = i_hi - i0 - out.size  # a narrower band keeps the first m of them
        fitted = _fit_line(v[:m], P[:m], work)  # the deviations overwrite the copies, if any
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
    q = x * x - np.mean(x * x)
    t = _curvature_t_orthogonal(v, x, q)
    if t is not None:
        return t
    A = np.column_stack([np.ones_like(x), x, q])
    coef, *_ = np.linalg.lstsq(A, v, rcond=None)
    r = v - A @ coef
    s2 = float(r @ r) / (v.size - 3)
    try:
        var = s2 * np.linalg.inv(A.T @ A)[2, 2]
    except np.linalg.LinAlgError:
        return 0.0
    return float(coef[2] / var**0.5) if var > 0 else 0.0


def _curvature_t_orthogonal(v, x, q):
    """The t statistic of _curvature_t from orthogonalised columns, or None when unsure.

    The quadratic column is made orthogonal to 1 and x (Frisch–Waugh: its
    coefficient and standard error are those of the full fit), so the fit
    needs only dot products of single columns, no LAPACK call.  The value is
    returned only when it lies farther from the decision threshold (3) than
    the two ways of computing it can differ: n^1.5 ε ‖v‖/‖r‖ (1 + |t|), r the
    residuals, with a factor 64 to spare (first-order rounding bound of dot
    products, |error| <= n u Σ|x_i y_i|: Higham, Accuracy and Stability of
    Numerical Algorithms, 2nd ed., chapter 3, from memory); and only when
    the quadratic column is not nearly a combination of the other two.
    """
    n = v.size
    # x and q are centred already (to rounding, which the bound below covers)
    vc = v - v.mean()
    sxx, sxq = _dot(x, x), _dot(x, q)
    if not sxx > 0.0:
        return None
    qt = q - (sxq / sxx) * x  # the part of q orthogonal to 1 and x
    sqq = _dot(qt, qt)
    if not sqq > 1e-6 * (sqq + sxq * sxq / sxx):  # q nearly a combination of 1 and x
        return None
    c2 = _dot(qt, vc) / sqq
    r = vc - (_dot(x, vc) / sxx) * x
    r -= c2 * qt
    ss = _dot(r, r)
    if not ss > 0.0:
        return None
    t = c2 * math.sqrt(sqq) / math.sqrt(ss / (n - 3))
    unsure = 64.0 * n**1.5 * _EPS * math.sqrt(_dot(v, v) / ss) * (1.0 + abs(t))
    if not (math.isfinite(t) and abs(t - _CURVATURE_T) > unsure):
        return None
    return float(t)


def _narrowed_band(extremes, P_ref, lo, hi, i0, i_hi, out, v, P):
    """Narrow the chosen band from the top while its curvature stands out of the scatter.

    v and P are the band's samples without ``out``, in order; a narrower
    band's are the first of them.  Returns (lo, hi, i_hi, out).
    """
    for width in _NARROW_WIDTHS:
        # every s-th sample of the band, s = max(1, count // 20 000)
        count = i_hi - i0 - out.size
        step = max(1, count // _CURVATURE_SAMPLES)
        t = _curvature_t(v[:count:step].copy(), P[:count:step].copy())
        # displacement growing faster than linear in load: the band reaches the curved part
        if t <= _CURVATURE_T:
            break
        # the band's lower end i0 is reached first: the search starts there
        new_hi = _first_reaches(extremes, [(lo + width) * P_ref], start=i0)[0]
        if new_hi - i0 < 4 * _MIN_FIT_POINTS:
            break
        hi, i_hi = lo + width, new_hi
        out = out[:np.searchsorted(out, i_hi)]  # the samples below the band, now up to i_hi
    return lo, hi, i_hi, out


def _sums(v, P):
    """[Σv, ΣP, Σv², ΣvP] of two arrays."""
    return np.array([v.sum(), P.sum(), _dot(v, v), _dot(v, P)])


#: _steepest_window could not decide: the windows are ranked by _slope_from_sums
_UNSURE = object()


def _steepest_window(extremes, windows):
    """The window _slope_from_sums ranks steepest, decided from block sums, or _UNSURE.

    Each window's sums are taken from sums of whole blocks
    (:meth:`BlockExtremes.window_sums`), which differ from the sums over its
    samples by rounding only.  Any order of summing N terms errs by at most
    (N - 1) u Σ|x|, u = ε/2, to first order (Higham, Accuracy and
    Stability of Numerical Algorithms, 2nd ed., chapter 4, from memory; the
    bound here takes 2 (2N + 64) ε, the samples left out counted too), so
    both slopes lie within a bound e of each other; the answer is given
    only when every decision (enough spread of v, k > 0, the steepest
    window) holds for every slope within the bounds.  The bounds take Σ|x|
    as N times the largest |x| of the blocks.
    """
    load, disp = extremes.load, extremes.disp
    found = []
    with np.errstate(all="ignore"):
        for window in windows:
            _lo, _hi, i0, i1, out = window
            n = i1 - i0 - out.size
            if n < _MIN_FIT_POINTS:
                continue  # exactly what _slope_from_sums does
            sv, sP, svv, svP = extremes.window_sums(i0, i1)
            if out.size:
                vo, Po = disp[out], load[out]
                sv, sP, svv, svP = sv - vo.sum(), sP - Po.sum(), svv - _dot(vo, vo), svP - _dot(vo, Po)
            M_v, M_P = extremes.magnitudes(i0, i1)
            N = i1 - i0
            g = 2.0 * (2 * N + 64) * _EPS  # N ε for the kept sums, outs taken off included
            Av, AP, Avv, AvP = N * M_v, N * M_P, N * M_v * M_v, N * M_v * M_P
            Ev, EP, Evv, EvP = g * Av, g * AP, g * Avv, g * AvP
            sxx, sxy = float(svv - sv * sv / n), float(svP - sv * sP / n)
            dxx = Evv + (2.0 * Av * Ev + Ev * Ev) / n + 4.0 * _EPS * (Avv + Av * Av / n)
            dxy = EvP + (Av * EP + AP * Ev + Ev * EP) / n + 4.0 * _EPS * (AvP + Av * AP / n)
            spread_hi = n * (_SUMS_CONSTANT_REL * (abs(sv) + 2.0 * Ev) / n) ** 2 * (1.0 + 1e-9)
            spread_lo = n * (_SUMS_CONSTANT_REL * max(abs(sv) - 2.0 * Ev, 0.0) / n) ** 2 * (1.0 - 1e-9)
            if not all(math.isfinite(x) for x in (sxx, sxy, dxx, dxy, spread_hi)):
                return _UNSURE
            if sxx + 2.0 * dxx <= spread_lo:
                continue  # v constant but for the sums' rounding, in either order
            if not (sxx - 2.0 * dxx > spread_hi and sxx > 4.0 * dxx and abs(sxy) > 4.0 * dxy):
                return _UNSURE
            k = sxy / sxx
            e = 4.0 * abs(k) * (dxy / abs(sxy) + dxx / sxx) + 8.0 * _EPS * abs(k)
            if k + e <= 0.0:
                continue  # not rising, in either order
            if not k - e > 0.0:
                return _UNSURE
            found.append((k, e, window))
    if not found:
        return None
    k, e, window = max(found, key=lambda f: f[0])
    if any(other is not window and not k - e > k2 + e2 for k2, e2, other in found):
        return _UNSURE  # too close to call from the bounds
    return (k, *window)


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
    return _flat_top(load, fit, BlockExtremes(load))


def _flat_top(load, fit, extremes):
    run, P_max = extremes.run_at_maximum()
    if run is None:
        return None
    i0, i1 = fit.index_range
    steps = np.abs(np.diff(load[i0:i1]))
    steps = steps[steps > _FLAT_REL * abs(P_max)]
    if steps.size == 0 or not fit.residual_sd_kN > float(steps.min()):
        return None  # no scatter above the resolution: a plateau cannot be told from a limit
    return run


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
    return _envelope(load, disp, BlockExtremes(load, disp))


def _envelope(load, disp, extremes):
    with np.errstate(all="ignore"):  # huge values overflow to inf, which compares as it should
        return _envelope_of(load, disp, extremes)


def _envelope_of(load, disp, extremes):
    n = load.size
    P_max = extremes.max() if n else 0.0
    if n < 3 or not P_max > 0.0 or not _load_falls(load, _CYCLE_DROP * P_max, extremes):
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


def _load_falls(load, drop, extremes) -> bool:
    """Could the load anywhere fall by more than ``drop`` below an earlier value?

    Block maxima and minima answer it for a long rising record in a few
    passes; a True only means the exact search is needed.
    """
    n = load.size
    m = n // _CHUNK * _CHUNK
    if m < 4 * _CHUNK:
        return bool(np.any(np.maximum.accumulate(load) - load > drop))
    if extremes.blocked:
        tops, bottoms = extremes.load_max[:m // _CHUNK], extremes.load_min[:m // _CHUNK]
    else:
        blocks = load[:m].reshape(-1, _CHUNK)
        tops, bottoms = blocks.max(axis=1), blocks.min(axis=1)
    highest = np.maximum.accumulate(tops)
    if np.any(highest - bottoms > drop):
        return True
    tail = load[m:]
    return bool(tail.size and float(highest[-1]) - float(tail.min()) > drop)


def _is_end_of_test(load, disp, j, P_cross, slope, w, extremes) -> bool:
    """Does the crossing at sample j lie on the end of the test, not on the loading?

    It does when the load never again reaches the crossing load (beyond the
    samples the smoothing at j already saw) and the record at the crossing is
    not advancing: the displacement runs back (an unloading) or the load
    falls faster than the elastic line would unload it, -dP > k·dv (a
    fracture).  A crossing while the opening grows, on the rising or the
    falling branch or at a pop-in, is a genuine P_5.
    """
    n, h = load.size, w // 2
    first_later = min(j + h + 1, n - 1)
    if first_later < n and extremes.max(first_later) >= P_cross:
        return False
    i0, i1 = max(j - h - 1, 0), min(j + h, n - 1)
    dP, dv = float(load[i1] - load[i0]), float(disp[i1] - disp[i0])
    advancing = dv > 0.0 and -dP < slope * dv
    return not advancing


def _first_crossing(load, disp, ks, v0, start, w, extremes):
    """First index j >= start where the smoothed record falls below the secant.

    Scans block by block; returns None when the record never does.  A block
    whose samples lie so far above the secant that no smoothed value can be
    below it (:meth:`BlockExtremes.above_secant`) is passed over.
    """
    n, h = load.size, w // 2
    a = start
    while a < n:
        b = min(a + _BLOCK, n)
        lo, hi = max(a - h, 0), min(b + h, n)
        if extremes.above_secant(lo, hi, ks, v0):
            a = b
            continue
        if w > 1:
            j = _first_below_in_block(load, disp, ks, v0, a, b, h)
            if j is not None:
                return j
        else:
            below = np.flatnonzero(load[a:b] - ks * (disp[a:b] - v0) < 0.0)
            if below.size:
                return a + int(below[0])
        a = b
    return None


def _first_below_in_block(load, disp, ks, v0, a, b, h):
    """First j in [a, b) where the smoothed P - ks (v - v0) is negative, else None.

    The values are those of _centred_means over the block's samples
    [a - h, b + h) (windows reach at most h beyond the block: only the
    record's ends clip them), found in steps of _PIECE samples: the running
    sum is carried on from step to step (a cumulative sum adds in order, so
    its values do not depend on where it stops), and the block is read only
    as far as its first negative value.
    """
    n = load.size
    lo, hi = max(a - h, 0), min(b + h, n)
    m = hi - lo
    c = np.empty(m + 1)
    c[0] = 0.0
    have, i = 0, a - lo
    while i < b - lo:
        e = min(i + _PIECE, b - lo)
        need = min(e + h, m)
        if need > have:
            part = c[have:need + 1]  # part[0] = c[have], the sum so far
            np.subtract(load[lo + have:lo + need], ks * (disp[lo + have:lo + need] - v0), out=part[1:])
            np.cumsum(part, out=part)
            have = need
        below = np.flatnonzero(_means_from_sums(c, 0, h, m, i, e) < 0.0)
        if below.size:
            return lo + i + int(below[0])
        i = e
    return None


def _smoothed_at(x, h, i):
    n = x.size
    L, R = max(i - h, 0), min(i + h + 1, n)
    return float(np.mean(x[L:R]))


def _smoothed_max_exceeds(load, h, j, level, extremes) -> bool:
    """Does the moving average of the load before sample j exceed ``level``?

    A mean never exceeds the largest sample in its window, so only the
    windows around raw samples above ``level`` are averaged.
    """
    if not extremes.max(0, j) > level:
        return False
    above = np.nextafter(level, np.inf)  # x > level is x >= the next float above level
    first, last = extremes.first_at_least(above, 0, j), extremes.last_at_least(above, 0, j)
    a, b = max(first - h, 0), min(last + h + 1, j)
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
    return _secant(load, disp, ratio, BlockExtremes(load, disp))


def _secant(load, disp, ratio, extremes):
    out = _construction(load, disp, ratio, _initial_slope(load, disp, None, extremes), extremes)
    # a record loaded far beyond P_Q: the bands scaled by P_max reach into the
    # curved part, so fit again with bands scaled by P_Q until P_Q settles
    for _ in range(_REFIT_ROUNDS):
        if out.P_Q >= _REFIT_BELOW * out.P_max:
            break
        again = _construction(load, disp, ratio, _initial_slope(load, disp, out.P_Q, extremes), extremes)
        settled = abs(again.P_Q - out.P_Q) <= _REFIT_SETTLED * out.P_Q
        out = again
        if settled:
            break
    return out


def _construction(load, disp, ratio, fit, extremes):
    flat = _flat_top(load, fit, extremes)
    if flat is not None:
        i0, i1 = flat
        raise ReductionError(
            f"the load channel is saturated: {i1 - i0} consecutive samples (samples {i0 + 1} to "
            f"{i1}) hold exactly {float(load[i0]):.6g} kN, the maximum, while the rest of the "
            "record scatters; the transducer or amplifier was at its limit, so P_max (and P_Q) "
            "are not known from this record")
    v0 = fit.origin_mm
    ks = ratio * fit.slope
    i_max = extremes.argmax()
    P_max, v_max = float(load[i_max]), float(disp[i_max] - v0)
    n = load.size
    w = smoothing_window(n)
    h = w // 2

    j = _first_crossing(load, disp, ks, v0, fit.index_range[1], w, extremes)
    P_5 = v_5 = None
    note = ""
    if j is not None:
        j = max(j, 1)
        Pa, Pb = _smoothed_at(load, h, j - 1), _smoothed_at(load, h, j)
        va, vb = _smoothed_at(disp, h, j - 1) - v0, _smoothed_at(disp, h, j) - v0
        g0, g1 = Pa - ks * va, Pb - ks * vb
        t = min(max(g0 / (g0 - g1), 0.0), 1.0) if g0 != g1 else 0.0
        P_cross, v_cross = float(Pa + t * (Pb - Pa)), float(va + t * (vb - va))
        if _is_end_of_test(load, disp, j, P_cross, fit.slope, w, extremes):
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
        i_before = extremes.argmax(0, min(j + h + 1, n))
        P_before = float(load[i_before])
        if _smoothed_max_exceeds(load, h, j, P_5 + tol, extremes):
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


@dataclass(frozen=True)
class Construction:
    """The construction of a record made on its loading envelope.

    Attributes
    ----------
    envelope : Envelope
        The unloading-reloading cycles removed.
    load, disp : numpy.ndarray
        The envelope's samples, kN and mm (the record's own arrays when no
        cycle was removed).
    time : numpy.ndarray or None
        The envelope's time stamps, s, when a time channel was given.
    secant : SecantResult
        The secant construction on them.
    extremes : BlockExtremes
        The block extremes of ``load`` and ``disp``, for later searches.
    """

    envelope: Envelope
    load: np.ndarray
    disp: np.ndarray
    time: np.ndarray | None
    secant: SecantResult
    extremes: BlockExtremes


def construction_on_envelope(load: np.ndarray, disp: np.ndarray, ratio: float = 0.95,
                             time: np.ndarray | None = None) -> Construction:
    """:func:`secant_construction` on :func:`loading_envelope` of the record.

    The same results as the two functions called in turn; the record is
    checked once and its block extremes serve both.

    Parameters
    ----------
    load : ndarray
        Load, kN, in sample order.
    disp : ndarray
        Displacement, mm, same length, any origin.
    ratio : float
        Slope of the secant relative to the initial slope.
    time : array_like, optional
        Time, s, same length; its samples on the envelope are returned.

    Returns
    -------
    Construction

    Raises
    ------
    ReductionError
        As :func:`loading_envelope` and :func:`secant_construction`.

    References
    ----------
    ASTM E399 clause 9.1.1 (the construction is made on the loading record).
    """
    load = np.asarray(load, dtype=float)
    disp = np.asarray(disp, dtype=float)
    if load.ndim != 1 or load.shape != disp.shape:
        _checked(load, disp)  # raises, naming the shapes
    extremes = BlockExtremes(load, disp)
    load, disp = _checked(load, disp, extremes)
    envelope = _envelope(load, disp, extremes)
    if envelope.keep is not None:
        # samples of a checked record: finite, no second check needed
        load, disp = load[envelope.keep], disp[envelope.keep]
        time = None if time is None else np.asarray(time, dtype=float)[envelope.keep]
        extremes = BlockExtremes(load, disp)
    return Construction(envelope, load, disp, time, _secant(load, disp, ratio, extremes), extremes)


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
    with np.errstate(all="ignore"):
        sums = float(t.sum()), float(P.sum())
    if not math.isfinite(sums[0] + sums[1]):  # NaN, inf or a huge sum
        ok = np.isfinite(t) & np.isfinite(P)
        if not ok.all():  # copies only when some stamps are missing
            t, P = t[ok], P[ok]
            sums = float(t.sum()), float(P.sum())
    if t.size < 2 or np.ptp(t) <= 0.0:
        return None
    k = _slope_by_pieces(t, P, sums[0] / t.size, sums[1] / t.size) if t.size > 4 * _PIECE else _UNSURE
    if k is _UNSURE:
        fitted = _fit_line(t, P)
        k = None if fitted is None else fitted[0]
    return k


def _slope_by_pieces(v, P, vm, Pm):
    """The slope k of :func:`_fit_line`, its centred sums taken piece by piece, or _UNSURE.

    vm and Pm are the means.  Given only when the fit is clearly not
    degenerate, r² is above 0.9 and no sum comes near overflow, so that
    _fit_line would return a finite fit: its k differs from this one by
    rounding only.
    """
    n = v.size
    dv, dP = np.empty(_PIECE), np.empty(_PIECE)
    sxx = sxy = syy = 0.0
    for s in range(0, n, _PIECE):
        e = min(s + _PIECE, n)
        a, b = np.subtract(v[s:e], vm, out=dv[:e - s]), np.subtract(P[s:e], Pm, out=dP[:e - s])
        sxx, sxy, syy = sxx + _dot(a, a), sxy + _dot(a, b), syy + _dot(b, b)
    if not (sxx > 2.0 * n * (_CONSTANT_REL * vm) ** 2 and sxy * sxy > 0.9 * sxx * syy):
        return _UNSURE  # nearly degenerate, or r² below 0.9: k not well defined
    k = sxy / sxx
    c = Pm - k * vm
    if not (math.isfinite(k) and math.isfinite(c) and syy < 1e300 and k * k * sxx < 1e300):
        return _UNSURE
    return k
