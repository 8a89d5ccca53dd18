"""The commands ``certify``, ``verify`` and ``plot``.

``certify`` reduces a test sheet and writes one PDF certificate per heat
(:mod:`reports.certificate`); a heat with a row that failed to reduce gets
none unless ``--include-failed`` is given.  ``verify`` checks a certificate
against its embedded results, its printed pages, its test sheet and records
and, with ``--db``, the issue kept in the QA store (:func:`verify_certificate`).
``plot`` draws one specimen's record and construction as PNG or SVG.

Exit status: 0 when everything asked for was done (or, for ``verify``, the
certificate matches and, with ``--db``, is the current issue), 2 otherwise;
the messages say why.
"""

from __future__ import annotations

import argparse
import hashlib
import math
import re
import sqlite3
import sys
from dataclasses import dataclass, field, replace
from datetime import date
from pathlib import Path

from reduce.errors import CracktipError, ReportError
from reduce.qa import add_db_option, revision_path, with_certificate_session  # QA store (issue 6)
# numbers re-reduced by verify are compared with the certificate's at the same
# tolerance as approved results are compared by the QA store (reduce/qa.py)
from reduce.qa import RESULTS_ABS_TOL as VERIFY_ABS_TOL, RESULTS_REL_TOL as VERIFY_REL_TOL

EXIT_OK, EXIT_BAD = 0, 2
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


def iso_date(text: str) -> str:
    """The ``--date`` option: an ISO calendar date (YYYY-MM-DD), not in the future.

    Raises
    ------
    argparse.ArgumentTypeError
        Naming the value and what was expected (argparse then exits with 2).

    >>> iso_date("2026-01-15")
    '2026-01-15'
    >>> iso_date("2025-13-45")
    Traceback (most recent call last):
    argparse.ArgumentTypeError: '2025-13-45' is not a calendar date (month must be in 1..12)
    """
    t = text.strip()
    if not re.fullmatch(r"\d{4}-\d{2}-\d{2}", t):
        raise argparse.ArgumentTypeError(f"expected a date as YYYY-MM-DD, got {text!r}")
    try:
        d = date.fromisoformat(t)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(f"{text!r} is not a calendar date ({exc})") from None
    if d > date.today():
        raise argparse.ArgumentTypeError(f"{text} lies in the future (today is {date.today().isoformat()})")
    return t


def _lab_profile(args, sheet: Path):
    from reports.certificate import load_lab_profile

    path = args.lab or (sheet.parent / "lab_profile.toml" if (sheet.parent / "lab_profile.toml").is_file() else None)
    lab = load_lab_profile(path)
    if lab["example"]:
        _say(f"note: using the example lab profile {lab['path']} (an invented laboratory); "
             "give your own with --lab FILE")
    return lab


def _stored_issue(session, heat, opts):
    """The issue kept in the store under the same approval (a reprint), or None."""
    approval_id = (opts.get("approval") or {}).get("store_approval_id")
    if opts.get("draft") or session.store is None or approval_id is None:
        return None
    same = [c for c in session.store.certificates(heat) if c.approval_id == approval_id]
    return same[-1] if same else None


def _page_count(pdf) -> int:
    from pypdf import PdfReader

    return len(PdfReader(str(pdf)).pages)


@with_certificate_session  # QA store (issue 6): one transaction per run; the session is args.qa
def cmd_certify(args) -> int:
    from reduce.pipeline import reduce_sheet
    from reduce.records import sha256_file
    from reports.certificate import build_certificate, certificate_file_name

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
        try:
            _certify_heat(args, lab, sheet, sheet_sha, out_dir, heat, heat_rows, len(failed),
                          build_certificate, certificate_file_name)
        except CracktipError as exc:
            _err(f"heat {heat}: no certificate: {exc}")
            status = EXIT_BAD
        except sqlite3.Error as exc:  # the store refused the issue (e.g. a number already taken)
            _err(f"heat {heat}: no certificate: the QA store refused to record it ({exc})")
            status = EXIT_BAD
    return status


