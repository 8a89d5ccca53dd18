"""The common shape of a specimen definition.

A :class:`Geometry` holds what the standard prints for one specimen type:
the calibration f(a/W), the form of K from load, the a/W range where the
calibration holds, the dimensions it needs and where displacement may be
measured.  Everything downstream (reduction, checks, reports) asks the
definition and never tests the designation itself.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Mapping

#: kN / mm^1.5 expressed in MPa·m^½: 1e3 N / (1e-3 m)^1.5 = 10^7.5 Pa·m^½
K_UNIT_FACTOR = math.sqrt(1000.0)

#: every registered geometry by designation
GEOMETRIES: dict[str, "Geometry"] = {}


@dataclass(frozen=True)
class Geometry:
    """One standard specimen geometry.

    Parameters
    ----------
    designation : str
        The standard's designation, e.g. ``"C(T)"``.
    title : str
        The name in words, e.g. ``"compact tension"``.
    calibration : callable
        ``calibration(alpha, dims) -> f``, the dimensionless K calibration
        f(a/W); ``dims`` maps dimension names (``B``, ``W``, ``S``, ``X``,
        ``r1``, ``r2`` in mm) to values for geometries that need them.
    bending : bool
        ``False``: K = P / (B_K W^½) · f(a/W) (pin-loaded types);
        ``True``: K = P S / (B_K W^{3/2}) · f(a/W) (bend types).
    alpha_range : (float, float)
        The a/W range over which the calibration is stated to hold.
    required : tuple of str
        Dimensions the definition needs beyond B and W (``"S"`` etc.).
    displacement_types : tuple of str
        Where displacement may be measured; the first is the default.
    reference : str
        The standard and clause the calibration comes from.
    aliases : tuple of str
        Other spellings a sheet may use (upper-case, no spaces).
    compliance : object, optional
        The elastic compliance relations (a
        :class:`specimens.compliance.ComplianceRelations`), ``None`` where no
        published relation is held.
    caveat : str, optional
        A limitation the reports must show beside any K from this
        definition; empty when there is none.
    """

    designation: str
    title: str
    calibration: Callable[[float, Mapping[str, float]], float]
    bending: bool
    alpha_range: tuple[float, float]
    required: tuple[str, ...] = ()
    displacement_types: tuple[str, ...] = ("load_line",)
    reference: str = ""
    aliases: tuple[str, ...] = field(default=())
    compliance: object = None  # optional: compliance relations (see specimens.compliance)
    caveat: str = ""

    def f(self, a_over_W: float, dims: Mapping[str, float] | None = None) -> float:
        """Dimensionless K calibration f(a/W).

        Raises
        ------
        ValueError
            If a/W is outside (0, 1) or a needed dimension is missing.
        """
        alpha = float(a_over_W)
        if not 0.0 < alpha < 1.0:
            raise ValueError(f"a/W must lie between 0 and 1, got {alpha!r}")
        dims = dict(dims or {})
        missing = [d for d in self.required if dims.get(d) is None]
        if missing:
            raise ValueError(f"{self.designation} needs the dimension(s) {', '.join(missing)}")
        return float(self.calibration(alpha, dims))

    def stress_intensity(self, P: float, B: float, W: float, a: float,
                         B_N: float | None = None, dims: Mapping[str, float] | None = None) -> float:
        """Stress intensity K in MPa·m^½ from load P in kN.

        .. math:: K = \\frac{P}{\\sqrt{B B_N}\\,W^{1/2}} f(a/W)
                  \\quad\\text{or}\\quad
                  K = \\frac{P S}{\\sqrt{B B_N}\\,W^{3/2}} f(a/W)

        Parameters
        ----------
        P : float
            Load, kN.
        B, W, a : float
            Thickness, width and crack length, mm.
        B_N : float, optional
            Net thickness between side grooves, mm; ``None`` for a plain specimen.
        dims : mapping, optional
            Further dimensions in mm (``S`` for bend types, ``X``, ``r1``, ``r2``).

        Raises
        ------
        ValueError
            If a/W is outside (0, 1) or a needed dimension is missing.

        References
        ----------
        ASTM E399, Annex A (K from load for each geometry); the side-groove
        thickness √(B·B_N) as in ASTM E1820, Annex A1–A2.
        """
        d = dict(dims or {})
        d.setdefault("B", B)
        d.setdefault("W", W)
        return P * self.K_per_load(B, W, a, B_N, d)

    def K_per_load(self, B: float, W: float, a: float,
                   B_N: float | None = None, dims: Mapping[str, float] | None = None) -> float:
        """K per unit load, MPa·m^½ per kN (the factor that multiplies P)."""
        d = dict(dims or {})
        d.setdefault("B", B)
        d.setdefault("W", W)
        B_K = math.sqrt(B * B_N) if B_N else B
        f = self.f(a / W, d)
        if self.bending:
            return d["S"] * f / (B_K * W**1.5) * K_UNIT_FACTOR
        return f / (B_K * math.sqrt(W)) * K_UNIT_FACTOR


def effective_thickness(B: float, B_N: float | None) -> float:
    """Effective thickness B_e = B − (B − B_N)²/B for compliance, mm.

    >>> effective_thickness(25.0, 20.0)
    24.0

    References
    ----------
    ASTM E1820, clause 3 (terminology, effective thickness).
    """
    if not B_N:
        return B
    return B - (B - B_N) ** 2 / B


def register(geometry: Geometry) -> Geometry:
    """Add a definition to :data:`GEOMETRIES` and return it."""
    GEOMETRIES[geometry.designation] = geometry
    return geometry


def _key(text: str) -> str:
    return "".join(str(text).upper().split()).replace("-", "")


def lookup_geometry(designation: str) -> Geometry:
    """The geometry for a standard designation such as ``"C(T)"``.

    Spaces, hyphens and letter case are ignored (``"c(t)"``, ``"CT"``).

    Raises
    ------
    KeyError
        If no registered geometry has that designation; the message lists
        the known ones.
    """
    key = _key(designation)
    for g in GEOMETRIES.values():
        if key == _key(g.designation) or key in (_key(x) for x in g.aliases):
            return g
    known = ", ".join(GEOMETRIES)
    raise KeyError(f"unknown geometry {designation!r}; known: {known}")
