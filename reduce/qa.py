"""The QA commands: ``accept``, ``approve``, ``history``, ``trend``, and what
``certify`` asks the store.

Where the store is: ``--db PATH``; else the environment variable
``CRACKTIP_DB``; else ``cracktip.db`` next to the sheet (commands that read
a sheet) or in the current folder (``approve``, ``history``, ``trend``).
``accept`` makes the store when it is missing; the other commands need one.

``accept`` is the command that records: it reduces the sheet, keeps every
reduction (a new version only when something changed), works out the
verdicts and keeps them with the reduction versions behind them — all in one
transaction.  ``--no-store`` prints and writes the verdicts without
recording them (nothing can then be approved).  ``reduce`` does not write to
the store: it is for looking at results; what QA decides on goes through
``accept``.

Approved results and certify (the policy the README states): the results
being certified are compared with the reduction versions the approver saw,
field by field — numbers within a relative :data:`RESULTS_REL_TOL` (and an
absolute :data:`RESULTS_ABS_TOL` for values near zero), everything else
(validity, checks, texts, record SHA-256, specimen description) exactly,
and the rule set's limits exactly.  Any difference makes a draft, and the
message names the specimen, the field and old → new.  The program version
alone does not: when a newer cracktip reproduces the approved results, the
approval stands; the certify message and the embedded approval record say
which version reduced the approved results and which made the certificate,
and the store keeps both (the approved reductions and the certificate row
each carry their program version).
"""

from __future__ import annotations

import argparse
import hashlib
import json
import math
import os
import sys
from contextlib import contextmanager
from pathlib import Path

from reduce.errors import ApprovalError, ReportError, StoreError

ENV_DB = "CRACKTIP_DB"
#: tolerance when results are compared with those approved (the same as ``verify``'s):
#: the same program on the same bytes gives the same floats; the margin only absorbs
#: a different numpy/BLAS build or summation order (common practice, no source)
RESULTS_REL_TOL = 1e-9
RESULTS_ABS_TOL = 1e-12
#: result keys that depend on where the files lie, not on the data (the record's
#: SHA-256 is compared)
LOCATION_KEYS = ("record", "record_notes")
#: shown first when results differ: the inputs, then what the verdict rests on
_FIRST_FIELDS = ("specimen_data", "record_sha256", "valid", "K_Ic_MPa_sqrt_m", "K_Q_MPa_sqrt_m", "P_Q_kN",
                 "a_mm", "checks")
#: fewer values than this make a trend bound very uncertain (common practice, no source)
TREND_FEW_VALUES = 10
#: plot formats the trend writes, by suffix
TREND_FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}


# ---------------------------------------------------------------- the store's place

def store_path(db=None, sheet=None) -> Path:
    """Where the store is (see the module docstring)."""
    if db:
        return Path(db)
    if os.environ.get(ENV_DB):
        return Path(os.environ[ENV_DB])
    from reduce.store import DEFAULT_NAME

    return (Path(sheet).parent if sheet else Path.cwd()) / DEFAULT_NAME


def add_db_option(parser, where: str) -> None:
    parser.add_argument("--db", metavar="PATH",
                        help=f"QA store (SQLite); default ${ENV_DB}, else cracktip.db {where}")


def _argv() -> list:
    return ["cracktip"] + sys.argv[1:]


def rule_set_content(rules: str) -> dict:
    """The rule set exactly as applied: its limits and the secant ratio."""
    from reduce.rules import rule_set, secant_ratio

    return {"name": rules, "limits": rule_set(rules), "secant_ratio": secant_ratio()}


def file_sha256(path) -> str:
    return hashlib.sha256(Path(path).read_bytes()).hexdigest()


def record_reductions(store, rows, rules: str, sheet) -> dict:
    """Keep every reduction of a sheet in the store (inside its transaction).

    Parameters
    ----------
    store : reduce.store.Store
    rows : list of (Result, Record or None, Specimen or BadRow)
    rules : str
    sheet : str or Path

    Returns
    -------
    dict
        specimen -> :class:`reduce.store.StoredReduction` (``new`` tells
        whether this run added the version).
    """
    from reduce.pipeline import record_path

    content = rule_set_content(rules)
    sheet = Path(sheet).resolve()
    sha = file_sha256(sheet)
    out = {}
    for result, _, row in rows:
        rec = None
        if getattr(row, "record", None) and getattr(row, "sheet", None):
            rec = str(record_path(row).resolve())
        out[result.specimen] = store.add_reduction(
            result.to_dict(), rule_set=rules, rule_set_content=content, sheet=str(sheet), sheet_sha256=sha,
            sheet_row=getattr(row, "row", None), record_path=rec)
    return out


# ---------------------------------------------------------------- accept