def _certify_heat(args, lab, sheet, sheet_sha, out_dir, heat, heat_rows, n_failed, build, file_name):
    """Write one heat's certificate: a draft, a new issue, or the stored issue again."""
    # ---- QA store (issue 6, reduce/qa.py): issued only when approved, else a draft ----
    opts = ({"draft": True} if args.draft else args.qa.options(
        heat, heat_rows, prefix=lab["certificate_prefix"]))
    number = opts.get("certificate_number")
    if not opts["draft"] and args.date and args.date != opts.get("issue_date"):
        raise ReportError(f"--date {args.date} is refused for the numbered certificate {number}: its date of "
                          f"issue is the day the QA store records the issue ({opts.get('issue_date')}); "
                          "--date is for drafts only")
    path = revision_path(out_dir / file_name(heat, number), opts.get("revision"))
    if _stored_issue(args.qa, heat, opts) is not None:
        # a reprint: the PDF kept in the store is written as it is; nothing is built
        _say(args.qa.record(heat, path))
        pages = _page_count(path)
    else:
        info = build(path, heat, heat_rows, lab, args.rules, sheet, sheet_sha,
                     include_failed=args.include_failed,
                     **{**opts, "issue_date": args.date if opts["draft"] else opts.get("issue_date")})
        if not args.draft:  # keeps an issue; for a draft the session says why it is one
            _say(args.qa.record(heat, info.path))
        pages = info.pages
    # ---- end of the QA store part ----
    n_valid = sum(1 for r, _, _ in heat_rows if r.valid)
    what = "draft" if opts["draft"] else f"certificate {number}"
    _say(f"heat {heat}: {what} written to {path} ({pages} pages; {len(heat_rows)} "
         f"specimens, {n_failed} not reduced, {n_valid} valid K_Ic)")
    if args.xlsx:
        from reports.workbook import write_workbook

        book = path.with_suffix(".xlsx")
        write_workbook(book, heat_rows)
        _say(f"heat {heat}: workbook written to {book}")


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
    c.add_argument("--date", metavar="YYYY-MM-DD", type=iso_date,
                   help="the date a draft is dated (default today); a numbered certificate always carries "
                        "the date the QA store records its issue")
    add_db_option(c, "next to the sheet")  # QA store (issue 6)
    c.set_defaults(func=cmd_certify)


# ------------------------------------------------------------------ verify

def differences(old, new, path: str = "", labels=("certificate", "now")) -> list[str]:
    """Where two JSON-like values differ; numbers within the verify tolerance are equal.

    >>> differences({"K": 1.0, "ok": True}, {"K": 1.0 + 1e-12, "ok": False})
    ['ok: certificate True, now False']
    >>> differences({"E_MPa": 7e4}, {"E_MPa": 7.2e4}, "specimen_data", ("certificate", "sheet"))
    ['specimen_data.E_MPa: certificate 70000.0, sheet 72000.0']
    """
    if isinstance(old, dict) and isinstance(new, dict):
        out = []
        for k in list(old) + [k for k in new if k not in old]:
            out += differences(old.get(k, "(absent)"), new.get(k, "(absent)"), f"{path}.{k}" if path else k,
                               labels)
        return out
    if isinstance(old, list) and isinstance(new, list) and len(old) == len(new):
        return [d for i, (a, b) in enumerate(zip(old, new)) for d in differences(a, b, f"{path}[{i}]", labels)]
    numbers = all(isinstance(x, (int, float)) and not isinstance(x, bool) for x in (old, new))
    if numbers and math.isclose(old, new, rel_tol=VERIFY_REL_TOL, abs_tol=VERIFY_ABS_TOL):
        return []
    if not numbers and old == new:
        return []
    return [f"{path}: {labels[0]} {_brief(old)}, {labels[1]} {_brief(new)}"]


def _brief(x, n: int = 80) -> str:
    text = repr(x)
    return text if len(text) <= n else text[:n - 1] + "…"


def _shown(diffs, n=5) -> str:
    return "; ".join(diffs[:n]) + (f"; and {len(diffs) - n} more" if len(diffs) > n else "")


def _comparable(d: dict) -> dict:
    d = {k: v for k, v in d.items() if k not in _LOCATION_KEYS}
    if isinstance(d.get("specimen_data"), dict):
        d["specimen_data"] = {k: v for k, v in d["specimen_data"].items() if k != "record"}
    return d


@dataclass
class Verification:
    """What ``verify`` found.

    ``intact``: nothing checked disagrees.  ``current``: with a store, whether
    the PDF is its current issue (False for a draft or a superseded issue);
    None when no store was consulted.  ``not_checked``: what could not be
    checked, in words.
    """

    lines: list = field(default_factory=list)
    intact: bool = True
    current: bool | None = None
    not_checked: list = field(default_factory=list)
    status: str = ""

    @property
    def ok(self) -> bool:
        return self.intact and self.current is not False

    def good(self, text: str) -> None:
        self.lines.append(text)

    def bad(self, text: str) -> None:
        self.intact = False
        self.lines.append(text)

    def verdict(self) -> str:
        """The last line ``verify`` prints."""
        if not self.intact:
            return "DOES NOT MATCH"
        if self.current is False:
            return f"MATCHES its data, but {self.status}"
        text = "MATCHES" + ("; the current issue in the QA store" if self.current else "")
        return text + (f" (not checked: {'; '.join(self.not_checked)})" if self.not_checked else "")


