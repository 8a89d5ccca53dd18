"""Plastic factors of the elastic–plastic methods, pure functions of a/W.

Two kinds of factor, per geometry and per place the displacement is measured:

* the plastic η that turns the plastic work under the load–displacement
  record into the plastic part of J, J_pl = η A_pl / (B_N b0);
* the rotational factor r_p of the plastic-hinge model of CTOD: the two
  halves of the specimen turn about a point r_p (W − a) ahead of the crack
  tip, so the plastic crack-tip opening is the plastic opening measured at
  distance a + z from the tip scaled down by similar triangles.

Every number below was written down from memory of the standards named
beside it and has not been checked against a printed copy; a laboratory
must confirm each against the edition in force before relying on it.

Units: lengths mm, K MPa·m^½, E and σ_YS MPa, δ mm.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Mapping

# Source: ASTM E1820 Annex A2 (C(T), load-line displacement),
# eta = 2 + 0.522 b0/W, from memory.  It is the fit of Clarke & Landes (1979)
# to the Merkle & Corten (1974) compact-specimen relation (tests compare them).
ETA_CT_LOAD_LINE = (2.0, 0.522)
ETA_CT_LOAD_LINE_SOURCE = "ASTM E1820 Annex A2: eta = 2 + 0.522 b0/W (from memory)"

# Source: ASTM E1820 Annex A1 (SE(B), S/W = 4, load-line displacement), eta = 1.9, from memory
ETA_SEB_LOAD_LINE = 1.9
ETA_SEB_LOAD_LINE_SOURCE = "ASTM E1820 Annex A1: eta = 1.9 (load line, from memory)"

# Source: ASTM E1820 Annex A1 (SE(B), S/W = 4, crack-mouth opening),
# eta = 3.667 - 2.199 a0/W + 0.437 (a0/W)^2, from memory.  E1820 is used rather
# than BS 7448-1 / ISO 12135, whose CMOD relation was not recalled with confidence.
ETA_SEB_CMOD = (3.667, -2.199, 0.437)
ETA_SEB_CMOD_SOURCE = ("ASTM E1820 Annex A1: eta = 3.667 - 2.199 a0/W + 0.437 (a0/W)^2 "
                       "(crack-mouth opening, from memory)")

# Source: BS 7448-1 (and ISO 12135), SE(B) plastic hinge, r_p = 0.4, from memory
R_P_SEB = 0.4
R_P_SEB_SOURCE = "BS 7448-1 / ISO 12135: SE(B) rotational factor r_p = 0.4 (from memory)"

# Source: BS 7448-1, C(T) plastic hinge, r_p = 0.46, from memory (less sure than the SE(B) value)
R_P_CT = 0.46
R_P_CT_SOURCE = ("BS 7448-1: C(T) rotational factor r_p = 0.46 (from memory, less certain than "
                 "the SE(B) value)")

# Source: ASTM E399 Annex A4 (C(T) proportions): the front face is 0.25W in front
# of the load line, from memory
CT_FRONT_FACE_OFFSET_OVER_W = 0.25


def eta_ct_load_line(b0_over_W: float) -> float:
    """Plastic η of the C(T) specimen for the load-line displacement.

    .. math:: \\eta = 2 + 0.522\\,b_0/W

    Parameters
    ----------
    b0_over_W : float
        Initial ligament over width, (W − a0)/W, in (0, 1).

    Returns
    -------
    float
        η, dimensionless.

    Raises
    ------
    ValueError
        If b0/W is outside (0, 1).

    References
    ----------
    ASTM E1820 Annex A2 (from memory).  The line is the fit of G. A. Clarke
    and J. D. Landes (1979) to the relation of J. G. Merkle and H. T. Corten
    (1974), :func:`merkle_corten_eta` (attribution from memory).

    Examples
    --------
    >>> round(eta_ct_load_line(0.5), 3)
    2.261
    """
    _in_unit_interval(b0_over_W, "b0/W")
    c0, c1 = ETA_CT_LOAD_LINE
    return c0 + c1 * b0_over_W


def eta_seb_load_line(a_over_W: float) -> float:
    """Plastic η of the SE(B) specimen (S/W = 4) for the load-line displacement.

    .. math:: \\eta = 1.9

    Parameters
    ----------
    a_over_W : float
        a0/W in (0, 1); η does not depend on it in the range of the standard.

    Raises
    ------
    ValueError
        If a/W is outside (0, 1).

    References
    ----------
    ASTM E1820 Annex A1 (from memory).

    Examples
    --------
    >>> eta_seb_load_line(0.5)
    1.9
    """
    _in_unit_interval(a_over_W, "a/W")
    return ETA_SEB_LOAD_LINE


def eta_seb_cmod(a_over_W: float) -> float:
    """Plastic η of the SE(B) specimen (S/W = 4) for the crack-mouth opening.

    .. math:: \\eta_{CMOD} = 3.667 - 2.199\\,(a_0/W) + 0.437\\,(a_0/W)^2

    Parameters
    ----------
    a_over_W : float
        a0/W in (0, 1).

    Raises
    ------
    ValueError
        If a/W is outside (0, 1).

    References
    ----------
    ASTM E1820 Annex A1 (from memory).

    Examples
    --------
    >>> round(eta_seb_cmod(0.5), 5)
    2.67675
    """
    _in_unit_interval(a_over_W, "a/W")
    c0, c1, c2 = ETA_SEB_CMOD
    return c0 + c1 * a_over_W + c2 * a_over_W**2


def ctod_elastic(K: float, E_MPa: float, nu: float, yield_MPa: float) -> float:
    """Elastic part of the crack-tip opening displacement, mm.

    .. math:: \\delta_{el} = \\frac{K^2 (1-\\nu^2)}{2\\,\\sigma_{YS} E}

    Parameters
    ----------
    K : float
        Stress intensity at the point of interest, MPa·m^½.
    E_MPa, yield_MPa : float
        Young's modulus and 0.2 % proof strength at the test temperature, MPa.
    nu : float
        Poisson's ratio.

    Raises
    ------
    ValueError
        If E or σ_YS is not positive.

    References
    ----------
    BS 7448-1 and ISO 12135, CTOD from force and clip-gauge opening (from memory).

    Examples
    --------
    >>> round(ctod_elastic(100.0, 200000.0, 0.3, 500.0), 5)   # 1e4*0.91/2e8 m
    0.0455
    """
    if not (E_MPa > 0 and yield_MPa > 0):
        raise ValueError(f"E and yield must be positive, got E = {E_MPa!r} MPa, yield = {yield_MPa!r} MPa")
    # MPa²·m / MPa² = m; × 1000 to mm
    return K**2 * (1.0 - nu**2) / (2.0 * yield_MPa * E_MPa) * 1000.0


def ctod_plastic(W: float, a: float, V_p: float, r_p: float, z: float = 0.0) -> float:
    """Plastic part of the crack-tip opening by the plastic-hinge model, mm.

    .. math:: \\delta_{pl} = \\frac{r_p (W-a)\\,V_p}{r_p (W-a) + a + z}

    Parameters
    ----------
    W, a : float
        Width and crack length, mm; a is measured from the line the opening
        is referred to (the front face of an SE(B), the load line of a C(T)).
    V_p : float
        Plastic part of the opening measured at distance a + z from the crack
        tip, mm.
    r_p : float
        Rotational factor of the geometry.
    z : float
        Distance of the measuring point beyond that line (knife-edge height),
        mm.

    Raises
    ------
    ValueError
        If a is not between 0 and W, or r_p is not positive.

    References
    ----------
    BS 7448-1 and ISO 12135, the plastic-hinge relation (from memory).

    Examples
    --------
    >>> round(ctod_plastic(50.0, 25.0, 0.7, 0.4), 4)   # 10 * 0.7 / 35
    0.2
    """
    if not 0.0 < a < W:
        raise ValueError(f"a must lie between 0 and W = {W!r} mm, got {a!r} mm")
    if not r_p > 0:
        raise ValueError(f"r_p must be positive, got {r_p!r}")
    hinge = r_p * (W - a)
    return hinge * V_p / (hinge + a + z)


@dataclass(frozen=True)
class PlasticFactors:
    """The plastic factors held for one geometry.

    Parameters
    ----------
    designation : str
        The geometry's standard designation.
    eta : mapping
        displacement type -> (``eta(a/W) -> η``, source).
    r_p : float
        Rotational factor of the plastic hinge.
    r_p_source : str
        Where r_p comes from.
    hinge_offset_over_W : mapping
        displacement type -> distance of that measuring line beyond the line
        a is measured from, as a fraction of W (added to the knife-edge
        height z).  A type absent here cannot give a CTOD.
    ctod_caveat : str
        A limitation to report beside the CTOD; empty when there is none.
    """

    designation: str
    eta: Mapping[str, tuple[Callable[[float], float], str]]
    r_p: float
    r_p_source: str
    hinge_offset_over_W: Mapping[str, float] = field(default_factory=dict)
    ctod_caveat: str = ""


#: plastic factors by geometry designation
PLASTIC_FACTORS: dict[str, PlasticFactors] = {
    "C(T)": PlasticFactors(
        designation="C(T)",
        eta={"load_line": (lambda alpha: eta_ct_load_line(1.0 - alpha), ETA_CT_LOAD_LINE_SOURCE)},
        r_p=R_P_CT, r_p_source=R_P_CT_SOURCE,
        hinge_offset_over_W={"load_line": 0.0, "front_face": CT_FRONT_FACE_OFFSET_OVER_W},
        ctod_caveat=("the C(T) plastic-hinge CTOD (r_p = 0.46) is written from memory of BS 7448-1 "
                     "and is less certain than the SE(B) form; confirm it before use"),
    ),
    "SE(B)": PlasticFactors(
        designation="SE(B)",
        eta={"load_line": (eta_seb_load_line, ETA_SEB_LOAD_LINE_SOURCE),
             "cmod": (eta_seb_cmod, ETA_SEB_CMOD_SOURCE)},
        r_p=R_P_SEB, r_p_source=R_P_SEB_SOURCE,
        hinge_offset_over_W={"cmod": 0.0},
    ),
}


def plastic_factors(designation: str) -> PlasticFactors:
    """The plastic factors held for a geometry designation such as ``"SE(B)"``.

    Raises
    ------
    KeyError
        If none are held for it; the message names the ones that are.

    References
    ----------
    ASTM E1820 Annexes A1–A2; BS 7448-1 (see the module constants).
    """
    try:
        return PLASTIC_FACTORS[designation]
    except KeyError:
        raise KeyError(f"no plastic eta or r_p factors are held for {designation!r}; "
                       f"held: {', '.join(PLASTIC_FACTORS)}") from None


def merkle_corten_eta(a_over_W: float) -> float:
    """Plastic η of the compact specimen by Merkle and Corten, for comparison.

    .. math:: \\eta = \\frac{2(1+\\alpha)}{1+\\alpha^2},\\quad
              \\alpha = \\sqrt{(2a/b)^2 + 2(2a/b) + 2} - (2a/b + 1)

    Raises
    ------
    ValueError
        If a/W is outside (0, 1).

    References
    ----------
    J. G. Merkle and H. T. Corten, J. Pressure Vessel Technology 96 (1974),
    the tension-plus-bending correction of the compact specimen (from memory).

    Examples
    --------
    >>> round(merkle_corten_eta(0.5), 3)
    2.265
    """
    _in_unit_interval(a_over_W, "a/W")
    r = 2.0 * a_over_W / (1.0 - a_over_W)
    alpha = math.sqrt(r * r + 2.0 * r + 2.0) - (r + 1.0)
    return 2.0 * (1.0 + alpha) / (1.0 + alpha**2)


def _in_unit_interval(x: float, name: str) -> None:
    if not 0.0 < x < 1.0:
        raise ValueError(f"{name} must lie between 0 and 1, got {x!r}")
