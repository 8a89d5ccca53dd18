"""The toughness certificate of one heat: a PDF built with reportlab.

Layout: page 1 names the issuing laboratory, the certificate, the material
and the test and gives the results table; then come the statement of what
was and was not assessed, the cautions, the traceability data and the
signature blocks; then one page per specimen with its load–displacement plot
(:mod:`reports.plots`), the construction, the check table and the
crack-front readings.  Every page has the header, the footer and
"page n of N"; a draft says DRAFT in the header and across every page and
carries no certificate number.

Traceability: the results, the rule set, the program version and the
SHA-256 of the test sheet and of every record are embedded in the PDF as the
JSON file attachment :data:`ATTACHMENT_NAME` (added with pypdf), and the
SHA-256 of that JSON in canonical form (:func:`payload_digest`) is printed
on the certificate and stored in the document information, so
``cracktip verify`` can tell whether the attachment is the one issued.

:func:`build_certificate` takes plain data (results, records, specimen
descriptions, a lab profile dict, options), so an approval workflow can call
it as well as the command line.  It writes atomically: a failure at any step
leaves no file behind.
"""

from __future__ import annotations

import hashlib
import io
import json
import math
import re
import tomllib
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import date
from pathlib import Path
from xml.sax.saxutils import escape

from reduce._version import PROGRAM_VERSION as __version__
from reduce.atomic import atomic_path
from reduce.errors import ReportError
from reduce.sheet import safe_name
from reports.table import CAUTION

ATTACHMENT_NAME = "cracktip-results.json"
PAYLOAD_FORMAT = "cracktip-certificate-results"
PAYLOAD_VERSION = 1
#: the document-information key holding the digest of the attachment
DIGEST_KEY = "/CracktipResultsSHA256"
EXAMPLE_PROFILE = Path(__file__).with_name("lab_profile.toml")

CAUTIONS = (
    "The results apply only to the specimens tested, as received and as described on the test sheet.",
    CAUTION,
    "The customer's specification, the test standard and local codes govern the use of these "
    "results; where they differ from the rule set applied here, they prevail.",
    "Limits whose clause reads 'from memory' were entered from the developers' knowledge of the "
    "standard and have not been checked against the printed edition in force; the laboratory "
    "confirms them against its own copy of the standard.",
    "Reproduce this certificate only in full.",
)

NOT_ASSESSED_BY_PROGRAM = (
    "Not assessed by cracktip (the laboratory's responsibility): machining and dimensional "
    "tolerances of the specimens; the fatigue precracking procedure beyond the final K_max "
    "reported; fracture-surface features such as crack-plane deviation; calibration of the test "
    "machine and the displacement gauge; the yield strength and modulus, which were taken from "
    "the test sheet as given.")

CHECK_TITLES = {
    "a_over_W": "a/W range", "pmax_pq_ratio": "P<sub>max</sub>/P<sub>Q</sub>",
    "ligament_size": "Ligament W − a size", "thickness_size": "Thickness B size",
    "crack_length_size": "Crack length a size", "crack_front": "Crack-front straightness",
    "surface_crack": "Surface crack traces", "precrack_kmax": "Fatigue precrack K<sub>max</sub>",
    "loading_rate": "Loading rate", "compliance_crack_length": "Crack length from compliance",
    "calibration_confirmed": "K calibration confirmed",
}
_CHECK_UNITS = {"ligament_size": "mm", "thickness_size": "mm", "crack_length_size": "mm",
                "loading_rate": "MPa·√m/s"}
_VERDICT = {True: "pass", False: "fail", None: "not assessed"}
#: Result.extra blocks with their own section; any other dict block gets a plain table
_EXTRA_SHOWN = ("elastic_plastic",)
#: the entries a lab profile may have (anything else is refused: a typo must not drop a line)
PROFILE_KEYS = ("example", "name", "address", "accreditation", "contact", "certificate_prefix", "signatories")
SIGNATORY_KEYS = ("name", "role")
_DISPLACEMENT_WORDS = {"load_line": "load-line displacement", "cmod": "crack-mouth opening (CMOD)",
                       "front_face": "front-face opening"}


# ---------------------------------------------------------------- lab profile

def load_lab_profile(path=None) -> dict:
    """Read and check a lab profile (TOML).

    Parameters
    ----------
    path : str or Path, optional
        The profile; default the invented example beside this module.

    Returns
    -------
    dict
        ``name``, ``address`` (list of str), ``accreditation``, ``contact``,
        ``certificate_prefix``, ``signatories`` (list of {name, role}),
        ``example`` (bool) and ``path``.

    Raises
    ------
    ReportError
        If the file cannot be read or an entry is missing or malformed; the
        message names the file and the entry.
    """
    path = Path(path) if path else EXAMPLE_PROFILE
    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise ReportError(f"{path}: the lab profile does not exist") from None
    except (OSError, tomllib.TOMLDecodeError) as exc:
        raise ReportError(f"{path}: the lab profile cannot be read: {exc}") from None
    _refuse_unknown(path, "", data, PROFILE_KEYS)

    def need(key, kind=str):
        v = data.get(key)
        if not isinstance(v, kind) or (isinstance(v, str) and not v.strip()):
            raise ReportError(f"{path}: entry '{key}' is missing or not a {kind.__name__}; "
                              "see the example profile")
        return v

    address = data.get("address", [])
    if isinstance(address, str):
        address = [address]
    if not isinstance(address, list) or not all(isinstance(a, str) for a in address):
        raise ReportError(f"{path}: entry 'address' must be a list of lines")
    prefix = need("certificate_prefix")
    if not re.fullmatch(r"[A-Za-z0-9-]+", prefix):
        raise ReportError(f"{path}: entry 'certificate_prefix' = {prefix!r}: use letters, digits and '-'")
    signatories = data.get("signatories", [])
    for i, s in enumerate(signatories if isinstance(signatories, list) else [], start=1):
        if isinstance(s, dict):
            _refuse_unknown(path, f"[[signatories]] {i}: ", s, SIGNATORY_KEYS)
    if not isinstance(signatories, list) or not signatories or not all(
            isinstance(s, dict) and isinstance(s.get("name"), str) and isinstance(s.get("role"), str)
            for s in signatories):
        raise ReportError(f"{path}: give at least one [[signatories]] table with 'name' and 'role'")
    return {"name": need("name"), "address": address, "accreditation": data.get("accreditation", ""),
            "contact": data.get("contact", ""), "certificate_prefix": prefix,
            "signatories": [{"name": s["name"], "role": s["role"]} for s in signatories],
            "example": bool(data.get("example", False)), "path": str(path)}


def _refuse_unknown(path, where: str, table: dict, known: tuple) -> None:
    """A misspelt entry must not silently drop a line from the certificate."""
    import difflib

    for key in table:
        if key not in known:
            near = difflib.get_close_matches(key, known, n=1)
            hint = f"did you mean '{near[0]}'? " if near else ""
            raise ReportError(f"{path}: {where}unknown entry '{key}'; {hint}the entries are: "
                              f"{', '.join(known)}")


# ---------------------------------------------------------------- payload

def _plain(obj):
    """JSON-ready copy: numpy scalars to Python, tuples to lists; NaN refused."""
    def default(x):
        if hasattr(x, "item"):
            return x.item()
        raise TypeError(f"not JSON-serialisable: {type(x).__name__}")
    return json.loads(json.dumps(obj, default=default, allow_nan=False))


def canonical_json(obj) -> str:
    """The canonical JSON text the digest is taken of (sorted keys, no spaces)."""
    return json.dumps(obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False)


def payload_digest(payload: dict) -> str:
    """SHA-256 (hex) of the payload in canonical form.

    References
    ----------
    FIPS PUB 180-4, "Secure Hash Standard", 2015 (SHA-256).
    """
    return hashlib.sha256(canonical_json(payload).encode("utf-8")).hexdigest()