def _sheet_candidates(payload, pdf: Path, records_dir):
    """Where the test sheet may be: the records folder, then beside or above the certificate."""
    sheet = payload.get("sheet") or {}
    name, rel = sheet.get("name"), sheet.get("path")
    here = pdf.resolve().parent
    folders = ([Path(records_dir)] if records_dir else []) + \
        ([(here / rel).parent] if rel else []) + [here.parent, here]
    return [(f / name).resolve() for f in folders] if name else []


def _records_base(records_dir, payload, pdf: Path):
    """The folder the records' sheet-relative paths are taken from, and whether it was given."""
    if records_dir:
        return Path(records_dir), True
    for cand in _sheet_candidates(payload, pdf, None):
        if cand.is_file():
            return cand.parent, False
    return None, False


def _find_record(base: Path, record: str | None, given: bool):
    if not record:
        return None
    for cand in (base / record, base / Path(record).name if given else None):
        if cand is not None and cand.is_file():
            return cand
    return None


def verify_certificate(pdf, records_dir=None, db=None) -> tuple[bool, list[str]]:
    """Check a certificate against its embedded results, its pages, its sheet and records, its store.

    Parameters
    ----------
    pdf : str or Path
        The certificate.
    records_dir : str or Path, optional
        Where the records are, laid out as beside the test sheet (or all in
        one folder).  Without it the folder of the sheet named in the
        certificate is tried; if the records are not found there, only the
        certificate itself is checked.
    db : str or Path, optional
        A QA store: the PDF's SHA-256 is compared with the issue kept there,
        and a draft or a superseded issue is reported as not current.

    Returns
    -------
    (bool, list of str)
        Whether everything checked matches (and, with ``db``, the PDF is the
        current issue), and one line per finding.  :func:`verification`
        gives the details.

    Raises
    ------
    ReportError
        If the PDF cannot be read or has no cracktip results.
    """
    v = verification(pdf, records_dir, db)
    return v.ok, v.lines


def verification(pdf, records_dir=None, db=None) -> Verification:
    """As :func:`verify_certificate`, with the findings as a :class:`Verification`.

    What is compared:

    - the digest of the attachment with the one in the document information
      and the one printed;
    - the printed pages with the attachment (:func:`reports.certificate.printed_mismatches`):
      page n of N, number and revision, date, each specimen's row, verdict
      and record;
    - when the test sheet is found and its SHA-256 matches: its rows with
      the embedded specimen descriptions (field by field), and the heat's
      specimens with those on the certificate; the specimens are then
      re-reduced from the sheet's rows, otherwise from the embedded
      descriptions;
    - every record's SHA-256, and the re-reduction with the embedded results;
    - with ``db``: the PDF's SHA-256 with the issue kept in the store, and
      whether a later revision supersedes it.
    """
    from reports.certificate import printed_mismatches, read_certificate_payload

    pdf = Path(pdf)
    payload, seen = read_certificate_payload(pdf)
    v = Verification()
    cert = payload.get("certificate") or {}
    rules = (payload.get("rule_set") or {}).get("name")
    version = (payload.get("program") or {}).get("version")
    what = ("draft (no certificate number)" if cert.get("draft") else
            f"certificate {cert.get('number')} revision {cert.get('revision')}")
    v.good(f"{what}, heat {cert.get('heat')}, {'drafted' if cert.get('draft') else 'issued'} "
           f"{cert.get('issue_date')} by cracktip {version}, rule set {rules}")
    _check_digests(v, payload, seen)
    printed = printed_mismatches(payload, seen["page_texts"])
    for m in printed:
        v.bad(f"MISMATCH: printed pages: {m}")
    if not printed:
        v.good(f"printed pages agree with the embedded results ({seen['pages']} pages)")
    _check_records_list(v, payload)
    if db is not None:
        _check_store(v, pdf, payload, db)
    else:
        v.not_checked.append("the QA store was not consulted (give --db)")
    _check_data(v, pdf, payload, records_dir, rules, version)
    return v


def _check_digests(v, payload, seen) -> None:
    from reports.certificate import payload_digest

    digest = payload_digest(payload)
    intact = True
    for where, value in (("document information", seen["digest_metadata"]), ("page text", seen["digest_printed"])):
        if value is None:
            intact = False
            v.bad(f"MISMATCH: no results digest in the {where}")
        elif value != digest:
            intact = False
            v.bad(f"MISMATCH: the embedded results are not the ones issued (digest in the {where} "
                  f"{value[:16]}…, of the attachment {digest[:16]}…)")
    if intact:
        v.good(f"embedded results intact (SHA-256 {digest[:16]}…)")


