"""The QA store: an append-only SQLite database of everything QA relies on.

It keeps every raw record's hash and path, every reduction (full results,
rule set, program version, time), every heat verdict, every approval (with
the reduction versions it saw) and every certificate issued (with the PDF).
Rows are never changed or deleted — triggers refuse it — so re-reducing a
specimen adds a version and the old one stays.

All SQL of cracktip lives in this module.  Callers see :class:`Store` and
plain dataclasses, so a shared server database can replace the file later
by reimplementing this one module.

Every command run is one transaction (:meth:`Store.transaction`,
``BEGIN IMMEDIATE`` … ``COMMIT``): if anything raises inside it, or the
process is killed, the database is left exactly as it was before the run
(SQLite's rollback journal).

The schema is versioned (``PRAGMA user_version`` and the ``schema_info``
table); a database from a newer cracktip is refused rather than guessed at.

No ``sqlite3`` error leaves this module: every one (opening, a transaction,
a read, a write; "database is locked" when another run still holds the
store after the timeout) becomes a :class:`~reduce.errors.StoreError` that
names the database file and says what to do.
"""

from __future__ import annotations

import functools
import getpass
import hashlib
import json
import re
import sqlite3
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from datetime import datetime, timezone
from pathlib import Path

from reduce._version import PROGRAM_VERSION as __version__
from reduce.errors import ApprovalError, StoreError

SCHEMA_VERSION = 1
#: "CRKT": marks the file as a cracktip store
APPLICATION_ID = 0x43524B54
DEFAULT_NAME = "cracktip.db"
#: how long a command waits for another run to release the store, s (cracktip's choice)
LOCK_TIMEOUT_S = 30.0

_TABLES = {
    "schema_info": """
        version INTEGER NOT NULL, applied_at TEXT NOT NULL, program_version TEXT NOT NULL""",
    "runs": """
        id INTEGER PRIMARY KEY, command TEXT NOT NULL, argv TEXT NOT NULL,
        program_version TEXT NOT NULL, account TEXT NOT NULL, started_at TEXT NOT NULL""",
    "records": """
        id INTEGER PRIMARY KEY, path TEXT NOT NULL, sha256 TEXT NOT NULL,
        first_run_id INTEGER NOT NULL REFERENCES runs(id), UNIQUE (path, sha256)""",
    "sheets": """
        id INTEGER PRIMARY KEY, path TEXT NOT NULL, sha256 TEXT NOT NULL,
        first_run_id INTEGER NOT NULL REFERENCES runs(id), UNIQUE (path, sha256)""",
    "rule_sets": """
        id INTEGER PRIMARY KEY, name TEXT NOT NULL, sha256 TEXT NOT NULL UNIQUE, content TEXT NOT NULL""",
    "specifications": """
        id INTEGER PRIMARY KEY, name TEXT NOT NULL, sha256 TEXT NOT NULL UNIQUE, file TEXT,
        content TEXT NOT NULL""",
    "reductions": """
        id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id),
        heat TEXT NOT NULL, specimen TEXT NOT NULL, version INTEGER NOT NULL,
        sheet_id INTEGER REFERENCES sheets(id), sheet_row INTEGER,
        record_id INTEGER REFERENCES records(id),
        rule_set_id INTEGER NOT NULL REFERENCES rule_sets(id),
        program_version TEXT NOT NULL, created_at TEXT NOT NULL,
        material TEXT, orientation TEXT, temperature_C REAL,
        K_Q REAL, K_Ic REAL, valid INTEGER NOT NULL, error TEXT,
        content_sha256 TEXT NOT NULL, result_json TEXT NOT NULL,
        UNIQUE (heat, specimen, version)""",
    "verdicts": """
        id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id), heat TEXT NOT NULL,
        specification_id INTEGER NOT NULL REFERENCES specifications(id),
        rule_set_id INTEGER NOT NULL REFERENCES rule_sets(id),
        verdict TEXT NOT NULL CHECK (verdict IN ('accepted', 'rejected', 'retest needed', 'not assessed')),
        reason TEXT NOT NULL, detail_json TEXT NOT NULL,
        program_version TEXT NOT NULL, created_at TEXT NOT NULL""",
    "verdict_reductions": """
        verdict_id INTEGER NOT NULL REFERENCES verdicts(id),
        reduction_id INTEGER NOT NULL REFERENCES reductions(id), role TEXT NOT NULL,
        PRIMARY KEY (verdict_id, reduction_id)""",
    "approvals": """
        id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id), heat TEXT NOT NULL,
        verdict_id INTEGER NOT NULL REFERENCES verdicts(id),
        decision TEXT NOT NULL CHECK (decision IN ('accept', 'reject')),
        approver TEXT NOT NULL CHECK (length(trim(approver)) > 0), comment TEXT NOT NULL,
        program_version TEXT NOT NULL, created_at TEXT NOT NULL""",
    "approval_reductions": """
        approval_id INTEGER NOT NULL REFERENCES approvals(id),
        reduction_id INTEGER NOT NULL REFERENCES reductions(id),
        PRIMARY KEY (approval_id, reduction_id)""",
    "certificates": """
        id INTEGER PRIMARY KEY, run_id INTEGER NOT NULL REFERENCES runs(id), heat TEXT NOT NULL,
        approval_id INTEGER NOT NULL REFERENCES approvals(id),
        number TEXT NOT NULL, revision INTEGER NOT NULL CHECK (revision >= 0),
        supersedes_id INTEGER REFERENCES certificates(id),
        file TEXT, pdf_sha256 TEXT NOT NULL, pdf BLOB NOT NULL,
        program_version TEXT NOT NULL, issued_at TEXT NOT NULL,
        UNIQUE (number, revision)""",
}