def cmd_accept(args) -> int:
    from reduce.acceptance import heat_verdicts, acceptance_inputs, without_heat
    from reduce.pipeline import reduce_sheet
    from reduce.spec import read_spec
    from reports.qa import verdict_table

    spec = read_spec(args.spec)
    rows = reduce_sheet(args.sheet, args.rules)
    tests = acceptance_inputs(rows)
    verdicts = heat_verdicts(tests, spec)
    loose = without_heat(tests)
    if args.no_store:
        stored, db = {}, None
        written = _write_verdicts(args, spec, verdicts, loose, stored, None)
    else:
        from reduce.store import Store

        db = store_path(args.db, args.sheet)
        with Store.open(db) as store, store.transaction("accept", _argv()):
            stored = record_reductions(store, rows, args.rules, args.sheet)
            ids = {}
            for v in verdicts:
                links = [(stored[s.specimen].id, s.role) for s in v.specimens if s.specimen in stored]
                ids[v.heat] = store.add_verdict(
                    heat=v.heat, verdict=v.verdict, reason=v.reason, detail=v.to_dict(),
                    specification={"name": spec.citation, "file": spec.file, "text": spec.text},
                    rule_set=args.rules, rule_set_content=rule_set_content(args.rules), reductions=links)
            written = _write_verdicts(args, spec, verdicts, loose, stored, ids)
    print(verdict_table(verdicts, spec, stored, loose))
    for line in written:
        print(line)
    if db is not None:
        n_new = sum(1 for r in stored.values() if r.new)
        print(f"\nrecorded in {db}: {n_new} new reduction version(s), {len(stored) - n_new} unchanged, "
              f"{len(verdicts)} verdict(s)")
    else:
        print("\nnot recorded (--no-store): these verdicts cannot be approved")
    return 0 if all(r.error is None for r, _, _ in rows) else 2


def _write_verdicts(args, spec, verdicts, loose, stored, verdict_ids) -> list:
    """Write the JSON and XLSX asked for; returns what to tell the user."""
    from reduce.atomic import write_text_atomic
    from reports.qa import verdicts_json, write_verdict_workbook

    said = []
    if args.json:
        write_text_atomic(args.json, verdicts_json(verdicts, spec, args.rules, stored, verdict_ids, loose) + "\n")
        said.append(f"verdicts written to {args.json}")
    if args.xlsx:
        write_verdict_workbook(args.xlsx, verdicts, spec, stored, verdict_ids)
        said.append(f"workbook written to {args.xlsx}")
    return said


def add_accept_command(sub) -> None:
    from reduce.cli import add_rules_option

    p = sub.add_parser("accept", help="judge each heat of a sheet against a customer specification")
    p.add_argument("sheet", help="test sheet (.csv or .xlsx); the heat column groups specimens")
    p.add_argument("--spec", required=True, metavar="SPEC", help="customer specification (.toml)")
    add_rules_option(p)
    p.add_argument("--json", metavar="OUT", help="write the verdicts as JSON")
    p.add_argument("--xlsx", metavar="OUT", help="write the verdicts as an Excel workbook")
    add_db_option(p, "next to the sheet")
    p.add_argument("--no-store", action="store_true", help="do not record reductions and verdicts")
    p.set_defaults(func=cmd_accept)


# ---------------------------------------------------------------- approve

def check_verdict_current(store, verdict) -> None:
    """Refuse a verdict whose reductions are no longer the latest of its heat.

    Raises
    ------
    ApprovalError
        Naming each specimen reduced again (or added) since the verdict.
    """
    latest = store.latest_reductions(verdict.heat)
    seen = {store.reduction(rid).specimen: rid for rid, _ in verdict.reductions}
    changes = []
    for specimen, red in latest.items():
        if specimen not in seen:
            changes.append(f"{specimen} (v{red.version}) is in the store but not behind the verdict "
                           "(keep all of a heat's specimens, retests included, in one sheet)")
        elif seen[specimen] != red.id:
            old = store.reduction(seen[specimen])
            changes.append(f"{specimen}: the verdict saw v{old.version}, the latest is v{red.version}")
    if changes:
        raise ApprovalError(f"heat {verdict.heat}: verdict #{verdict.id} is out of date: "
                            + "; ".join(changes)
                            + "; run `cracktip accept SHEET --spec SPEC` again and approve the new verdict")


