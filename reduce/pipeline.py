"""From a record and a specimen description to a :class:`~reduce.models.Result`.

:func:`reduce_arrays` is the Python API: arrays in (load kN, displacement
mm, optional time s), no files.  :func:`reduce_specimen` reads the record a
sheet row names first; :func:`reduce_sheet` does every row of a sheet and
never lets one bad row stop the others.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

import specimens
from reduce import rules as R
from reduce.construction import construction_on_envelope, loading_rate
from reduce.elastic_plastic import elastic_plastic_result
from reduce.errors import CracktipError, ReductionError
from reduce.models import Result, Specimen

_REASON_WORDS = {
    "a_over_W": "a/W is outside the permitted range",
    "pmax_pq_ratio": "P_max/P_Q exceeds the limit",
    "ligament_size": "the ligament W - a is too small for plane strain",
    "thickness_size": "the thickness B is too small for plane strain",
    "crack_length_size": "the crack length a is too small for plane strain",
    "crack_front": "the crack front is too uneven",
    "surface_crack": "the surface crack traces are out of tolerance",
    "precrack_kmax": "the fatigue precrack K_max was too high",
    "loading_rate": "the loading rate is outside the permitted range",
    "calibration_confirmed": "the K calibration of this geometry is not confirmed, so K_Q cannot be K_Ic",
    "compliance_crack_length": "the crack length the initial slope implies differs from the measured one",
}


def reasons_in_words(checks, core, advisory=()) -> list[str]:
    """Why K_Q does not qualify, one sentence per failed or unassessed core check.

    Failed advisory checks are left out: they do not decide validity
    (:func:`warnings_in_words` reports them).
    """
    out = []
    for c in checks:
        if c.passed is False and c.name in advisory:
            continue
        if c.passed is False and c.value is None:
            out.append(f"{_REASON_WORDS.get(c.name, c.name)} ({c.name}, required: {c.limit})")
        elif c.passed is False:
            out.append(f"{_REASON_WORDS.get(c.name, c.name)} ({c.name}: {_fmt(c.value)}, required {c.limit})")
        elif c.passed is None and c.name in core:
            out.append(f"{c.name} was not assessed ({c.note}); a core check must pass")
    return out


def warnings_in_words(checks, advisory) -> list[str]:
    """One sentence per failed advisory check; these show but do not decide validity."""
    out = []
    for c in checks:
        if c.name in advisory and c.passed is False:
            what = _fmt(c.value) if c.value is not None else "n/a"
            out.append(f"advisory, does not decide validity: {_REASON_WORDS.get(c.name, c.name)} "
                       f"({c.name}: {what}, required {c.limit}; {c.note}); check the crack-length "
                       "readings, E, the dimensions and the displacement type")
    return out


def _fmt(x):
    return "n/a" if x is None else f"{x:.4g}"


def displacement_type_of(geo, specimen: Specimen) -> str:
    """The displacement type in force: the specimen's, else the geometry's default.

    Raises
    ------
    ValueError
        If the geometry does not allow the specimen's displacement type; the
        message lists the allowed ones.
    """
    kind = specimen.displacement_type or geo.displacement_types[0]
    if kind not in geo.displacement_types:
        raise ValueError(f"displacement_type {kind!r} is not possible for {geo.designation}; "
                         f"allowed: {', '.join(geo.displacement_types)}")
    return kind


def compliance_crack_length(limits: dict, geo, specimen: Specimen, kind: str, a: float,
                            slope_kN_per_mm: float):
    """(a_compliance mm or None, Check): the crack length the initial slope implies.

    C = 1/slope is turned into a by the geometry's compliance relation for
    the displacement type in force (:mod:`specimens.compliance`), with E and
    Poisson's ratio of the specimen (0.3 where none is given, the default of
    :func:`specimens.crack_length_from_compliance`).

    References
    ----------
    ASTM E1820 Annex A1 (SE(B) CMOD), Annex A2 (C(T) load line); ASTM E647
    (C(T) front face).  From memory, see :mod:`specimens.compliance`.
    """
    W = specimen.W
    if geo.compliance is None or kind not in geo.compliance.displacement_types:
        where = "" if geo.compliance is None else f" at {kind}"
        return None, R.compliance_crack_length_check(
            limits, a, W, None, note=f"no compliance relation is held for {geo.designation}{where}")
    lo, hi = geo.compliance.fit(kind).alpha_range
    if not lo <= a / W <= hi:
        return None, R.compliance_crack_length_check(
            limits, a, W, None, note=f"the measured a/W = {a / W:.3f} is outside {lo} to {hi}, "
                                     f"the range of the {kind} compliance relation")
    nu = 0.3 if specimen.poisson is None else specimen.poisson
    try:
        a_c = specimens.crack_length_from_compliance(
            geo, 1.0 / slope_kN_per_mm, specimen.B, W, specimen.E_MPa, specimen.B_N, specimen.S,
            kind, nu)
    except ValueError as exc:
        # the slope implies an a/W outside the relation's range: at least this far from a/W
        return None, R.compliance_crack_length_check(
            limits, a, W, None, min_difference_over_W=min(hi - a / W, a / W - lo),
            note=f"the initial slope {slope_kN_per_mm:.4g} kN/mm implies a crack length outside "
                 f"the relation's range ({exc})")
    return a_c, R.compliance_crack_length_check(limits, a, W, a_c)


def reduce_arrays(load_kN, disp_mm, specimen: Specimen, time_s=None, rules: str = "e399",
                  record_sha256: str | None = None) -> Result:
    """Reduce one load–displacement record to K_Q and its validity.

    a is the crack-front average of the scheme the number of readings
    implies (3: ASTM E399, 9: ASTM E1820).  The crack length the initial
    slope implies (``a_compliance_mm``, through the compliance relation of
    the displacement type in force) is compared with it by the advisory
    check ``compliance_crack_length``; a geometry definition with a caveat
    fails ``calibration_confirmed``, so its K_Q never qualifies.
    Unloading–reloading cycles are removed before the construction
    (:func:`reduce.construction.loading_envelope`); ``curve_note`` and
    ``warnings`` then say so.

    Parameters
    ----------
    load_kN : array_like
        Load, kN, in sample order.
    disp_mm : array_like
        Crack-opening (or load-line) displacement, mm, any origin.
    specimen : Specimen
        Geometry, dimensions (mm) and material data (MPa).
    time_s : array_like, optional
        Time, s; enables the ``loading_rate`` check.
    rules : {"e399", "iso12737"}
        The rule set.

    Returns
    -------
    Result

    Raises
    ------
    ReductionError
        If the construction cannot be made on the record.
    RulesError
        For an unknown rule set.
    ValueError
        If a/W is outside (0, 1), the geometry lacks a dimension, there are
        neither 3 nor 9 crack-length readings, or the geometry does not allow
        the specimen's displacement type.

    References
    ----------
    ASTM E399 clauses 9.1 (P_Q, K_Q) and 9.1.3 (validity); ISO 12737;
    ASTM E1820 (nine-point average, compliance crack length), from memory.

    Examples
    --------
    >>> import numpy as np
    >>> v = np.linspace(0, 0.5, 200); P = 40 * v   # a purely linear record
    >>> s = Specimen("X1", "C(T)", B=25, W=50, a_readings=(25, 25, 25),
    ...              yield_MPa=500, E_MPa=205000)
    >>> r = reduce_arrays(P, v, s)
    >>> r.curve_type, round(r.P_Q_kN, 2), round(r.K_Q_MPa_sqrt_m, 1)
    ('III', 20.0, 34.6)
    """
    limits = R.rule_set(rules)
    geo = specimens.geometry(specimen.geometry)
    load = np.asarray(load_kN, dtype=float)
    disp = np.asarray(disp_mm, dtype=float)
    if load.shape != disp.shape or load.ndim != 1:
        raise ReductionError("load and displacement must be 1-D arrays of the same length")
    # unloading-reloading cycles go first, so P_Q never comes from an unloading line
    made = construction_on_envelope(load, disp, R.secant_ratio(), time_s)
    envelope, sec, load, disp, time_s = made.envelope, made.secant, made.load, made.disp, made.time

    kind = displacement_type_of(geo, specimen)
    front = specimens.crack_front_average(specimen.a_readings)
    a = front.average
    dims = specimen.geometry_dims()
    a_over_W = a / specimen.W
    f = geo.f(a_over_W, dims)
    K_per_kN = geo.K_per_load(specimen.B, specimen.W, a, specimen.B_N, dims)
    K_Q = sec.P_Q * K_per_kN
    ratio = sec.P_max / sec.P_Q

    checks = R.core_checks(limits, a_over_W=a_over_W, P_max_over_P_Q=ratio, K_Q=K_Q,
                           yield_MPa=specimen.yield_MPa, B=specimen.B, a=a, W=specimen.W)
    checks.append(R.crack_front_check(limits, tuple(specimen.a_readings), specimen.B, specimen.W))
    checks.append(R.surface_crack_check(limits, a, tuple(specimen.surface)))
    checks.append(R.precrack_check(limits, specimen.precrack_Kmax, K_Q, specimen.E_MPa))
    K_rate = None
    if time_s is not None:
        P_rate = loading_rate(load, np.asarray(time_s, dtype=float), sec.fit)
        K_rate = None if P_rate is None else P_rate * K_per_kN
    checks.append(R.loading_rate_check(limits, K_rate))
    a_compliance, c_check = compliance_crack_length(limits, geo, specimen, kind, a, sec.fit.slope)
    checks.append(c_check)
    checks.append(R.calibration_check(limits, geo.designation, geo.caveat, geo.reference))
    advisory = tuple(limits.get("advisory_checks", ()))

    valid = R.qualifies(limits, checks)
    return Result(
        specimen=specimen.specimen, geometry=geo.designation, rule_set=rules, heat=specimen.heat,
        P_Q_kN=sec.P_Q, P_max_kN=sec.P_max, P_5_kN=sec.P_5, P_max_over_P_Q=ratio,
        curve_type=sec.curve_type,
        curve_note=f"{envelope.note}; {sec.note}" if envelope.note else sec.note,
        initial_slope_kN_per_mm=sec.fit.slope, fit_r_squared=sec.fit.r_squared,
        fit_residual_sd_kN=sec.fit.residual_sd_kN, fit_window_fraction_of_P_max=sec.fit.window_fraction,
        origin_offset_mm=sec.fit.origin_mm,
        secant_slope_kN_per_mm=sec.secant_slope, v_5_mm=sec.v_5, v_Q_mm=sec.v_Q, v_max_mm=sec.v_max,
        a_mm=a, a_over_W=a_over_W, f_a_over_W=f, K_Q_MPa_sqrt_m=K_Q,
        valid=valid, K_Ic_MPa_sqrt_m=K_Q if valid else None, K_rate_MPa_sqrt_m_per_s=K_rate,
        checks=checks,
        reasons=[] if valid else reasons_in_words(checks, limits["core_checks"], advisory),
        a_compliance_mm=a_compliance, displacement_type=kind, crack_front_scheme=front.scheme,
        caveats=[geo.caveat] if geo.caveat else [],
        warnings=warnings_in_words(checks, advisory) + ([envelope.note] if envelope.note else []),
        record_sha256=record_sha256, record=specimen.record, specimen_data=specimen.describe(),
        extra={"elastic_plastic": elastic_plastic_result(load, disp, specimen, sec, a, K_per_kN,
                                                         kic_checks=checks, extremes=made.extremes)},
    )


def failed_result(specimen_id: str, rules: str, error: Exception | str, *, heat=None,
                  geometry=None, record=None, record_sha256=None) -> Result:
    """The result object of a row that could not be reduced."""
    return Result(specimen=specimen_id, geometry=geometry, rule_set=rules, heat=heat,
                  error=str(error), record=record, record_sha256=record_sha256)


def record_path(specimen: Specimen) -> Path:
    """Where a specimen's record lies: relative paths are taken from the sheet's folder."""
    p = Path(specimen.record)
    if not p.is_absolute() and specimen.sheet:
        p = Path(specimen.sheet).parent / p
    return p


def reduce_specimen(specimen: Specimen, rules: str = "e399"):
    """Read the record a specimen names and reduce it.

    Returns
    -------
    (Result, Record or None)
        The record is returned too so reports can draw it; it is ``None``
        when it could not be read.  Errors are caught and carried in
        ``Result.error``: this function does not raise for bad data.
    """
    from reduce.records import read_record

    rec = None
    try:
        if not specimen.record:
            raise ReductionError(f"row {specimen.row}: column 'record' is empty; name the record file")
        rec = read_record(record_path(specimen), load_column=specimen.load_column,
                          displacement_column=specimen.displacement_column,
                          load_unit=specimen.load_unit, displacement_unit=specimen.displacement_unit)
        result = reduce_arrays(rec.load_kN, rec.disp_mm, specimen, rec.time_s, rules)
        result.record_sha256 = rec.sha256  # read after the reduction: a large file is hashed beside it
        result.record_notes = list(rec.notes)
        return result, rec
    except (CracktipError, ValueError, KeyError) as exc:
        where = f"{specimen.sheet}, row {specimen.row}: " if specimen.sheet and not isinstance(exc, CracktipError) else ""
        if rec is not None and isinstance(exc, ReductionError):
            where = f"{rec.path}: "  # the record was read but cannot be reduced: name it
        msg = exc.args[0] if isinstance(exc, KeyError) and exc.args else exc
        return failed_result(specimen.specimen, rules, f"{where}{msg}", heat=specimen.heat,
                             geometry=specimen.geometry, record=specimen.record,
                             record_sha256=rec.sha256 if rec else None), rec


def reduce_sheet(path, rules: str = "e399") -> list:
    """Reduce every row of a test sheet.

    Returns
    -------
    list of (Result, Record or None, Specimen or BadRow)
        In sheet order.  Rows that could not be read or reduced carry their
        message in ``Result.error``; they never stop the other rows.

    Raises
    ------
    SheetError
        Only when the sheet as a whole cannot be used.
    RulesError
        For an unknown rule set.
    """
    from reduce.batch import reduce_rows
    from reduce.sheet import read_sheet

    R.rule_set(rules)
    rows = read_sheet(path)
    # in this process, with the batch runner's handling of bad rows and its whole-row guard
    done = reduce_rows(rows, rules, jobs=1)
    return [(result, rec, row) for (result, rec), row in zip(done, rows)]
