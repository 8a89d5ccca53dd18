"""The commands ``certify``, ``verify`` and ``plot``.

``certify`` reduces a test sheet and writes one PDF certificate per heat
(:mod:`reports.certificate`); a heat with a row that failed to reduce gets
none unless ``--include-failed`` is given.  ``verify`` re-reads the results
embedded in a certificate, re-hashes the records and re-reduces them with
the embedded specimen descriptions.  ``plot`` draws one specimen's record
and construction as PNG or SVG.

Exit status: 0 when everything asked for was done (or, for ``verify``, the
certificate matches), 2 otherwise; the messages say why.
"""

from __future__ import annotations

import math
import sys
from pathlib import Path

from reduce.errors import CracktipError, ReportError
from reduce.qa import add_db_option, revision_path, with_certificate_session  # QA store (issue 6)

EXIT_OK, EXIT_BAD = 0, 2
#: tolerance when re-reduced numbers are compared with the certificate's: the same
#: program on the same bytes gives the same floats; the margin only absorbs a
#: different numpy/BLAS build (common practice, no source)
VERIFY_REL_TOL = 1e-9
VERIFY_ABS_TOL = 1e-12
#: result keys that depend on where the files lie, not on the data
_LOCATION_KEYS = ("record", "record_notes")


def _say(text=""):
    print(text)


def _err(text):
    print(f"cracktip: {text}", file=sys.stderr)


# ------------------------------------------------------------------ certify

def group_by_heat(rows) -> dict:
    """Rows of :func:`reduce.pipeline.reduce_sheet` by heat, in sheet order (``None`` for no heat)."""
    out: dict = {}
    for row in rows:
        out.setdefault(row[0].heat, []).append(row)
    return out


def _lab_profile(args, sheet: Path):
    from reports.certificate import load_lab_profile

    path = args.lab or (sheet.parent / "lab_profile.toml" if (sheet.parent / "lab_profile.toml").is_file() else None)
    lab = load_lab_profile(path)
    if lab["example"]:
        _say(f"note: using the example lab profile {lab['path']} (an invented laboratory); "
             "give your own with --lab FILE")
    return lab


@with_certificate_session  # QA store (issue 6): one transaction per run; the session is args.qa
def cmd_certify(args) -> int:
    from reduce.pipeline import reduce_sheet
    from reduce.records import sha256_file
    from reports.certificate import build_certificate, certificate_file_name, certificate_number

    sheet = Path(args.sheet)
    lab = _lab_profile(args, sheet)
    rows = reduce_sheet(sheet, args.rules)
    sheet_sha = sha256_file(sheet)
    heats = group_by_heat(rows)
    status = EXIT_OK
    if None in heats:
        ids = ", ".join(r.specimen for r, _, _ in heats.pop(None))
        _err(f"{sheet}: no heat given for {ids}; certificates are issued per heat: fill the 'heat' column")
        status = EXIT_BAD
    if args.heat:
        unknown = [h for h in args.heat if h not in heats]
        if unknown:
            raise ReportError(f"{sheet}: heat(s) {', '.join(unknown)} not in the sheet; "
                              f"heats there: {', '.join(map(str, heats)) or 'none'}")
        heats = {h: heats[h] for h in args.heat}
    out_dir = Path(args.out) if args.out else sheet.parent / "certificates"
    for heat, heat_rows in heats.items():
        failed = [(r, s) for r, _, s in heat_rows if r.error is not None]
        if failed and not args.include_failed:
            _err(f"heat {heat}: no certificate: {len(failed)} of {len(heat_rows)} specimen(s) could not be "
                 "reduced (give --include-failed to issue one listing them):")
            for r, _ in failed:
                _err(f"  {r.specimen}: {r.error}")
            status = EXIT_BAD
            continue
        # ---- QA store (issue 6, reduce/qa.py): issued only when approved, else a draft ----
        opts = ({"draft": True} if args.draft else args.qa.options(
            heat, heat_rows, number=certificate_number(lab["certificate_prefix"], heat, sheet_sha)))
        number = opts.get("certificate_number")
        path = revision_path(out_dir / certificate_file_name(heat, number), opts.get("revision"))
        try:
            info = build_certificate(path, heat, heat_rows, lab, args.rules, sheet, sheet_sha,
                                     include_failed=args.include_failed,
                                     **{**opts, "issue_date": args.date or opts.get("issue_date")})
            if not args.draft:
                _say(args.qa.record(heat, info.path))
            # ---- end of the QA store part ----
            n_valid = sum(1 for r, _, _ in heat_rows if r.valid)
            what = "draft" if opts["draft"] else f"certificate {number}"
            _say(f"heat {heat}: {what} written to {info.path} ({info.pages} pages; {len(heat_rows)} "
                 f"specimens, {len(failed)} not reduced, {n_valid} valid K_Ic)")
            if args.xlsx:
                from reports.workbook import write_workbook

                book = path.with_suffix(".xlsx")
                write_workbook(book, heat_rows)
                _say(f"heat {heat}: workbook written to {book}")
        except CracktipError as exc:
            _err(f"heat {heat}: no certificate: {exc}")
            status = EXIT_BAD
    return status