def approve(store, heat: str, *, by: str, decision: str, comment: str = ""):
    """Record a QA decision on the heat's latest verdict (inside a transaction).

    Returns
    -------
    (StoredApproval, StoredVerdict)

    Raises
    ------
    ApprovalError
        If the heat has no verdict, the verdict is out of date, or an
        acceptance is asked for a verdict other than "accepted".
    """
    verdict = store.latest_verdict(heat)
    if verdict is None:
        known = ", ".join(store.heats()) or "none"
        raise ApprovalError(f"{store.path}: no verdict on heat {heat!r} (heats in the store: {known}); "
                            "run `cracktip accept SHEET --spec SPEC` first")
    check_verdict_current(store, verdict)
    if decision == "accept" and verdict.verdict != "accepted":
        raise ApprovalError(f"heat {heat}: the verdict is {verdict.verdict!r} ({verdict.reason}); "
                            "only an accepted heat can be approved for acceptance (--decision reject "
                            "is always possible)")
    ids = [rid for rid, _ in verdict.reductions]
    aid = store.add_approval(heat=heat, verdict_id=verdict.id, decision=decision, approver=by,
                             comment=comment, reduction_ids=ids)
    return store.approval(aid), verdict


def cmd_approve(args) -> int:
    from reduce.store import Store
    from reports.qa import approval_text

    with Store.open(store_path(args.db), create=False) as store:
        with store.transaction("approve", _argv()):
            approval, verdict = approve(store, args.heat, by=args.by, decision=args.decision,
                                        comment=args.comment or "")
        reductions = [store.reduction(rid) for rid in approval.reduction_ids]
        print(approval_text(approval, verdict, reductions, store.path))
    return 0


def add_approve_command(sub) -> None:
    p = sub.add_parser("approve", help="record a QA decision on a heat's latest verdict")
    p.add_argument("heat", help="the heat, as in the sheet's heat column")
    p.add_argument("--by", required=True, metavar="NAME", help="who decides (printed on the certificate)")
    p.add_argument("--decision", required=True, choices=("accept", "reject"))
    p.add_argument("--comment", default="", help="free text kept with the decision")
    add_db_option(p, "in the current folder")
    p.set_defaults(func=cmd_approve)


# ---------------------------------------------------------------- history

def history_events(store, name: str | None = None) -> tuple[str, list]:
    """The trail of a heat, a specimen, or everything, oldest first.

    Returns
    -------
    (str, list of (kind, object))
        What was selected in words, and the events: ``("reduction",
        StoredReduction)``, ``("verdict", StoredVerdict)``, ``("approval",
        StoredApproval)``, ``("certificate", StoredCertificate)``.

    Raises
    ------
    StoreError
        If ``name`` is neither a heat nor a specimen in the store.
    """
    if name is None:
        what = "everything"
        reds, verdicts, approvals, certs = (store.reductions(), store.verdicts(), store.approvals(),
                                            store.certificates())
    elif name in store.heats():
        what = f"heat {name}"
        reds, verdicts = store.reductions(heat=name), store.verdicts(name)
        approvals, certs = store.approvals(name), store.certificates(name)
    elif store.heats_of_specimen(name):
        what = f"specimen {name}"
        reds = store.reductions(specimen=name)
        ids = {r.id for r in reds}
        verdicts = [v for h in {r.heat for r in reds} for v in store.verdicts(h)
                    if ids & {rid for rid, _ in v.reductions}]
        approvals = [a for h in {r.heat for r in reds} for a in store.approvals(h) if ids & set(a.reduction_ids)]
        shown = {a.id for a in approvals}
        certs = [c for h in {r.heat for r in reds} for c in store.certificates(h) if c.approval_id in shown]
    else:
        known = ", ".join(store.heats()) or "none"
        raise StoreError(f"{store.path}: no heat or specimen named {name!r} (heats: {known})")
    rank = {"reduction": 0, "verdict": 1, "approval": 2, "certificate": 3}
    events = ([("reduction", r) for r in reds] + [("verdict", v) for v in verdicts]
              + [("approval", a) for a in approvals] + [("certificate", c) for c in certs])
    events.sort(key=lambda e: (e[1].run_id, rank[e[0]], e[1].id))
    return what, events


def cmd_history(args) -> int:
    from reduce.store import Store
    from reports.qa import history_text

    with Store.open(store_path(args.db), create=False) as store:
        what, events = history_events(store, args.name)
        runs = {r.id: r for r in store.runs()}
        latest = {}
        for r in store.reductions():
            latest[(r.heat, r.specimen)] = max(latest.get((r.heat, r.specimen), 0), r.version)
        names = {r.id: r for _, r in events if hasattr(r, "specimen")}
        for kind, e in events:
            if kind in ("verdict", "approval"):
                ids = [rid for rid, _ in e.reductions] if kind == "verdict" else e.reduction_ids
                names.update({rid: store.reduction(rid) for rid in ids if rid not in names})
        print(history_text(what, events, runs, latest, names, store.path))
    return 0


def add_history_command(sub) -> None:
    p = sub.add_parser("history", help="the QA trail of a heat, a specimen, or everything")
    p.add_argument("name", nargs="?", help="a heat or a specimen (default: everything)")
    add_db_option(p, "in the current folder")
    p.set_defaults(func=cmd_history)


