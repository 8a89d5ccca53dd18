"""Synthetic load–displacement records with known answers.

These are invented records for tests and for the demo campaign, built from
a curve whose 5 % secant intersection is known in closed form.  They are not
measurements.

The loading curve is

.. math:: P(v) = \\frac{k v}{\\left[1 + (k v / P_y)^m\\right]^{1/m}}

which starts with slope k and bends over towards the plateau P_y; the
larger m, the sharper the knee.  Its intersection with the secant of slope
r·k (r = 0.95) is where :math:`[1 + (kv/P_y)^m]^{1/m} = 1/r`, so

.. math:: v_5 = \\frac{P_y}{k}\\left(r^{-m} - 1\\right)^{1/m},\\qquad P_5 = r k v_5 .
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

RATIO = 0.95


@dataclass
class SyntheticRecord:
    """A constructed record and the answers it was built with (kN, mm, s)."""

    load_kN: np.ndarray
    disp_mm: np.ndarray
    time_s: np.ndarray
    P_Q: float
    P_5: float | None
    P_max: float
    curve_type: str


def curve_load(v, k, P_y, m):
    """P(v) of the constructed loading curve, kN (v in mm, k in kN/mm)."""
    v = np.asarray(v, dtype=float)
    x = np.clip(k * v / P_y, 0.0, None)
    return k * v / (1.0 + x**m) ** (1.0 / m)


def secant_point(k, P_y, m, ratio=RATIO):
    """(v_5, P_5) of the constructed curve in closed form (module docstring)."""
    v5 = P_y / k * (ratio ** (-m) - 1.0) ** (1.0 / m)
    return v5, ratio * k * v5


def _finish(v, P, rate_kN_s, noise_kN, offset_mm, toe_mm, rng):
    P_clean = P.copy()
    v_meas = v + offset_mm
    if toe_mm:
        # a seating toe: extra softness at low load that settles to a constant shift
        P_t = 0.02 * P_clean.max()
        v_meas = v_meas + toe_mm * (1.0 - np.exp(-np.clip(P_clean, 0, None) / P_t))
    # time: the elastic part loads at rate_kN_s; displacement-controlled afterwards
    dv = np.abs(np.diff(v, prepend=v[0]))
    k0 = P[min(5, P.size - 1)] / max(v[min(5, P.size - 1)], 1e-12)
    t = np.cumsum(dv) * k0 / rate_kN_s
    if noise_kN:
        P = P + rng.normal(0.0, noise_kN, P.size)
    return v_meas, P, t


def make_record(kind: str, k: float = 40.0, P_y: float = 30.0, m: float = 6.0, *,
                n: int = 2000, noise_kN: float = 0.0, offset_mm: float = 0.0, toe_mm: float = 0.0,
                rate_kN_s: float = 0.5, pop_fraction: float = 0.85, pop_drop: float = 0.06,
                fracture_fraction: float = 0.80, overshoot: float = 1.6,
                seed: int = 0) -> SyntheticRecord:
    """Build a record of curve type ``"I"``, ``"II"`` or ``"III"``.

    Parameters
    ----------
    kind : {"I", "II", "III"}
        Type I: smooth curve loaded past P_5 (to ``overshoot``·v_5).
        Type II: a pop-in at ``pop_fraction``·P_5 whose load drop and opening
        cross the secant, then loading resumes.
        Type III: linear-ish loading to fracture at ``fracture_fraction``·P_5,
        then the load falls to near zero.
    k, P_y, m : float
        Initial slope (kN/mm), plateau load (kN) and knee sharpness of the curve.
    noise_kN : float
        Standard deviation of Gaussian noise added to the load.
    offset_mm, toe_mm : float
        A constant displacement offset and a seating toe.
    """
    rng = np.random.default_rng(seed)
    v5, P5 = secant_point(k, P_y, m)
    if kind == "I":
        v = np.linspace(0.0, overshoot * v5, n)
        P = curve_load(v, k, P_y, m)
        v, P, t = _finish(v, P, rate_kN_s, noise_kN, offset_mm, toe_mm, rng)
        return SyntheticRecord(P, v, t, P5, P5, float(curve_load(overshoot * v5, k, P_y, m)), "I")
    if kind == "II":
        P_pop = pop_fraction * P5
        # the load where the curve reaches P_pop, found on a fine grid of the monotone curve
        grid = np.linspace(0.0, v5, 200001)
        v_pop = float(np.interp(P_pop, curve_load(grid, k, P_y, m), grid))
        n1 = int(n * 0.5)
        v1 = np.linspace(0.0, v_pop, n1)
        P1 = curve_load(v1, k, P_y, m)
        # the jump: load falls by pop_drop, opening grows enough to cross the secant
        P_low = P_pop * (1.0 - pop_drop)
        v_jump = max(P_pop / (RATIO * k) * 1.05, v_pop * 1.08)
        n2 = 8
        v2 = np.linspace(v_pop, v_jump, n2 + 1)[1:]
        P2 = np.linspace(P_pop, P_low, n2 + 1)[1:]
        # resume: the same curve, shifted to start from the end of the jump, rising above P_pop
        P_end = P_pop * 1.06
        n3 = n - n1 - n2
        shift = v_jump - float(np.interp(P_low, curve_load(grid, k, P_y, m), grid))
        P3 = np.linspace(P_low, P_end, n3 + 1)[1:]
        grid_v = np.linspace(0.0, 3 * v5, 400001)
        grid_P = curve_load(grid_v, k, P_y, m)
        v3 = np.interp(P3, grid_P, grid_v) + shift
        v = np.concatenate([v1, v2, v3])
        P = np.concatenate([P1, P2, P3])
        v, P, t = _finish(v, P, rate_kN_s, noise_kN, offset_mm, toe_mm, rng)
        return SyntheticRecord(P, v, t, P_pop, None, P_end, "II")
    if kind == "III":
        P_f = fracture_fraction * P5
        grid = np.linspace(0.0, v5, 200001)
        v_f = float(np.interp(P_f, curve_load(grid, k, P_y, m), grid))
        v1 = np.linspace(0.0, v_f, n - 4)
        P1 = curve_load(v1, k, P_y, m)
        v2 = v_f + np.array([0.002, 0.004, 0.006, 0.008])
        P2 = P_f * np.array([0.35, 0.05, 0.01, 0.0])
        v = np.concatenate([v1, v2])
        P = np.concatenate([P1, P2])
        v, P, t = _finish(v, P, rate_kN_s, noise_kN, offset_mm, toe_mm, rng)
        return SyntheticRecord(P, v, t, P_f, None, P_f, "III")
    raise ValueError(f"kind must be 'I', 'II' or 'III', got {kind!r}")
