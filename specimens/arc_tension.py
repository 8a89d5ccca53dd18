"""Arc-shaped tension specimen A(T), a pin-loaded ring segment.

.. math:: K = \\frac{P}{B W^{1/2}}
          \\left[\\frac{3X}{W} + 1.9 + 1.1\\frac{a}{W}\\right]
          \\left[1 + 0.25\\left(1-\\frac{a}{W}\\right)^2\\left(1-\\frac{r_1}{r_2}\\right)\\right]
          f(a/W)

with X the loading-hole offset and r1, r2 the inner and outer radii
(W = r2 − r1).  So that the common K expression of
:class:`~specimens.base.Geometry` holds unchanged, the calibration returned
here is the whole factor, both brackets times f(a/W).

References
----------
ASTM E399, Annex A5 (arc-shaped tension specimen A(T)).  Written down from
memory: the bracket factors are as given in the brief and as recalled; the
f(a/W) coefficients 3.74, −6.30, 6.32, −2.43 are as recalled and have not
been checked against a printed copy.  The stated ranges (0.2 ≤ a/W ≤ 1,
0 ≤ r1/r2 ≤ 1, and the X/W over which it holds) and the stated accuracy are
recalled only loosely.  The standard's specimen designs use X/W = 0.5 and
X/W = 0 (from memory).  Which displacement the standard prefers for each
design was not recalled with confidence; ``cmod`` is listed first.
"""

from __future__ import annotations

import math
from typing import Mapping

from specimens.base import Geometry, register


def radius_ratio(dims: Mapping[str, float], designation: str) -> float:
    """r1/r2 of an arc-shaped specimen, checked.

    Parameters
    ----------
    dims : mapping
        Must hold ``r1`` and ``r2``, the inner and outer radii, mm.
    designation : str
        Named in the error message.

    Returns
    -------
    float
        r1/r2, dimensionless, in [0, 1).

    Raises
    ------
    ValueError
        If r1 is negative or r2 is not larger than r1.

    Examples
    --------
    >>> radius_ratio({"r1": 50.0, "r2": 100.0}, "A(T)")
    0.5
    """
    r1, r2 = float(dims["r1"]), float(dims["r2"])
    if not (math.isfinite(r1) and math.isfinite(r2)) or r1 < 0 or r2 <= r1:
        raise ValueError(f"{designation} needs 0 <= r1 < r2 (inner and outer radius, mm), "
                         f"got r1={r1!r}, r2={r2!r}")
    return r1 / r2


def arc_tension_f(alpha: float, dims: Mapping[str, float]) -> float:
    """The A(T) factor that multiplies P/(B W^½), dimensionless.

    .. math:: \\left[\\frac{3X}{W} + 1.9 + 1.1\\alpha\\right]
              \\left[1 + 0.25(1-\\alpha)^2\\left(1-\\frac{r_1}{r_2}\\right)\\right]
              \\frac{\\alpha^{1/2}(3.74 - 6.30\\alpha + 6.32\\alpha^2
              - 2.43\\alpha^3)}{(1-\\alpha)^{3/2}}

    Parameters
    ----------
    alpha : float
        a/W, dimensionless.
    dims : mapping
        ``W``, ``X`` (loading-hole offset), ``r1``, ``r2`` (inner and
        outer radius), all mm.

    Returns
    -------
    float
        The calibration factor, dimensionless.

    Raises
    ------
    ValueError
        If ``W`` is missing or not positive, or the radii are impossible.

    References
    ----------
    ASTM E399, Annex A5 (from memory, see the module docstring).

    Examples
    --------
    >>> round(arc_tension_f(0.5, {"W": 50.0, "X": 25.0, "r1": 50.0, "r2": 100.0}), 2)
    15.2
    """
    W = dims.get("W")
    if W is None or not float(W) > 0:
        raise ValueError(f"A(T) needs the width W > 0 (mm) among the dimensions, got {W!r}")
    a = alpha
    core = a**0.5 * (3.74 - 6.30 * a + 6.32 * a**2 - 2.43 * a**3) / (1 - a) ** 1.5
    offset = 3 * float(dims["X"]) / float(W) + 1.9 + 1.1 * a
    curvature = 1 + 0.25 * (1 - a) ** 2 * (1 - radius_ratio(dims, "A(T)"))
    return offset * curvature * core


AT = register(Geometry(
    designation="A(T)",
    title="arc-shaped tension",
    calibration=arc_tension_f,
    bending=False,
    alpha_range=(0.2, 1.0),
    required=("X", "r1", "r2"),
    displacement_types=("cmod", "load_line"),
    reference="ASTM E399 Annex A5 (K factor and f(a/W) from memory)",
    aliases=("AT", "ARCTENSION", "CSHAPED"),
))