# ---------------------------------------------------------------- trend

def trend_data(rows: list, content: float, confidence: float, *, per_heat_mean: bool = False) -> dict:
    """Group store rows by heat and compute the tolerance bound (pure).

    Parameters
    ----------
    rows : list of dict
        :meth:`reduce.store.Store.trend_rows` output.
    content, confidence : float
        As for :func:`reduce.tolerance.lower_tolerance_bound`.
    per_heat_mean : bool
        Take one value per heat, its mean, as the sample (the bound then
        covers heat means, not single specimens).

    Returns
    -------
    dict
        ``heats`` (list of (heat, first reduced, [K_Ic …])), ``bound``
        (:class:`reduce.tolerance.ToleranceBound`), ``flagged`` (heats with a
        sample value below the bound), ``groups`` (the (orientation,
        temperature) pairs in the selection), ``rule_sets``, ``per_heat_mean``,
        ``warnings`` (in words: few values, values of one heat pooled) and
        ``plot_notes`` (the same, short, for the plot).

    Raises
    ------
    StoreError
        With fewer than two values in the sample.

    References
    ----------
    Natrella, NBS Handbook 91, section 1-6: the factor assumes a random
    sample of independent values from one normal population.
    """
    from reduce.tolerance import heats_below, lower_tolerance_bound

    by_heat, first = {}, {}
    for r in rows:
        by_heat.setdefault(r["heat"], []).append(r["K_Ic"])
        first[r["heat"]] = r["heat_first_reduced"]
    sample_by_heat = ({h: [sum(vs) / len(vs)] for h, vs in by_heat.items()} if per_heat_mean else by_heat)
    values = [v for vs in sample_by_heat.values() for v in vs]
    unit = "heat means" if per_heat_mean else "valid K_Ic results"
    if len(values) < 2:
        raise StoreError(f"a trend needs at least two {unit}; the selection has {len(values)}"
                         + (" (one heat: leave out --per-heat-mean)" if per_heat_mean else ""))
    bound = lower_tolerance_bound(values, content, confidence)
    warnings, notes = [], []
    if bound.n < TREND_FEW_VALUES:
        notes.append(f"only {bound.n} {unit} (fewer than {TREND_FEW_VALUES}): the bound is very uncertain")
        warnings.append(f"only {bound.n} {unit}: with so few the factor k = {bound.k:.3f} is large, the bound "
                        f"is very uncertain and the normal model cannot be checked (fewer than "
                        f"{TREND_FEW_VALUES}: common practice, no source)")
    pooled = [h for h, vs in by_heat.items() if len(vs) > 1]
    if pooled and not per_heat_mean:
        notes.append("results of one heat are pooled as independent values: the bound may sit too high "
                     "(--per-heat-mean uses heat means)")
        gives = ", ".join(f"{h} gives {len(by_heat[h])}" for h in pooled[:6]) + (", …" if len(pooled) > 6 else "")
        warnings.append(f"the {bound.n} values are pooled from {len(by_heat)} heat{'s' if len(by_heat) > 1 else ''} "
                        f"({gives}): results of one heat are not independent (they share its chemistry and "
                        "processing), so k rests on too many independent values and the bound may sit too high; "
                        "--per-heat-mean takes one mean per heat as the sample (the bound then covers heat "
                        "means, not single specimens)")
    return {"heats": [(h, first[h], vs) for h, vs in by_heat.items()], "bound": bound,
            "flagged": heats_below(sample_by_heat, bound.lower), "per_heat_mean": per_heat_mean,
            "groups": sorted({(r["orientation"], r["temperature_C"]) for r in rows}, key=str),
            "rule_sets": sorted({r.get("rule_set") or "?" for r in rows}), "warnings": warnings,
            "plot_notes": notes}


def trend_format(out) -> str:
    """The plot format a trend output file asks for by its suffix.

    Raises
    ------
    ReportError
        For a suffix other than .png, .svg or .pdf.

    >>> trend_format("trend.SVG")
    'svg'
    """
    suffix = Path(out).suffix.lower()
    if suffix not in TREND_FORMATS:
        raise ReportError(f"{out}: the trend plot is written as {', '.join(list(TREND_FORMATS)[:-1])} or "
                          f"{list(TREND_FORMATS)[-1]} (by the suffix); "
                          f"{suffix or 'no suffix'} is not one of them")
    return TREND_FORMATS[suffix]


def trend_band(args) -> float:
    """The temperature band, °C: ``--band``, else the specifications' default tolerance."""
    from reduce.spec import DEFAULT_TEMPERATURE_TOLERANCE_C

    return DEFAULT_TEMPERATURE_TOLERANCE_C if args.band is None else args.band