def certificate_payload(heat, results, rules: str, sheet_path, sheet_sha256: str, *,
                        number=None, revision=None, supersedes=None, draft=False,
                        approval=None, issue_date=None, lab_name=None,
                        program_version=__version__, certificate_path=None) -> dict:
    """The data embedded in the certificate.

    Parameters
    ----------
    heat : str
    results : list of Result
        Every result of the heat, failed ones included.
    rules : str
        The rule set's name.
    sheet_path, sheet_sha256 : str or Path, str
        The test sheet and the SHA-256 of its bytes.
    number, revision, supersedes, draft, approval, issue_date, lab_name
        What the certificate says about itself.
    certificate_path : str or Path, optional
        Where the certificate is written: the sheet's place is kept relative
        to its folder (``sheet.path``), never as a local absolute path, and
        only when it is at most two folders up; otherwise only its name.

    Returns
    -------
    dict
        ``format``, ``format_version``, ``program``, ``certificate``,
        ``rule_set``, ``sheet``, ``records`` (specimen, record path, SHA-256)
        and ``results`` (:meth:`Result.to_dict` each), JSON-ready.

    Raises
    ------
    RulesError
        For an unknown rule set.
    ValueError
        If a result holds NaN or infinity (JSON has no such numbers).
    """
    from reduce.rules import rule_set

    return _plain({
        "format": PAYLOAD_FORMAT, "format_version": PAYLOAD_VERSION,
        "program": {"name": "cracktip", "version": program_version},
        "certificate": {"number": number, "revision": revision, "supersedes": supersedes,
                        "draft": bool(draft), "issue_date": issue_date, "heat": heat,
                        "approval": approval, "lab": lab_name},
        "rule_set": {"name": rules, "title": rule_set(rules)["title"]},
        "sheet": {"name": Path(sheet_path).name, "path": sheet_reference(sheet_path, certificate_path),
                  "sha256": sheet_sha256},
        "records": [{"specimen": r.specimen, "record": r.record, "sha256": r.record_sha256}
                    for r in results],
        "results": [r.to_dict() for r in results],
    })


def sheet_reference(sheet_path, certificate_path) -> str | None:
    """The sheet's path relative to the certificate's folder, POSIX style, or None.

    None when the certificate's place is not given, the two are on different
    drives, or the path climbs more than two folders or has more than four
    parts (such a path says more about the local disk than about the test).

    >>> sheet_reference("/lab/c/campaign.csv", "/lab/c/certificates/X.pdf")
    '../campaign.csv'
    >>> sheet_reference("/home/u/a/b/c/s.csv", "/tmp/out/X.pdf") is None
    True
    """
    import os

    if certificate_path is None:
        return None
    try:
        rel = os.path.relpath(Path(sheet_path).resolve(), Path(certificate_path).resolve().parent)
    except ValueError:  # another drive
        return None
    parts = Path(rel).parts
    if parts.count("..") > 2 or len(parts) > 4:
        return None
    return Path(rel).as_posix()


