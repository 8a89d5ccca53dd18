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
"""

from __future__ import annotations

import hashlib
import os
import sys
from contextlib import contextmanager
from pathlib import Path

from reduce.errors import ApprovalError, StoreError

ENV_DB = "CRACKTIP_DB"


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

def trend_data(rows: list, content: float, confidence: float) -> dict:
    """Group store rows by heat and compute the tolerance bound (pure).

    Returns
    -------
    dict
        ``heats`` (list of (heat, first reduced, [K_Ic …])), ``bound``
        (:class:`reduce.tolerance.ToleranceBound`), ``flagged`` (heats with a
        K_Ic below the bound), ``groups`` (the (orientation, temperature)
        pairs in the selection).

    Raises
    ------
    StoreError
        With fewer than two K_Ic values.
    """
    from reduce.tolerance import heats_below, lower_tolerance_bound

    by_heat, first = {}, {}
    for r in rows:
        by_heat.setdefault(r["heat"], []).append(r["K_Ic"])
        first[r["heat"]] = r["heat_first_reduced"]
    values = [v for vs in by_heat.values() for v in vs]
    if len(values) < 2:
        raise StoreError(f"a trend needs at least two valid K_Ic results; the selection has {len(values)}")
    bound = lower_tolerance_bound(values, content, confidence)
    return {"heats": [(h, first[h], vs) for h, vs in by_heat.items()], "bound": bound,
            "flagged": heats_below(by_heat, bound.lower),
            "groups": sorted({(r["orientation"], r["temperature_C"]) for r in rows}, key=str)}


def cmd_trend(args) -> int:
    from reduce.sheet import safe_name
    from reduce.store import Store
    from reports.qa import trend_text
    from reports.trend import plot_trend

    with Store.open(store_path(args.db), create=False) as store:
        rows = store.trend_rows(args.material, args.orientation)
    if not rows:
        raise StoreError(f"no valid K_Ic in the store for material containing {args.material!r}"
                         + (f" in orientation {args.orientation}" if args.orientation else ""))
    data = trend_data(rows, args.content, args.confidence)
    out = args.out or f"trend-{safe_name(args.material)}.png"
    title = f"K_Ic by heat: {args.material}" + (f", {args.orientation}" if args.orientation else "")
    plot_trend(out, data["heats"], data["bound"], data["flagged"], title)
    print(trend_text(data, title))
    print(f"plot written to {out}")
    return 0


def add_trend_command(sub) -> None:
    p = sub.add_parser("trend", help="plot K_Ic by heat over time with a lower tolerance bound (PNG)")
    p.add_argument("--material", required=True, help="text the material name contains (case-insensitive)")
    p.add_argument("--orientation", help="only this orientation, e.g. L-T")
    p.add_argument("--content", type=float, default=0.95, help="population fraction covered (default 0.95)")
    p.add_argument("--confidence", type=float, default=0.95, help="confidence level (default 0.95)")
    p.add_argument("--out", metavar="PNG", help="the plot (default trend-<material>.png here)")
    add_db_option(p, "in the current folder")
    p.set_defaults(func=cmd_trend)


# ---------------------------------------------------------------- certify

class CertificateSession:
    """What ``cracktip certify`` asks the store: draft or issued, number, revision.

    A heat's certificate is issued only when its latest approval accepts it,
    that approval is on the heat's latest verdict, and the results being
    certified are exactly the reduction versions the approver saw.  Otherwise
    it is a draft: DRAFT on every page, no number.  A certificate issued
    again after a new approval keeps the number of the first issue, takes
    revision r + 1 and names the issue it supersedes; certifying again
    under the same approval writes out the PDF kept in the store.

    Use :func:`certificate_session` (or :func:`with_certificate_session`);
    call :meth:`options` for the builder's keyword arguments, then
    :meth:`record` with the PDF written.
    """

    def __init__(self, store, rules: str):
        self.store, self.rules = store, rules
        self._plans: dict = {}
        self.written: list = []

    def _why_draft(self, heat, rows) -> tuple[str | None, object]:
        """(reason it must be a draft or None, the approval)."""
        from reduce.store import reduction_content_sha256

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
        content = rule_set_content(self.rules)
        fresh = {r.specimen: reduction_content_sha256(r.to_dict(), content)
                 for r, _, _ in rows if (r.heat or "") == heat}
        seen = {red.specimen: red.content_sha256 for red in map(st.reduction, a.reduction_ids)}
        if fresh != seen:
            changed = sorted(s for s in set(fresh) | set(seen) if fresh.get(s) != seen.get(s))
            return (f"the results of {', '.join(changed)} differ from those approved (approval #{a.id}); "
                    "run accept and approve again"), a
        return None, a

    def options(self, heat: str, rows, number: str | None = None) -> dict:
        """The builder's options for a heat.

        Parameters
        ----------
        heat : str
        rows : list of (Result, Record or None, Specimen or BadRow)
            The heat's rows as just reduced: what the certificate will show.
        number : str, optional
            The number to give a first issue (the caller's numbering);
            default: the store's ``CT-YEAR-NNNN`` sequence.

        Returns
        -------
        dict
            ``draft``, ``certificate_number``, ``revision``, ``supersedes``,
            ``approval`` (``approver``, ``date``, ``decision``, and the store's
            approval and reduction ids) and ``issue_date``.
        """
        why, a = self._why_draft(heat, rows)
        if why:
            self._plans[heat] = {"draft": True, "why": why}
            return {"draft": True, "certificate_number": None, "revision": None, "supersedes": None,
                    "approval": None}
        st = self.store
        certs = st.certificates(heat)
        same = [c for c in certs if c.approval_id == a.id]
        approval = {"approver": a.approver, "date": a.created_at[:10], "decision": "accepted",
                    "comment": a.comment, "store_approval_id": a.id, "verdict_id": a.verdict_id,
                    "reduction_ids": list(a.reduction_ids)}
        if same:
            c = same[-1]
            plan = {"draft": False, "reprint": c, "number": c.number, "revision": c.revision,
                    "supersedes": c.supersedes, "supersedes_id": c.supersedes_id, "date": c.issued_at[:10]}
        elif certs:
            last = certs[-1]
            plan = {"draft": False, "reprint": None, "number": last.number, "revision": last.revision + 1,
                    "supersedes": last.designation, "supersedes_id": last.id}
        else:
            pending = sum(1 for p in self._plans.values() if not p["draft"] and p.get("new_number"))
            plan = {"draft": False, "reprint": None,
                    "number": number or st.next_certificate_number(reserved=pending), "revision": 0,
                    "supersedes": None, "supersedes_id": None, "new_number": number is None}
        plan.setdefault("date", st.current_run.started_at[:10] if st.current_run else None)
        plan["approval"] = a
        self._plans[heat] = plan
        return {"draft": False, "certificate_number": plan["number"], "revision": plan["revision"],
                "supersedes": plan["supersedes"], "approval": approval, "issue_date": plan["date"]}

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
        return text + (f", superseding {p['supersedes']}" if p["supersedes"] else "") + \
            f", approved by {p['approval'].approver}"

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