def trend_title(args) -> str:
    """The selection in words, e.g. ``"K_Ic by heat: 7075, L-T, 21 ± 3 °C, e399"``."""
    parts = [args.material]
    if args.orientation:
        parts.append(args.orientation.upper())
    if args.temperature is not None:
        parts.append(f"{args.temperature:g} ± {trend_band(args):g} °C")
    if args.rules:
        parts.append(args.rules)
    return "K_Ic by heat: " + ", ".join(parts) + (" (heat means)" if args.per_heat_mean else "")


def cmd_trend(args) -> int:
    from reduce.sheet import safe_name
    from reduce.store import Store
    from reports.qa import trend_text
    from reports.trend import plot_trend

    out = args.out or f"trend-{safe_name(args.material)}.png"
    fmt = trend_format(out)
    if args.band is not None and args.temperature is None:
        raise ReportError(f"--band {args.band:g} needs --temperature T_C (the band is around it)")
    args.band = trend_band(args)
    with Store.open(store_path(args.db), create=False) as store:
        rows = store.trend_rows(args.material, args.orientation, temperature_C=args.temperature,
                                band_C=args.band, rule_set=args.rules)
    title = trend_title(args)
    if not rows:
        raise StoreError(f"no valid K_Ic in the store for {title[len('K_Ic by heat: '):]}")
    data = trend_data(rows, args.content, args.confidence, per_heat_mean=args.per_heat_mean)
    plot_trend(out, data["heats"], data["bound"], data["flagged"], title, fmt=fmt,
               per_heat_mean=args.per_heat_mean, notes=data["plot_notes"])
    print(trend_text(data, title))
    print(f"plot written to {out}")
    return 0


def _number_type(accept, expected: str):
    """An argparse type: a number for which ``accept(x)`` holds, else a message naming it."""
    def parse(text: str) -> float:
        try:
            x = float(text)
        except ValueError:
            x = math.nan
        if not accept(x):
            raise argparse.ArgumentTypeError(f"expected {expected}; got {text!r}")
        return x
    return parse


#: an argparse type: a number strictly between 0 and 1 (``fraction("0.9")`` is 0.9)
fraction = _number_type(lambda x: 0.0 < x < 1.0, "a fraction between 0 and 1 (exclusive), e.g. 0.95")
_band = _number_type(lambda x: math.isfinite(x) and x >= 0.0, "a temperature band of zero or more °C")
_celsius = _number_type(math.isfinite, "a test temperature in °C")


def add_trend_command(sub) -> None:
    from reduce.spec import DEFAULT_TEMPERATURE_TOLERANCE_C

    p = sub.add_parser("trend", help="plot K_Ic by heat over time with a lower tolerance bound (PNG, SVG, PDF)")
    p.add_argument("--material", required=True, help="text the material name contains (case-insensitive)")
    p.add_argument("--orientation", help="only this orientation, e.g. L-T")
    p.add_argument("--temperature", type=_celsius, metavar="T_C",
                   help="only specimens tested at this temperature, °C (within --band)")
    p.add_argument("--band", type=_band, metavar="DT_C",
                   help=f"with --temperature: ± this many °C (default {DEFAULT_TEMPERATURE_TOLERANCE_C:g}, "
                        "as a specification's default temperature_tolerance_C; 0 for exactly T)")
    p.add_argument("--rules", choices=("e399", "iso12737"), help="only results of this rule set (default: any)")
    p.add_argument("--per-heat-mean", action="store_true",
                   help="one value per heat, its mean, as the sample (the bound then covers heat means)")
    p.add_argument("--content", type=fraction, default=0.95, help="population fraction covered (default 0.95)")
    p.add_argument("--confidence", type=fraction, default=0.95, help="confidence level (default 0.95)")
    p.add_argument("--out", metavar="FILE", help="the plot, .png, .svg or .pdf (default trend-<material>.png here)")
    add_db_option(p, "in the current folder")
    p.set_defaults(func=cmd_trend)


# ---------------------------------------------------------------- certify

_ABSENT = "(absent)"


def _is_number(x) -> bool:
    return isinstance(x, (int, float)) and not isinstance(x, bool)