def _check_records_list(v, payload) -> None:
    listed = [(e.get("specimen"), e.get("record"), e.get("sha256")) for e in payload.get("records") or []]
    results = [(d.get("specimen"), d.get("record"), d.get("record_sha256")) for d in payload.get("results") or []]
    if listed != results:
        v.bad("MISMATCH: the embedded list of records differs from the records of the embedded results")


def _check_store(v, pdf: Path, payload, db) -> None:
    """The PDF against the issue the QA store keeps (read only)."""
    from reduce.errors import StoreError
    from reduce.store import Store, designation

    cert = payload.get("certificate") or {}
    if cert.get("draft"):
        v.current = False
        v.status = "it is a DRAFT, not an issued certificate (the QA store keeps no drafts)"
        v.good(f"QA store {db}: a draft is not an issue; nothing to compare")
        return
    sha = hashlib.sha256(pdf.read_bytes()).hexdigest()
    number, revision = cert.get("number"), cert.get("revision")
    try:
        with Store.open(db, create=False) as store:
            issues = [c for c in store.certificates() if c.number == number]
    except (StoreError, sqlite3.Error) as exc:
        v.current = False
        v.bad(f"MISMATCH: the QA store cannot be read: {exc}")
        return
    issue = next((c for c in issues if c.revision == revision), None)
    if issue is None:
        v.current = False
        held = ", ".join(c.designation for c in issues) or "no issue of this number"
        v.bad(f"MISMATCH: the QA store {db} has no issue {designation(number, revision)} ({held})")
        return
    if issue.pdf_sha256 != sha:
        v.bad(f"MISMATCH: this PDF (SHA-256 {sha[:16]}…) is not the one issued as {issue.designation} and kept "
              f"in the QA store (SHA-256 {issue.pdf_sha256[:16]}…); `cracktip certify` under the same "
              "approval writes out the stored one")
    else:
        v.good(f"QA store {db}: the PDF is byte for byte the {issue.designation} issued "
               f"{issue.issued_at[:10]} (SHA-256 {sha[:16]}…)")
    approval = (cert.get("approval") or {}).get("store_approval_id")
    if issue.heat != cert.get("heat") or (approval is not None and approval != issue.approval_id):
        v.bad(f"MISMATCH: the store's {issue.designation} is of heat {issue.heat} under approval "
              f"#{issue.approval_id}; the certificate says heat {cert.get('heat')}, approval #{approval}")
    later = sorted((c for c in issues if c.revision > issue.revision), key=lambda c: c.revision)
    if later:
        nxt = next((c for c in later if c.supersedes_id == issue.id), later[0])
        v.current = False
        text = (f"SUPERSEDED by {nxt.designation} (issued {nxt.issued_at[:10]})"
                + (f"; the current issue is {later[-1].designation}" if later[-1] is not nxt else ""))
        v.status = f"it is {text}"
        v.good(text)
    else:
        v.current = True
        v.good(f"current issue: no later revision of {number} in the QA store")


def _check_data(v, pdf, payload, records_dir, rules, version) -> None:
    """The sheet and the records: hashes, descriptions, and the re-reduction."""
    from reduce._version import PROGRAM_VERSION
    from reduce.records import sha256_file
    from reduce.rules import rule_set

    try:
        rule_set(rules)
    except CracktipError as exc:
        v.bad(f"MISMATCH: {exc}")
        return
    base, given = _records_base(records_dir, payload, pdf)
    if base is None:
        v.good("records not given and not found beside the sheet: records not re-hashed, "
               "results not re-reduced (give --records DIR)")
        v.not_checked.append("the sheet and records were not found (give --records DIR)")
        return
    if version != PROGRAM_VERSION:
        v.good(f"note: re-reduced with cracktip {PROGRAM_VERSION}, the certificate was made with {version}")
    sheet = payload.get("sheet") or {}
    sheet_file = next((c for c in _sheet_candidates(payload, pdf, base) if c.is_file()), None)
    rows = None
    if sheet_file is None:
        v.good(f"test sheet {sheet.get('name')} not found in {base}: not re-hashed; the embedded specimen "
               "descriptions are used as they are")
        v.not_checked.append("the embedded specimen descriptions were not compared with the sheet")
    elif sha256_file(sheet_file) != sheet.get("sha256"):
        v.bad(f"MISMATCH: test sheet {sheet_file}: SHA-256 differs from the certificate's")
    else:
        v.good(f"test sheet {sheet_file}: SHA-256 matches")
        rows = _sheet_rows(v, sheet_file, payload)
    for old in payload.get("results") or []:
        _check_result(v, old, rows, base, given, rules)


