"""Validity checks of the rule sets ``e399`` and ``iso12737``.

The limits and their clauses are data (``limits.toml`` beside this module);
this module only applies them.  Each check returns a :class:`Check` with its
value, its limit in words, ``passed`` (``True``, ``False`` or ``None`` when
the data to assess it are missing) and the clause it comes from.

K_Q qualifies as K_Ic only when no check failed and every core check of the
rule set passed (was assessed and met).
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, asdict
from functools import lru_cache
from pathlib import Path

from reduce.errors import RulesError

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
        return asdict(self)


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


def crack_front_check(rules: dict, readings: tuple[float, ...]) -> Check:
    """Spread of the interior crack-length readings against their mean."""
    r = rules["crack_front"]
    lim = r["max_spread"]
    if len(readings) < 3:
        return Check("crack_front", None, None, f"(max - min)/a <= {lim:.2f}", r["clause"],
                     "fewer than three interior readings")
    mean = sum(readings) / len(readings)
    spread = (max(readings) - min(readings)) / mean
    return Check("crack_front", spread <= lim, spread, f"(max - min)/a <= {lim:.2f}", r["clause"])


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


def qualifies(rules: dict, checks: list[Check]) -> bool:
    """K_Q is K_Ic only if no check failed and every core check passed."""
    by_name = {c.name: c for c in checks}
    if any(c.passed is False for c in checks):
        return False
    return all(by_name.get(n) is not None and by_name[n].passed is True for n in rules["core_checks"])