def add_certify_command(sub) -> None:
    from reduce.cli import add_rules_option

    c = sub.add_parser("certify", help="write one PDF toughness certificate per heat of a test sheet")
    c.add_argument("sheet", help="test sheet (.csv or .xlsx), one row per specimen")
    c.add_argument("--heat", action="append", metavar="H", help="certify only this heat (repeatable)")
    c.add_argument("--out", metavar="DIR", help="output folder (default: 'certificates' beside the sheet)")
    add_rules_option(c)
    c.add_argument("--lab", metavar="FILE", help="lab profile (TOML); default lab_profile.toml beside the "
                                                 "sheet, else the invented example")
    c.add_argument("--draft", action="store_true", help="write drafts: DRAFT on every page, no number")
    c.add_argument("--include-failed", action="store_true",
                   help="issue a certificate even where rows failed to reduce; they are listed on it")
    c.add_argument("--xlsx", action="store_true", help="also write each heat's results workbook beside its PDF")
    c.add_argument("--date", metavar="YYYY-MM-DD", help="date of issue (default today)")
    add_db_option(c, "next to the sheet")  # QA store (issue 6)
    c.set_defaults(func=cmd_certify)


# ------------------------------------------------------------------ verify

def differences(old, new, path: str = "") -> list[str]:
    """Where two JSON-like values differ; numbers within the verify tolerance are equal.

    >>> differences({"K": 1.0, "ok": True}, {"K": 1.0 + 1e-12, "ok": False})
    ['ok: certificate True, now False']
    """
    if isinstance(old, dict) and isinstance(new, dict):
        out = []
        for k in list(old) + [k for k in new if k not in old]:
            out += differences(old.get(k, "(absent)"), new.get(k, "(absent)"), f"{path}.{k}" if path else k)
        return out
    if isinstance(old, list) and isinstance(new, list) and len(old) == len(new):
        return [d for i, (a, b) in enumerate(zip(old, new)) for d in differences(a, b, f"{path}[{i}]")]
    numbers = all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in (old, new))
    if numbers and math.isclose(old, new, rel_tol=VERIFY_REL_TOL, abs_tol=VERIFY_ABS_TOL):
        return []
    if not numbers and old == new:
        return []
    return [f"{path}: certificate {old!r}, now {new!r}"]


def _comparable(d: dict) -> dict:
    d = {k: v for k, v in d.items() if k not in _LOCATION_KEYS}
    if isinstance(d.get("specimen_data"), dict):
        d["specimen_data"] = {k: v for k, v in d["specimen_data"].items() if k != "record"}
    return d


