"""Disk-shaped compact specimen DC(T).

The K expression has the C(T) form, K = P/(B W^½) · f(a/W), with the
polynomial fitted to the disk outline.

References
----------
ASTM E399, Annex A6 (disk-shaped compact specimen DC(T)), the f(a/W)
polynomial as printed there.  Written down from memory: the coefficients
0.76, 4.8, −11.58, 11.43, −4.08 are as recalled and have not been checked
against a printed copy; the stated a/W range (0.2 to 1) and accuracy are
recalled less firmly than the coefficients.
"""

from __future__ import annotations

from specimens.base import Geometry, register


def disk_compact_f(alpha: float, dims=None) -> float:
    """f(a/W) of the DC(T) specimen (dimensionless).

    .. math:: f = \\frac{(2+\\alpha)(0.76 + 4.8\\alpha - 11.58\\alpha^2
              + 11.43\\alpha^3 - 4.08\\alpha^4)}{(1-\\alpha)^{3/2}}

    Parameters
    ----------
    alpha : float
        a/W, dimensionless.
    dims : mapping, optional
        Not used; accepted so every calibration has one signature.

    Returns
    -------
    float
        f(a/W), dimensionless.

    References
    ----------
    ASTM E399, Annex A6 (from memory, see the module docstring).

    Examples
    --------
    >>> round(disk_compact_f(0.5), 2)
    10.17
    """
    a = alpha
    return (2 + a) * (0.76 + 4.8 * a - 11.58 * a**2 + 11.43 * a**3 - 4.08 * a**4) / (1 - a) ** 1.5


DCT = register(Geometry(
    designation="DC(T)",
    title="disk-shaped compact tension",
    calibration=disk_compact_f,
    bending=False,
    alpha_range=(0.2, 1.0),
    displacement_types=("load_line",),
    reference="ASTM E399 Annex A6 (f(a/W) from memory)",
    aliases=("DCT", "DISK", "DISC", "DISKCOMPACT", "DISCCOMPACT"),
))
