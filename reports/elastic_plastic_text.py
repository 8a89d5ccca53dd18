"""The elastic–plastic section of a certificate, as sentences.

:func:`elastic_plastic_paragraph` turns the ``elastic_plastic`` object of a
result (see :mod:`reduce.elastic_plastic`) into the sentences a certificate
prints: which of J, K_J and CTOD is available, at which point of the record,
and whether each qualified by its size rule, with the failed check named.
"""

from __future__ import annotations

_POINT_WORDS = {"instability": "at the instability that ends the record",
                "P_max": "at the first attainment of P_max"}
_DISPLACEMENT_WORDS = {"load_line": "load-line displacement", "cmod": "crack-mouth opening",
                       "front_face": "front-face opening"}


def _failed(ep: dict, names) -> str:
    by = {c["name"]: c for c in ep.get("checks") or []}
    bad = [by[n] for n in names if n in by and by[n]["passed"] is not True]
    if not bad:
        return ""
    parts = [f"{c['name']} {'n/a' if c['value'] is None else format(c['value'], '.4g')}, required {c['limit']}"
             for c in bad]
    return " (" + "; ".join(parts) + ")"


def _verdict(ok: bool) -> str:
    return "qualifies" if ok else "does not qualify"


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
        not, the second says which elastic–plastic result is available
        instead and whether it qualified; then one sentence per quantity
        with its size rule, the findings and what was assumed.

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
    J, K_J, d = ep.get("J_kJ_per_m2"), ep.get("K_J_MPa_sqrt_m"), ep.get("CTOD_mm")
    if J is None and d is None:
        return [head, "No elastic–plastic result is available: " + "; ".join(ep.get("notes") or ["not computed"]) + "."]
    where = _POINT_WORDS.get(ep.get("point"), "")
    K_name = "K_Jc" if ep.get("point") == "instability" else "K_J"
    out = [head] if result.get("valid") else [head, _available(ep, K_name, where)]
    dtype = ep.get("displacement_type")
    out.append(_sentence(f"{ep.get('point_note') or where} (P = {ep['P_kN']:.2f} kN, from the "
                         f"{_DISPLACEMENT_WORDS.get(dtype, dtype)})"))
    if J is not None:
        out.append(f"J = {J:.1f} kJ/m² (elastic {ep['J_el_kJ_per_m2']:.1f}, plastic {ep['J_pl_kJ_per_m2']:.1f}, "
                   f"eta = {ep['eta']:.3f}) {_verdict(ep['J_valid'])} by the ASTM E1820 size rule "
                   f"B, b0 >= 10 J/sigma_Y{_failed(ep, ('ep_a_over_W', 'j_thickness_size', 'j_ligament_size'))}.")
        out.append(f"{K_name} = {K_J:.1f} MPa·m^½ {_verdict(ep['K_J_valid'])} by the ASTM E1921 size limit "
                   f"K_Jc(limit) = {ep['K_Jc_limit_MPa_sqrt_m']:.1f} MPa·m^½"
                   f"{_failed(ep, ('ep_a_over_W', 'kjc_ligament_size'))}.")
    if d is not None:
        out.append(f"CTOD = {d:.4f} mm (plastic hinge, r_p = {ep['r_p']:g}) {_verdict(ep['CTOD_valid'])} by the "
                   f"ISO 12135 capacity rule delta <= min(B, W - a0)/30"
                   f"{_failed(ep, ('ep_a_over_W', 'ctod_size'))}.")
    out.extend(_sentence(n) for n in (ep.get("notes") or []) + (ep.get("assumptions") or []))
    return out


def _sentence(note: str) -> str:
    return note[:1].upper() + note[1:] + "."


def _available(ep: dict, K_name: str, where: str) -> str:
    """The plain sentence of what can be used instead of K_Ic."""
    have = []
    if ep.get("J_kJ_per_m2") is not None:
        have.append(f"J = {ep['J_kJ_per_m2']:.1f} kJ/m² "
                    f"({'qualifies' if ep['J_valid'] else 'does not qualify'} by ASTM E1820 size)")
    if ep.get("K_J_MPa_sqrt_m") is not None:
        have.append(f"{K_name} = {ep['K_J_MPa_sqrt_m']:.1f} MPa·m^½ "
                    f"({'qualifies' if ep['K_J_valid'] else 'does not qualify'} by ASTM E1921 size)")
    if ep.get("CTOD_mm") is not None:
        have.append(f"CTOD = {ep['CTOD_mm']:.4f} mm "
                    f"({'qualifies' if ep['CTOD_valid'] else 'does not qualify'} by ISO 12135 capacity)")
    return f"Available instead {where}: " + ", ".join(have[:-1]) + (" and " if len(have) > 1 else "") + have[-1] + "."