def _sheet_rows(v, sheet_file: Path, payload) -> dict | None:
    """The sheet's rows by specimen; the heat's specimens compared with the certificate's."""
    from reduce.sheet import read_sheet

    try:
        rows = {r.specimen: r for r in read_sheet(sheet_file)}
    except CracktipError as exc:
        v.bad(f"MISMATCH: test sheet {sheet_file} cannot be read now: {exc}")
        return None
    heat = (payload.get("certificate") or {}).get("heat")
    on_cert = [d.get("specimen") for d in payload.get("results") or []]
    in_sheet = [s for s, r in rows.items() if r.heat == heat]
    for s in in_sheet:
        if s not in on_cert:
            v.bad(f"MISMATCH {s}: in the sheet as heat {heat}, but not on the certificate")
    for s in on_cert:
        if s not in in_sheet:
            where = f"heat {rows[s].heat}" if s in rows else "no row"
            v.bad(f"MISMATCH {s}: on the certificate as heat {heat}, but the sheet has {where} for it")
    return rows


def _check_result(v, old: dict, rows, base: Path, given: bool, rules) -> None:
    """One specimen: its sheet row, its record and its re-reduction against the certificate."""
    from reduce.models import Specimen
    from reduce.pipeline import reduce_specimen
    from reduce.records import sha256_file
    from reduce.sheet import BadRow
    from reports.certificate import _plain

    sid = old.get("specimen")
    row = None if rows is None else rows.get(sid)
    found = _find_record(base, old.get("record"), given)
    if old.get("error") is not None or not old.get("specimen_data"):
        # listed as not reduced: only a record that was read at issue can be compared
        if old.get("record_sha256") is None:
            v.good(f"ok {sid}: listed as not reduced ({old.get('error')}); no record was read, nothing to compare")
            return
        same = found is not None and sha256_file(found) == old["record_sha256"]
        (v.good if same else v.bad)(f"{'ok' if same else 'MISMATCH'} {sid}: listed as not reduced; record "
                                    f"{'SHA-256 matches' if same else 'missing or changed'}")
        return
    if found is None:
        v.bad(f"MISMATCH {sid}: record {old.get('record')} not found in {base}")
        return
    if isinstance(row, BadRow):
        v.bad(f"MISMATCH {sid}: the sheet's row {row.row} cannot be read now: {row.error}")
        return
    if row is not None:
        diffs = differences(old["specimen_data"], row.describe(), "specimen_data", ("certificate", "sheet"))
        if diffs:
            v.bad(f"MISMATCH {sid}: the embedded specimen description differs from the sheet (row {row.row}): "
                  + _shown(diffs))
        spec = replace(row, record=str(found.resolve()))
    else:
        try:
            spec = Specimen.from_description(old["specimen_data"])
        except (KeyError, TypeError, ValueError) as exc:
            v.bad(f"MISMATCH {sid}: the embedded specimen description cannot be used ({exc!r})")
            return
        spec.record = str(found.resolve())
    new, _ = reduce_specimen(spec, rules)
    if new.record_sha256 != old.get("record_sha256"):
        v.bad(f"MISMATCH {sid}: record {found}: SHA-256 differs from the certificate's")
        return
    diffs = differences(_comparable(old), _comparable(_plain(new.to_dict())))
    source = "the sheet" if row is not None else "the embedded description"
    if diffs:
        v.bad(f"MISMATCH {sid}: re-reduction from {source} differs: {_shown(diffs)}")
    else:
        v.good(f"ok {sid}: record SHA-256 matches; re-reduction from {source} gives the same results")


def cmd_verify(args) -> int:
    v = verification(args.certificate, args.records, args.db)
    for line in v.lines:
        _say(line)
    _say(f"{args.certificate}: {v.verdict()}")
    return EXIT_OK if v.ok else EXIT_BAD


def add_verify_command(sub) -> None:
    v = sub.add_parser("verify", help="check a certificate against its embedded results, its pages, "
                                      "its sheet and records, and the QA store")
    v.add_argument("certificate", help="the certificate PDF")
    v.add_argument("--records", metavar="DIR",
                   help="folder with the records (as beside the test sheet, or all in one folder)")
    v.add_argument("--db", metavar="PATH",
                   help="QA store: compare the PDF with the issue kept there and say whether it is superseded")
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
