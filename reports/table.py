"""The summary table printed by ``cracktip reduce``."""

from __future__ import annotations

CAUTION = ("Results are for qualified personnel. The governing test standard, the customer's "
           "specification, local codes and accredited practice rule over these results. A K_Q "
           "that does not qualify is not K_Ic and must not be used as K_Ic.")

_COLUMNS = (  # header, width, formatter
    ("specimen", 12, lambda r: r.specimen),
    ("heat", 8, lambda r: r.heat or ""),
    ("geom", 6, lambda r: r.geometry or ""),
    ("a/W", 6, lambda r: _f(r.a_over_W, 3)),
    ("type", 4, lambda r: r.curve_type or ""),
    ("P_Q kN", 8, lambda r: _f(r.P_Q_kN, 2)),
    ("Pmax/PQ", 7, lambda r: _f(r.P_max_over_P_Q, 3)),
    ("K_Q MPa√m", 10, lambda r: _f(r.K_Q_MPa_sqrt_m, 1)),
    ("verdict", 9, lambda r: "ERROR" if r.error else ("K_Ic" if r.valid else "K_Q only")),
)


def _f(x, nd):
    return "" if x is None else f"{x:.{nd}f}"


def _wrap(text: str, width: int) -> list[str]:
    """Lines of at most ``width`` characters, broken at spaces (a word longer
    than a line is cut).  A plain greedy wrap: ``textwrap.wrap`` took most of
    the table's time for a few hundred rows."""
    lines, line = [], ""
    for word in text.split():
        if len(word) > width:  # cut: the first piece fills the line begun
            room = width - len(line) - 1 if line else width
            if room > 0:
                line = (line + " " if line else "") + word[:room]
                word = word[room:]
            lines.append(line)
            line = ""
            while len(word) > width:
                lines.append(word[:width])
                word = word[width:]
            line = word
            continue
        if not line:
            line = word
        elif len(line) + 1 + len(word) <= width:
            line += " " + word
        else:
            lines.append(line)
            line = word
    if line:
        lines.append(line)
    return lines


def summary_table(results, rules_title: str, width: int = 100) -> str:
    """A plain-text table of results with the reasons and errors beneath.

    Beneath the table: per specimen the error, or why K_Q is not K_Ic, then
    the caveats of its geometry definition and its warnings (failed advisory
    checks, which do not decide validity).

    Parameters
    ----------
    results : list of Result
    rules_title : str
        The rule set's name in words, printed above the table.
    """
    head = "  ".join(f"{h:<{w}}" if i < 3 else f"{h:>{w}}" for i, (h, w, _) in enumerate(_COLUMNS))
    lines = [f"Rule set: {rules_title}", head, "-" * len(head)]
    for r in results:
        cells = []
        for i, (_, w, fmt) in enumerate(_COLUMNS):
            text = str(fmt(r))
            text = text if len(text) <= w else text[: w - 1] + "…"
            cells.append(f"{text:<{w}}" if i < 3 else f"{text:>{w}}")
        lines.append("  ".join(cells))
    notes = []
    for r in results:
        if r.error:
            notes.append((r.specimen, "could not be reduced: " + r.error))
        elif not r.valid:
            notes.append((r.specimen, "not K_Ic: " + "; ".join(r.reasons)))
        if not r.error:
            notes.extend((r.specimen, "caveat: " + c) for c in r.caveats)
            notes.extend((r.specimen, "warning: " + w) for w in r.warnings)
    if notes:
        lines.append("")
        for spec, text in notes:
            wrapped = _wrap(text, width - 16) or [""]
            lines.append(f"  {spec[:12]:<12}  {wrapped[0]}")
            lines.extend(f"  {'':<12}  {w}" for w in wrapped[1:])
    n_ok = sum(1 for r in results if not r.error)
    n_valid = sum(1 for r in results if r.valid)
    lines.append("")
    n_warn = sum(1 for r in results if not r.error and (r.caveats or r.warnings))
    lines.append(f"{len(results)} specimens: {n_ok} reduced, {len(results) - n_ok} failed, "
                 f"{n_valid} valid K_Ic" + (f", {n_warn} with warnings or caveats." if n_warn else "."))
    lines.extend(_wrap("CAUTION: " + CAUTION, width))
    return "\n".join(lines)
