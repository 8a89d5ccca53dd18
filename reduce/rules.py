"""Validity checks of the rule sets ``e399`` and ``iso12737``.

The limits and their clauses are data (``limits.toml`` beside this module);
this module only applies them.  Each check returns a :class:`Check` with its
value, its limit in words, ``passed`` (``True``, ``False`` or ``None`` when
the data to assess it are missing) and the clause it comes from.

K_Q qualifies as K_Ic only when every core check of the rule set passed (was
assessed and met) and no other check failed, except the rule set's advisory
checks (``advisory_checks`` in ``limits.toml``): these are reported but do
not decide validity.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, asdict
from functools import lru_cache
from pathlib import Path

from reduce.errors import RulesError
from specimens import crack_front as cf

RULE_SETS = ("e399", "iso12737")


@dataclass(frozen=True)
class Check:
    """One validity check.

    Attributes
    ----------
    name : str
        The check's name (part of the output contract, e.g. ``ligament_size``).
    passed : bool or None
        ``None`` when not assessed (no data).
    value : float or None
        The measured quantity, in the unit named in ``limit``.
    limit : str
        The requirement in words with its number and unit.
    clause : str
        Where the requirement comes from.
    note : str
        Why it was not assessed, or a detail of the result.
    """

    name: str
    passed: bool | None
    value: float | None
    limit: str
    clause: str
    note: str = ""

    def to_dict(self) -> dict:
        """The check as a plain dict (as ``dataclasses.asdict``, without its deep copy of scalars)."""
        d = {"name": self.name, "passed": self.passed, "value": self.value, "limit": self.limit,
             "clause": self.clause, "note": self.note}
        for v in d.values():
            if isinstance(v, (list, tuple, dict, set)):
                return asdict(self)  # containers are copied, as asdict does
        return d


@lru_cache(maxsize=None)
def _limits() -> dict:
    with open(Path(__file__).with_name("limits.toml"), "rb") as fh:
        return tomllib.load(fh)


def rule_set(name: str) -> dict:
    """The limits of a rule set by name.

    Raises
    ------
    RulesError
        For an unknown name; the message lists the known ones.
    """
    data = _limits()
    if name not in RULE_SETS or name not in data:
        raise RulesError(f"unknown rule set {name!r}; known: {', '.join(RULE_SETS)}")
    return data[name]


def secant_ratio() -> float:
    """Slope ratio of the secant to the initial tangent (0.95)."""
    return float(_limits()["secant"]["ratio"])


def size_required(K_Q: float, yield_MPa: float, factor: float) -> float:
    """Required size 2.5 (K_Q/σ_YS)² in mm.

    Parameters
    ----------
    K_Q : float
        MPa·m^½.
    yield_MPa : float
        0.2 % offset yield strength at the test temperature, MPa.
    factor : float
        The rule set's size factor (2.5).

    >>> round(size_required(50.0, 500.0, 2.5), 3)
    25.0

    References
    ----------
    ASTM E399 clause 9.1.3; ISO 12737 (same factor).
    """
    return factor * (K_Q / yield_MPa) ** 2 * 1000.0


def _range_check(name, value, lo, hi, clause, fmt="{:.3f}"):
    passed = lo <= value <= hi
    return Check(name, passed, value, f"{fmt.format(lo)} to {fmt.format(hi)}", clause)


def core_checks(rules: dict, *, a_over_W, P_max_over_P_Q, K_Q, yield_MPa, B, a, W) -> list[Check]:
    """a/W, P_max/P_Q and the rule set's size checks."""
    out = [_range_check("a_over_W", a_over_W, rules["a_over_W"]["min"], rules["a_over_W"]["max"],
                        rules["a_over_W"]["clause"])]
    lim = rules["pmax_pq_ratio"]["max"]
    out.append(Check("pmax_pq_ratio", P_max_over_P_Q <= lim, P_max_over_P_Q, f"<= {lim:.2f}",
                     rules["pmax_pq_ratio"]["clause"]))
    req = size_required(K_Q, yield_MPa, rules["size"]["factor"])
    sizes = {"ligament_size": ("W - a", W - a), "thickness_size": ("B", B), "crack_length_size": ("a", a)}
    for name in rules["size_checks"]:
        label, value = sizes[name]
        out.append(Check(name, value >= req, value,
                         f"{label} >= 2.5 (K_Q/yield)^2 = {req:.2f} mm", rules["size"]["clause"]))
    return out


