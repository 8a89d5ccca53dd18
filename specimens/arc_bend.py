"""Arc-shaped bend specimen A(B), a ring segment in three-point bending.

K has the bend form, K = P S/(B W^{3/2}) · f(a/W), span S = 4W, with the
crack from the inner (concave) surface and W = r2 − r1.

**Incomplete.** ASTM E399 Annex A9 gives an f(a/W) that includes the ring
curvature through r1/r2.  That expression could not be recalled reliably
enough to write down, and it is *not* used here.  What is used is its
straight-beam limit (r1/r2 → 1): the SE(B) S/W = 4 calibration.  For real
ring segments (r1/r2 well below 1) this differs from the Annex A9 value by an
amount not known here.  The radii are required and checked so that the
interface is ready, but they do not enter f.  The A9 expression must be
entered from a printed copy of the standard before a K from this definition
is reported; :attr:`Geometry.caveat` says so.

References
----------
ASTM E399, Annex A9 (arc-shaped bend specimen A(B)), the specimen and the
form of K (from memory); the f(a/W) used is that of ASTM E399 Annex A3
(SE(B), S/W = 4), see :mod:`specimens.bend`.
"""

from __future__ import annotations

from typing import Mapping

from specimens.arc_tension import radius_ratio
from specimens.base import Geometry, register
from specimens.bend import bend_f

#: what a report must show beside a K from this definition
CAVEAT = ("A(B): f(a/W) is the straight-beam SE(B) S/W = 4 value, not the ASTM E399 "
          "Annex A9 expression with the r1/r2 curvature term; not to be reported as an "
          "E399 K until the Annex A9 expression is entered from the standard")


def arc_bend_f(alpha: float, dims: Mapping[str, float]) -> float:
    """f(a/W) used for the A(B) specimen, S/W = 4 (dimensionless).

    The straight-beam limit of the Annex A9 calibration, i.e. the SE(B)
    S/W = 4 expression; r1/r2 is checked but does not enter (see the module
    docstring).

    Parameters
    ----------
    alpha : float
        a/W, dimensionless.
    dims : mapping
        ``r1``, ``r2`` (inner and outer radius, mm) are checked; ``S`` is
        required by the definition for K.

    Returns
    -------
    float
        f(a/W), dimensionless.

    Raises
    ------
    ValueError
        If the radii are impossible (r1 < 0 or r2 <= r1).

    References
    ----------
    ASTM E399, Annex A3 (SE(B), S/W = 4); Annex A9 not implemented.

    Examples
    --------
    >>> round(arc_bend_f(0.5, {"r1": 50.0, "r2": 100.0, "S": 200.0}), 2)
    2.66
    """
    radius_ratio(dims, "A(B)")
    return bend_f(alpha)


AB = register(Geometry(
    designation="A(B)",
    title="arc-shaped bend",
    calibration=arc_bend_f,
    bending=True,
    alpha_range=(0.0, 1.0),
    required=("S", "r1", "r2"),
    displacement_types=("cmod",),
    reference="ASTM E399 Annex A9 (specimen); f(a/W) of Annex A3, straight-beam limit",
    aliases=("AB", "ARCBEND"),
    caveat=CAVEAT,
))
