"""Heat acceptance: reduction results and a customer's specification in,
one verdict per heat out.

A heat (the sheet's ``heat`` column) is judged against every requirement of
the specification that applies to its material; each specimen belongs to the
requirement of its orientation and test temperature.  The verdicts:

``accepted``
    every applicable requirement is met;
``rejected``
    a result is below the minimum and the retest rule cannot clear it, or a
    retest failed;
``retest needed``
    too few valid results, or retests of a low result are still missing;
``not assessed``
    the specification has no requirement for the heat, or the heat's data
    contradict themselves (a specimen not reduced, a ``retest_of`` that names
    no suitable specimen) — fix the sheet and run again.

What counts: a K_Q that qualifies as K_Ic.  A K_Q that does not qualify never
counts unless the requirement says ``count_K_Q = "at_or_above_minimum"``;
then it counts as a passing result when at least the minimum, and never as
a low one.

Retests: a specimen whose sheet column ``retest_of`` names a specimen of the
same heat and requirement is a retest of it.  Retests of a low result clear
it only when the requirement has a retest rule, the heat has no more low
results than the rule allows, and every retest passes; the low result is then
set aside (kept and shown) and the passing retests count.  A ``retest_of``
naming a specimen that was not low makes the specimen an ordinary result.

Two more things stop an assessment (``not assessed``, the reason names them):
two specimens whose records have the same SHA-256 (one test cannot count as
two specimens; the later row is not counted, and the sheet must say which
row is the real test), and two requirements that both apply to a heat's
material, orientation and temperature (the specification is ambiguous for
that material).

When too few results count and every one that does not count failed a size
check by a wide margin (:data:`WIDE_SIZE_MARGIN`), the reason says that
larger specimens are needed (the size the results require) and points to the
elastic–plastic result instead of asking for more specimens of the same size.

Pure: no files, no printing.

References
----------
The specification's own clauses decide.  The retest rule of the demo
specification (one low result, two retests that must both pass) is common
practice, no source.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field

from reduce.spec import Requirement, Specification

ACCEPTED, REJECTED, RETEST, NOT_ASSESSED = "accepted", "rejected", "retest needed", "not assessed"
VERDICTS = (ACCEPTED, REJECTED, RETEST, NOT_ASSESSED)
#: a size check failed "by a wide margin" when the size required is at least this many
#: times the specimen's (cracktip's threshold, no source): more specimens of the same
#: size are then not worth testing for K_Ic
WIDE_SIZE_MARGIN = 2.0
#: the size checks and the dimension each one is about
SIZE_CHECKS = {"ligament_size": "W − a", "thickness_size": "B", "crack_length_size": "a"}


@dataclass(frozen=True)
class SizeShortfall:
    """A failed E399 / ISO 12737 size check of one specimen.

    Attributes
    ----------
    check : str
        ``ligament_size``, ``thickness_size`` or ``crack_length_size``.
    actual_mm, required_mm : float
        The specimen's dimension and the 2.5 (K_Q/σ_YS)² it had to reach, mm.
    K_Q : float
        MPa·m^½.

    References
    ----------
    ASTM E399 clause 9.1.3; ISO 12737 (size requirement 2.5 (K_Q/σ_YS)²), from memory.
    """

    check: str
    actual_mm: float
    required_mm: float
    K_Q: float

    @property
    def label(self) -> str:
        return SIZE_CHECKS[self.check]

    @property
    def wide(self) -> bool:
        return self.required_mm >= WIDE_SIZE_MARGIN * self.actual_mm

    @property
    def K_capacity(self) -> float:
        """The largest K that this dimension can qualify as K_Ic, MPa·m^½.

        The requirement grows as K², so it is K_Q·√(actual/required).

        >>> round(SizeShortfall("ligament_size", 25.0, 100.0, 120.0).K_capacity, 6)
        60.0
        """
        return self.K_Q * (self.actual_mm / self.required_mm) ** 0.5


@dataclass(frozen=True)
class TestedSpecimen:
    """What acceptance needs to know of one specimen.

    Attributes
    ----------
    specimen, heat : str
    orientation : str or None
    temperature_C : float or None
        Test temperature, °C.
    material : str or None
    K_Q : float or None
        MPa·m^½ (``None`` when not reduced).
    qualifies : bool
        Whether K_Q qualifies as K_Ic under the rule set used.
    reasons : tuple of str
        Why K_Q does not qualify, in words.
    error : str or None
        Why the specimen could not be reduced.
    retest_of : str or None
        The specimen this one retests (sheet column ``retest_of``).
    where : str
        Sheet and row, for messages.
    record, record_sha256 : str or None
        The raw record and the SHA-256 of its bytes.
    size_shortfalls : tuple of SizeShortfall
        The size checks it failed.
    """

    __test__ = False  # not a pytest test class despite the name

    specimen: str
    heat: str | None
    orientation: str | None = None
    temperature_C: float | None = None
    material: str | None = None
    K_Q: float | None = None
    qualifies: bool = False
    reasons: tuple = ()
    error: str | None = None
    retest_of: str | None = None
    where: str = ""
    record: str | None = None
    record_sha256: str | None = None
    size_shortfalls: tuple = ()


@dataclass(frozen=True)
class SpecimenRole:
    """The part one specimen played in a heat's verdict.

    ``role`` is one of ``counted``, ``low``, ``low, set aside``, ``retest passed``,
    ``retest low``, ``not counted``, ``not covered``, ``not reduced``, ``bad retest_of``,
    ``duplicate record``, ``not assessed`` (the requirements are ambiguous for it).
    ``kind`` is ``"K_Ic"`` or ``"K_Q"`` for a value that counted or was low.
    """

    specimen: str
    role: str
    value: float | None = None
    kind: str | None = None
    note: str = ""
    requirement: int | None = None

    def to_dict(self) -> dict:
        return {"specimen": self.specimen, "role": self.role, "value_MPa_sqrt_m": self.value,
                "kind": self.kind, "note": self.note, "requirement": self.requirement}


@dataclass
class RequirementOutcome:
    """How a heat fared against one requirement."""

    requirement: Requirement
    status: str
    reason: str
    specimens: list = field(default_factory=list)

    def to_dict(self) -> dict:
        return {"requirement": self.requirement.to_dict(), "status": self.status,
                "reason": self.reason, "specimens": [s.to_dict() for s in self.specimens]}


@dataclass
class HeatVerdict:
    """The verdict on one heat, with the reason in words and the specimens behind it."""

    heat: str
    verdict: str
    reason: str
    specification: str
    outcomes: list = field(default_factory=list)
    others: list = field(default_factory=list)

    @property
    def specimens(self) -> list:
        """Every specimen's role, requirement by requirement, then the others."""
        return [s for o in self.outcomes for s in o.specimens] + list(self.others)

    @property
    def specimen_ids(self) -> list:
        return list(dict.fromkeys(s.specimen for s in self.specimens))

    def to_dict(self) -> dict:
        return {"heat": self.heat, "verdict": self.verdict, "reason": self.reason,
                "specification": self.specification,
                "requirements": [o.to_dict() for o in self.outcomes],
                "other_specimens": [s.to_dict() for s in self.others]}


