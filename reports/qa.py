"""What the QA commands print and write: verdicts (text, JSON, workbook),
approvals, the history trail and the trend summary."""

from __future__ import annotations

import json
import textwrap

from reports.table import CAUTION

WIDTH = 100


def _wrap(text, indent, width=WIDTH) -> list:
    return textwrap.wrap(text, width, initial_indent=indent, subsequent_indent=indent + "  ",
                         break_on_hyphens=False) or [indent]


def _k(x) -> str:
    return "" if x is None else f"{x:.1f}"


def _version(stored, specimen) -> str:
    r = stored.get(specimen)
    return f"v{r.version} (#{r.id})" if r else ""


#: what the "reduction" column of the verdict table means
REDUCTION_COLUMN_NOTE = ("reduction: the version of the specimen's reduction in the store and its id "
                         "(#); `cracktip history SPECIMEN` lists every version")


def verdict_table(verdicts, spec, stored: dict, without_heat=()) -> str:
    """The verdicts as text: per heat the verdict, the reason and every specimen's part.

    Parameters
    ----------
    verdicts : list of reduce.acceptance.HeatVerdict
    spec : reduce.spec.Specification
    stored : dict
        specimen -> StoredReduction (empty when not recorded).
    without_heat : list of TestedSpecimen
    """
    lines = [f"Specification: {spec.citation}" + (f" — {spec.title}" if spec.title else ""),
             f"  file {spec.file}, SHA-256 {spec.sha256[:16]}…", ""]
    for v in verdicts:
        lines.append(f"{v.heat}: {v.verdict.upper()}")
        lines.extend(_wrap(v.reason, "  "))
        lines.append(f"  {'specimen':<12} {'reduction':<10} {'role':<16} {'K MPa√m':>8}  note")
        for s in v.specimens:
            value = f"{_k(s.value)} {s.kind}" if s.value is not None else ""
            head = f"  {s.specimen[:12]:<12} {_version(stored, s.specimen):<10} {s.role:<16} {value:>8}  "
            note = textwrap.wrap(s.note, max(30, WIDTH - len(head))) or [""]
            lines.append((head + note[0]).rstrip())
            lines.extend(" " * len(head) + n for n in note[1:])
        lines.append("")
    for t in without_heat:
        lines.extend(_wrap(f"{t.specimen} ({t.where}): no heat given in the sheet; not part of any verdict", ""))
    counts = {}
    for v in verdicts:
        counts[v.verdict] = counts.get(v.verdict, 0) + 1
    lines.append(f"{len(verdicts)} heat(s): " + ", ".join(f"{n} {k}" for k, n in counts.items()) + ".")
    if stored:
        lines.extend(_wrap(REDUCTION_COLUMN_NOTE, ""))
    lines.extend(textwrap.wrap("CAUTION: " + CAUTION + " A verdict is advice to QA staff, not an "
                               "approval; the customer's specification rules.", WIDTH))
    return "\n".join(lines)


def verdicts_json(verdicts, spec, rules: str, stored: dict, verdict_ids, without_heat=()) -> str:
    """The documented JSON of ``cracktip accept``."""
    from reduce._version import __version__

    out = []
    for v in verdicts:
        d = v.to_dict()
        d["verdict_id"] = (verdict_ids or {}).get(v.heat)
        d["reductions"] = [{"specimen": s, "reduction_id": stored[s].id, "version": stored[s].version}
                           for s in v.specimen_ids if s in stored]
        out.append(d)
    spec_d = spec.to_dict()
    return json.dumps({"program_version": __version__, "rule_set": rules, "specification": spec_d,
                       "recorded": bool(stored), "verdicts": out,
                       "without_heat": [t.specimen for t in without_heat]},
                      indent=2, ensure_ascii=False, allow_nan=False)


def write_verdict_workbook(path, verdicts, spec, stored: dict, verdict_ids) -> None:
    """Sheets ``Verdicts`` (one row per heat) and ``Specimens`` (one row per specimen); atomic."""
    import openpyxl
    from openpyxl.styles import Alignment, Font

    from reduce.atomic import atomic_path

    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Verdicts"
    ws.append(["Heat", "Verdict", "Reason", "Specification", "Verdict id"])
    for v in verdicts:
        ws.append([v.heat, v.verdict, v.reason, spec.citation, (verdict_ids or {}).get(v.heat)])
    wsp = wb.create_sheet("Specimens")
    wsp.append(["Heat", "Specimen", "Requirement", "Role", "Value (MPa·m^½)", "Kind", "Note",
                "Reduction id", "Version"])
    labels = {r.index: r.label for r in spec.requirements}
    for v in verdicts:
        for s in v.specimens:
            red = stored.get(s.specimen)
            wsp.append([v.heat, s.specimen, labels.get(s.requirement, ""), s.role, s.value, s.kind, s.note,
                        red.id if red else None, red.version if red else None])
    for sheet, widths in ((ws, (12, 14, 90, 16, 10)), (wsp, (12, 12, 28, 16, 14, 6, 80, 12, 8))):
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        for i, w in enumerate(widths):
            sheet.column_dimensions[chr(ord("A") + i)].width = w
        for row in sheet.iter_rows(min_row=2):
            for cell in row:
                cell.alignment = Alignment(wrap_text=True, vertical="top")
        sheet.freeze_panes = "A2"
    for row in wsp.iter_rows(min_row=2, min_col=5, max_col=5):
        row[0].number_format = "0.0"
    with atomic_path(path) as tmp:
        wb.save(tmp)


