"""The elastic–plastic section of a certificate, as sentences.

:func:`elastic_plastic_paragraph` turns the ``elastic_plastic`` object of a
result (see :mod:`reduce.elastic_plastic`) into the sentences a certificate
prints: the event the values belong to, which of J, K_J and CTOD is
available, the rule each was judged by and its verdict — "meets the size
rule of …" where size and the carried specimen checks were met, the failed
check named where one failed, "not assessed" with the reason otherwise —
and which requirements were not assessed.
"""

from __future__ import annotations

_DISPLACEMENT_WORDS = {"load_line": "load-line displacement", "cmod": "crack-mouth opening",
                       "front_face": "front-face opening"}
_QUANTITIES = (("J", "J_kJ_per_m2", "kJ/m²", ".1f"), ("K_J", "K_J_MPa_sqrt_m", "MPa·m^½", ".1f"),
               ("CTOD", "CTOD_mm", "mm", ".4f"))
_CARRIED = "no crack-front, precrack or surface-trace check carried over from K_Ic failed"


def _fmt(x) -> str:
    return "n/a" if x is None else format(x, ".4g")


def _failed_checks(ep: dict, names) -> str:
    by = {c["name"]: c for c in ep.get("checks") or []}
    return "; ".join(f"{n} {_fmt(by[n]['value'])}, required {by[n]['limit']}" for n in names if n in by)


def _reasons(ep: dict, names) -> str:
    """Why the named checks were not assessed, each reason once."""
    by = {c["name"]: c for c in ep.get("checks") or []}
    out = []
    for n in names:
        note = (by.get(n) or {}).get("note") or "no data"
        why = note.split("not assessed: ", 1)[-1]
        if why not in out:
            out.append(why)
    return "; ".join(out)


def verdict_words(ep: dict, q: str) -> str:
    """The verdict on one quantity (``"J"``, ``"K_J"``, ``"CTOD"``) in words.

    Examples
    --------
    >>> ep = {"checks": [], "verdicts": {"J": {"passed": True, "rule": "R", "checks": [],
    ...       "failed": [], "not_assessed": []}}}
    >>> verdict_words(ep, "J")
    'size check passed: meets the R, and no crack-front, precrack or surface-trace check carried over from K_Ic failed'
    """
    v = (ep.get("verdicts") or {}).get(q) or {}
    rule = v.get("rule", "size rule")
    if v.get("passed") is True:
        return f"size check passed: meets the {rule}, and {_CARRIED}"
    if v.get("passed") is False:
        return f"does not meet the requirements ({_failed_checks(ep, v.get('failed') or [])})"
    if not ep.get("event_defined"):
        return f"not assessed: no event is defined (the {rule} is not applied)"
    return f"not assessed ({rule}): {_reasons(ep, v.get('undecided') or []) or 'not determined'}"


def _short(ep: dict, q: str) -> str:
    v = (ep.get("verdicts") or {}).get(q) or {}
    if v.get("passed") is True:
        return f"meets the {v.get('rule', 'size rule')}: size check passed"
    if v.get("passed") is False:
        return "does not meet the requirements: " + ", ".join(v.get("failed") or []) + " failed"
    return "not assessed"