def result_differences(old, new, path: str = "") -> list:
    """Where two JSON-like results differ under the approval policy.

    Numbers are equal within a relative :data:`RESULTS_REL_TOL` (absolute
    :data:`RESULTS_ABS_TOL`); everything else must be identical.  Items of a
    list of named objects (the checks) are named by their ``name``.

    Returns
    -------
    list of (str, object, object)
        (field, old, new) for each difference, in the order of ``old``'s keys.

    Examples
    --------
    >>> result_differences({"K": 28.1, "valid": True, "checks": [{"name": "a_over_W", "passed": True}]},
    ...                    {"K": 28.1 * (1 + 1e-12), "valid": False,
    ...                     "checks": [{"name": "a_over_W", "passed": False}]})
    [('valid', True, False), ('checks[a_over_W].passed', True, False)]
    """
    if isinstance(old, dict) and isinstance(new, dict):
        out = []
        for k in list(old) + [k for k in new if k not in old]:
            out += result_differences(old.get(k, _ABSENT), new.get(k, _ABSENT), f"{path}.{k}" if path else k)
        return out
    if isinstance(old, list) and isinstance(new, list) and len(old) == len(new):
        out = []
        for i, (a, b) in enumerate(zip(old, new)):
            named = isinstance(a, dict) and isinstance(b, dict) and a.get("name") and a.get("name") == b.get("name")
            out += result_differences(a, b, f"{path}[{a['name'] if named else i}]")
        return out
    if _is_number(old) and _is_number(new):
        same = math.isclose(old, new, rel_tol=RESULTS_REL_TOL, abs_tol=RESULTS_ABS_TOL)
        return [] if same else [(path, old, new)]
    return [] if old == new else [(path, old, new)]


def _shown(x) -> str:
    if isinstance(x, float):
        return f"{x:.10g}"
    text = json.dumps(x, ensure_ascii=False) if isinstance(x, (list, dict)) else str(x)
    return text if len(text) <= 60 else text[:57] + "…"


def _tol() -> str:
    """The relative tolerance as people write it: ``1e-9``."""
    mantissa, exponent = f"{RESULTS_REL_TOL:.0e}".split("e")
    return f"{mantissa}e{int(exponent)}"


def _comparable(result: dict) -> dict:
    """A result as compared with the approved one: JSON types, file locations left out."""
    from reduce.store import canonical_json

    d = {k: v for k, v in json.loads(canonical_json(result)).items() if k not in LOCATION_KEYS}
    if isinstance(d.get("specimen_data"), dict):
        d["specimen_data"] = {k: v for k, v in d["specimen_data"].items() if k != "record"}
    return d


def _rank(field: str) -> int:
    head = field.split(".")[0].split("[")[0]
    return _FIRST_FIELDS.index(head) if head in _FIRST_FIELDS else len(_FIRST_FIELDS)


def approved_results_differences(store, approval, rows, rules: str, *, most: int = 5) -> list:
    """What differs between the results being certified and those an approval saw, in words.

    Parameters
    ----------
    store : reduce.store.Store
    approval : reduce.store.StoredApproval
    rows : list of (Result, Record or None, Specimen or BadRow)
        The heat's rows as just reduced.
    rules : str
        The rule set of this run.
    most : int
        Differing fields shown per specimen (the rest are counted).

    Returns
    -------
    list of str
        One line per specimen (or rule set) that differs, naming the field
        and old → new; empty when the results are the approved ones under
        the policy of the module docstring.  The program version is not
        compared here (see :func:`approved_program_versions`).
    """
    heat = approval.heat
    fresh = {r.specimen: r for r, _, _ in rows if (r.heat or "") == heat}
    approved = {red.specimen: red for red in map(store.reduction, approval.reduction_ids)}
    lines = []
    for sid in fresh:
        if sid not in approved:
            lines.append(f"{sid}: in the sheet now, but not among the approved results")
    for sid, red in approved.items():
        if sid not in fresh:
            lines.append(f"{sid}: approved (v{red.version}), but no longer in the sheet")
    now_rules = rule_set_content(rules)
    said_rules = set()
    for sid, r in fresh.items():
        red = approved.get(sid)
        if red is None:
            continue
        then_rules = store.reduction_rule_set(red.id) or {}
        if then_rules != json.loads(json.dumps(now_rules)):
            if then_rules.get("name") != rules:
                text = f"rule set: approved under {then_rules.get('name')}, this run uses {rules}"
            else:
                changed = result_differences(then_rules, json.loads(json.dumps(now_rules)))
                text = (f"rule set {rules}: its limits changed since the approval: "
                        + "; ".join(f"{f} {_shown(o)} → {_shown(n)}" for f, o, n in changed[:most]))
            said_rules.add(text)
        diffs = sorted(result_differences(_comparable(red.result), _comparable(r.to_dict())),
                       key=lambda d: _rank(d[0]))
        if diffs:
            shown = "; ".join(f"{f} {_shown(o)} → {_shown(n)}" for f, o, n in diffs[:most])
            more = len(diffs) - most
            lines.append(f"{sid} (approved v{red.version}): {shown}"
                         + (f"; and {more} more field{'s' if more > 1 else ''}" if more > 0 else ""))
    return sorted(said_rules) + lines


def approved_program_versions(store, approval) -> list:
    """The program versions that produced the reductions an approval saw, sorted."""
    return sorted({store.reduction(rid).program_version for rid in approval.reduction_ids})


