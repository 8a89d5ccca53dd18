"""The two objects that travel through the pipeline: what was tested
(:class:`Specimen`) and what the reduction found (:class:`Result`).

Units: lengths mm, stress and modulus MPa, load kN, K MPa·m^½, °C.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from reduce.units import mpa_sqrt_m_to_ksi_sqrt_in


@dataclass
class Specimen:
    """One tested specimen, as described by a sheet row or by a caller.

    Attributes
    ----------
    specimen : str
        The specimen identifier.
    geometry : str
        Standard designation, ``"C(T)"``, ``"SE(B)"`` …
    B, W : float
        Thickness and width, mm.
    a_readings : tuple of float
        Crack-length readings across the front (E399: at B/4, B/2, 3B/4), mm.
    yield_MPa, E_MPa : float
        0.2 % offset yield strength at the test temperature and Young's modulus, MPa.
    B_N : float, optional
        Net thickness between side grooves, mm.
    S : float, optional
        Span of a bend specimen, mm.
    surface : tuple of float
        Crack traces on the two surfaces, mm (optional).
    precrack_Kmax : float, optional
        Final-stage fatigue precrack K_max, MPa·m^½.
    dims : dict
        Further dimensions some geometries need (``X``, ``r1``, ``r2``), mm.
    """

    specimen: str
    geometry: str
    B: float
    W: float
    a_readings: tuple[float, ...]
    yield_MPa: float
    E_MPa: float
    B_N: float | None = None
    S: float | None = None
    surface: tuple[float, ...] = ()
    precrack_Kmax: float | None = None
    heat: str | None = None
    temperature_C: float | None = None
    orientation: str | None = None
    tensile_MPa: float | None = None
    poisson: float | None = None
    displacement_type: str | None = None
    dims: dict = field(default_factory=dict)
    record: str | None = None
    load_column: str | None = None
    displacement_column: str | None = None
    load_unit: str | None = None
    displacement_unit: str | None = None
    metadata: dict = field(default_factory=dict)
    sheet: str | None = None
    row: int | None = None

    def geometry_dims(self) -> dict:
        """All dimensions by the standard's symbols, for the geometry definition."""
        d = {"B": self.B, "W": self.W}
        if self.S is not None:
            d["S"] = self.S
        d.update(self.dims)
        return d

    def describe(self) -> dict:
        """The description as plain JSON-ready data."""
        return {
            "specimen": self.specimen, "heat": self.heat, "geometry": self.geometry,
            "B_mm": self.B, "B_N_mm": self.B_N, "W_mm": self.W, "S_mm": self.S,
            "a_readings_mm": list(self.a_readings), "surface_mm": list(self.surface),
            "yield_MPa": self.yield_MPa, "E_MPa": self.E_MPa, "tensile_MPa": self.tensile_MPa,
            "temperature_C": self.temperature_C, "orientation": self.orientation,
            "precrack_Kmax_MPa_sqrt_m": self.precrack_Kmax, "dims_mm": dict(self.dims),
            "record": self.record, "metadata": dict(self.metadata),
            "poisson": self.poisson, "displacement_type": self.displacement_type,
            "load_column": self.load_column, "displacement_column": self.displacement_column,
            "load_unit": self.load_unit, "displacement_unit": self.displacement_unit,
        }

    @classmethod
    def from_description(cls, d: dict, *, sheet: str | None = None) -> "Specimen":
        """Rebuild a specimen from :meth:`describe` output (e.g. embedded in a certificate).

        Parameters
        ----------
        d : dict
            The description; keys as :meth:`describe` writes them.
        sheet : str, optional
            A sheet path; a relative ``record`` is then taken from its folder.

        Raises
        ------
        KeyError
            If a required key (specimen, geometry, B_mm, W_mm, a_readings_mm,
            yield_MPa, E_MPa) is missing.

        >>> s = Specimen("X1", "C(T)", B=25, W=50, a_readings=(25, 25.2, 25.1),
        ...              yield_MPa=500, E_MPa=205000, heat="H1", surface=(24.9, 25.0))
        >>> Specimen.from_description(s.describe()) == s
        True
        """
        return cls(
            specimen=d["specimen"], geometry=d["geometry"], B=d["B_mm"], W=d["W_mm"],
            a_readings=tuple(d["a_readings_mm"]), yield_MPa=d["yield_MPa"], E_MPa=d["E_MPa"],
            B_N=d.get("B_N_mm"), S=d.get("S_mm"), surface=tuple(d.get("surface_mm") or ()),
            precrack_Kmax=d.get("precrack_Kmax_MPa_sqrt_m"), heat=d.get("heat"),
            temperature_C=d.get("temperature_C"), orientation=d.get("orientation"),
            tensile_MPa=d.get("tensile_MPa"), poisson=d.get("poisson"),
            displacement_type=d.get("displacement_type"), dims=dict(d.get("dims_mm") or {}),
            record=d.get("record"), load_column=d.get("load_column"),
            displacement_column=d.get("displacement_column"), load_unit=d.get("load_unit"),
            displacement_unit=d.get("displacement_unit"), metadata=dict(d.get("metadata") or {}),
            sheet=sheet,
        )


