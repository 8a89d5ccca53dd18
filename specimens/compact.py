"""Compact specimen C(T).

References
----------
ASTM E399, Annex A4 (compact specimen), the K expression and f(a/W)
polynomial as printed there; the same form is given in ASTM E1820 Annex A2.
"""

from __future__ import annotations

from specimens.base import Geometry, register
from specimens.compliance import CT_COMPLIANCE


def compact_f(alpha: float, dims=None) -> float:
    """f(a/W) of the C(T) specimen.

    .. math:: f = \\frac{(2+\\alpha)(0.886 + 4.64\\alpha - 13.32\\alpha^2
              + 14.72\\alpha^3 - 5.6\\alpha^4)}{(1-\\alpha)^{3/2}}

    >>> round(compact_f(0.5), 2)
    9.66
    """
    a = alpha
    return (2 + a) * (0.886 + 4.64 * a - 13.32 * a**2 + 14.72 * a**3 - 5.6 * a**4) / (1 - a) ** 1.5


CT = register(Geometry(
    designation="C(T)",
    title="compact tension",
    calibration=compact_f,
    bending=False,
    alpha_range=(0.2, 1.0),
    displacement_types=("load_line", "front_face"),
    reference="ASTM E399 Annex A4; ASTM E1820 Annex A2",
    aliases=("CT", "COMPACT"),
    compliance=CT_COMPLIANCE,
))