class CertificateSession:
    """What ``cracktip certify`` asks the store: draft or issued, number, revision.

    A heat's certificate is issued only when its latest approval accepts it,
    that approval is on the heat's latest verdict, and the results being
    certified are the reduction versions the approver saw (compared as the
    module docstring says; a newer program version that reproduces them
    keeps the approval, and both versions are named).  Otherwise it is a
    draft: DRAFT on every page, no number, and :meth:`explain` says exactly
    what differs.  A certificate issued again after a new approval keeps the
    number of the first issue, takes revision r + 1 and names the issue it
    supersedes; certifying again under the same approval writes out the PDF
    kept in the store.

    Numbers of first issues: ``PREFIX-YEAR-NNNN`` from the store, one more
    than the highest of the year (:meth:`reduce.store.Store.next_certificate_number`).

    Use :func:`certificate_session` (or :func:`with_certificate_session`);
    call :meth:`options` for the builder's keyword arguments, then
    :meth:`record` with the PDF written.
    """

    def __init__(self, store, rules: str):
        self.store, self.rules = store, rules
        self._plans: dict = {}
        self._handed: dict = {}  # number -> heat, handed out in this run
        self.written: list = []

    def _why_draft(self, heat, rows) -> tuple[str | None, object]:
        """(reason it must be a draft or None, the approval)."""
        st = self.store
        if st is None:
            return "there is no QA store, so nothing is approved", None
        a = st.latest_approval(heat)
        if a is None:
            return f"heat {heat} is not approved", None
        if a.decision != "accept":
            return f"heat {heat} was rejected by {a.approver} on {a.created_at[:10]}", a
        v = st.latest_verdict(heat)
        if v is None or v.id != a.verdict_id:
            return (f"a newer verdict (#{v.id}, {v.verdict}) followed approval #{a.id}; "
                    "approve it first"), a
        diffs = approved_results_differences(st, a, rows, self.rules)
        if diffs:
            return (f"the results differ from those approved (approval #{a.id} by {a.approver}, "
                    f"{a.created_at[:10]}); compared field by field, numbers within a relative "
                    f"{_tol()}:\n" + "\n".join(f"    {d}" for d in diffs)
                    + "\n  run `cracktip accept SHEET --spec SPEC` and `cracktip approve` again"), a
        return None, a

    def _first_number(self, heat, number, prefix) -> tuple[str, bool]:
        """(number for a first issue, whether it comes from the store's sequence)."""
        if prefix is not None or number is None:
            return self.store.next_certificate_number(prefix or "CT", reserved=list(self._handed)), True
        return number, False

    def options(self, heat: str, rows, number: str | None = None, prefix: str | None = None) -> dict:
        """The builder's options for a heat.

        Parameters
        ----------
        heat : str
        rows : list of (Result, Record or None, Specimen or BadRow)
            The heat's rows as just reduced: what the certificate will show.
        number : str, optional
            The number to give a first issue (the caller's numbering), used
            only when no ``prefix`` is given.
        prefix : str, optional
            The lab's certificate prefix: first issues are numbered
            ``PREFIX-YEAR-NNNN`` from the store.  With neither, ``CT`` is used.

        Returns
        -------
        dict
            ``draft``, ``certificate_number``, ``revision``, ``supersedes``,
            ``approval`` (``approver``, ``date``, ``decision``, the store's
            approval, verdict and reduction ids, and ``results_reduced_with``,
            the program versions of the approved reductions) and ``issue_date``.
        """
        why, a = self._why_draft(heat, rows)
        plan = None
        if not why:
            plan = self._issue_plan(heat, a, number, prefix)
            if isinstance(plan, str):
                why = plan
        if why:
            self._plans[heat] = {"draft": True, "why": why}
            return {"draft": True, "certificate_number": None, "revision": None, "supersedes": None,
                    "approval": None}
        from reduce.store import __version__ as now

        versions = approved_program_versions(self.store, a)
        plan["versions"] = (versions, now)
        approval = {"approver": a.approver, "date": a.created_at[:10], "decision": "accepted",
                    "comment": a.comment, "store_approval_id": a.id, "verdict_id": a.verdict_id,
                    "reduction_ids": list(a.reduction_ids),
                    "results_reduced_with": [f"cracktip {v}" for v in versions]}
        return {"draft": False, "certificate_number": plan["number"], "revision": plan["revision"],
                "supersedes": plan["supersedes"], "approval": approval, "issue_date": plan["date"]}

    def _issue_plan(self, heat, a, number, prefix):
        """The plan of an issue (dict), or why it cannot be one (str)."""
        st = self.store
        certs = st.certificates(heat)
        same = [c for c in certs if c.approval_id == a.id]
        if same:
            c = same[-1]
            plan = {"draft": False, "reprint": c, "number": c.number, "revision": c.revision,
                    "supersedes": c.supersedes, "supersedes_id": c.supersedes_id, "date": c.issued_at[:10]}
        elif certs:
            last = certs[-1]
            plan = {"draft": False, "reprint": None, "number": last.number, "revision": last.revision + 1,
                    "supersedes": last.designation, "supersedes_id": last.id}
        else:
            first, sequential = self._first_number(heat, number, prefix)
            other = st.heat_of_certificate_number(first) or self._handed.get(first)
            if other is not None and other != heat:
                return (f"certificate number {first} is already used by heat {other}; a number names one "
                        "heat's certificate: number first issues from the store's sequence (the lab "
                        "prefix), or give the heats names that differ in letters and digits")
            self._handed[first] = heat
            plan = {"draft": False, "reprint": None, "number": first, "revision": 0,
                    "supersedes": None, "supersedes_id": None, "sequential": sequential}
        plan.setdefault("date", st.current_run.started_at[:10] if st.current_run else None)
        plan["approval"] = a
        self._plans[heat] = plan
        return plan

    def explain(self, heat: str) -> str:
        """Why the heat's certificate is a draft, or what was issued, in words."""
        p = self._plans.get(heat)
        if p is None:
            return f"heat {heat}: options() not asked yet"
        if p["draft"]:
            return f"heat {heat}: DRAFT, no certificate number: {p['why']}"
        from reduce.store import designation

        text = f"heat {heat}: certificate {designation(p['number'], p['revision'])}"
        if p.get("reprint"):
            return text + f", issued {p['reprint'].issued_at[:10]}; written again exactly as issued"
        text += (f", superseding {p['supersedes']}" if p["supersedes"] else "") + \
            f", approved by {p['approval'].approver}"
        versions, now = p.get("versions", ([], None))
        if now is not None and versions and versions != [now]:
            text += (f"\n  note: the approved results were reduced with cracktip {', '.join(versions)}; this run "
                     f"(cracktip {now}) reproduced them (numbers within a relative {_tol()}, "
                     f"everything else identical), so approval #{p['approval'].id} stands; the certificate "
                     "names both versions in its embedded approval record and the store keeps both")
        return text

    def record(self, heat: str, path) -> str:
        """Keep the issue of the PDF at ``path`` (written by the builder); returns :meth:`explain`.

        A draft is not kept.  A reprint is replaced by the PDF kept in the store.
        """
        from reduce.atomic import write_bytes_atomic

        p = self._plans[heat]
        if not p["draft"]:
            if p.get("reprint"):
                write_bytes_atomic(path, self.store.certificate_pdf(p["reprint"].id))
            else:
                self.written.append(Path(path))
                try:
                    self.store.add_certificate(heat=heat, approval_id=p["approval"].id, number=p["number"],
                                               revision=p["revision"], supersedes_id=p["supersedes_id"],
                                               pdf=Path(path).read_bytes(), file=str(Path(path).resolve()))
                except BaseException:
                    # a numbered certificate the store does not know must not circulate
                    Path(path).unlink(missing_ok=True)
                    raise
        return self.explain(heat)