def read_certificate_payload(pdf_path) -> tuple[dict, dict]:
    """The embedded results of a certificate, and what the PDF says about them.

    Returns
    -------
    payload : dict
        The parsed attachment.
    seen : dict
        ``digest_metadata`` (the digest in the document information, or
        None), ``digest_printed`` (the digest found in the page text, or
        None), ``pages`` (the page count), ``page_texts`` (the extracted
        text of each page) and ``text`` (all of it).

    Raises
    ------
    ReportError
        If the file is not a readable PDF or has no cracktip attachment.
    """
    from pypdf import PdfReader
    from pypdf.errors import PdfReadError

    try:
        with _quiet_pypdf():  # its warnings on a broken file would come before our one clear message
            reader = PdfReader(str(pdf_path))
            blobs = reader.attachments.get(ATTACHMENT_NAME)
            page_texts = [p.extract_text() or "" for p in reader.pages]
            meta = reader.metadata or {}
    except FileNotFoundError:
        raise ReportError(f"{pdf_path}: the certificate does not exist") from None
    except (PdfReadError, OSError, ValueError, KeyError, TypeError, AttributeError) as exc:
        raise ReportError(f"{pdf_path}: not a readable PDF ({exc})") from None
    text = "\n".join(page_texts)
    if not blobs:
        raise ReportError(f"{pdf_path}: no embedded '{ATTACHMENT_NAME}'; this is not a cracktip "
                          "certificate, or its attachment was removed")
    try:
        payload = json.loads(blobs[0].decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ReportError(f"{pdf_path}: the embedded '{ATTACHMENT_NAME}' is not valid JSON: {exc}") from None
    if not isinstance(payload, dict) or payload.get("format") != PAYLOAD_FORMAT:
        raise ReportError(f"{pdf_path}: the embedded '{ATTACHMENT_NAME}' is not in the format "
                          f"'{PAYLOAD_FORMAT}'")
    m = re.search(r"Results digest \(SHA-256\):\s*((?:[0-9a-f]\s*){64})", text)
    return payload, {"digest_metadata": meta.get(DIGEST_KEY),
                     "digest_printed": re.sub(r"\s", "", m.group(1)) if m else None,
                     "pages": len(page_texts), "page_texts": page_texts, "text": text}


@contextmanager
def _quiet_pypdf():
    """pypdf's logger held at ERROR for the duration (its level restored after)."""
    import logging

    log = logging.getLogger("pypdf")
    level = log.level
    log.setLevel(logging.ERROR)
    try:
        yield
    finally:
        log.setLevel(level)


# ---------------------------------------------------------------- the printed pages against the payload

_RESULT_COLUMNS = ("B", "B_N", "W", "S", "a", "a/W", "yield strength", "P_max", "P_Q", "P_max/P_Q", "K_Q",
                   "valid", "K_Ic")


def _flat(text: str) -> str:
    """The text without any whitespace: line breaks fall wherever the layout put them."""
    return re.sub(r"\s+", "", text)


def _readable(markup: str) -> str:
    """Reportlab markup as the page reads: tags dropped, entities resolved."""
    from xml.sax.saxutils import unescape

    return " ".join(unescape(re.sub(r"<[^>]+>", "", markup)).split())


def _flat_markup(markup: str) -> str:
    return _flat(_readable(markup))


def printed_mismatches(payload: dict, page_texts: list[str]) -> list[str]:
    """Where the printed pages do not say what the embedded results say.

    Compared with the payload: "page n of N" on every page (N the real
    page count), the certificate number and revision (or DRAFT) and the
    date on every page, the identification box, the results table row of
    each specimen (every printed cell: K_Q, valid, K_Ic …), each specimen's
    pages (heading, verdict, K_Q of the construction, record SHA-256), the
    traceability table and the sheet's SHA-256.

    Parameters
    ----------
    payload : dict
        The embedded results (:func:`read_certificate_payload`).
    page_texts : list of str
        The extracted text of each page, in order.

    Returns
    -------
    list of str
        One finding per disagreement; empty when the pages agree.
    """
    cert = payload.get("certificate") or {}
    draft = bool(cert.get("draft"))
    results = [d for d in payload.get("results") or [] if isinstance(d, dict)]
    reduced = [d for d in results if d.get("error") is None and d.get("specimen_data")]
    flat = [_flat(t) for t in page_texts]
    whole = "".join(flat)
    out = _page_mismatches(page_texts, flat, cert, draft)
    first = flat[0] if flat else ""
    box = [("the revision", f"Revision{cert.get('revision')}") if cert.get("revision") is not None else None,
           ("the date", _flat(f"{date_label(draft)}{cert.get('issue_date')}")),
           ("the number of specimens", _flat(f"Specimens {len(results)} ({len(reduced)} reduced, "
                                             f"{len(results) - len(reduced)} not reduced)"))]
    out += [f"page 1 does not state {what} as embedded ({want})" for what, want in filter(None, box)
            if want not in first]
    for d in reduced:
        out += _results_row_mismatches(d, page_texts, whole)
        out += _specimen_page_mismatches(d, flat)
    sheet = payload.get("sheet") or {}
    trace = [(str(d.get("specimen")), d.get("record") or "—", d.get("record_sha256") or "not read")
             for d in results] + [("Test sheet", sheet.get("name") or "", sheet.get("sha256") or "")]
    for who, record, sha in trace:
        if _flat(who + record + sha) not in whole:
            out.append(f"the traceability table does not list {who}: {record}, SHA-256 {sha}")
    return out


def _page_mismatches(page_texts, flat, cert, draft) -> list[str]:
    n = len(page_texts)
    header = header_text(draft, cert.get("number"), cert.get("revision"))
    dated = f"{'drafted' if draft else 'issued'} {cert.get('issue_date')}"
    out = []
    for i, (text, f) in enumerate(zip(page_texts, flat), start=1):
        said = re.findall(r"page\s+(\d+)\s+of\s+(\d+)", text)
        if said != [(str(i), str(n))]:
            what = ", ".join(f"'page {a} of {b}'" for a, b in said) or "no page number"
            out.append(f"page {i} of the {n} in the file says {what}")
        if _flat(header) not in f:
            out.append(f"page {i} does not carry '{header}'")
        if _flat(dated) not in f:
            out.append(f"page {i} does not carry '{dated}'")
    return out


def _results_row_mismatches(d, page_texts, whole) -> list[str]:
    cells = results_cells(d)
    if _flat("".join(cells)) in whole:
        return []
    sid = cells[0]
    # which cells differ: the extracted text has one table cell per line
    tokens = page_texts[0].split() if page_texts else []
    if sid in tokens:
        i = tokens.index(sid)
        got = tokens[i + 1:i + len(cells)]
        diffs = [f"{name} printed {g}, embedded {w}" for name, g, w in zip(_RESULT_COLUMNS, got, cells[1:])
                 if g != w]
        if diffs:
            return [f"results table, {sid}: " + "; ".join(diffs)]
    return [f"results table: no row for {sid} reads as the embedded results "
            f"(K_Q {cells[11]}, valid {cells[12]}, K_Ic {cells[13]})"]


def _specimen_page_mismatches(d, flat) -> list[str]:
    sid = str(d.get("specimen"))
    heading = _flat(f"Specimen {sid} {d.get('geometry') or ''}")
    pages = [i for i, f in enumerate(flat) if heading in f]
    if not pages:
        return [f"no specimen page for {sid}"]
    page, i = flat[pages[0]], pages[0] + 1
    out = []
    verdict = verdict_markup(d)
    if _flat_markup(verdict) not in page:
        out.append(f"page {i}, {sid}: the verdict does not read '{_readable(verdict)}' as embedded")
    K = (f"K<sub>Q</sub>{_f(d.get('K_Q_MPa_sqrt_m'), 2)} MPa·√m "
         f"({_f(d.get('K_Q_ksi_sqrt_in'), 2)} ksi·√in)")
    if _flat_markup(K) not in page:
        out.append(f"page {i}, {sid}: the construction does not give K_Q = "
                   f"{_f(d.get('K_Q_MPa_sqrt_m'), 2)} MPa·√m as embedded")
    if _flat(f"Record {d.get('record')}, SHA-256 {d.get('record_sha256')}") not in page:
        out.append(f"page {i}, {sid}: the record or its SHA-256 differs from the embedded one")
    if not any(_flat(f"Specimen {sid} (continued)") in f for f in flat):
        out.append(f"no continuation page (checks) for {sid}")
    return out


# ---------------------------------------------------------------- formatting

def _f(x, nd=2, none="—"):
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return none
    return f"{x:.{nd}f}"


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def significant(x, sig: int = 4) -> str:
    """``x`` to ``sig`` significant digits; powers of ten below 10⁻⁴ or from 10⁵ up.

    The same number of significant digits whatever the magnitude, so a
    check table does not mix 0.5485 with 0.000008639.

    >>> [significant(v) for v in (0.54851, 24.8667, 0.00011994, 8.6391e-6, 123456.0, 9.99996, 0.0)]
    ['0.5485', '24.87', '0.0001199', '8.639 × 10⁻⁶', '1.235 × 10⁵', '10.00', '0']
    """
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "—"
    if x == 0:
        return "0"
    mantissa, exp = f"{x:.{sig - 1}e}".split("e")
    e = int(exp)  # of the rounded value: 9.99996 is 10.00, not 9.1000
    if -4 <= e < 5:
        return f"{x:.{max(0, sig - 1 - e)}f}"
    return f"{mantissa} × 10{str(e).translate(_SUPERSCRIPT)}"


def check_unit(name: str, limit: str = "") -> str:
    """The unit of a check's value: ``mm``, ``MPa·√m/s``, or ``ratio`` (dimensionless).

    >>> check_unit("ligament_size"), check_unit("a_over_W"), check_unit("crack_front", "... = 1.2 mm")
    ('mm', 'ratio', 'mm')
    """
    if name in _CHECK_UNITS:
        return _CHECK_UNITS[name]
    if name.endswith("_size") or (name == "crack_front" and limit.rstrip().endswith("mm")):
        return "mm"  # size checks compare lengths; the nine-point front a deviation in mm
    return "" if name == "calibration_confirmed" else "ratio"


def date_label(draft: bool) -> str:
    """What the certificate's date is called: a draft is drafted, not issued."""
    return "Drafted" if draft else "Date of issue"


def header_text(draft: bool, number, revision) -> str:
    """The identification at the top right of every page.

    >>> header_text(False, "AMTL-H-1-0A", 2), header_text(True, None, None)
    ('Certificate No. AMTL-H-1-0A, revision 2', 'DRAFT — no certificate number')
    """
    if draft:
        return "DRAFT — no certificate number"
    return f"Certificate No. {number}" + (f", revision {revision}" if revision is not None else "")


def _e(text) -> str:
    return escape(str(text))


#: symbols written in plain ASCII by the checks and notes, and how they are set
_SYMBOLS = {
    "P_max": "P<sub>max</sub>", "P_Q": "P<sub>Q</sub>", "P_5": "P<sub>5</sub>", "K_Q": "K<sub>Q</sub>",
    "K_max": "K<sub>max</sub>", "K_Ic": "K<sub>Ic</sub>", "K_J": "K<sub>J</sub>", "K_Jc": "K<sub>Jc</sub>",
    "K_Jc(limit)": "K<sub>Jc(limit)</sub>", "F_max": "F<sub>max</sub>", "F_Q": "F<sub>Q</sub>",
    "K_f": "K<sub>f</sub>", "a_s1": "a<sub>s1</sub>", "a_s2": "a<sub>s2</sub>", "a_s": "a<sub>s</sub>",
    "R_p0.2": "R<sub>p0.2</sub>", "J_m": "J<sub>m</sub>", "J_c": "J<sub>c</sub>", "J_Q": "J<sub>Q</sub>",
    "J_Ic": "J<sub>Ic</sub>", "delta_m": "δ<sub>m</sub>", "delta_c": "δ<sub>c</sub>",
    "delta_u": "δ<sub>u</sub>", "delta": "δ", "b0": "b<sub>0</sub>", "a0": "a<sub>0</sub>",
    "r_p": "r<sub>p</sub>", "eta": "η", "nu": "ν", "sigma_YS": "σ<sub>YS</sub>", "sigma_ys": "σ<sub>YS</sub>",
    "sigma_Y": "σ<sub>Y</sub>", "sigma_TS": "σ<sub>TS</sub>", "a_compliance": "a<sub>compliance</sub>",
    "yield": "σ<sub>YS</sub>", "B_N": "B<sub>N</sub>",
}
_SYMBOL_RE = re.compile(r"(?<![A-Za-z0-9_])(" + "|".join(
    re.escape(k) for k in sorted(_SYMBOLS, key=len, reverse=True)) + r")(?![A-Za-z0-9_])")
_PLAIN = (("m^0.5", "m<super>½</super>"), ("^2", "²"), ("&lt;=", "≤"), ("&gt;=", "≥"),
          ("m^½", "m<super>½</super>"), ("MPa·m<super>½</super>", "MPa·√m"), ("MPa m<super>½</super>", "MPa·√m"))


def _words(text: str) -> str:
    """The checks' and notes' plain-ASCII symbols set for reading (reportlab markup).

    "yield" is taken as σ_YS only inside a formula, after a slash.

    >>> _words("W - a >= 2.5 (K_Q/yield)^2, the yield strength")
    'W - a ≥ 2.5 (K<sub>Q</sub>/σ<sub>YS</sub>)², the yield strength'
    """
    t = _e(text)
    t = _SYMBOL_RE.sub(lambda m: _SYMBOLS[m.group(1)] if m.group(1) != "yield" or
                       t[max(0, m.start() - 1)] == "/" else m.group(1), t)
    for a, b in _PLAIN:
        t = t.replace(a, b)
    return t


def _clause(text: str) -> str:
    """The clause reference without a long parenthetical restating the requirement.

    >>> _clause("ASTM E399 clause 9.1.3 (P_max/P_Q <= 1.10 for every record type), from memory")
    'ASTM E399 clause 9.1.3, from memory'
    """
    out = re.sub(r"\s*\([^()]{25,}\)", "", text)
    return out if re.search(r"[A-Za-z]", out) else text


def check_title(name: str) -> str:
    """A check's name for people (markup for reportlab).

    >>> check_title("ligament_size"), check_title("ep_a_over_W")
    ('Ligament W − a size', 'Ep a over W')
    """
    words = name.replace("_", " ")
    return CHECK_TITLES.get(name) or _e(words[:1].upper() + words[1:])


def results_cells(d: dict) -> list[str]:
    """The results-table row of one reduced specimen, as printed.

    Parameters
    ----------
    d : dict
        A result as :meth:`Result.to_dict` gives it (or as embedded).
    """
    sd = d.get("specimen_data") or {}
    return [str(d.get("specimen")), _f(sd.get("B_mm")), _f(sd.get("B_N_mm")), _f(sd.get("W_mm")),
            _f(sd.get("S_mm")), _f(d.get("a_mm")), _f(d.get("a_over_W"), 3), _f(sd.get("yield_MPa"), 0),
            _f(d.get("P_max_kN")), _f(d.get("P_Q_kN")), _f(d.get("P_max_over_P_Q"), 3),
            _f(d.get("K_Q_MPa_sqrt_m"), 1), "yes" if d.get("valid") else "no", _f(d.get("K_Ic_MPa_sqrt_m"), 1)]


def verdict_markup(d: dict) -> str:
    """The specimen page's verdict, without the reasons (reportlab markup)."""
    K_Q = _f(d.get("K_Q_MPa_sqrt_m"), 1)
    if d.get("valid"):
        return f"K<sub>Q</sub> = {K_Q} MPa·√m qualifies: K<sub>Ic</sub> = {_f(d.get('K_Ic_MPa_sqrt_m'), 1)} MPa·√m"
    return f"K<sub>Q</sub> = {K_Q} MPa·√m does not qualify as K<sub>Ic</sub>"


def _given(x, unit="", none="not given"):
    """A sheet value as entered (``:g`` keeps what was typed, 71.7 not 71.70)."""
    return none if x is None else f"{x:g}{unit}"


def specimen_inputs(d: dict) -> list[tuple[str, str]]:
    """(label, value) of every input a reviewer needs to re-check one specimen's numbers.

    Dimensions, moduli and strengths as the reduction used them (sheet
    values converted to mm and MPa); what was assumed says so.

    >>> d = {"displacement_type": "load_line", "specimen_data": {"E_MPa": 71700.0, "yield_MPa": 420.0,
    ...      "tensile_MPa": None, "precrack_Kmax_MPa_sqrt_m": 16.2, "B_mm": 25.0, "W_mm": 50.0}}
    >>> dict(specimen_inputs(d))["E"], dict(specimen_inputs(d))["sigma_TS"]
    ('71.7 GPa', 'not given: sigma_Y = sigma_YS used')
    """
    sd = d.get("specimen_data") or {}
    ep = d.get("elastic_plastic") if isinstance(d.get("elastic_plastic"), dict) else {}
    dims = sd.get("dims_mm") or {}
    E = sd.get("E_MPa")
    if ep.get("poisson") is not None:
        nu = f"{ep['poisson']:g} ({'assumed: not given' if ep.get('poisson_assumed') else 'given'})"
    else:
        nu = _given(sd.get("poisson"))
    z = dims.get("z")
    out = [("B", _given(sd.get("B_mm"), " mm")), ("B_N", _given(sd.get("B_N_mm"), " mm", "none (no side grooves)")),
           ("W", _given(sd.get("W_mm"), " mm"))]
    if sd.get("S_mm") is not None:
        out.append(("S", _given(sd["S_mm"], " mm")))
    out += [(k, _given(v, " mm")) for k, v in dims.items() if k != "z"]
    out += [("E", "not given" if E is None else f"{E / 1000:g} GPa"),
            ("sigma_YS", _given(sd.get("yield_MPa"), " MPa")),
            ("sigma_TS", _given(sd.get("tensile_MPa"), " MPa", "not given: sigma_Y = sigma_YS used")),
            ("nu", nu),
            ("Precrack K_max", _given(sd.get("precrack_Kmax_MPa_sqrt_m"), " MPa·√m")),
            ("Knife-edge z", _given(z, " mm", "not given: 0 used for the CTOD")),
            ("Displacement", _DISPLACEMENT_WORDS.get(d.get("displacement_type"), str(d.get("displacement_type")))
             + ("" if sd.get("displacement_type") else " (the geometry's default)"))]
    if ep.get("sigma_Y_MPa") is not None:
        out.append(("sigma_Y (for J, CTOD)", f"{significant(ep['sigma_Y_MPa'])} MPa"))
    if sd.get("temperature_C") is not None:
        out.append(("Test temperature", f"{sd['temperature_C']:g} °C"))
    return out


def _common(values, unit="", nd=None):
    vals = sorted({v for v in values if v is not None}, key=str)
    if not vals:
        return "not stated"
    fmt = (lambda v: f"{v:.{nd}f}{unit}") if nd is not None else (lambda v: f"{v}{unit}")
    return ", ".join(fmt(v) for v in vals)


# ---------------------------------------------------------------- document

@dataclass(frozen=True)
class CertificateInfo:
    """What :func:`build_certificate` wrote."""

    path: Path
    pages: int
    number: str | None
    digest: str
    payload: dict


class _Styles:
    def __init__(self):
        from reportlab.lib.colors import HexColor
        from reportlab.lib.styles import ParagraphStyle

        _register_fonts()
        base = ParagraphStyle("body", fontName="CT-Sans", fontSize=8.5, leading=11)
        self.body = base
        self.para = ParagraphStyle("para", base, spaceAfter=4)
        self.small = ParagraphStyle("small", base, fontSize=7.2, leading=9.6, spaceBefore=1)
        self.cell = ParagraphStyle("cell", base, fontSize=7.2, leading=9.6)
        self.cell_s = ParagraphStyle("cell_s", self.cell, fontSize=6.6, leading=9.2)
        self.warn = ParagraphStyle("warn", self.small, textColor=HexColor("#7a5a00"))
        self.cell_c = ParagraphStyle("cell_c", self.cell, alignment=1)
        self.cell_r = ParagraphStyle("cell_r", self.cell, alignment=2)
        self.head = ParagraphStyle("head", self.cell, fontName="CT-Sans-Bold", alignment=1, leading=11.5)
        self.head_l = ParagraphStyle("head_l", self.head, alignment=0)
        self.mono = ParagraphStyle("mono", self.cell, fontName="CT-Mono", fontSize=6.6, leading=8.4)
        self.h1 = ParagraphStyle("h1", base, fontName="CT-Sans-Bold", fontSize=15, leading=19,
                                 spaceAfter=2)
        self.sub = ParagraphStyle("sub", base, fontSize=9.5, leading=12, textColor=HexColor("#444444"),
                                  spaceAfter=6)
        self.h2 = ParagraphStyle("h2", base, fontName="CT-Sans-Bold", fontSize=10.5, leading=13,
                                 spaceBefore=8, spaceAfter=4, textColor=HexColor("#1b3a5c"))
        self.h3 = ParagraphStyle("h3", base, fontName="CT-Sans-Bold", fontSize=8.8, leading=12,
                                 spaceBefore=7, spaceAfter=2)
        self.verdict_ok = ParagraphStyle("vok", base, fontName="CT-Sans-Bold", fontSize=9.5, leading=12,
                                         textColor=HexColor("#1d5e2a"))
        self.verdict_no = ParagraphStyle("vno", self.verdict_ok, textColor=HexColor("#8a1c1c"))


_FONTS_DONE = False


def _register_fonts():
    """DejaVu Sans from matplotlib's own data (σ, √, ½, −, ≤ are needed; always installed with it)."""
    global _FONTS_DONE
    if _FONTS_DONE:
        return
    import matplotlib
    from reportlab.lib.fonts import addMapping
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    d = Path(matplotlib.get_data_path()) / "fonts" / "ttf"
    faces = {"CT-Sans": "DejaVuSans.ttf", "CT-Sans-Bold": "DejaVuSans-Bold.ttf",
             "CT-Sans-Oblique": "DejaVuSans-Oblique.ttf", "CT-Sans-BoldOblique": "DejaVuSans-BoldOblique.ttf",
             "CT-Mono": "DejaVuSansMono.ttf"}
    for name, file in faces.items():
        pdfmetrics.registerFont(TTFont(name, str(d / file)))
    addMapping("CT-Sans", 0, 0, "CT-Sans")
    addMapping("CT-Sans", 1, 0, "CT-Sans-Bold")
    addMapping("CT-Sans", 0, 1, "CT-Sans-Oblique")
    addMapping("CT-Sans", 1, 1, "CT-Sans-BoldOblique")
    _FONTS_DONE = True


def _table(data, widths, *, header_rows=1, zebra=True, align_right_from=None, extra=()):
    from reportlab.lib.colors import HexColor
    from reportlab.platypus import Table, TableStyle

    t = Table(data, colWidths=widths, repeatRows=header_rows)
    style = [
        ("FONT", (0, 0), (-1, -1), "CT-Sans", 7.2),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LINEBELOW", (0, header_rows - 1), (-1, header_rows - 1), 0.7, HexColor("#1b3a5c")),
        ("LINEABOVE", (0, 0), (-1, 0), 0.7, HexColor("#1b3a5c")),
        ("LINEBELOW", (0, -1), (-1, -1), 0.7, HexColor("#1b3a5c")),
        ("TOPPADDING", (0, 0), (-1, -1), 2), ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
        ("LEFTPADDING", (0, 0), (-1, -1), 3), ("RIGHTPADDING", (0, 0), (-1, -1), 3),
    ]
    if header_rows:
        style.append(("BACKGROUND", (0, 0), (-1, header_rows - 1), HexColor("#e4eaf1")))
    if zebra:
        for i in range(header_rows, len(data)):
            if (i - header_rows) % 2:
                style.append(("BACKGROUND", (0, i), (-1, i), HexColor("#f5f7f9")))
    if align_right_from is not None:
        style.append(("ALIGN", (align_right_from, header_rows), (-1, -1), "RIGHT"))
    style.extend(extra)
    t.setStyle(TableStyle(style))
    return t


def _kv_table(pairs, widths, st):
    """Label/value pairs laid out as rows of (label, value, label, value)."""
    from reportlab.platypus import Paragraph

    rows = []
    for i in range(0, len(pairs), 2):
        row = []
        for label, value in pairs[i:i + 2]:
            row += [Paragraph(f"<b>{label}</b>", st.cell), Paragraph(value, st.cell)]
        while len(row) < 4:
            row.append("")
        rows.append(row)
    return _table(rows, widths, header_rows=0, zebra=False,
                  extra=[("LINEBELOW", (0, 0), (-1, -2), 0.25, "#c9d1da")])


class _Doc:
    """The flowables of one certificate, section by section."""

    def __init__(self, heat, rows, lab, rules, sheet_path, sheet_sha256, opts, digest, st):
        from reduce.rules import rule_set

        self.heat, self.rows, self.lab, self.rules = heat, rows, lab, rules
        self.rule_title = rule_set(rules)["title"]
        self.core = set(rule_set(rules)["core_checks"])
        self.advisory = set(rule_set(rules).get("advisory_checks", ()))
        self.sheet_path, self.sheet_sha = Path(sheet_path), sheet_sha256
        self.o, self.digest, self.st = opts, digest, st
        self.ok = [(r, rec, s) for r, rec, s in rows if r.error is None]
        self.failed = [(r, rec, s) for r, rec, s in rows if r.error is not None]

    # page 1 --------------------------------------------------------------
    def title(self):
        from reportlab.platypus import Paragraph, Spacer

        st, o = self.st, self.o
        kind = "DRAFT fracture-toughness test certificate" if o["draft"] else "Fracture-toughness test certificate"
        out = [Paragraph(kind, st.h1),
               Paragraph(f"Plane-strain fracture toughness K<sub>Ic</sub> / K<sub>Q</sub> — "
                         f"{_e(self.rule_title)}", st.sub)]
        lab = self.lab
        left = [f"<b>{'Prepared by' if o['draft'] else 'Issued by'}</b><br/>{_e(lab['name'])}"] + \
            [_e(a) for a in lab["address"]]
        if lab.get("accreditation"):
            left.append(f"<i>{_e(lab['accreditation'])}</i>")
        if lab.get("contact"):
            left.append(_e(lab["contact"]))
        number = _e(o["number"]) if o["number"] else "none (draft)"
        right = [("Certificate No.", f"<b>{number}</b>")]
        if o.get("revision") is not None:
            right.append(("Revision", _e(o["revision"])))
        if o.get("supersedes"):
            right.append(("Supersedes", _e(o["supersedes"])))
        right += [(date_label(o["draft"]), _e(o["issue_date"])),
                  ("Status", "DRAFT — not valid as a certificate" if o["draft"] else "issued")]
        if o.get("approval"):
            a = o["approval"]
            right.append(("Approval", _e(f"{a.get('decision', '')} by {a.get('approver', '')}, "
                                        f"{a.get('date', '')}")))
        from reportlab.lib.units import mm
        from reportlab.platypus import Table, TableStyle

        rtab = Table([[Paragraph(f"<b>{k}</b>", st.cell), Paragraph(v, st.cell)] for k, v in right],
                     colWidths=[27 * mm, 55 * mm])
        rtab.setStyle(TableStyle([("TOPPADDING", (0, 0), (-1, -1), 1.5),
                                  ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
                                  ("LINEBELOW", (0, 0), (-1, -2), 0.25, "#c9d1da")]))
        box = Table([[Paragraph("<br/>".join(left), st.body), rtab]], colWidths=[88 * mm, 86 * mm])
        box.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"),
                                 ("BOX", (0, 0), (-1, -1), 0.6, "#1b3a5c"),
                                 ("LINEAFTER", (0, 0), (0, 0), 0.3, "#9aa8b8"),
                                 ("TOPPADDING", (0, 0), (-1, -1), 5), ("BOTTOMPADDING", (0, 0), (-1, -1), 5),
                                 ("LEFTPADDING", (0, 0), (-1, -1), 6)]))
        return out + [box, Spacer(1, 6)]

    def identification(self):
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        specs = [s for _, _, s in self.rows if hasattr(s, "metadata")]
        meta = lambda key: _common([s.metadata.get(key) for s in specs])  # noqa: E731
        geos = sorted({r.geometry for r, _, _ in self.rows if r.geometry})
        pairs = [("Material", _e(meta("material"))), ("Heat", f"<b>{_e(self.heat)}</b>")]
        for key, label in (("supplier", "Supplier"), ("customer", "Customer"), ("order", "Order")):
            if any(s.metadata.get(key) for s in specs):
                pairs.append((label, _e(meta(key))))
        pairs += [
            ("Test method", _e(f"{self.rule_title}; 5 % secant construction")),
            ("Rule set", _e(self.rules)),
            ("Specimen type", _e(", ".join(geos) or "not stated")),
            ("Specimens", f"{len(self.rows)} ({len(self.ok)} reduced, {len(self.failed)} not reduced)"),
            ("Test temperature", _e(_common([getattr(s, "temperature_C", None) for s in specs], " °C", 1))),
            ("Orientation", _e(_common([getattr(s, "orientation", None) for s in specs]))),
            ("Test sheet", _e(self.sheet_path.name)),
            ("Program", _e(f"cracktip {self.o['program_version']}")),
        ]
        return [Paragraph("Identification", self.st.h2),
                _kv_table(pairs, [25 * mm, 62 * mm, 25 * mm, 62 * mm], self.st)]

    def results(self):
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        st = self.st
        heads = ["Specimen", "B<br/>mm", "B<sub>N</sub><br/>mm", "W<br/>mm", "S<br/>mm", "a<br/>mm", "a/W",
                 "σ<sub>YS</sub><br/>MPa", "P<sub>max</sub><br/>kN", "P<sub>Q</sub><br/>kN",
                 "P<sub>max</sub>/<br/>P<sub>Q</sub>", "K<sub>Q</sub><br/>MPa√m", "Valid",
                 "K<sub>Ic</sub><br/>MPa√m"]
        data = [[Paragraph(h, st.head if i else st.head_l) for i, h in enumerate(heads)]]
        for r, _, _ in self.ok:
            cells = results_cells(r.to_dict())
            data.append([Paragraph(_e(cells[0]), st.cell)] + cells[1:])
        w = [19 * mm] + [11.2 * mm] * 10 + [13.6 * mm, 9.8 * mm, 13.6 * mm]
        extra = [("ALIGN", (12, 1), (12, -1), "CENTER"), ("FONT", (13, 1), (13, -1), "CT-Sans-Bold", 7.2)]
        for i, (r, _, _) in enumerate(self.ok, start=1):
            if not r.valid:
                extra.append(("TEXTCOLOR", (12, i), (12, i), "#8a1c1c"))
        out = [Paragraph("Results", st.h2),
               _table(data, w, align_right_from=1, extra=extra),
               Paragraph("K<sub>Ic</sub> is given only where K<sub>Q</sub> qualifies under the rule set; "
                         "'—' means it does not. a is the average of the crack-length readings.", st.small)]
        reasons = [(r.specimen, r.reasons) for r, _, _ in self.ok if not r.valid]
        if reasons:
            rows = [[Paragraph("Specimen", st.head_l), Paragraph("Why K<sub>Q</sub> is not K<sub>Ic</sub>", st.head_l)]]
            rows += [[Paragraph(_e(s), st.cell), Paragraph("; ".join(_words(x) for x in why) or
                                                           "not qualified", st.cell)]
                     for s, why in reasons]
            out += [Paragraph("Results that do not qualify as K<sub>Ic</sub>", st.h3),
                    _table(rows, [19 * mm, 155 * mm])]
        out += self.elastic_plastic_summary() + self.caveats()
        if self.failed:
            out += self.failed_rows()
        return out

    def elastic_plastic_summary(self):
        """J, K_J and CTOD per specimen where the reduction gives them (reduce/elastic_plastic.py)."""
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        st = self.st
        eps = [(r, r.extra.get("elastic_plastic")) for r, _, _ in self.ok]
        eps = [(r, ep) for r, ep in eps if isinstance(ep, dict) and
               (ep.get("J_kJ_per_m2") is not None or ep.get("CTOD_mm") is not None)]
        if not eps:
            return []
        def passed(ep, q):
            # reduce/elastic_plastic.py: verdicts[q]["passed"] is True, False or None (not assessed)
            v = ((ep.get("verdicts") or {}).get(q) or {}).get("passed", ep.get(f"{q}_valid"))
            return "not assessed" if v is None else ("yes" if v else "no")

        heads = ["Specimen", "Event", "J<br/>kJ/m²", "J size<br/>check passed", "K<sub>J</sub><br/>MPa√m",
                 "K<sub>J</sub> size<br/>check passed", "CTOD<br/>mm", "CTOD size<br/>check passed"]
        data = [[Paragraph(h, st.head if i > 1 else st.head_l) for i, h in enumerate(heads)]]
        for r, ep in eps:
            event = ep.get("event") or {"P_max": "first attainment of P_max",
                                        "instability": "instability (end of record)"}.get(ep.get("point"))
            data.append([Paragraph(_e(r.specimen), st.cell), Paragraph(_words(event or "—"), st.cell),
                         _f(ep.get("J_kJ_per_m2"), 1), Paragraph(passed(ep, "J"), st.cell_c),
                         _f(ep.get("K_J_MPa_sqrt_m"), 1), Paragraph(passed(ep, "K_J"), st.cell_c),
                         _f(ep.get("CTOD_mm"), 4), Paragraph(passed(ep, "CTOD"), st.cell_c)])
        return [Paragraph("Elastic–plastic results", st.h3),
                _table(data, [19 * mm, 45 * mm, 18 * mm, 18 * mm, 19 * mm, 18 * mm, 19 * mm, 18 * mm],
                       align_right_from=2, extra=[("ALIGN", (c, 1), (c, -1), "CENTER") for c in (3, 5, 7)]),
                Paragraph("Computed from the same records; the rules applied (ASTM E1820 for J, ASTM E1921 "
                          "for K<sub>J</sub>, ISO 12135 for CTOD) and what was not assessed are stated on each "
                          "specimen page. They are not K<sub>Ic</sub>.", st.small)]

    def caveats(self):
        """Caveats of the geometry definitions and failed advisory checks, per specimen."""
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        st = self.st
        items = [(r.specimen, kind, text) for r, _, _ in self.ok
                 for kind, texts in (("caveat", r.caveats), ("warning", r.warnings)) for text in texts]
        if not items:
            return []
        rows = [[Paragraph(h, st.head_l) for h in ("Specimen", "Kind", "Text")]]
        rows += [[Paragraph(_e(sp), st.cell), kind, Paragraph(_words(t), st.cell)] for sp, kind, t in items]
        return [Paragraph("Caveats and warnings", st.h3),
                _table(rows, [19 * mm, 16 * mm, 139 * mm], extra=[("TEXTCOLOR", (1, 1), (1, -1), "#7a5a00")])]

    def failed_rows(self):
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        st = self.st
        rows = [[Paragraph(h, st.head_l) for h in ("Specimen", "Sheet row", "Why it was not reduced")]]
        for r, _, s in self.failed:
            rows.append([Paragraph(_e(r.specimen), st.cell), str(getattr(s, "row", "") or "—"),
                         Paragraph(_e(r.error), st.cell)])
        return [Paragraph(f"Specimens not reduced ({len(self.failed)})", st.h3),
                Paragraph("These rows of the test sheet could not be reduced; this certificate was issued "
                          "with them at the user's explicit request. They have no result.", st.small),
                _table(rows, [19 * mm, 16 * mm, 139 * mm], extra=[("TEXTCOLOR", (0, 1), (-1, -1), "#8a1c1c")])]

    # statements -----------------------------------------------------------
    def assessment(self):
        from reportlab.platypus import Paragraph

        st = self.st
        done = ("Assessed by cracktip for every reduced specimen: the initial slope, the origin "
                "correction and the 5 % secant construction on the load–displacement record (P<sub>5</sub>, "
                "P<sub>Q</sub>, P<sub>max</sub>, record type); K<sub>Q</sub> from the specimen's K calibration; "
                f"and the checks of rule set {_e(self.rules)} listed on each specimen page, with the result "
                "pass, fail or not assessed.")
        out = [Paragraph("What was and was not assessed", st.h2), Paragraph(done, st.para)]
        missing: dict[str, list[str]] = {}
        notes: dict[str, str] = {}
        for r, _, _ in self.ok:
            for c in r.checks:
                if c.passed is None:
                    missing.setdefault(c.name, []).append(r.specimen)
                    notes.setdefault(c.name, c.note)
        if missing:
            items = "".join(
                f"<br/>• {CHECK_TITLES.get(n, _e(n))}{' (core check: K_Ic cannot be given)' if n in self.core else ''}: "
                f"{_e(', '.join(specs))} — {_e(notes[n])}" for n, specs in missing.items())
            out.append(Paragraph("Not assessed for lack of data:" + items, st.para))
        else:
            out.append(Paragraph("Every check of the rule set was assessed for every reduced specimen.", st.para))
        if self.failed:
            out.append(Paragraph(f"Not assessed at all: {len(self.failed)} specimen(s) that could not be "
                                 "reduced (listed above).", st.para))
        out.append(Paragraph(_words(NOT_ASSESSED_BY_PROGRAM), st.para))
        return out

    def cautions(self):
        from reportlab.platypus import Paragraph

        return [Paragraph("Cautions", self.st.h2)] + [
            Paragraph(f"{i}. {_words(c)}", self.st.para) for i, c in enumerate(CAUTIONS, start=1)]

    def traceability(self):
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        st = self.st
        rows = [[Paragraph(h, st.head_l) for h in ("Specimen", "Record file", "SHA-256 of the record")]]
        for r, _, _ in self.rows:
            rows.append([Paragraph(_e(r.specimen), st.cell), Paragraph(_e(r.record or "—"), st.cell),
                         Paragraph(_e(r.record_sha256 or "not read"), st.mono)])
        rows.append([Paragraph("<b>Test sheet</b>", st.cell), Paragraph(_e(self.sheet_path.name), st.cell),
                     Paragraph(_e(self.sheet_sha), st.mono)])
        text = (f"Program cracktip {_e(self.o['program_version'])}; rule set {_e(self.rules)} "
                f"({_e(self.rule_title)}). The results of this certificate are embedded in this PDF as "
                f"the attachment <b>{ATTACHMENT_NAME}</b> (JSON), for import without retyping. "
                f"To check the certificate against the records: <b>cracktip verify</b> "
                f"<i>certificate.pdf</i> <b>--records</b> <i>folder</i>.")
        return [Paragraph("Traceability", st.h2), Paragraph(text, st.para),
                _table(rows, [19 * mm, 52 * mm, 103 * mm],
                       extra=[("LINEABOVE", (0, -1), (-1, -1), 0.5, "#1b3a5c")]),
                Paragraph(f"Results digest (SHA-256): <font name='CT-Mono'>{self.digest}</font>", st.small)]

    def signatures(self):
        from reportlab.lib.units import mm
        from reportlab.platypus import KeepTogether, Paragraph, Spacer

        st = self.st
        if self.o["draft"]:
            return [Paragraph("Signatures", st.h2),
                    Paragraph("DRAFT — not for signature. A draft has no certificate number and is not a "
                              "certificate.", st.verdict_no)]
        cells = []
        for s in self.lab["signatories"]:
            cells.append([Paragraph(f"<b>{_e(s['role'])}</b><br/>{_e(s['name'])}", st.cell),
                          Spacer(1, 14), Paragraph("Signature ___________________________", st.cell),
                          Spacer(1, 6), Paragraph("Date ________________", st.cell)])
        n = len(cells)
        per_row = 2
        data = [cells[i:i + per_row] + [""] * (per_row - len(cells[i:i + per_row])) for i in range(0, n, per_row)]
        t = _table(data, [87 * mm, 87 * mm], header_rows=0, zebra=False,
                   extra=[("TOPPADDING", (0, 0), (-1, -1), 6), ("BOTTOMPADDING", (0, 0), (-1, -1), 8)])
        return [KeepTogether([Paragraph("Signatures", st.h2), t])]

    # specimen pages -------------------------------------------------------
    def specimen_page(self, result, record, spec):
        from reportlab.lib.units import mm
        from reportlab.platypus import Image, PageBreak, Paragraph, Spacer

        from reports.plots import plot_bytes

        st, r = self.st, result
        d = r.specimen_data
        where = ", ".join(x for x in (r.geometry, d.get("orientation"),
                                      None if d.get("temperature_C") is None else f"{d['temperature_C']:.1f} °C",
                                      _DISPLACEMENT_WORDS.get(r.displacement_type, r.displacement_type))
                          if x)
        out = [Paragraph(f"Specimen {_e(r.specimen)}  <font size='9' color='#444444'>{_e(where)}</font>", st.h2),
               Paragraph(f"Record <b>{_e(r.record)}</b>, SHA-256 <font name='CT-Mono' size='6.6'>"
                         f"{_e(r.record_sha256)}</font>", st.small)]
        if record is not None:
            size = (6.7, 4.2)
            w_mm = 168
            png = plot_bytes(r, record.load_kN, record.disp_mm, fmt="png", dpi=220, title="", size_in=size)
            out += [Spacer(1, 1), Image(io.BytesIO(png), width=w_mm * mm, height=w_mm * size[1] / size[0] * mm)]
        out += [self._verdict(r)]
        out += [Paragraph("Construction", st.h3), self._construction(r)]
        out += [Paragraph("Crack-front readings", st.h3), self._front(r)]
        out += [Paragraph("Inputs used (from the test sheet unless marked)", st.h3), self._inputs(r)]
        # the second page of a specimen: its checks and everything else said about it
        out += [PageBreak(), Paragraph(f"Specimen {_e(r.specimen)} (continued)", st.h2)]
        out += [Paragraph("Validity checks", st.h3), self._checks(r),
                Paragraph("* core check: K<sub>Q</sub> qualifies as K<sub>Ic</sub> only if every core check is "
                          "assessed and passes and no other check fails. † advisory: shown, does not decide "
                          "validity.", st.small)]
        out += self._elastic_plastic(r) + self._extra(r)
        for c in r.caveats:
            out.append(Paragraph("Caveat: " + _words(c), st.warn))
        for w in r.warnings:
            out.append(Paragraph("Warning: " + _words(w), st.warn))
        notes = [n for n in [r.curve_note] + list(r.record_notes) if n]
        if notes:
            out.append(Paragraph("Notes: " + "; ".join(_words(n) for n in notes), st.small))
        return out

    def _elastic_plastic(self, r):
        """The elastic–plastic sentences of reports.elastic_plastic_text, where there are any."""
        from reportlab.platypus import Paragraph

        if not isinstance(r.extra.get("elastic_plastic"), dict):
            return []
        from reports.elastic_plastic_text import elastic_plastic_paragraph

        lines = elastic_plastic_paragraph(r.to_dict())[1:]  # the first restates the K_Ic verdict
        if not lines:
            return []
        return [Paragraph("Elastic–plastic results (not K<sub>Ic</sub>)", self.st.h3)] + [
            Paragraph("• " + _words(x), self.st.small) for x in lines]

    def _construction(self, r):
        from reportlab.lib.units import mm

        lo_hi = r.fit_window_fraction_of_P_max
        band = f"{lo_hi[0]:.0%} to {lo_hi[1]:.0%} of P<sub>max</sub>" if lo_hi else "—"
        pairs = [
            ("Initial slope k", f"{_f(r.initial_slope_kN_per_mm)} kN/mm (r² = {_f(r.fit_r_squared, 5)})"),
            ("Fitted load band", band),
            ("Origin correction v<sub>0</sub>", f"{_f(r.origin_offset_mm, 4)} mm"),
            ("95 % secant slope", f"{_f(r.secant_slope_kN_per_mm)} kN/mm"),
            ("P<sub>5</sub>", f"{_f(r.P_5_kN, 3)} kN" if r.P_5_kN is not None else "not reached"),
            ("Record type", _e(r.curve_type)),
            ("P<sub>Q</sub>", f"{_f(r.P_Q_kN, 3)} kN"),
            ("P<sub>max</sub>", f"{_f(r.P_max_kN, 3)} kN (P<sub>max</sub>/P<sub>Q</sub> = {_f(r.P_max_over_P_Q, 3)})"),
            ("f(a/W)", _f(r.f_a_over_W, 4)),
            ("K<sub>Q</sub>", f"<b>{_f(r.K_Q_MPa_sqrt_m, 2)} MPa·√m</b> ({_f(r.K_Q_ksi_sqrt_in, 2)} ksi·√in)"),
        ]
        return _kv_table(pairs, [34 * mm, 53 * mm, 30 * mm, 57 * mm], self.st)

    def _checks(self, r):
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        st = self.st
        rows = [[Paragraph(h, st.head_l) for h in ("Check", "Value", "Unit", "Requirement", "Result",
                                                     "Clause / note")]]
        for c in r.checks:
            # a no-break space keeps the mark with the last word of the title
            mark = "\u00a0*" if c.name in self.core else "\u00a0†" if c.name in self.advisory else ""
            colour = {True: "#1d5e2a", False: "#8a1c1c", None: "#7a5a00"}[c.passed]
            note = _words(_clause(c.clause)) + (f"<br/><i>{_words(c.note)}</i>" if c.note else "")
            unit = check_unit(c.name, c.limit) if c.value is not None else ""
            rows.append([Paragraph(check_title(c.name) + mark, st.cell),
                         Paragraph(_e(significant(c.value)), st.cell_r), Paragraph(_e(unit), st.cell_s),
                         Paragraph(_words(c.limit), st.cell_s),
                         Paragraph(f"<font color='{colour}'><b>{_VERDICT[c.passed]}</b></font>", st.cell),
                         Paragraph(note, st.cell_s)])
        return _table(rows, [33 * mm, 19 * mm, 16 * mm, 42 * mm, 14 * mm, 50 * mm])

    def _front(self, r):
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        st = self.st
        d = r.specimen_data
        a = list(d.get("a_readings_mm") or [])
        s = list(d.get("surface_mm") or [])
        heads = [f"a<sub>{i}</sub>" for i in range(1, len(a) + 1)] + ["a (average)"] + \
                [f"a<sub>s{i}</sub> (surface)" for i in range(1, len(s) + 1)]
        vals = [_f(x, 2) for x in a] + [_f(r.a_mm, 3)] + [_f(x, 2) for x in s]
        n = len(heads)
        w = [174 / n * mm] * n
        return _table([[Paragraph(h + "<br/>mm", st.head) for h in heads],
                       [Paragraph(v, st.cell_c) for v in vals]], w, zebra=False)

    def _extra(self, r):
        """Further results other modules put in Result.extra (dicts of scalars), as a table each."""
        from reportlab.lib.units import mm
        from reportlab.platypus import Paragraph

        out = []
        for key, block in r.extra.items():
            if key in _EXTRA_SHOWN or not isinstance(block, dict):
                continue
            items = [(k, v) for k, v in block.items() if isinstance(v, (int, float, str, bool)) or v is None]
            if not items:
                continue
            pairs = [(_e(k), _e(significant(v) if isinstance(v, float) else v)) for k, v in items]
            out += [Paragraph(_e(key.replace("_", " ").capitalize()), self.st.h3),
                    _kv_table(pairs, [35 * mm, 52 * mm, 35 * mm, 52 * mm], self.st)]
        return out

    def _verdict(self, r):
        from reportlab.platypus import Paragraph

        d = r.to_dict()
        if r.valid:
            return Paragraph(verdict_markup(d) + ".", self.st.verdict_ok)
        return Paragraph(verdict_markup(d) + ": " + "; ".join(_words(x) for x in r.reasons) + ".",
                         self.st.verdict_no)

    def _inputs(self, r):
        """Every input a reviewer needs to redo the numbers, as the reduction used it."""
        from reportlab.lib.units import mm

        pairs = [(_words(label), _words(value)) for label, value in specimen_inputs(r.to_dict())]
        return _kv_table(pairs, [34 * mm, 53 * mm, 34 * mm, 53 * mm], self.st)

    def story(self):
        from reportlab.platypus import PageBreak

        s = self.title() + self.identification() + self.results()
        s += [PageBreak()] + self.assessment() + self.cautions() + self.traceability() + self.signatures()
        for r, rec, spec in self.ok:
            s += [PageBreak()] + self.specimen_page(r, rec, spec)
        return s