def acceptance_inputs(rows) -> list:
    """Acceptance inputs from :func:`reduce.pipeline.reduce_sheet` output.

    Parameters
    ----------
    rows : list of (Result, Record or None, Specimen or BadRow)

    Returns
    -------
    list of TestedSpecimen
        In sheet order.  ``retest_of`` and ``material`` come from the sheet's
        columns of those names.
    """
    out = []
    for result, _, row in rows:
        meta = getattr(row, "metadata", None) or {}
        sheet, row_no = getattr(row, "sheet", None), getattr(row, "row", None)
        where = ", ".join(p for p in (sheet, f"row {row_no}" if row_no else None) if p)
        out.append(TestedSpecimen(
            specimen=result.specimen, heat=result.heat or getattr(row, "heat", None),
            orientation=getattr(row, "orientation", None),
            temperature_C=getattr(row, "temperature_C", None), material=meta.get("material"),
            K_Q=result.K_Q_MPa_sqrt_m, qualifies=bool(result.valid and result.K_Ic_MPa_sqrt_m is not None),
            reasons=tuple(result.reasons), error=result.error,
            retest_of=(meta.get("retest_of") or "").strip() or None, where=where,
            record=result.record, record_sha256=result.record_sha256,
            size_shortfalls=size_shortfalls(result)))
    return out