@contextmanager
def certificate_session(sheet, rules: str, *, db=None, argv=None):
    """One ``certify`` run against the store (one transaction).

    Parameters
    ----------
    sheet : str or Path
        The test sheet (the default store is next to it).
    rules : str
    db : str, optional
        ``--db``.  When no store exists there, every certificate is a draft.

    Yields
    ------
    CertificateSession

    Notes
    -----
    If the run fails after a numbered PDF was written, that PDF is removed:
    a numbered certificate the store does not know must not circulate.
    """
    from reduce.store import Store

    path = store_path(db, sheet)
    if not path.exists():
        yield CertificateSession(None, rules)
        return
    with Store.open(path, create=False) as store:
        session = CertificateSession(store, rules)
        try:
            with store.transaction("certify", argv or _argv()):
                yield session
        except BaseException:
            for f in session.written:
                f.unlink(missing_ok=True)
            raise


def with_certificate_session(command):
    """Run a ``certify`` command function inside :func:`certificate_session`.

    The wrapped function finds the session as ``args.qa``; ``args`` needs
    ``sheet``, ``rules`` and ``db``.
    """
    import functools

    @functools.wraps(command)
    def run(args):
        with certificate_session(args.sheet, args.rules, db=getattr(args, "db", None)) as session:
            args.qa = session
            return command(args)

    return run


def revision_path(path, revision) -> Path:
    """The file of a certificate revision: ``NAME.pdf`` for revision 0 or none,
    ``NAME-rev1.pdf`` …, so a re-issue never overwrites the issue it supersedes.

    >>> revision_path("out/C-1.pdf", 0).name, revision_path("out/C-1.pdf", 2).name
    ('C-1.pdf', 'C-1-rev2.pdf')
    """
    path = Path(path)
    return path if not revision else path.with_name(f"{path.stem}-rev{revision}{path.suffix}")