def crack_front_check(rules: dict, readings: tuple[float, ...], B: float | None = None,
                      W: float | None = None) -> Check:
    """Crack-front straightness by the scheme the number of readings implies.

    Parameters
    ----------
    rules : dict
        The rule set (:func:`rule_set`); its ``crack_front`` table holds both
        tolerances.
    readings : tuple of float
        Crack lengths across the front, mm: 3 (B/4, B/2, 3B/4) or 9 (surface
        to surface).
    B, W : float, optional
        Thickness and width, mm; needed for nine readings.

    Returns
    -------
    Check
        Three readings: value (max − min)/a, dimensionless, against the rule
        set's ``max_spread``.  Nine readings: value max |a_i − a| of the
        seven inner readings, mm, against ``nine_point_factor`` (b0 B)^½
        (rule ``ligament``, b0 = W − a) or ``nine_point_factor`` a (rule
        ``fraction``).  The note names the scheme.  Any other count: not
        assessed.

    References
    ----------
    ASTM E399 clause 9.1.4 (three-point); ASTM E1820 crack-front
    straightness (nine-point).  From memory, see ``limits.toml``.
    """
    r = rules["crack_front"]
    if len(readings) == 9 and B is not None and W is not None:
        return _nine_point_check(r, readings, B, W)
    lim = r["max_spread"]
    limit = f"(max - min)/a <= {lim:.2f}"
    if len(readings) != 3:
        return Check("crack_front", None, None, limit, r["clause"],
                     f"{len(readings)} readings: expected 3 ({cf.THREE_POINT}) or 9 "
                     f"({cf.NINE_POINT}, with B and W)")
    d = cf.three_point_spread(readings, lim, r["clause"])
    return Check("crack_front", d.within, d.measure, limit, r["clause"], f"scheme: {d.scheme}")


def _nine_point_check(r: dict, readings, B: float, W: float) -> Check:
    rule, factor = r["nine_point_rule"], r["nine_point_factor"]
    d = cf.nine_point_deviation(readings, B, W, rule)
    if rule == "ligament":
        tol = factor * math.sqrt((W - d.average) * B)
        limit = f"max |a_i - a| of the 7 inner readings <= {factor:g} ((W - a) B)^0.5 = {tol:.3f} mm"
    else:
        tol = factor * d.average
        limit = f"max |a_i - a| of the 7 inner readings <= {factor:g} a = {tol:.3f} mm"
    return Check("crack_front", d.measure <= tol, d.measure, limit, r["nine_point_clause"],
                 f"scheme: {d.scheme}")


def surface_crack_check(rules: dict, a: float, surface: tuple[float, ...]) -> Check:
    """Surface crack traces against the average crack length."""
    r = rules["surface_crack"]
    limit = (f"|a_s - a|/a <= {r['max_deviation']:.2f} each, "
             f"|a_s1 - a_s2|/a <= {r['max_difference']:.2f}")
    if len(surface) < 2:
        return Check("surface_crack", None, None, limit, r["clause"], "surface traces not given")
    dev = max(abs(s - a) for s in surface) / a
    diff = abs(surface[0] - surface[1]) / a
    passed = dev <= r["max_deviation"] and diff <= r["max_difference"]
    return Check("surface_crack", passed, dev, limit, r["clause"],
                 f"largest deviation {dev:.3f}, difference {diff:.3f}")