def _records_base(records_dir, payload, pdf: Path):
    """The folder the records' sheet-relative paths are taken from, and whether it was given."""
    if records_dir:
        return Path(records_dir), True
    sheet = payload.get("sheet") or {}
    for cand in (Path(sheet.get("path") or "").parent, pdf.resolve().parent.parent, pdf.resolve().parent):
        if sheet.get("name") and (cand / sheet["name"]).is_file():
            return cand, False
    return None, False


def _find_record(base: Path, record: str | None, given: bool):
    if not record:
        return None
    for cand in (base / record, base / Path(record).name if given else None):
        if cand is not None and cand.is_file():
            return cand
    return None


def verify_certificate(pdf, records_dir=None) -> tuple[bool, list[str]]:
    """Check a certificate against its embedded results and, where found, its records.

    Parameters
    ----------
    pdf : str or Path
        The certificate.
    records_dir : str or Path, optional
        Where the records are, laid out as beside the test sheet (or all in
        one folder).  Without it the folder of the sheet named in the
        certificate is tried; if the records are not found there, only the
        integrity of the embedded results is checked.

    Returns
    -------
    (bool, list of str)
        Whether everything checked matches, and one line per finding.

    Raises
    ------
    ReportError
        If the PDF cannot be read or has no cracktip results.
    """
    from reduce.models import Specimen
    from reduce.pipeline import reduce_specimen
    from reduce.records import sha256_file
    from reduce.rules import rule_set
    from reports.certificate import _plain, payload_digest, read_certificate_payload

    pdf = Path(pdf)
    payload, seen = read_certificate_payload(pdf)
    lines, ok = [], True
    cert = payload.get("certificate") or {}
    rules = (payload.get("rule_set") or {}).get("name")
    version = (payload.get("program") or {}).get("version")
    lines.append(f"certificate {cert.get('number') or '(draft)'}, heat {cert.get('heat')}, issued "
                 f"{cert.get('issue_date')} by cracktip {version}, rule set {rules}")
    digest = payload_digest(payload)
    for where, value in (("document information", seen["digest_metadata"]), ("page text", seen["digest_printed"])):
        if value is None:
            ok = False
            lines.append(f"MISMATCH: no results digest in the {where}")
        elif value != digest:
            ok = False
            lines.append(f"MISMATCH: the embedded results are not the ones issued (digest in the {where} "
                         f"{value[:16]}…, of the attachment {digest[:16]}…)")
    if ok:
        lines.append(f"embedded results intact (SHA-256 {digest[:16]}…)")
    try:
        rule_set(rules)
    except CracktipError as exc:
        return False, lines + [f"MISMATCH: {exc}"]
    base, given = _records_base(records_dir, payload, pdf)
    if base is None:
        lines.append("records not given and not found beside the sheet: records not re-hashed, "
                     "results not re-reduced (give --records DIR)")
        return ok, lines
    from reduce import __version__

    if version != __version__:
        lines.append(f"note: re-reduced with cracktip {__version__}, the certificate was made with {version}")
    sheet = payload.get("sheet") or {}
    sheet_file = base / sheet.get("name", "") if sheet.get("name") else None
    if sheet_file is not None and sheet_file.is_file():
        if sha256_file(sheet_file) == sheet.get("sha256"):
            lines.append(f"test sheet {sheet_file}: SHA-256 matches")
        else:
            ok = False
            lines.append(f"MISMATCH: test sheet {sheet_file}: SHA-256 differs from the certificate's")
    else:
        lines.append(f"test sheet {sheet.get('name')} not found in {base}: not re-hashed")
    for old in payload.get("results") or []:
        sid = old.get("specimen")
        found = _find_record(base, old.get("record"), given)
        if old.get("error") is not None or not old.get("specimen_data"):
            # listed as not reduced: only a record that was read at issue can be compared
            if old.get("record_sha256") is None:
                lines.append(f"ok {sid}: listed as not reduced ({old.get('error')}); no record was read, "
                             "nothing to compare")
                continue
            same = found is not None and sha256_file(found) == old["record_sha256"]
            ok &= same
            lines.append(f"{'ok' if same else 'MISMATCH'} {sid}: listed as not reduced; record "
                         f"{'SHA-256 matches' if same else 'missing or changed'}")
            continue
        if found is None:
            ok = False
            lines.append(f"MISMATCH {sid}: record {old.get('record')} not found in {base}")
            continue
        try:
            spec = Specimen.from_description(old["specimen_data"])
        except (KeyError, TypeError, ValueError) as exc:
            ok = False
            lines.append(f"MISMATCH {sid}: the embedded specimen description cannot be used ({exc!r})")
            continue
        spec.record = str(found.resolve())
        new, _ = reduce_specimen(spec, rules)
        if new.record_sha256 != old.get("record_sha256"):
            ok = False
            lines.append(f"MISMATCH {sid}: record {found}: SHA-256 differs from the certificate's")
            continue
        diffs = differences(_comparable(old), _comparable(_plain(new.to_dict())))
        if diffs:
            ok = False
            shown = "; ".join(diffs[:5]) + (f"; and {len(diffs) - 5} more" if len(diffs) > 5 else "")
            lines.append(f"MISMATCH {sid}: re-reduction differs: {shown}")
        else:
            lines.append(f"ok {sid}: record SHA-256 matches; re-reduction gives the same results")
    return ok, lines