def elastic_plastic_paragraph(result: dict) -> list[str]:
    """Sentences for the certificate's elastic–plastic section.

    Parameters
    ----------
    result : dict
        One result as :meth:`reduce.models.Result.to_dict` writes it.

    Returns
    -------
    list of str
        Empty for a specimen that could not be reduced.  Otherwise the
        first sentence says only whether K_Q qualifies as K_Ic (a
        certificate that states this elsewhere may drop it); when it does
        not, the second says plainly which elastic–plastic result is
        available instead, at which event, and the verdict of each; then the
        event, one sentence per quantity with its value, the rule applied
        and the verdict, the requirements not assessed, the findings and
        what was assumed.

    References
    ----------
    ASTM E1820 (J), ASTM E1921 (K_Jc limit), BS 7448-1 / ISO 12135 (CTOD);
    the limits and their clauses are in ``reduce/limits.toml``.

    Examples
    --------
    >>> elastic_plastic_paragraph({"error": "no record"})
    []
    """
    if result.get("error"):
        return []
    ep = result.get("elastic_plastic") or {}
    K_Q = result.get("K_Q_MPa_sqrt_m")
    head = (f"K_Q = {K_Q:.1f} MPa·m^½ qualifies as K_Ic." if result.get("valid")
            else f"K_Q = {K_Q:.1f} MPa·m^½ does not qualify as K_Ic and is not K_Ic.")
    if ep.get("J_kJ_per_m2") is None and ep.get("CTOD_mm") is None:
        return [head, "No elastic–plastic result is available: " + "; ".join(ep.get("notes") or ["not computed"]) + "."]
    out = [head] if result.get("valid") else [head, _available(ep)]
    dtype = ep.get("displacement_type")
    out.append(f"Event: {ep.get('event') or ep.get('point')} (P = {ep['P_kN']:.2f} kN, from the "
               f"{_DISPLACEMENT_WORDS.get(dtype, dtype)}).")
    if ep.get("point_note"):
        out.append(_sentence(ep["point_note"]))
    names = ep.get("names") or {}
    if ep.get("J_kJ_per_m2") is not None:
        out.append(f"{names.get('J', 'J')} = {ep['J_kJ_per_m2']:.1f} kJ/m² (elastic {ep['J_el_kJ_per_m2']:.1f}, "
                   f"plastic {ep['J_pl_kJ_per_m2']:.1f}, eta = {ep['eta']:.3f}): {verdict_words(ep, 'J')}.")
        out.append(f"{names.get('K_J', 'K_J')} = {ep['K_J_MPa_sqrt_m']:.1f} MPa·m^½ (K_Jc(limit) = "
                   f"{ep['K_Jc_limit_MPa_sqrt_m']:.1f} MPa·m^½): {verdict_words(ep, 'K_J')}.")
    if ep.get("CTOD_mm") is not None:
        out.append(f"{names.get('CTOD', 'CTOD')} = {ep['CTOD_mm']:.4f} mm (plastic hinge, r_p = {ep['r_p']:g}): "
                   f"{verdict_words(ep, 'CTOD')}.")
    missing = _not_assessed(ep)
    if missing:
        out.append("Not assessed: " + "; ".join(missing) + ".")
    out.extend(_sentence(n) for n in (ep.get("notes") or []) + (ep.get("assumptions") or []))
    return out


def _not_assessed(ep: dict) -> list[str]:
    """The checks of the elastic–plastic result that were not assessed, grouped by why."""
    by_reason: dict[str, list[str]] = {}
    for c in ep.get("checks") or []:
        if c.get("passed") is None:
            why = (c.get("note") or "no data").split("not assessed: ", 1)[-1]
            by_reason.setdefault(why, []).append(c["name"])
    return [f"{', '.join(names)} ({why})" for why, names in by_reason.items()]


def _sentence(note: str) -> str:
    return note[:1].upper() + note[1:] + "."


def _available(ep: dict) -> str:
    """The plain sentence of what can be used instead of K_Ic, and whether it met its rules."""
    names = ep.get("names") or {}
    have = [(f"{names.get(q, q)} = {format(ep[key], fmt)} {unit}", q) for q, key, unit, fmt in _QUANTITIES
            if ep.get(key) is not None]
    listed = ", ".join(x for x, _ in have[:-1]) + (" and " if len(have) > 1 else "") + have[-1][0]
    if not ep.get("event_defined"):
        return (f"Available instead, at {ep.get('event')}: {listed}, reported for information only; no "
                "event is defined, so whether they meet any size rule was not assessed.")
    parts = [f"{text} ({_short(ep, q)})" for text, q in have]
    return (f"Available instead, at {ep.get('event')}: " + ", ".join(parts[:-1])
            + (" and " if len(parts) > 1 else "") + parts[-1] + ".")
