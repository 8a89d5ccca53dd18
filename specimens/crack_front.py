"""Crack-front averaging and straightness measures, pure functions.

Two schemes:

* **three-point** (ASTM E399): readings at B/4, B/2 and 3B/4; a is their
  plain average.
* **nine-point** (ASTM E1820): nine equally spaced readings across the
  thickness, the outer two 0.005W in from the surfaces (or the side-groove
  roots); the outer two are averaged first,
  a = (1/8)[(a1 + a9)/2 + a2 + ... + a8].

The tolerances below are the ones the checks compare the measures with;
every one is from memory and must be confirmed against the edition in force.
A rule set may pass its own tolerance instead.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

# Source: ASTM E399 clause 9.1.4, any two of the three readings within 10 % of
# the average (from memory; same value as reduce/limits.toml [e399.crack_front])
THREE_POINT_MAX_SPREAD = 0.10
THREE_POINT_SOURCE = "ASTM E399 clause 9.1.4: (max - min)/a <= 0.10 (from memory)"

# Source: ASTM E1820 (recent editions), each of the seven inner readings within
# 0.1 (b0 B)^0.5 of the nine-point average (from memory; edition not confirmed)
NINE_POINT_LIGAMENT_FACTOR = 0.1
NINE_POINT_LIGAMENT_SOURCE = ("ASTM E1820, recent editions: |a_i - a0| <= 0.1 (b0 B)^0.5 for "
                              "the seven inner readings (from memory; edition not confirmed)")

# Source: ASTM E1820 (earlier editions), readings within 5 % of the average
# (from memory; whether 5 % of a0 or of B was meant is not certain)
NINE_POINT_FRACTION = 0.05
NINE_POINT_FRACTION_SOURCE = ("ASTM E1820, earlier editions: |a_i - a0| <= 0.05 a0 for the "
                              "seven inner readings (from memory; 5 % of a0 assumed, not of B)")

# Source: ASTM E1820, the outer readings 0.005W in from the surfaces (from memory)
NINE_POINT_EDGE_FRACTION_OF_W = 0.005

THREE_POINT = "three-point (ASTM E399)"
NINE_POINT = "nine-point (ASTM E1820)"


@dataclass(frozen=True)
class CrackFrontAverage:
    """An averaged crack length with what it came from.

    Parameters
    ----------
    readings : tuple of float
        The readings in order across the thickness, mm.
    average : float
        The crack length a of the scheme, mm.
    scheme : str
        Which scheme (:data:`THREE_POINT` or :data:`NINE_POINT`).
    source : str
        The standard and clause of the scheme.
    """

    readings: tuple[float, ...]
    average: float
    scheme: str
    source: str


@dataclass(frozen=True)
class CrackFrontDeviation:
    """A crack-front straightness measure and the tolerance it is held to.

    Parameters
    ----------
    readings : tuple of float
        The readings, mm.
    average : float
        The scheme's average crack length, mm.
    scheme : str
        Which scheme.
    deviations : tuple of float
        The deviations that were measured, mm (three-point: max − min;
        nine-point: a_i − a for the seven inner readings, signed).
    measure : float
        The number compared with the tolerance: (max − min)/a for three
        points (dimensionless), max |a_i − a| for nine points (mm).
    tolerance : float
        The limit of ``measure``, in the same unit.
    source : str
        Where the tolerance comes from.
    """

    readings: tuple[float, ...]
    average: float
    scheme: str
    deviations: tuple[float, ...]
    measure: float
    tolerance: float
    source: str

    @property
    def within(self) -> bool:
        """``True`` if the measure does not exceed the tolerance."""
        return self.measure <= self.tolerance


def _checked(readings: Sequence[float], n: int, scheme: str) -> tuple[float, ...]:
    values = tuple(float(x) for x in readings)
    if len(values) != n:
        raise ValueError(f"the {scheme} scheme needs {n} readings, got {len(values)}")
    for i, x in enumerate(values, start=1):
        if not (math.isfinite(x) and x > 0):
            raise ValueError(f"crack-length reading {i} must be a positive length in mm, got {x!r}")
    return values


def three_point_average(readings: Sequence[float]) -> CrackFrontAverage:
    """Crack length from three readings at B/4, B/2, 3B/4, mm.

    Parameters
    ----------
    readings : sequence of 3 float
        Crack lengths, mm.

    Returns
    -------
    CrackFrontAverage

    Raises
    ------
    ValueError
        If there are not three readings or one is not a positive length.

    References
    ----------
    ASTM E399, clause 9.1.4 (from memory).

    Examples
    --------
    >>> three_point_average([25.0, 25.6, 25.2]).average
    25.266666666666666
    """
    values = _checked(readings, 3, THREE_POINT)
    return CrackFrontAverage(values, sum(values) / 3.0, THREE_POINT, "ASTM E399 clause 9.1.4")


def nine_point_average(readings: Sequence[float]) -> CrackFrontAverage:
    """Crack length from nine readings across the thickness, mm.

    .. math:: a = \\frac{1}{8}\\left[\\frac{a_1 + a_9}{2} + \\sum_{i=2}^{8} a_i\\right]

    Parameters
    ----------
    readings : sequence of 9 float
        Crack lengths from one surface to the other, mm.

    Returns
    -------
    CrackFrontAverage

    Raises
    ------
    ValueError
        If there are not nine readings or one is not a positive length.

    References
    ----------
    ASTM E1820, measurement of initial and final crack size (nine-point
    average; from memory).

    Examples
    --------
    >>> nine_point_average([24.0] + [26.0] * 7 + [24.0]).average
    25.75
    """
    v = _checked(readings, 9, NINE_POINT)
    average = ((v[0] + v[8]) / 2.0 + sum(v[1:8])) / 8.0
    return CrackFrontAverage(v, average, NINE_POINT, "ASTM E1820, nine-point average")


def crack_front_average(readings: Sequence[float]) -> CrackFrontAverage:
    """Crack length by the scheme that the number of readings implies, mm.

    Three readings: :func:`three_point_average`; nine:
    :func:`nine_point_average`.

    Raises
    ------
    ValueError
        For any other number of readings, or a reading that is not a
        positive length.

    References
    ----------
    ASTM E399 clause 9.1.4; ASTM E1820 (nine-point average).  From memory.

    Examples
    --------
    >>> crack_front_average([25.0, 25.0, 25.3]).scheme
    'three-point (ASTM E399)'
    """
    n = len(readings)
    if n == 3:
        return three_point_average(readings)
    if n == 9:
        return nine_point_average(readings)
    raise ValueError(f"crack-front readings: expected 3 (ASTM E399) or 9 (ASTM E1820), got {n}")


def three_point_spread(readings: Sequence[float], max_spread: float = THREE_POINT_MAX_SPREAD,
                       source: str = THREE_POINT_SOURCE) -> CrackFrontDeviation:
    """(max − min)/a of three crack-length readings, dimensionless.

    Parameters
    ----------
    readings : sequence of 3 float
        Crack lengths at B/4, B/2, 3B/4, mm.
    max_spread : float
        Tolerance of the spread; default :data:`THREE_POINT_MAX_SPREAD`.
    source : str
        Where ``max_spread`` comes from; give it with a tolerance of your own.

    Returns
    -------
    CrackFrontDeviation
        ``measure`` = (max − min)/a.

    Raises
    ------
    ValueError
        As :func:`three_point_average`.

    References
    ----------
    ASTM E399, clause 9.1.4 (from memory).

    Examples
    --------
    >>> d = three_point_spread([25.0, 27.0, 26.0])
    >>> round(d.measure, 4), d.within
    (0.0769, True)
    """
    avg = three_point_average(readings)
    spread = max(avg.readings) - min(avg.readings)
    return CrackFrontDeviation(avg.readings, avg.average, THREE_POINT, (spread,),
                               spread / avg.average, max_spread, source)


def nine_point_tolerance(B: float, W: float, a0: float, rule: str = "ligament") -> tuple[float, str]:
    """Tolerance on the inner nine-point readings, mm, and its source.

    Parameters
    ----------
    B, W : float
        Thickness and width, mm.
    a0 : float
        The nine-point average crack length, mm.
    rule : {"ligament", "fraction"}
        ``"ligament"``: 0.1 (b0 B)^½ with b0 = W − a0 (recent E1820
        editions); ``"fraction"``: 0.05 a0 (earlier editions).

    Returns
    -------
    (float, str)
        The tolerance in mm and the source text.

    Raises
    ------
    ValueError
        For an unknown rule or a crack not shorter than W.

    References
    ----------
    ASTM E1820, crack-front straightness (from memory; see the module
    constants).

    Examples
    --------
    >>> round(nine_point_tolerance(25.0, 50.0, 25.0)[0], 3)
    2.5
    """
    if rule == "ligament":
        b0 = W - a0
        if not b0 > 0:
            raise ValueError(f"the crack a0 = {a0!r} mm must be shorter than W = {W!r} mm")
        return NINE_POINT_LIGAMENT_FACTOR * math.sqrt(b0 * B), NINE_POINT_LIGAMENT_SOURCE
    if rule == "fraction":
        return NINE_POINT_FRACTION * a0, NINE_POINT_FRACTION_SOURCE
    raise ValueError(f"nine-point tolerance rule must be 'ligament' or 'fraction', got {rule!r}")


def nine_point_deviation(readings: Sequence[float], B: float, W: float,
                         rule: str = "ligament") -> CrackFrontDeviation:
    """Largest deviation of the seven inner readings from the nine-point average, mm.

    Parameters
    ----------
    readings : sequence of 9 float
        Crack lengths from one surface to the other, mm.
    B, W : float
        Thickness and width, mm (for the ligament rule).
    rule : {"ligament", "fraction"}
        See :func:`nine_point_tolerance`.

    Returns
    -------
    CrackFrontDeviation
        ``deviations`` = a_i − a for i = 2…8, ``measure`` = max |a_i − a|.

    Raises
    ------
    ValueError
        As :func:`nine_point_average` and :func:`nine_point_tolerance`.

    References
    ----------
    ASTM E1820, crack-front straightness (from memory).

    Examples
    --------
    >>> d = nine_point_deviation([24.0, 25.0, 25.5, 26.0, 26.0, 26.0, 25.5, 25.0, 24.0], 25.0, 50.0)
    >>> round(d.measure, 3), round(d.tolerance, 3), d.within
    (0.625, 2.481, True)
    """
    avg = nine_point_average(readings)
    inner = tuple(x - avg.average for x in avg.readings[1:8])
    tol, source = nine_point_tolerance(B, W, avg.average, rule)
    return CrackFrontDeviation(avg.readings, avg.average, NINE_POINT, inner,
                               max(abs(d) for d in inner), tol, source)


def measurement_positions(B: float, W: float, n: int) -> tuple[float, ...]:
    """Where across the thickness the readings are taken, mm from one surface.

    Parameters
    ----------
    B : float
        Thickness (B_N for side-grooved specimens), mm.
    W : float
        Width, mm (the nine-point edge offset is 0.005W).
    n : {3, 9}
        Number of readings.

    Returns
    -------
    tuple of float
        Positions, mm.

    Raises
    ------
    ValueError
        If n is neither 3 nor 9.

    References
    ----------
    ASTM E399 clause 9.1.4 (B/4, B/2, 3B/4); ASTM E1820 (nine equally
    spaced, outer ones 0.005W from the surfaces).  From memory.

    Examples
    --------
    >>> measurement_positions(20.0, 50.0, 3)
    (5.0, 10.0, 15.0)
    >>> [round(x, 3) for x in measurement_positions(20.0, 50.0, 9)][:2]
    [0.25, 2.688]
    """
    if n == 3:
        return (B / 4.0, B / 2.0, 3.0 * B / 4.0)
    if n == 9:
        edge = NINE_POINT_EDGE_FRACTION_OF_W * W
        step = (B - 2.0 * edge) / 8.0
        return tuple(edge + i * step for i in range(9))
    raise ValueError(f"reading positions are defined for 3 or 9 readings, got {n}")
