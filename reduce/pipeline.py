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
from reduce.construction import loading_rate, secant_construction
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
}


def reasons_in_words(checks, core) -> list[str]:
    """Why K_Q does not qualify, one sentence per failed or unassessed core check."""
    out = []
    for c in checks:
        if c.passed is False:
            out.append(f"{_REASON_WORDS.get(c.name, c.name)} ({c.name}: {_fmt(c.value)}, required {c.limit})")
        elif c.passed is None and c.name in core:
            out.append(f"{c.name} was not assessed ({c.note}); a core check must pass")
    return out


def _fmt(x):
    return "n/a" if x is None else f"{x:.4g}"


def reduce_arrays(load_kN, disp_mm, specimen: Specimen, time_s=None, rules: str = "e399",
                  record_sha256: str | None = None) -> Result:
    """Reduce one load–displacement record to K_Q and its validity.

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
        If a/W is outside (0, 1) or the geometry lacks a dimension.

    References
    ----------
    ASTM E399 clauses 9.1 (P_Q, K_Q) and 9.1.3 (validity); ISO 12737.

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
    sec = secant_construction(load, disp, R.secant_ratio())

    a = float(np.mean(specimen.a_readings))
    dims = specimen.geometry_dims()
    a_over_W = a / specimen.W
    f = geo.f(a_over_W, dims)
    K_per_kN = geo.K_per_load(specimen.B, specimen.W, a, specimen.B_N, dims)
    K_Q = sec.P_Q * K_per_kN
    ratio = sec.P_max / sec.P_Q

    checks = R.core_checks(limits, a_over_W=a_over_W, P_max_over_P_Q=ratio, K_Q=K_Q,
                           yield_MPa=specimen.yield_MPa, B=specimen.B, a=a, W=specimen.W)
    checks.append(R.crack_front_check(limits, tuple(specimen.a_readings)))
    checks.append(R.surface_crack_check(limits, a, tuple(specimen.surface)))
    checks.append(R.precrack_check(limits, specimen.precrack_Kmax, K_Q, specimen.E_MPa))
    K_rate = None
    if time_s is not None:
        P_rate = loading_rate(load, np.asarray(time_s, dtype=float), sec.fit)
        K_rate = None if P_rate is None else P_rate * K_per_kN
    checks.append(R.loading_rate_check(limits, K_rate))

    valid = R.qualifies(limits, checks)
    return Result(
        specimen=specimen.specimen, geometry=geo.designation, rule_set=rules, heat=specimen.heat,
        P_Q_kN=sec.P_Q, P_max_kN=sec.P_max, P_5_kN=sec.P_5, P_max_over_P_Q=ratio,
        curve_type=sec.curve_type, curve_note=sec.note,
        initial_slope_kN_per_mm=sec.fit.slope, fit_r_squared=sec.fit.r_squared,
        fit_residual_sd_kN=sec.fit.residual_sd_kN, fit_window_fraction_of_P_max=sec.fit.window_fraction,
        origin_offset_mm=sec.fit.origin_mm,
        a_mm=a, a_over_W=a_over_W, f_a_over_W=f, K_Q_MPa_sqrt_m=K_Q,
        valid=valid, K_Ic_MPa_sqrt_m=K_Q if valid else None, K_rate_MPa_sqrt_m_per_s=K_rate,
        checks=checks, reasons=[] if valid else reasons_in_words(checks, limits["core_checks"]),
        record_sha256=record_sha256, record=specimen.record, specimen_data=specimen.describe(),
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
        result = reduce_arrays(rec.load_kN, rec.disp_mm, specimen, rec.time_s, rules, rec.sha256)
        result.record_notes = list(rec.notes)
        return result, rec
    except (CracktipError, ValueError, KeyError) as exc:
        where = f"{specimen.sheet}, row {specimen.row}: " if specimen.sheet and not isinstance(exc, CracktipError) else ""
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
    from reduce.sheet import BadRow, read_sheet

    R.rule_set(rules)
    out = []
    for row in read_sheet(path):
        if isinstance(row, BadRow):
            out.append((failed_result(row.specimen, rules, row.error, heat=row.heat,
                                      geometry=row.geometry, record=row.record), None, row))
            continue
        result, rec = reduce_specimen(row, rules)
        out.append((result, rec, row))
    return out