def precrack_check(rules: dict, K_max: float | None, K_Q: float, E_MPa: float) -> Check:
    """Final-stage fatigue precrack K_max against K_Q and against E."""
    r = rules["precrack_kmax"]
    frac, ratio = r["max_fraction_of_KQ"], r["max_Kmax_over_E_sqrt_m"]
    limit = f"K_max/K_Q <= {frac:.2f} and K_max/E <= {ratio:.5f} m^0.5"
    if K_max is None:
        return Check("precrack_kmax", None, None, limit, r["clause"], "precrack K_max not given")
    value = K_max / K_Q
    over_E = K_max / E_MPa
    passed = value <= frac and over_E <= ratio
    return Check("precrack_kmax", passed, value, limit, r["clause"], f"K_max/E = {over_E:.6f} m^0.5")


def loading_rate_check(rules: dict, K_rate: float | None) -> Check:
    """Rate of increase of K in the elastic part of the test."""
    r = rules["loading_rate"]
    limit = f"{r['min']:.2f} to {r['max']:.2f} MPa m^0.5/s"
    if K_rate is None:
        return Check("loading_rate", None, None, limit, r["clause"], "the record has no time channel")
    return Check("loading_rate", r["min"] <= K_rate <= r["max"], K_rate, limit, r["clause"])


def compliance_crack_length_check(rules: dict, a: float, W: float, a_compliance: float | None,
                                  *, min_difference_over_W: float | None = None,
                                  note: str = "") -> Check:
    """The crack length the initial slope implies against the measured one.

    Parameters
    ----------
    rules : dict
        The rule set; its ``compliance_crack_length`` table holds the tolerance.
    a, W : float
        Measured (crack-front average) crack length and width, mm.
    a_compliance : float or None
        Crack length from the elastic compliance, mm; ``None`` when it could
        not be found.
    min_difference_over_W : float, optional
        When ``a_compliance`` is ``None`` because the compliance implies an
        a/W outside the relation's range: the least |a_compliance − a|/W
        this means.  The check fails if that already exceeds the tolerance.
    note : str
        Why it was not assessed, or what lies behind a failure without a value.

    Returns
    -------
    Check
        Value (a_compliance − a)/W, dimensionless, signed; passes when its
        magnitude does not exceed ``max_difference_over_W``.  An advisory
        check of both rule sets (see ``limits.toml``).

    References
    ----------
    ASTM E1820 (compliance-predicted against measured initial crack size),
    from memory; see ``limits.toml`` for the standing of the tolerance.

    Examples
    --------
    >>> c = compliance_crack_length_check(rule_set("e399"), 25.0, 50.0, 27.5)
    >>> round(c.value, 3), c.passed
    (0.05, False)
    """
    r = rules["compliance_crack_length"]
    tol = r["max_difference_over_W"]
    limit = f"|a_compliance - a|/W <= {tol:.3f}"
    if a_compliance is not None:
        value = (a_compliance - a) / W
        return Check("compliance_crack_length", abs(value) <= tol, value, limit, r["clause"],
                     f"a_compliance = {a_compliance:.3f} mm, a = {a:.3f} mm")
    if min_difference_over_W is not None and min_difference_over_W > tol:
        return Check("compliance_crack_length", False, None, limit, r["clause"], note)
    return Check("compliance_crack_length", None, None, limit, r["clause"], note)


def calibration_check(rules: dict, designation: str, caveat: str, reference: str) -> Check:
    """Whether the geometry's K calibration stands without a caveat.

    Fails when the definition carries a caveat, so that such a K_Q is never
    reported as K_Ic (a core check of both rule sets).

    >>> calibration_check(rule_set("e399"), "C(T)", "", "ASTM E399 Annex A4").passed
    True
    """
    r = rules["calibration_confirmed"]
    return Check("calibration_confirmed", not caveat, None,
                 f"the {designation} K calibration is confirmed against the standard",
                 f"{r['clause']}; calibration: {reference}", caveat)


def qualifies(rules: dict, checks: list[Check]) -> bool:
    """K_Q is K_Ic only if every core check passed and no other check but an
    advisory one failed."""
    by_name = {c.name: c for c in checks}
    advisory = set(rules.get("advisory_checks", ()))
    if any(c.passed is False and c.name not in advisory for c in checks):
        return False
    return all(by_name.get(n) is not None and by_name[n].passed is True for n in rules["core_checks"])