@dataclass
class Result:
    """What the reduction of one specimen found.

    ``error`` is set (and the numbers are ``None``) when the specimen could
    not be reduced; the message then says why.
    """

    specimen: str
    geometry: str | None
    rule_set: str
    heat: str | None = None
    P_Q_kN: float | None = None
    P_max_kN: float | None = None
    P_5_kN: float | None = None
    P_max_over_P_Q: float | None = None
    curve_type: str | None = None
    curve_note: str = ""
    initial_slope_kN_per_mm: float | None = None
    fit_r_squared: float | None = None
    fit_residual_sd_kN: float | None = None
    fit_window_fraction_of_P_max: tuple[float, float] | None = None
    origin_offset_mm: float | None = None
    a_mm: float | None = None
    a_over_W: float | None = None
    f_a_over_W: float | None = None
    K_Q_MPa_sqrt_m: float | None = None
    valid: bool = False
    K_Ic_MPa_sqrt_m: float | None = None
    K_rate_MPa_sqrt_m_per_s: float | None = None
    checks: list = field(default_factory=list)
    reasons: list = field(default_factory=list)
    record_sha256: str | None = None
    record: str | None = None
    record_notes: list = field(default_factory=list)
    error: str | None = None
    specimen_data: dict = field(default_factory=dict)
    extra: dict = field(default_factory=dict)
    #: where the construction's points lie, mm from the corrected origin, and
    #: the secant's slope, kN/mm (for plots)
    v_5_mm: float | None = None
    v_Q_mm: float | None = None
    v_max_mm: float | None = None
    secant_slope_kN_per_mm: float | None = None
    #: crack length the initial slope implies through the geometry's compliance
    #: relation, mm (``None`` where no relation is held or it could not be found)
    a_compliance_mm: float | None = None
    #: where the displacement was measured, and the crack-front scheme used for a
    displacement_type: str | None = None
    crack_front_scheme: str | None = None
    #: limitations of the geometry definition (:attr:`specimens.Geometry.caveat`)
    #: and failed advisory checks, in words; reports print both
    caveats: list = field(default_factory=list)
    warnings: list = field(default_factory=list)

    @property
    def K_Q_ksi_sqrt_in(self) -> float | None:
        return None if self.K_Q_MPa_sqrt_m is None else mpa_sqrt_m_to_ksi_sqrt_in(self.K_Q_MPa_sqrt_m)

    def to_dict(self) -> dict:
        """The result as JSON-ready data (the documented output keys first)."""
        d = {
            "specimen": self.specimen, "heat": self.heat, "geometry": self.geometry,
            "rule_set": self.rule_set,
            "P_Q_kN": self.P_Q_kN, "P_max_kN": self.P_max_kN, "P_5_kN": self.P_5_kN,
            "P_max_over_P_Q": self.P_max_over_P_Q, "curve_type": self.curve_type,
            "curve_note": self.curve_note,
            "initial_slope_kN_per_mm": self.initial_slope_kN_per_mm,
            "fit_r_squared": self.fit_r_squared, "fit_residual_sd_kN": self.fit_residual_sd_kN,
            "fit_window_fraction_of_P_max": (list(self.fit_window_fraction_of_P_max)
                                             if self.fit_window_fraction_of_P_max else None),
            "origin_offset_mm": self.origin_offset_mm,
            "secant_slope_kN_per_mm": self.secant_slope_kN_per_mm,
            "v_5_mm": self.v_5_mm, "v_Q_mm": self.v_Q_mm, "v_max_mm": self.v_max_mm,
            "a_mm": self.a_mm, "a_over_W": self.a_over_W, "f_a_over_W": self.f_a_over_W,
            "a_compliance_mm": self.a_compliance_mm, "displacement_type": self.displacement_type,
            "crack_front_scheme": self.crack_front_scheme,
            "K_Q_MPa_sqrt_m": self.K_Q_MPa_sqrt_m, "K_Q_ksi_sqrt_in": self.K_Q_ksi_sqrt_in,
            "valid": self.valid, "K_Ic_MPa_sqrt_m": self.K_Ic_MPa_sqrt_m,
            "K_rate_MPa_sqrt_m_per_s": self.K_rate_MPa_sqrt_m_per_s,
            "checks": [c.to_dict() if hasattr(c, "to_dict") else dict(c) for c in self.checks],
            "reasons": list(self.reasons),
            "caveats": list(self.caveats), "warnings": list(self.warnings),
            "record": self.record, "record_sha256": self.record_sha256,
            "record_notes": list(self.record_notes),
            "error": self.error,
            "specimen_data": self.specimen_data,
        }
        d.update(self.extra)
        return d
