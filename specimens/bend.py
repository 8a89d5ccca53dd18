"""Single-edge notched bend specimen SE(B), span S = 4W.

References
----------
ASTM E399, Annex A3 (bend specimen SE(B)), the K expression and f(a/W) as
printed there for S/W = 4; the same form in ASTM E1820 Annex A1.
"""

from __future__ import annotations

from specimens.base import Geometry, register
from specimens.compliance import SEB_COMPLIANCE


def bend_f(alpha: float, dims=None) -> float:
    """f(a/W) of the SE(B) specimen with S/W = 4.

    .. math:: f = \\frac{3\\alpha^{1/2}[1.99 - \\alpha(1-\\alpha)(2.15 - 3.93\\alpha
              + 2.7\\alpha^2)]}{2(1+2\\alpha)(1-\\alpha)^{3/2}}

    >>> round(bend_f(0.5), 2)
    2.66
    """
    a = alpha
    num = 3 * a**0.5 * (1.99 - a * (1 - a) * (2.15 - 3.93 * a + 2.7 * a**2))
    return num / (2 * (1 + 2 * a) * (1 - a) ** 1.5)


SEB = register(Geometry(
    designation="SE(B)",
    title="single-edge notched bend",
    calibration=bend_f,
    bending=True,
    alpha_range=(0.0, 1.0),
    required=("S",),
    displacement_types=("cmod", "load_line"),
    reference="ASTM E399 Annex A3; ASTM E1820 Annex A1",
    aliases=("SEB", "BEND", "SENB"),
    compliance=SEB_COMPLIANCE,
))