def size_shortfalls(result) -> tuple:
    """The size checks a result failed, with the size each required.

    Parameters
    ----------
    result : reduce.models.Result

    Returns
    -------
    tuple of SizeShortfall
        Empty when the result has no K_Q or passed its size checks.

    References
    ----------
    ASTM E399 clause 9.1.3; ISO 12737 (2.5 (K_Q/σ_YS)²), from memory; the factor
    is the rule set's (``limits.toml``).
    """
    from reduce.rules import rule_set, size_required

    yield_MPa = (result.specimen_data or {}).get("yield_MPa")
    if result.K_Q_MPa_sqrt_m is None or not yield_MPa:
        return ()
    failed = [c for c in result.checks if getattr(c, "name", None) in SIZE_CHECKS and c.passed is False]
    if not failed:
        return ()
    required = size_required(result.K_Q_MPa_sqrt_m, yield_MPa, rule_set(result.rule_set)["size"]["factor"])
    return tuple(SizeShortfall(c.name, float(c.value), required, result.K_Q_MPa_sqrt_m) for c in failed)


def heat_verdicts(tests, spec: Specification) -> list:
    """One verdict per heat.

    Parameters
    ----------
    tests : list of TestedSpecimen
        Every specimen of the sheet (specimens without a heat are left out;
        see :func:`without_heat`).
    spec : Specification

    Returns
    -------
    list of HeatVerdict
        Heats in the order they first appear.

    Examples
    --------
    >>> from reduce.spec import parse_spec
    >>> spec = parse_spec('[specification]\\nname = "X"\\n[[requirement]]\\norientation = "L-T"\\n'
    ...                   'temperature_C = 21\\nmin_K_Ic_MPa_sqrt_m = 26\\nmin_valid = 2\\n')
    >>> tests = [TestedSpecimen(s, "H1", "L-T", 21.0, K_Q=k, qualifies=True)
    ...          for s, k in (("A", 28.0), ("B", 29.5))]
    >>> v = heat_verdicts(tests, spec)[0]
    >>> v.verdict, v.reason
    ('accepted', 'L-T at 21 °C: 2 valid results (2 required), lowest 28.0 ≥ 26.0 MPa·m^½')
    """
    by_heat = defaultdict(list)
    for t in tests:
        if t.heat:
            by_heat[t.heat].append(t)
    all_by_id = {t.specimen: t for t in tests}
    first_with_record = {}
    for t in tests:
        if t.record_sha256 and not t.error:
            first_with_record.setdefault(t.record_sha256, t)
    return [_heat_verdict(heat, ts, all_by_id, spec, first_with_record) for heat, ts in by_heat.items()]


def without_heat(tests) -> list:
    """The specimens no verdict can cover because the sheet gives them no heat."""
    return [t for t in tests if not t.heat]


def _ambiguity(heat, tests, materials, spec) -> HeatVerdict | None:
    """A "not assessed" verdict when two requirements both apply to a material of the heat."""
    pairs = {(a.index, b.index): (a, b) for m in materials if m for a, b in spec.overlaps_for(m)}
    if not pairs:
        return None
    said = []
    for a, b in pairs.values():
        band = (f"{a.orientation} at {a.temperature_C:g} ± {a.temperature_tolerance_C:g} °C and "
                f"{b.temperature_C:g} ± {b.temperature_tolerance_C:g} °C")
        said.append(f"requirement {a.index} ({a.label}) and requirement {b.index} ({b.label}) both apply to "
                    f"this heat's material at {band}")
    shown = "; ".join(sorted(m for m in materials if m))
    reason = (f"cannot be assessed: {spec.citation} is ambiguous for material {shown!r}: " + "; ".join(said)
              + ": a specimen could count under either; make the requirements' material texts (or "
                "temperatures) exclusive")
    roles = [SpecimenRole(t.specimen, "not assessed", note="the specification's requirements are ambiguous "
                          "for this heat (see the reason)") for t in tests]
    return HeatVerdict(heat, NOT_ASSESSED, reason, spec.citation, [], roles)