def cmd_verify(args) -> int:
    ok, lines = verify_certificate(args.certificate, args.records)
    for line in lines:
        _say(line)
    _say(f"{args.certificate}: {'MATCHES' if ok else 'DOES NOT MATCH'}")
    return EXIT_OK if ok else EXIT_BAD


def add_verify_command(sub) -> None:
    v = sub.add_parser("verify", help="check a certificate against its embedded results and its records")
    v.add_argument("certificate", help="the certificate PDF")
    v.add_argument("--records", metavar="DIR",
                   help="folder with the records (as beside the test sheet, or all in one folder)")
    v.set_defaults(func=cmd_verify)


# ------------------------------------------------------------------ plot

def cmd_plot(args) -> int:
    from reduce.pipeline import reduce_specimen
    from reduce.rules import rule_set
    from reduce.sheet import BadRow, read_sheet, safe_name
    from reports.plots import write_plot

    rule_set(args.rules)
    rows = read_sheet(args.sheet)
    match = [r for r in rows if r.specimen == args.specimen]
    if not match:
        ids = [r.specimen for r in rows]
        raise ReportError(f"{args.sheet}: specimen {args.specimen!r} not in the sheet; there: "
                          f"{', '.join(ids[:20])}{' …' if len(ids) > 20 else ''}")
    row = match[0]
    if isinstance(row, BadRow):
        raise ReportError(f"specimen {args.specimen}: {row.error}")
    result, rec = reduce_specimen(row, args.rules)
    if rec is None:
        raise ReportError(f"specimen {args.specimen}: {result.error}")
    out = Path(args.out) if args.out else Path(f"{safe_name(args.specimen)}.png")
    try:
        write_plot(out, result, rec.load_kN, rec.disp_mm)
    except ValueError as exc:
        raise ReportError(str(exc)) from None
    _say(f"plot of {args.specimen} written to {out}")
    if result.error:
        _err(f"specimen {args.specimen} could not be reduced (the plot shows the raw record): {result.error}")
        return EXIT_BAD
    return EXIT_OK


def add_plot_command(sub) -> None:
    from reduce.cli import add_rules_option

    p = sub.add_parser("plot", help="draw one specimen's load-displacement record and construction")
    p.add_argument("sheet", help="test sheet (.csv or .xlsx)")
    p.add_argument("--specimen", required=True, metavar="ID", help="the specimen to draw")
    p.add_argument("--out", metavar="FILE", help="PNG or SVG file (by suffix; default ID.png here)")
    add_rules_option(p)
    p.set_defaults(func=cmd_plot)