_INDEXES = [
    "CREATE INDEX reductions_by_specimen ON reductions (heat, specimen, version)",
    "CREATE INDEX verdicts_by_heat ON verdicts (heat, id)",
    "CREATE INDEX approvals_by_heat ON approvals (heat, id)",
    "CREATE INDEX certificates_by_heat ON certificates (heat, id)",
]


def _triggers() -> list:
    out = []
    for table in _TABLES:
        for action in ("UPDATE", "DELETE"):
            out.append(f"CREATE TRIGGER {table}_no_{action.lower()} BEFORE {action} ON {table} "
                       f"BEGIN SELECT RAISE(ABORT, 'the cracktip store is append-only: "
                       f"rows of {table} are never changed or deleted'); END")
    out.append("CREATE TRIGGER certificates_need_approval BEFORE INSERT ON certificates "
               "WHEN NOT EXISTS (SELECT 1 FROM approvals WHERE id = NEW.approval_id "
               "AND decision = 'accept' AND heat = NEW.heat) "
               "BEGIN SELECT RAISE(ABORT, 'a certificate needs an accepting approval of its heat'); END")
    return out


def utc_now() -> str:
    """The present time, UTC, ISO 8601 to the second (``2025-06-01T09:30:00+00:00``)."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def canonical_json(data) -> str:
    """JSON with sorted keys and no NaN: the text that is hashed and stored."""
    return json.dumps(data, sort_keys=True, ensure_ascii=False, allow_nan=False,
                      default=lambda x: x.item() if hasattr(x, "item") else str(x))


def sha256_text(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def reduction_content_sha256(result: dict, rule_set_content: dict, program_version: str = __version__) -> str:
    """The identity of a reduction's content: results, rule set and program version.

    Two reductions with the same identity are the same version; anything that
    changes a number, a check, a record hash, the limits or the program makes
    a new one.
    """
    return sha256_text(canonical_json({"result": result, "rule_set": rule_set_content,
                                       "program_version": program_version}))


@dataclass(frozen=True)
class Run:
    """One command run: every row written carries its id."""

    id: int
    command: str
    started_at: str
    argv: tuple = ()
    program_version: str = __version__
    account: str = ""


@dataclass(frozen=True)
class StoredReduction:
    """One reduction version as the store keeps it."""

    id: int
    heat: str
    specimen: str
    version: int
    created_at: str
    program_version: str
    rule_set: str
    valid: bool
    K_Q: float | None
    K_Ic: float | None
    error: str | None
    content_sha256: str
    record_path: str | None
    record_sha256: str | None
    sheet_path: str | None
    run_id: int
    result: dict = field(repr=False, default_factory=dict)
    new: bool = False  # set by add_reduction: True when this call stored it


@dataclass(frozen=True)
class StoredVerdict:
    id: int
    heat: str
    verdict: str
    reason: str
    specification: str
    specification_sha256: str
    rule_set: str
    created_at: str
    program_version: str
    run_id: int
    detail: dict = field(repr=False, default_factory=dict)
    #: (reduction id, role) of every specimen behind the verdict
    reductions: tuple = ()


@dataclass(frozen=True)
class StoredApproval:
    id: int
    heat: str
    verdict_id: int
    decision: str
    approver: str
    comment: str
    created_at: str
    program_version: str
    run_id: int
    reduction_ids: tuple = ()


@dataclass(frozen=True)
class StoredCertificate:
    id: int
    heat: str
    approval_id: int
    number: str
    revision: int
    supersedes_id: int | None
    supersedes: str | None
    file: str | None
    pdf_sha256: str
    issued_at: str
    program_version: str
    run_id: int

    @property
    def designation(self) -> str:
        return designation(self.number, self.revision)


def designation(number: str, revision: int) -> str:
    """How a certificate issue is named, e.g. ``"CT-2025-0001 rev. 1"``."""
    return f"{number} rev. {revision}"


def store_error(path, exc: sqlite3.Error, timeout_s: float = LOCK_TIMEOUT_S) -> StoreError:
    """A :class:`StoreError` for an ``sqlite3`` error on the store at ``path``: the file and what to do.

    >>> print(store_error("qa.db", sqlite3.OperationalError("database is locked"), 30))
    qa.db: the store is in use by another cracktip run (still locked after 30 s); nothing of this run was kept: try again when the other run has finished
    """
    text = str(exc)
    low = text.lower()
    if "locked" in low or "busy" in low:
        return StoreError(f"{path}: the store is in use by another cracktip run (still locked after "
                          f"{timeout_s:g} s); nothing of this run was kept: try again when the other "
                          "run has finished")
    if "readonly" in low or "read-only" in low:
        return StoreError(f"{path}: the store cannot be written (the file or its folder is read-only); "
                          "nothing of this run was kept: ask for write access or give another --db")
    if "unable to open" in low:
        return StoreError(f"{path}: the store cannot be opened ({text}); check that the folder exists "
                          "and can be written, or give another --db")
    if "not a database" in low or "malformed" in low or "corrupt" in low:
        return StoreError(f"{path}: not a usable cracktip store ({text}); give --db the cracktip.db file "
                          "(if this is one, it is damaged: keep a copy and ask whoever looks after the store)")
    if "disk" in low or "full" in low:
        return StoreError(f"{path}: the store could not be written ({text}); nothing of this run was "
                          "kept: free disk space and try again")
    return StoreError(f"{path}: the store refused the operation ({type(exc).__name__}: {text}); "
                      "nothing of this run was kept")


def _sql_errors_named(method):
    """Turn an ``sqlite3.Error`` raised inside a Store method into a :class:`StoreError`."""
    @functools.wraps(method)
    def run(self, *args, **kwargs):
        try:
            return method(self, *args, **kwargs)
        except sqlite3.Error as exc:
            raise store_error(self.path, exc, self._timeout) from None
    return run


def _sql_errors_named_everywhere(cls):
    """Apply :func:`_sql_errors_named` to every public method (``open`` and
    ``transaction`` translate their own errors)."""
    for name, member in list(vars(cls).items()):
        if callable(member) and not name.startswith("_") and name not in ("open", "transaction"):
            setattr(cls, name, _sql_errors_named(member))
    return cls


@_sql_errors_named_everywhere
class Store:
    """The QA database.

    Open it with :meth:`open`; write only inside :meth:`transaction`.

    Parameters
    ----------
    connection : sqlite3.Connection
    path : str
    clock : callable, optional
        Returns the present time as ISO text (tests pass a fixed one).
    timeout_s : float
        How long to wait for another run's lock, s.
    """

    def __init__(self, connection, path, clock=utc_now, timeout_s: float = LOCK_TIMEOUT_S):
        self._db = connection
        self.path = str(path)
        self._clock = clock
        self._timeout = timeout_s
        self._run: Run | None = None

    # ------------------------------------------------------------ opening
    @classmethod
    def open(cls, path, *, create: bool = True, clock=utc_now, timeout_s: float | None = None) -> "Store":
        """Open (and when ``create``, make) the store at ``path``.

        Parameters
        ----------
        path : str or Path
            The database file.
        create : bool
            Make the store when the file is missing.
        clock : callable, optional
        timeout_s : float, optional
            How long to wait for another run's lock, s; default :data:`LOCK_TIMEOUT_S`.

        Raises
        ------
        StoreError
            If the file is missing and ``create`` is false, is a folder, is not
            a cracktip store, was written by a newer schema, or cannot be
            opened or read (locked, read-only, damaged).
        """
        path = Path(path)
        timeout_s = LOCK_TIMEOUT_S if timeout_s is None else timeout_s
        if path.is_dir():
            raise StoreError(f"{path}: is a folder, not a store; give --db the store file, "
                             f"e.g. {path / DEFAULT_NAME}")
        if not path.exists() and not create:
            raise StoreError(f"{path}: no cracktip store here; give --db, or run "
                             "`cracktip accept SHEET --spec SPEC` first to make one")
        con = None
        try:
            if create:
                path.parent.mkdir(parents=True, exist_ok=True)
            con = sqlite3.connect(str(path), timeout=timeout_s, isolation_level=None)
            con.execute("PRAGMA foreign_keys = ON")
            store = cls(con, path, clock, timeout_s)
            store._prepare(create)
        except (sqlite3.Error, StoreError) as exc:
            if con is not None:
                con.close()
            if isinstance(exc, StoreError):
                raise
            raise store_error(path, exc, timeout_s) from None
        return store

    def _prepare(self, create: bool) -> None:
        version = self._db.execute("PRAGMA user_version").fetchone()[0]
        app = self._db.execute("PRAGMA application_id").fetchone()[0]
        tables = self._db.execute("SELECT count(*) FROM sqlite_master").fetchone()[0]
        if version == 0 and tables == 0:
            if not create:
                raise StoreError(f"{self.path}: the store is empty")
            self._create_schema()
            return
        if app != APPLICATION_ID:
            raise StoreError(f"{self.path}: an SQLite file, but not a cracktip store")
        if version > SCHEMA_VERSION:
            raise StoreError(f"{self.path}: written by a newer cracktip (schema {version}); "
                             f"this program (cracktip {__version__}) knows schema {SCHEMA_VERSION}")
        # older schemas would be migrated here, one step per version

    def _create_schema(self) -> None:
        db = self._db
        db.execute("BEGIN IMMEDIATE")
        try:
            for name, cols in _TABLES.items():
                db.execute(f"CREATE TABLE {name} ({cols})")
            for stmt in _INDEXES + _triggers():
                db.execute(stmt)
            db.execute("INSERT INTO schema_info VALUES (?, ?, ?)",
                       (SCHEMA_VERSION, self._clock(), __version__))
            db.execute(f"PRAGMA application_id = {APPLICATION_ID}")
            db.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
            db.execute("COMMIT")
        except BaseException:
            db.execute("ROLLBACK")
            raise

    def close(self) -> None:
        self._db.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # ------------------------------------------------------------ transactions
    @contextmanager
    def transaction(self, command: str, argv=()):
        """One command run: everything written inside is kept, or nothing.

        Yields
        ------
        Run
            The run's row (id, command, time).

        Raises
        ------
        StoreError
            If a transaction is already open on this store.
        """
        if self._run is not None:
            raise StoreError(f"{self.path}: a transaction is already open on this store")
        db = self._db
        try:
            db.execute("BEGIN IMMEDIATE")
        except sqlite3.Error as exc:
            raise store_error(self.path, exc, self._timeout) from None
        try:
            now = self._clock()
            try:
                cur = db.execute("INSERT INTO runs (command, argv, program_version, account, started_at) "
                                 "VALUES (?, ?, ?, ?, ?)",
                                 (command, canonical_json(list(argv)), __version__, _account(), now))
            except sqlite3.Error as exc:
                raise store_error(self.path, exc, self._timeout) from None
            self._run = Run(cur.lastrowid, command, now, tuple(argv), __version__, _account())
            yield self._run
            try:
                db.execute("COMMIT")
            except sqlite3.Error as exc:
                raise store_error(self.path, exc, self._timeout) from None
        except BaseException:
            if db.in_transaction:  # a failed COMMIT may already have rolled back
                try:
                    db.execute("ROLLBACK")
                except sqlite3.Error:
                    pass  # SQLite rolls back an unfinished transaction when the connection closes
            raise
        finally:
            self._run = None

    @property
    def current_run(self) -> Run | None:
        """The run of the open transaction, or ``None``."""
        return self._run

    def _writing(self) -> Run:
        if self._run is None:
            raise StoreError("the store is written only inside Store.transaction()")
        return self._run

    def counts(self) -> dict:
        """Rows per table (for checks and tests)."""
        return {t: self._db.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in _TABLES}

    # ------------------------------------------------------------ writes
    def _id_of(self, table, keys: dict, extra: dict) -> int:
        where = " AND ".join(f"{k} = ?" for k in keys)
        row = self._db.execute(f"SELECT id FROM {table} WHERE {where}", tuple(keys.values())).fetchone()
        if row:
            return row[0]
        cols = {**keys, **extra}
        cur = self._db.execute(f"INSERT INTO {table} ({', '.join(cols)}) VALUES ({', '.join('?' * len(cols))})",
                               tuple(cols.values()))
        return cur.lastrowid

    def _rule_set_id(self, name: str, content: dict) -> int:
        text = canonical_json(content)
        return self._id_of("rule_sets", {"sha256": sha256_text(text)}, {"name": name, "content": text})

    def add_reduction(self, result: dict, *, rule_set: str, rule_set_content: dict,
                      sheet: str | None = None, sheet_sha256: str | None = None,
                      sheet_row: int | None = None, record_path: str | None = None) -> StoredReduction:
        """Keep one reduction; a new version only when its content changed.

        Parameters
        ----------
        result : dict
            :meth:`reduce.models.Result.to_dict` output.
        rule_set, rule_set_content : str, dict
            The rule set's name and its limits as applied.
        sheet, sheet_sha256, sheet_row
            The test sheet (path and hash) and the row the specimen came from.
        record_path : str, optional
            The raw record's path; its hash is ``result["record_sha256"]``.

        Returns
        -------
        StoredReduction
            ``new`` is false when the latest version already had this content.
        """
        run = self._writing()
        heat, specimen = result.get("heat") or "", result["specimen"]
        content = reduction_content_sha256(result, rule_set_content)
        latest = self.latest_reduction(heat, specimen)
        if latest is not None and latest.content_sha256 == content:
            return latest
        rs_id = self._rule_set_id(rule_set, rule_set_content)
        sheet_id = (self._id_of("sheets", {"path": sheet, "sha256": sheet_sha256}, {"first_run_id": run.id})
                    if sheet and sheet_sha256 else None)
        rec_id = None
        if result.get("record_sha256"):
            rec_id = self._id_of("records", {"path": record_path or result.get("record") or "",
                                             "sha256": result["record_sha256"]}, {"first_run_id": run.id})
        sd = result.get("specimen_data") or {}
        version = 1 + (latest.version if latest else 0)
        cur = self._db.execute(
            "INSERT INTO reductions (run_id, heat, specimen, version, sheet_id, sheet_row, record_id, "
            "rule_set_id, program_version, created_at, material, orientation, temperature_C, K_Q, K_Ic, "
            "valid, error, content_sha256, result_json) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, "
            "?, ?, ?, ?, ?)",
            (run.id, heat, specimen, version, sheet_id, sheet_row, rec_id, rs_id, __version__, run.started_at,
             (sd.get("metadata") or {}).get("material"), sd.get("orientation"), sd.get("temperature_C"),
             result.get("K_Q_MPa_sqrt_m"), result.get("K_Ic_MPa_sqrt_m"), int(bool(result.get("valid"))),
             result.get("error"), content, canonical_json(result)))
        return replace(self.reduction(cur.lastrowid), new=True)

    def add_verdict(self, *, heat: str, verdict: str, reason: str, detail: dict, specification: dict,
                    rule_set: str, rule_set_content: dict, reductions) -> int:
        """Keep a heat verdict and the reductions behind it.

        Parameters
        ----------
        specification : dict
            ``name``, ``file`` and ``text`` of the specification file used.
        reductions : iterable of (int, str)
            (reduction id, role in the verdict).

        Returns
        -------
        int
            The verdict's id.
        """
        run = self._writing()
        text = specification["text"]
        spec_id = self._id_of("specifications", {"sha256": sha256_text(text)},
                              {"name": specification["name"], "file": specification.get("file"),
                               "content": text})
        cur = self._db.execute(
            "INSERT INTO verdicts (run_id, heat, specification_id, rule_set_id, verdict, reason, "
            "detail_json, program_version, created_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (run.id, heat, spec_id, self._rule_set_id(rule_set, rule_set_content), verdict, reason,
             canonical_json(detail), __version__, run.started_at))
        vid = cur.lastrowid
        self._db.executemany("INSERT INTO verdict_reductions VALUES (?, ?, ?)",
                             [(vid, rid, role) for rid, role in reductions])
        return vid

    def add_approval(self, *, heat: str, verdict_id: int, decision: str, approver: str,
                     comment: str = "", reduction_ids) -> int:
        """Keep a QA decision with the exact reduction versions it was shown.

        Raises
        ------
        ApprovalError
            If the verdict is not of this heat, or the approver is blank.
        """
        run = self._writing()
        v = self.verdict(verdict_id)
        if v is None or v.heat != heat:
            raise ApprovalError(f"verdict {verdict_id} is not a verdict on heat {heat}")
        if not approver.strip():
            raise ApprovalError("the approver's name is empty; give --by NAME")
        cur = self._db.execute(
            "INSERT INTO approvals (run_id, heat, verdict_id, decision, approver, comment, "
            "program_version, created_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
            (run.id, heat, verdict_id, decision, approver.strip(), comment, __version__, run.started_at))
        aid = cur.lastrowid
        self._db.executemany("INSERT INTO approval_reductions VALUES (?, ?)",
                             [(aid, rid) for rid in reduction_ids])
        return aid

    def next_certificate_number(self, prefix: str = "CT", reserved=()) -> str:
        """A new certificate number, ``PREFIX-YEAR-NNNN``: one more than the highest of the year.

        Parameters
        ----------
        prefix : str
            The lab's certificate prefix (letters, digits and ``-``).
        reserved : iterable of str
            Numbers handed out in this transaction but not yet stored.

        >>> import tempfile, os
        >>> with tempfile.TemporaryDirectory() as d:
        ...     with Store.open(os.path.join(d, "qa.db"), clock=lambda: "2031-05-01T10:00:00+00:00") as st:
        ...         with st.transaction("certify"):
        ...             st.next_certificate_number("AMTL", reserved=["AMTL-2031-0001"])
        'AMTL-2031-0002'
        """
        run = self._writing()
        stem = f"{prefix}-{run.started_at[:4]}-"
        pattern = re.compile(re.escape(stem) + r"(\d+)$")
        used = [r[0] for r in self._db.execute("SELECT DISTINCT number FROM certificates WHERE "
                                                "substr(number, 1, ?) = ?", (len(stem), stem))]
        serials = [int(m.group(1)) for m in map(pattern.match, list(used) + list(reserved)) if m]
        return f"{stem}{max(serials, default=0) + 1:04d}"

    def heat_of_certificate_number(self, number: str) -> str | None:
        """The heat an issued certificate number belongs to, or ``None`` when unused."""
        row = self._db.execute("SELECT heat FROM certificates WHERE number = ? ORDER BY id LIMIT 1",
                               (number,)).fetchone()
        return None if row is None else row[0]

    def add_certificate(self, *, heat: str, approval_id: int, number: str, revision: int,
                        supersedes_id: int | None, pdf: bytes, file: str | None) -> int:
        """Keep an issued certificate (the PDF itself too).

        Raises
        ------
        ApprovalError
            If the approval is not an acceptance of this heat: no certificate
            is issued before approval.
        """
        run = self._writing()
        a = self.approval(approval_id)
        if a is None or a.heat != heat or a.decision != "accept":
            raise ApprovalError(f"heat {heat} has no accepting approval (approval id {approval_id}); "
                                "a certificate is issued only after `cracktip approve HEAT --decision accept`")
        cur = self._db.execute(
            "INSERT INTO certificates (run_id, heat, approval_id, number, revision, supersedes_id, file, "
            "pdf_sha256, pdf, program_version, issued_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (run.id, heat, approval_id, number, revision, supersedes_id, file,
             hashlib.sha256(pdf).hexdigest(), sqlite3.Binary(pdf), __version__, run.started_at))
        return cur.lastrowid

    # ------------------------------------------------------------ reads
    _RED = ("SELECT r.id, r.heat, r.specimen, r.version, r.created_at, r.program_version, rs.name, r.valid, "
            "r.K_Q, r.K_Ic, r.error, r.content_sha256, rec.path, rec.sha256, sh.path, r.run_id, r.result_json "
            "FROM reductions r JOIN rule_sets rs ON rs.id = r.rule_set_id "
            "LEFT JOIN records rec ON rec.id = r.record_id LEFT JOIN sheets sh ON sh.id = r.sheet_id ")

    @staticmethod
    def _reduction(row) -> StoredReduction:
        return StoredReduction(row[0], row[1], row[2], row[3], row[4], row[5], row[6], bool(row[7]), row[8],
                               row[9], row[10], row[11], row[12], row[13], row[14], row[15], json.loads(row[16]))

    def reduction(self, reduction_id: int) -> StoredReduction | None:
        row = self._db.execute(self._RED + "WHERE r.id = ?", (reduction_id,)).fetchone()
        return None if row is None else self._reduction(row)

    def latest_reduction(self, heat: str, specimen: str) -> StoredReduction | None:
        row = self._db.execute(self._RED + "WHERE r.heat = ? AND r.specimen = ? ORDER BY r.version DESC LIMIT 1",
                               (heat or "", specimen)).fetchone()
        return None if row is None else self._reduction(row)

    def reductions(self, *, heat: str | None = None, specimen: str | None = None) -> list:
        """Every reduction version, oldest first, optionally of one heat and/or specimen."""
        sql, args = self._where(heat=heat, specimen=specimen)
        return [self._reduction(r) for r in self._db.execute(self._RED + sql + " ORDER BY r.id", args)]

    def latest_reductions(self, heat: str) -> dict:
        """specimen -> its latest reduction version, for one heat."""
        rows = self._db.execute(
            self._RED + "WHERE r.heat = ? AND r.version = (SELECT max(version) FROM reductions x "
            "WHERE x.heat = r.heat AND x.specimen = r.specimen) ORDER BY r.id", (heat,))
        return {r.specimen: r for r in map(self._reduction, rows)}

    @staticmethod
    def _where(**conds):
        parts = [(f"r.{k} = ?", v) for k, v in conds.items() if v is not None]
        if not parts:
            return "", ()
        return "WHERE " + " AND ".join(p for p, _ in parts), tuple(v for _, v in parts)

    _VER = ("SELECT v.id, v.heat, v.verdict, v.reason, s.name, s.sha256, rs.name, v.created_at, "
            "v.program_version, v.run_id, v.detail_json FROM verdicts v "
            "JOIN specifications s ON s.id = v.specification_id JOIN rule_sets rs ON rs.id = v.rule_set_id ")

    def _verdict(self, row) -> StoredVerdict:
        links = tuple(self._db.execute("SELECT reduction_id, role FROM verdict_reductions WHERE verdict_id = ? "
                                       "ORDER BY reduction_id", (row[0],)))
        return StoredVerdict(*row[:10], json.loads(row[10]), links)

    def verdict(self, verdict_id: int) -> StoredVerdict | None:
        row = self._db.execute(self._VER + "WHERE v.id = ?", (verdict_id,)).fetchone()
        return None if row is None else self._verdict(row)

    def latest_verdict(self, heat: str) -> StoredVerdict | None:
        row = self._db.execute(self._VER + "WHERE v.heat = ? ORDER BY v.id DESC LIMIT 1", (heat,)).fetchone()
        return None if row is None else self._verdict(row)

    def verdicts(self, heat: str | None = None) -> list:
        sql, args = ("WHERE v.heat = ? ", (heat,)) if heat is not None else ("", ())
        return [self._verdict(r) for r in self._db.execute(self._VER + sql + "ORDER BY v.id", args).fetchall()]

    _APP = ("SELECT id, heat, verdict_id, decision, approver, comment, created_at, program_version, run_id "
            "FROM approvals ")

    def _approval(self, row) -> StoredApproval:
        ids = tuple(r[0] for r in self._db.execute(
            "SELECT reduction_id FROM approval_reductions WHERE approval_id = ? ORDER BY reduction_id", (row[0],)))
        return StoredApproval(*row, ids)

    def approval(self, approval_id: int) -> StoredApproval | None:
        row = self._db.execute(self._APP + "WHERE id = ?", (approval_id,)).fetchone()
        return None if row is None else self._approval(row)

    def latest_approval(self, heat: str) -> StoredApproval | None:
        row = self._db.execute(self._APP + "WHERE heat = ? ORDER BY id DESC LIMIT 1", (heat,)).fetchone()
        return None if row is None else self._approval(row)

    def approvals(self, heat: str | None = None) -> list:
        sql, args = ("WHERE heat = ? ", (heat,)) if heat is not None else ("", ())
        return [self._approval(r) for r in self._db.execute(self._APP + sql + "ORDER BY id", args).fetchall()]

    _CERT = ("SELECT c.id, c.heat, c.approval_id, c.number, c.revision, c.supersedes_id, "
             "CASE WHEN p.id IS NULL THEN NULL ELSE p.number || ' rev. ' || p.revision END, "
             "c.file, c.pdf_sha256, c.issued_at, c.program_version, c.run_id "
             "FROM certificates c LEFT JOIN certificates p ON p.id = c.supersedes_id ")

    def certificates(self, heat: str | None = None) -> list:
        """Issued certificates, oldest first."""
        sql, args = ("WHERE c.heat = ? ", (heat,)) if heat is not None else ("", ())
        return [StoredCertificate(*r) for r in self._db.execute(self._CERT + sql + "ORDER BY c.id", args)]

    def certificate_pdf(self, certificate_id: int) -> bytes:
        """The PDF exactly as issued."""
        row = self._db.execute("SELECT pdf FROM certificates WHERE id = ?", (certificate_id,)).fetchone()
        if row is None:
            raise StoreError(f"no certificate with id {certificate_id} in {self.path}")
        return bytes(row[0])

    def reduction_rule_set(self, reduction_id: int) -> dict | None:
        """The rule set exactly as a reduction applied it (name, limits, secant ratio)."""
        row = self._db.execute("SELECT rs.content FROM reductions r JOIN rule_sets rs ON rs.id = r.rule_set_id "
                               "WHERE r.id = ?", (reduction_id,)).fetchone()
        return None if row is None else json.loads(row[0])

    def heats(self) -> list:
        return [r[0] for r in self._db.execute(
            "SELECT heat FROM reductions WHERE heat != '' GROUP BY heat ORDER BY min(id)")]

    def heats_of_specimen(self, specimen: str) -> list:
        return [r[0] for r in self._db.execute(
            "SELECT DISTINCT heat FROM reductions WHERE specimen = ? ORDER BY heat", (specimen,))]

    def runs(self) -> list:
        rows = self._db.execute("SELECT id, command, started_at, argv, program_version, account FROM runs "
                                "ORDER BY id")
        return [Run(r[0], r[1], r[2], tuple(json.loads(r[3])), r[4], r[5]) for r in rows]

    def trend_rows(self, material: str, orientation: str | None = None, *, temperature_C: float | None = None,
                   band_C: float = 0.0, rule_set: str | None = None) -> list:
        """Latest valid K_Ic of every specimen whose material contains ``material``.

        Parameters
        ----------
        material : str
            Text the material name contains (case-insensitive).
        orientation : str, optional
            Only this orientation code.
        temperature_C, band_C : float, optional
            Only specimens tested within ``temperature_C ± band_C``, °C.
        rule_set : str, optional
            Only reductions by this rule set (``e399``, ``iso12737``).

        Returns
        -------
        list of dict
            ``heat``, ``specimen``, ``K_Ic`` (MPa·m^½), ``orientation``,
            ``temperature_C``, ``material``, ``heat_first_reduced`` (ISO time),
            ``rule_set``, oldest heat first.
        """
        sql = ("SELECT r.heat, r.specimen, r.K_Ic, r.orientation, r.temperature_C, r.material, "
               "(SELECT min(created_at) FROM reductions f WHERE f.heat = r.heat) AS first, rs.name "
               "FROM reductions r JOIN rule_sets rs ON rs.id = r.rule_set_id "
               "WHERE r.valid = 1 AND r.K_Ic IS NOT NULL AND r.heat != '' "
               "AND instr(lower(coalesce(r.material, '')), lower(?)) > 0 "
               "AND r.version = (SELECT max(version) FROM reductions x WHERE x.heat = r.heat "
               "AND x.specimen = r.specimen)")
        args = [material]
        if orientation:
            sql += " AND upper(r.orientation) = upper(?)"
            args.append(orientation)
        if temperature_C is not None:
            sql += " AND r.temperature_C IS NOT NULL AND abs(r.temperature_C - ?) <= ?"
            args += [float(temperature_C), float(band_C)]
        if rule_set:
            sql += " AND rs.name = ?"
            args.append(rule_set)
        sql += " ORDER BY first, r.heat, r.specimen"
        keys = ("heat", "specimen", "K_Ic", "orientation", "temperature_C", "material", "heat_first_reduced",
                "rule_set")
        return [dict(zip(keys, r)) for r in self._db.execute(sql, args)]


def _account() -> str:
    """The operating-system account running the command (who pressed the key, for the trail)."""
    try:
        return getpass.getuser()
    except Exception:  # no login name in some containers and services
        return "unknown"