def _page_decor(opts, lab, heat):
    """The header, footer and draft watermark drawn on every page."""
    from reportlab.lib.colors import Color, HexColor
    from reportlab.lib.pagesizes import A4
    from reportlab.lib.units import mm

    W, H = A4

    def draw(canv, doc):
        canv.saveState()
        if opts["draft"]:
            canv.setFillColor(Color(0.75, 0.1, 0.1, alpha=0.10))
            canv.setFont("CT-Sans-Bold", 120)
            canv.translate(W / 2, H / 2)
            canv.rotate(52)
            canv.drawCentredString(0, -40, "DRAFT")
            canv.rotate(-52)
            canv.translate(-W / 2, -H / 2)
        canv.setFillColor(HexColor("#1b3a5c"))
        canv.setFont("CT-Sans-Bold", 9)
        canv.drawString(18 * mm, H - 14 * mm, lab["name"])
        canv.setFont("CT-Sans", 8)
        canv.drawRightString(W - 18 * mm, H - 14 * mm, header_text(opts["draft"], opts["number"],
                                                                     opts.get("revision")))
        canv.drawRightString(W - 18 * mm, H - 18 * mm, f"Heat {heat} — fracture-toughness test")
        canv.setStrokeColor(HexColor("#1b3a5c"))
        canv.setLineWidth(0.6)
        canv.line(18 * mm, H - 20 * mm, W - 18 * mm, H - 20 * mm)
        canv.line(18 * mm, 15 * mm, W - 18 * mm, 15 * mm)
        canv.setFont("CT-Sans", 7)
        canv.setFillColor(HexColor("#444444"))
        canv.drawString(18 * mm, 11 * mm, f"cracktip {opts['program_version']} · rule set {opts['rules']} · "
                                          f"{'drafted' if opts['draft'] else 'issued'} {opts['issue_date']}")
        canv.restoreState()

    return draw


