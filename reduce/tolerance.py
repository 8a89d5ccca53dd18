"""One-sided normal tolerance bounds for QA trends of K_Ic.

A lower tolerance bound ``x̄ − k s`` is exceeded by at least a fraction ``p``
(the content) of the population with confidence ``γ``, when the values are a
random sample of a normal population.  The factor ``k`` is computed exactly
from the noncentral t distribution (scipy), not from an approximation.

Pure functions: numbers in, numbers out.

References
----------
M. G. Natrella, *Experimental Statistics*, NBS Handbook 91 (1963), section 1-6 and
Table A-7 (one-sided normal tolerance factors).
NIST/SEMATECH e-Handbook of Statistical Methods, section 7.2.6.3 (tolerance
intervals for a normal distribution).
"""

from __future__ import annotations

import math
from dataclasses import dataclass


def one_sided_k_factor(n: int, content: float = 0.95, confidence: float = 0.95) -> float:
    """The exact one-sided normal tolerance factor k.

    .. math::

        k = \\frac{t'_{\\gamma;\\,n-1,\\,\\delta}}{\\sqrt{n}}, \\qquad \\delta = z_p \\sqrt{n}

    where :math:`t'_{\\gamma;\\nu,\\delta}` is the γ quantile of the noncentral t
    distribution with ν degrees of freedom and noncentrality δ, and
    :math:`z_p` the p quantile of the standard normal distribution.

    Parameters
    ----------
    n : int
        Number of values in the sample (at least 2).
    content : float
        Population fraction p the bound must cover, 0 < p < 1.
    confidence : float
        Confidence γ, 0 < γ < 1.

    Returns
    -------
    float
        k (dimensionless); the lower bound is ``mean - k * sd``.

    Raises
    ------
    ValueError
        If ``n < 2`` or ``content`` or ``confidence`` lie outside (0, 1).

    References
    ----------
    Natrella, NBS Handbook 91, Table A-7; NIST/SEMATECH e-Handbook 7.2.6.3.

    Examples
    --------
    >>> round(one_sided_k_factor(10), 3)
    2.911
    """
    from scipy.stats import nct, norm

    if int(n) != n or n < 2:
        raise ValueError(f"n must be a whole number of at least 2, got {n!r}")
    for name, x in (("content", content), ("confidence", confidence)):
        if not 0.0 < x < 1.0:
            raise ValueError(f"{name} must lie between 0 and 1 (exclusive), got {x!r}")
    root_n = math.sqrt(n)
    return float(nct.ppf(confidence, n - 1, norm.ppf(content) * root_n) / root_n)


@dataclass(frozen=True)
class ToleranceBound:
    """Mean, standard deviation and one-sided lower tolerance bound of a sample.

    Attributes
    ----------
    n : int
    mean, sd : float
        In the unit of the values (here MPa·m^½); ``sd`` with n − 1 in the denominator.
    k : float
        The tolerance factor.
    lower : float
        ``mean - k * sd``.
    content, confidence : float
    """

    n: int
    mean: float
    sd: float
    k: float
    lower: float
    content: float
    confidence: float


def lower_tolerance_bound(values, content: float = 0.95, confidence: float = 0.95) -> ToleranceBound:
    """The one-sided lower normal tolerance bound of a sample.

    Parameters
    ----------
    values : sequence of float
        The sample, any unit (K_Ic in MPa·m^½ for the trend).
    content, confidence : float
        As for :func:`one_sided_k_factor`.

    Returns
    -------
    ToleranceBound

    Raises
    ------
    ValueError
        For fewer than two values or a non-finite value.

    References
    ----------
    Natrella, NBS Handbook 91, section 1-6 (one-sided tolerance limit x̄ − K s).

    Examples
    --------
    >>> b = lower_tolerance_bound([10.0, 11.0, 12.0, 13.0, 14.0, 15.0, 16.0, 17.0, 18.0, 19.0])
    >>> round(b.mean, 2), round(b.sd, 4), round(b.lower, 3)
    (14.5, 3.0277, 5.687)
    """
    xs = [float(v) for v in values]
    if len(xs) < 2:
        raise ValueError(f"a tolerance bound needs at least two values, got {len(xs)}")
    if not all(math.isfinite(x) for x in xs):
        raise ValueError("every value must be finite")
    n = len(xs)
    mean = sum(xs) / n
    sd = math.sqrt(sum((x - mean) ** 2 for x in xs) / (n - 1))
    k = one_sided_k_factor(n, content, confidence)
    return ToleranceBound(n, mean, sd, k, mean - k * sd, content, confidence)


def heats_below(values_by_heat: dict, lower: float) -> list:
    """Heats with at least one value below ``lower``, in the dict's order.

    >>> heats_below({"H1": [30.0, 31.0], "H2": [24.0, 33.0]}, 25.0)
    ['H2']
    """
    return [h for h, vs in values_by_heat.items() if vs and min(vs) < lower]