def _duplicate_record(t, first_with_record) -> str | None:
    """Why ``t`` cannot count: its record's bytes are those of an earlier specimen."""
    first = first_with_record.get(t.record_sha256) if t.record_sha256 else None
    if first is None or first is t:
        return None
    other = first.specimen + ("" if first.heat == t.heat else f" (heat {first.heat})")
    if t.record == first.record:
        return (f"{t.specimen} names the record of {other}, {t.record}: one test cannot count as two "
                "specimens")
    return (f"{t.specimen}'s record {t.record} has the same SHA-256 ({t.record_sha256[:12]}…) as "
            f"the record of {other}, {first.record}: one test cannot count as two specimens")


def _heat_verdict(heat, tests, all_by_id, spec, first_with_record=None) -> HeatVerdict:
    materials = {t.material for t in tests}
    ambiguous = _ambiguity(heat, tests, materials, spec)
    if ambiguous is not None:
        return ambiguous
    applicable = [r for r in spec.requirements if any(r.applies_to_material(m) for m in materials)]
    others, problems, groups = [], [], defaultdict(list)
    for t in tests:
        if t.error:
            others.append(SpecimenRole(t.specimen, "not reduced", note=t.error))
            problems.append(f"{t.specimen} could not be reduced")
            continue
        dup = _duplicate_record(t, first_with_record or {})
        if dup:
            others.append(SpecimenRole(t.specimen, "duplicate record", note=dup + "; not counted"))
            problems.append(dup + "; correct the record column")
            continue
        req = next((r for r in applicable if r.covers(t.orientation, t.temperature_C, t.material)), None)
        if req is None:
            others.append(SpecimenRole(t.specimen, "not covered", note=_uncovered(t, spec)))
            continue
        groups[req.index].append(t)
    by_req = {t.specimen: i for i, ts in groups.items() for t in ts}
    for t in tests:
        bad = _bad_retest_link(t, all_by_id, by_req, heat)
        if bad:
            others.append(SpecimenRole(t.specimen, "bad retest_of", note=bad))
            problems.append(bad)
    outcomes = [_outcome(r, groups.get(r.index, []), spec) for r in applicable]
    cite = spec.citation
    if not applicable:
        shown = ", ".join(sorted(m for m in materials if m)) or "not given"
        return HeatVerdict(heat, NOT_ASSESSED, f"{cite} has no requirement for this heat's material "
                           f"({shown})", cite, [], others)
    text = "; ".join(o.reason for o in outcomes)
    if problems:
        return HeatVerdict(heat, NOT_ASSESSED, "cannot be assessed until the sheet is put right: "
                           + "; ".join(problems) + f" (meanwhile: {text})", cite, outcomes, others)
    statuses = {o.status for o in outcomes}
    verdict = REJECTED if REJECTED in statuses else RETEST if RETEST in statuses else ACCEPTED
    if verdict != ACCEPTED:
        text = "; ".join(o.reason for o in outcomes if o.status == verdict)
    return HeatVerdict(heat, verdict, text, cite, outcomes, others)


def _uncovered(t, spec) -> str:
    if t.orientation is None or t.temperature_C is None:
        missing = "orientation" if t.orientation is None else "test temperature"
        return f"{missing} not given in the sheet, so no requirement of {spec.citation} can apply"
    return (f"{spec.citation} has no requirement for {t.orientation} at {t.temperature_C:g} °C"
            + (f" for {t.material}" if t.material else "") + "; not counted")


def _bad_retest_link(t, all_by_id, by_req, heat) -> str | None:
    if not t.retest_of:
        return None
    where = f"{t.where}, column 'retest_of'" if t.where else "column 'retest_of'"
    head = f"{t.specimen} ({where}, value {t.retest_of!r})"
    target = all_by_id.get(t.retest_of)
    if t.retest_of == t.specimen:
        return f"{head} names the specimen itself; name the original specimen"
    if target is None:
        return f"{head} names no specimen of the sheet; name the original specimen"
    if target.heat != heat:
        return f"{head} names a specimen of heat {target.heat}; a retest must be of the same heat"
    if target.retest_of:
        return f"{head} names a retest; name the original specimen {target.retest_of}"
    if t.specimen in by_req and target.specimen in by_req and by_req[t.specimen] != by_req[target.specimen]:
        return f"{head} was tested in another orientation or at another temperature than {target.specimen}"
    return None


def _K(x) -> str:
    return f"{x:.1f}"