def _numbered_canvas():
    """A canvas class that writes "page n of N" once the page count is known."""
    from reportlab.lib.pagesizes import A4
    from reportlab.lib.units import mm
    from reportlab.pdfgen.canvas import Canvas

    class NumberedCanvas(Canvas):
        def __init__(self, *a, **kw):
            super().__init__(*a, **kw)
            self._pages = []

        def showPage(self):
            self._pages.append(dict(self.__dict__))
            self._startPage()

        def save(self):
            n = len(self._pages)
            for state in self._pages:
                self.__dict__.update(state)
                self.setFont("CT-Sans", 7)
                self.setFillColorRGB(0.27, 0.27, 0.27)
                self.drawRightString(A4[0] - 18 * mm, 11 * mm, f"page {self._pageNumber} of {n}")
                super().showPage()
            super().save()

    return NumberedCanvas


def build_certificate(path, heat, rows, lab: dict, rules: str, sheet_path, sheet_sha256: str, *,
                      draft: bool = False, certificate_number: str | None = None,
                      revision: int | None = None, supersedes: str | None = None,
                      approval: dict | None = None, include_failed: bool = False,
                      issue_date: str | None = None,
                      program_version: str = __version__) -> CertificateInfo:
    """Write the certificate of one heat.

    Parameters
    ----------
    path : str or Path
        The PDF to write (atomically).
    heat : str
        The heat the certificate covers.
    rows : list of (Result, Record or None, Specimen or BadRow)
        Every specimen of the heat, as :func:`reduce.pipeline.reduce_sheet`
        returns them.
    lab : dict
        A lab profile (:func:`load_lab_profile`).
    rules : str
        The rule set the results were reduced with.
    sheet_path, sheet_sha256 : str or Path, str
        The test sheet and the SHA-256 of its bytes.
    draft : bool
        A draft: DRAFT on every page, no certificate number, no signature blocks.
    certificate_number : str, optional
        Required unless ``draft``; ignored for a draft.
    revision, supersedes, approval : optional
        Revision number, the number of the certificate this one replaces,
        and an approval record ``{"approver", "date", "decision"}``.
    include_failed : bool
        Issue although rows failed to reduce; they are then listed.
    issue_date : str, optional
        ISO date printed as the date of issue (a draft's: "Drafted"); default
        today.  The caller checks it (``cracktip certify --date``).

    Returns
    -------
    CertificateInfo

    Raises
    ------
    ReportError
        If a row failed and ``include_failed`` is false, if the heat has no
        rows, or if an issued certificate has no number.

    References
    ----------
    ISO/IEC 17025:2017 clause 7.8.2, what a test report states (laboratory,
    unique identification on every page, page n of N, the method, the item
    tested, the results with units, who authorised it), from memory; the
    layout and wording are cracktip's own.
    """
    from pypdf import PdfReader, PdfWriter
    from reportlab.lib.pagesizes import A4
    from reportlab.lib.units import mm
    from reportlab.platypus import Frame, PageTemplate
    from reportlab.platypus.doctemplate import BaseDocTemplate

    if not rows:
        raise ReportError(f"heat {heat}: no specimens to certify")
    failed = [r.specimen for r, _, _ in rows if r.error is not None]
    if failed and not include_failed:
        raise ReportError(f"heat {heat}: {len(failed)} specimen(s) could not be reduced "
                          f"({', '.join(failed)}); no certificate is issued unless failed rows are "
                          "explicitly included")
    if draft:
        certificate_number = None
    elif not certificate_number:
        raise ReportError(f"heat {heat}: an issued certificate needs a certificate number")
    issue_date = issue_date or date.today().isoformat()
    results = [r for r, _, _ in rows]
    payload = certificate_payload(heat, results, rules, sheet_path, sheet_sha256, number=certificate_number,
                                  revision=revision, supersedes=supersedes, draft=draft, approval=approval,
                                  issue_date=issue_date, lab_name=lab["name"], program_version=program_version,
                                  certificate_path=path)
    digest = payload_digest(payload)
    opts = {"draft": draft, "number": certificate_number, "revision": revision, "supersedes": supersedes,
            "approval": approval, "issue_date": issue_date, "program_version": program_version, "rules": rules}
    st = _Styles()
    story = _Doc(heat, rows, lab, rules, sheet_path, sheet_sha256, opts, digest, st).story()

    buf = io.BytesIO()
    title = ("DRAFT certificate" if draft else f"Certificate {certificate_number}") + f", heat {heat}"
    doc = BaseDocTemplate(buf, pagesize=A4, leftMargin=18 * mm, rightMargin=18 * mm, topMargin=25 * mm,
                          bottomMargin=20 * mm, title=title, author=lab["name"],
                          subject="Fracture-toughness test certificate", creator=f"cracktip {program_version}")
    frame = Frame(doc.leftMargin, doc.bottomMargin, doc.width, doc.height, id="body",
                  leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
    doc.addPageTemplates([PageTemplate(id="page", frames=[frame], onPage=_page_decor(opts, lab, heat))])
    doc.build(story, canvasmaker=_numbered_canvas())

    writer = PdfWriter(clone_from=PdfReader(io.BytesIO(buf.getvalue())))
    attachment = json.dumps(payload, indent=2, ensure_ascii=False).encode("utf-8")
    writer.add_attachment(ATTACHMENT_NAME, attachment)
    writer.add_metadata({DIGEST_KEY: digest})
    pages = len(writer.pages)
    with atomic_path(path) as tmp:
        with open(tmp, "wb") as fh:
            writer.write(fh)
    return CertificateInfo(Path(path), pages, certificate_number, digest, payload)


def certificate_file_name(heat: str, number: str | None) -> str:
    """The file name of a heat's certificate (a draft is named after the heat).

    >>> certificate_file_name("H-7A21", "AMTL-H-7A21-3FA9C01D"), certificate_file_name("H/1", None)
    ('AMTL-H-7A21-3FA9C01D.pdf', 'DRAFT-H_1.pdf')
    """
    return f"{safe_name(number)}.pdf" if number else f"DRAFT-{safe_name(heat)}.pdf"