def _reduction_line(r) -> str:
    value = (f"K_Ic {_k(r.K_Ic)} MPa·m^½" if r.K_Ic is not None else
             f"K_Q {_k(r.K_Q)} MPa·m^½ (not K_Ic)" if r.K_Q is not None else f"not reduced ({r.error})")
    rec = f", record {r.record_path} SHA-256 {r.record_sha256[:12]}…" if r.record_sha256 else ""
    return f"{r.specimen} v{r.version} (#{r.id}): {value}, {r.rule_set}, cracktip {r.program_version}{rec}"


def approval_text(approval, verdict, reductions, db) -> str:
    """What ``cracktip approve`` prints: the decision and exactly what it was taken on."""
    lines = [f"heat {approval.heat}: decision '{approval.decision}' by {approval.approver} at "
             f"{approval.created_at} recorded as approval #{approval.id} in {db}",
             f"on verdict #{verdict.id} ({verdict.verdict}, {verdict.specification}, {verdict.created_at}):"]
    lines.extend(_wrap(verdict.reason, "  "))
    if approval.comment:
        lines.extend(_wrap(f"comment: {approval.comment}", ""))
    lines.append("reduction versions approved:")
    for r in reductions:
        lines.extend(_wrap(_reduction_line(r), "  "))
    return "\n".join(lines)


def history_text(what, events, runs: dict, latest: dict, reductions: dict, db) -> str:
    """The trail, oldest first, grouped by command run.

    Parameters
    ----------
    what : str
        What was selected, in words.
    events : list of (kind, object)
        From :func:`reduce.qa.history_events`.
    runs : dict
        run id -> Run.
    latest : dict
        (heat, specimen) -> latest version number.
    reductions : dict
        reduction id -> StoredReduction (to name the versions a verdict or approval saw).
    """
    lines = [f"History of {what} in {db}"]
    if not events:
        lines.append("  (nothing recorded)")
    current = None

    def names(ids):
        return ", ".join(f"{reductions[i].specimen} v{reductions[i].version}" if i in reductions else f"#{i}"
                         for i in ids)

    for kind, e in events:
        if e.run_id != current:
            current = e.run_id
            run = runs.get(current)
            if run:
                lines.append(f"\n{run.started_at}  run {run.id}: {run.command} (cracktip {run.program_version}, "
                             f"account {run.account})")
        if kind == "reduction":
            newest = latest.get((e.heat, e.specimen))
            note = "" if newest == e.version else f" [superseded by v{newest}]"
            lines.extend(_wrap("reduction   " + _reduction_line(e) + note, "  "))
        elif kind == "verdict":
            lines.extend(_wrap(f"verdict     {e.heat} (#{e.id}): {e.verdict.upper()} against {e.specification}, "
                               f"{e.rule_set}; on {names([rid for rid, _ in e.reductions])}: {e.reason}", "  "))
        elif kind == "approval":
            comment = f'; comment "{e.comment}"' if e.comment else ""
            lines.extend(_wrap(f"approval    {e.heat} (#{e.id}): {e.decision} by {e.approver} on verdict "
                               f"#{e.verdict_id}; saw {names(e.reduction_ids)}{comment}", "  "))
        else:
            sup = f", supersedes {e.supersedes}" if e.supersedes else ""
            lines.extend(_wrap(f"certificate {e.designation} (#{e.id}) for heat {e.heat}: issued on approval "
                               f"#{e.approval_id}{sup}; PDF SHA-256 {e.pdf_sha256[:12]}…, kept in the store, "
                               f"written to {e.file}", "  "))
    return "\n".join(lines)


def trend_text(data: dict, title: str) -> str:
    """The numbers behind the trend plot, with the warnings a reader needs."""
    b = data["bound"]
    lines = [title, f"  {'heat':<12} {'first reduced':<26} {'n':>3} {'min':>7} {'mean':>7}  (K_Ic MPa·m^½)"]
    for heat, first, vs in data["heats"]:
        flag = "  BELOW THE BOUND" if heat in data["flagged"] else ""
        lines.append(f"  {heat[:12]:<12} {first:<26} {len(vs):>3} {min(vs):>7.1f} {sum(vs) / len(vs):>7.1f}{flag}")
    sample = f"{b.n} heat means" if data.get("per_heat_mean") else f"all {b.n} results"
    lines.extend(_wrap(f"{sample}: mean {b.mean:.1f}, s {b.sd:.2f}, k {b.k:.3f} ({b.content:.0%} content, "
                       f"{b.confidence:.0%} confidence, normal model, exact noncentral t); lower tolerance "
                       f"bound {b.lower:.1f} MPa·m^½", ""))
    if len(data["groups"]) > 1:
        shown = ", ".join(f"{o or '?'} at {'?' if t is None else f'{t:g}'} °C" for o, t in data["groups"])
        lines.extend(_wrap(f"WARNING: the selection mixes {shown}; narrow it with --orientation and "
                           "--temperature for a meaningful bound", ""))
    if len(data.get("rule_sets") or ()) > 1:
        lines.extend(_wrap(f"WARNING: the selection mixes the rule sets {', '.join(data['rule_sets'])}; "
                           "narrow it with --rules", ""))
    for w in data.get("warnings") or ():
        lines.extend(_wrap(f"WARNING: {w}", ""))
    lines.append("heats below the bound: " + (", ".join(data["flagged"]) or "none"))
    return "\n".join(lines)