def _counted_value(t, req):
    """(value, kind) when the result counts, else ``None``."""
    if t.qualifies and t.K_Q is not None:
        return t.K_Q, "K_Ic"
    if req.count_K_Q == "at_or_above_minimum" and t.K_Q is not None and t.K_Q >= req.min_K_Ic:
        return t.K_Q, "K_Q"
    return None


def _not_counted_note(t, req, spec) -> str:
    why = "; ".join(t.reasons) or "it does not qualify"
    rule = ("never counts K_Q" if req.count_K_Q == "never"
            else "counts a non-qualifying K_Q only at or above the minimum")
    return f"K_Q {_K(t.K_Q)} MPa·m^½ is not K_Ic ({why}); {spec.citation} {rule}"


def _outcome(req: Requirement, tests, spec) -> RequirementOutcome:
    roles, counted, low = [], [], []
    lows_by_id = {}
    originals = [t for t in tests if not t.retest_of]
    retests = defaultdict(list)
    for t in tests:
        if t.retest_of:
            retests[t.retest_of].append(t)

    def judge(t, note=""):
        cv = _counted_value(t, req)
        if cv is None:
            roles.append(SpecimenRole(t.specimen, "not counted", None, None,
                                      _join(note, _not_counted_note(t, req, spec)), req.index))
        elif cv[0] < req.min_K_Ic:
            low.append((t, cv))
            lows_by_id[t.specimen] = (t, cv)
        else:
            counted.append((t, cv))
            roles.append(SpecimenRole(t.specimen, "counted", cv[0], cv[1], note, req.index))

    for t in originals:
        judge(t)
    for target, rts in retests.items():
        if target not in lows_by_id:
            for t in rts:
                judge(t, f"tested as a retest of {target}, which gave no low result: "
                         "counted as an ordinary result")
    reasons, status = [], ACCEPTED
    label, minimum = req.label, req.min_K_Ic
    lows_text = ", ".join(f"{t.specimen} {k} {_K(v)}" for t, (v, k) in low)
    rule = req.retest
    if low and (rule is None or len(low) > rule.low_results):
        status = REJECTED
        allowed = ("allows no retest" if rule is None
                   else f"allows retests for at most {rule.low_results} ({rule.source})")
        reasons.append(f"{len(low)} result{'s' if len(low) > 1 else ''} below the minimum "
                       f"{_K(minimum)} MPa·m^½ ({lows_text}); {spec.citation} {allowed}")
        roles.extend(SpecimenRole(t.specimen, "low", v, k, "below the minimum", req.index)
                     for t, (v, k) in low)
        for rts in (retests.get(t.specimen, []) for t, _ in low):
            roles.extend(SpecimenRole(r.specimen, "not counted", r.K_Q, None,
                                      "retest of a low result the rule cannot clear", req.index)
                         for r in rts)
    else:
        for t, (v, k) in low:
            s, text = _retests(t, v, k, retests.get(t.specimen, []), req, spec, roles, counted)
            reasons.append(text)
            status = _worse(status, s)
    n = len(counted)
    if status != REJECTED and n < req.min_valid:
        status = _worse(status, RETEST)
        missing = [r.specimen for r in roles if r.role == "not counted"]
        by_id = {t.specimen: t for t in tests}
        reasons.append(f"{n} valid result{'s' if n != 1 else ''}, {req.min_valid} required"
                       + (f" ({', '.join(missing)} {'does' if len(missing) == 1 else 'do'} not count)"
                          if missing else "")
                       + "; " + (_too_small([by_id[s] for s in missing], req) or "test further specimens"))
    if status == ACCEPTED:
        lowest = min(v for _, (v, _) in counted)
        kinds = {k for _, (_, k) in counted}
        on_K_Q = " (including K_Q counted under the specification's count_K_Q rule)" if "K_Q" in kinds else ""
        reasons.insert(0, f"{n} valid results ({req.min_valid} required), lowest {_K(lowest)} ≥ "
                          f"{_K(minimum)} MPa·m^½{on_K_Q}")
    return RequirementOutcome(req, status, f"{label}: " + "; ".join(reasons), roles)


def _span(values, fmt="{:.1f}") -> str:
    lo, hi = min(values), max(values)
    return fmt.format(lo) if fmt.format(lo) == fmt.format(hi) else f"{fmt.format(lo)}–{fmt.format(hi)}"


def _too_small(not_counting, req) -> str | None:
    """What to say when every result that does not count failed a size check by a wide margin."""
    if not not_counting or not all(any(f.wide for f in t.size_shortfalls) for t in not_counting):
        return None
    shortfalls = [f for t in not_counting for f in t.size_shortfalls if f.wide]
    by_label = defaultdict(list)
    for f in shortfalls:
        by_label[f.label].append(f)
    needs = "; ".join(f"{label} ≥ {_span([f.required_mm for f in fs])} mm (these have "
                      f"{_span([f.actual_mm for f in fs])} mm)" for label, fs in by_label.items())
    rule = f"at K_Q {_span([f.K_Q for f in shortfalls])} MPa·m^½ the size rule 2.5 (K_Q/σ_YS)² asks {needs}"
    # a specimen qualifies only up to its smallest dimension's capacity
    capacity = max(min(f.K_capacity for f in t.size_shortfalls) for t in not_counting)
    largest = "; ".join(f"{label} ≥ {max(f.required_mm for f in fs):.0f} mm" for label, fs in by_label.items())
    where_next = (f"test larger specimens ({largest}), or see the elastic–plastic result (J, K_J, CTOD) of "
                  "these specimens, which is not K_Ic and counts only where the specification allows it")
    if capacity < req.min_K_Ic:
        return (f"valid K_Ic cannot be obtained with specimens of this size: {rule}, and the largest K_Ic "
                f"they could qualify ({capacity:.1f} MPa·m^½) is below the minimum {req.min_K_Ic:.1f}; "
                + where_next)
    return (f"specimens of this size are too small for a valid K_Ic at this toughness: {rule}; "
            "more specimens of this size are unlikely to count: " + where_next)


def _retests(t, v, k, rts, req, spec, roles, counted):
    """Judge the retests of one low result; returns (status, reason)."""
    rule = req.retest
    passed, failed, void = [], [], []
    for r in rts:
        cv = _counted_value(r, req)
        if cv is None:
            void.append(r)
            roles.append(SpecimenRole(r.specimen, "not counted", None, None,
                                      f"retest of {t.specimen}: " + _not_counted_note(r, req, spec),
                                      req.index))
        elif cv[0] < req.min_K_Ic:
            failed.append((r, cv))
            roles.append(SpecimenRole(r.specimen, "retest low", cv[0], cv[1],
                                      f"retest of {t.specimen}, below the minimum", req.index))
        else:
            passed.append((r, cv))
    head = f"{t.specimen} gave {k} {_K(v)} < {_K(req.min_K_Ic)} MPa·m^½"
    if failed:
        roles.append(SpecimenRole(t.specimen, "low", v, k, "below the minimum", req.index))
        roles.extend(SpecimenRole(r.specimen, "retest passed", c[0], c[1], f"retest of {t.specimen}",
                                  req.index) for r, c in passed)
        shown = ", ".join(f"{r.specimen} {c[1]} {_K(c[0])}" for r, c in failed)
        return REJECTED, (f"{head} and its retest{'s' if len(failed) > 1 else ''} {shown} "
                          f"also fell below; every retest must pass ({rule.source})")
    if len(passed) < rule.retests_each:
        roles.append(SpecimenRole(t.specimen, "low", v, k, "below the minimum; retests pending",
                                  req.index))
        roles.extend(SpecimenRole(r.specimen, "retest passed", c[0], c[1], f"retest of {t.specimen}",
                                  req.index) for r, c in passed)
        return RETEST, (f"{head}: {rule.retests_each} passing retests required ({rule.source}), "
                        f"{len(passed)} so far")
    roles.append(SpecimenRole(t.specimen, "low, set aside", v, k,
                              f"cleared by {len(passed)} passing retests", req.index))
    for r, c in passed:
        counted.append((r, c))
        roles.append(SpecimenRole(r.specimen, "retest passed", c[0], c[1], f"retest of {t.specimen}; counted",
                                  req.index))
    names = ", ".join(r.specimen for r, _ in passed)
    return ACCEPTED, f"{head}, cleared by passing retests {names} ({rule.source})"


def _worse(a: str, b: str) -> str:
    order = (ACCEPTED, RETEST, REJECTED)
    return a if order.index(a) >= order.index(b) else b


def _join(*parts) -> str:
    return "; ".join(p for p in parts if p)
