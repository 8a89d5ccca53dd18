"""A customer's acceptance specification, read from our own TOML schema.

The schema (documented with an example in the README and in
``sample_data/spec_example.toml``)::

    schema = 1                          # optional; the only version so far

    [specification]
    name = "CS-118"                     # required: how verdicts and certificates cite it
    title = "…"                         # optional, free text
    customer = "…"                      # optional
    revision = "C"                      # optional

    [[requirement]]                     # one per material / orientation / test temperature
    material = "7075-T7351"             # optional: applies to heats whose material contains it
    orientation = "L-T"                 # required, E399 orientation code
    temperature_C = 21.0                # required (or temperature_F)
    temperature_tolerance_C = 2.0       # optional, default 2 °C
    min_K_Ic_MPa_sqrt_m = 26.0          # required (or min_K_Ic_ksi_sqrt_in)
    min_valid = 3                       # required: valid results per heat
    count_K_Q = "never"                 # optional: "never" (default) or "at_or_above_minimum"
    note = "…"                          # optional, free text

      [requirement.retest]              # optional; without it a low result rejects the heat
      low_results = 1                   # at most this many low results may be retested
      retests_each = 2                  # retests per low result; every one must pass
      source = "common practice, no source"   # required: where the rule comes from

Values are converted to the internal units (K MPa·m^½, °C) here and
nowhere else.  Every problem raises :class:`~reduce.errors.SpecError`
naming the file, the requirement, the key and the value.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass
from pathlib import Path

from reduce.errors import SpecError
from reduce.units import K_TO_MPA_SQRT_M, fahrenheit_to_celsius

SCHEMA_VERSIONS = (1,)
COUNT_K_Q = ("never", "at_or_above_minimum")
#: cracktip's default, not a standard's: common practice, no source
DEFAULT_TEMPERATURE_TOLERANCE_C = 2.0

_ORIENTATION = re.compile(r"^([LTSCR])-([LTSCR])$")
_TOP_KEYS = {"schema", "specification", "requirement"}
_SPEC_KEYS = {"name", "title", "customer", "revision"}
_REQ_KEYS = {"material", "orientation", "temperature_C", "temperature_F", "temperature_tolerance_C",
             "min_K_Ic_MPa_sqrt_m", "min_K_Ic_ksi_sqrt_in", "min_valid", "count_K_Q", "note", "retest"}
_RETEST_KEYS = {"low_results", "retests_each", "source"}


@dataclass(frozen=True)
class RetestRule:
    """How low results may be retested.

    Attributes
    ----------
    low_results : int
        At most this many low results of a heat (per requirement) may be retested;
        more reject the heat.
    retests_each : int
        Retests required for each low result; every one must pass.
    source : str
        Where the rule comes from (a clause of the specification, or
        "common practice, no source").
    """

    low_results: int
    retests_each: int
    source: str


@dataclass(frozen=True)
class Requirement:
    """One requirement of a specification.

    Attributes
    ----------
    index : int
        1-based position in the file (how messages name it).
    orientation : str
        E399 orientation code, e.g. ``"L-T"``.
    temperature_C, temperature_tolerance_C : float
        Test temperature and the band around it a specimen must lie in, °C.
    min_K_Ic : float
        Minimum toughness, MPa·m^½.
    min_valid : int
        Valid results per heat.
    count_K_Q : str
        ``"never"`` or ``"at_or_above_minimum"``.
    retest : RetestRule or None
    material : str or None
        Applies only to heats whose material contains this text (case-insensitive).
    note : str
    """

    index: int
    orientation: str
    temperature_C: float
    temperature_tolerance_C: float
    min_K_Ic: float
    min_valid: int
    count_K_Q: str = "never"
    retest: RetestRule | None = None
    material: str | None = None
    note: str = ""

    @property
    def label(self) -> str:
        """The requirement in a few words, e.g. ``"L-T at 21 °C"``."""
        text = f"{self.orientation} at {self.temperature_C:g} °C"
        return f"{self.material}, {text}" if self.material else text

    def applies_to_material(self, material: str | None) -> bool:
        """Whether the requirement applies to a heat of this material."""
        if self.material is None:
            return True
        return material is not None and self.material.casefold() in material.casefold()

    def covers(self, orientation: str | None, temperature_C: float | None, material: str | None) -> bool:
        """Whether a specimen tested so belongs to this requirement."""
        if orientation is None or temperature_C is None:
            return False
        return (orientation.strip().upper() == self.orientation
                and abs(temperature_C - self.temperature_C) <= self.temperature_tolerance_C
                and self.applies_to_material(material))

    def to_dict(self) -> dict:
        return {
            "index": self.index, "label": self.label, "material": self.material,
            "orientation": self.orientation, "temperature_C": self.temperature_C,
            "temperature_tolerance_C": self.temperature_tolerance_C,
            "min_K_Ic_MPa_sqrt_m": self.min_K_Ic, "min_valid": self.min_valid,
            "count_K_Q": self.count_K_Q, "note": self.note,
            "retest": None if self.retest is None else {
                "low_results": self.retest.low_results, "retests_each": self.retest.retests_each,
                "source": self.retest.source},
        }


@dataclass(frozen=True)
class Specification:
    """A customer's specification: its identity and its requirements."""

    name: str
    requirements: tuple[Requirement, ...]
    title: str = ""
    customer: str = ""
    revision: str = ""
    file: str | None = None
    text: str = ""

    @property
    def sha256(self) -> str:
        """SHA-256 of the file's text, so a verdict can name the exact file it used."""
        return hashlib.sha256(self.text.encode("utf-8")).hexdigest()

    @property
    def citation(self) -> str:
        """How verdicts cite the specification, e.g. ``"CS-118 rev. C"``."""
        return f"{self.name} rev. {self.revision}" if self.revision else self.name

    def overlaps_for(self, material: str | None) -> list:
        """Pairs of requirements that could both claim a specimen of this material.

        Returns
        -------
        list of (Requirement, Requirement)
            In file order; empty when every specimen of the material belongs
            to at most one requirement.
        """
        return [(a, b) for i, a in enumerate(self.requirements) for b in self.requirements[i + 1:]
                if requirements_overlap(a, b, material)]

    def to_dict(self) -> dict:
        return {"name": self.name, "title": self.title, "customer": self.customer,
                "revision": self.revision, "file": self.file, "sha256": self.sha256,
                "requirements": [r.to_dict() for r in self.requirements]}


def read_spec(path) -> Specification:
    """Read and check a specification file.

    Parameters
    ----------
    path : str or Path
        The TOML file.

    Returns
    -------
    Specification

    Raises
    ------
    SpecError
        If the file cannot be read, is not TOML, or breaks the schema; the
        message names the file, the requirement, the key and the value.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
        raise SpecError(f"cannot be read ({reason})", file=str(path)) from None
    return parse_spec(text, file=str(path))


def parse_spec(text: str, file: str | None = None) -> Specification:
    """Check a specification given as TOML text (see the module docstring).

    Raises
    ------
    SpecError
        As :func:`read_spec`.

    Examples
    --------
    >>> s = parse_spec('''
    ... [specification]
    ... name = "X-1"
    ... [[requirement]]
    ... orientation = "L-T"
    ... temperature_C = 21
    ... min_K_Ic_MPa_sqrt_m = 26
    ... min_valid = 3
    ... ''')
    >>> s.requirements[0].label, s.requirements[0].count_K_Q, s.requirements[0].retest
    ('L-T at 21 °C', 'never', None)
    """
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise SpecError(f"is not valid TOML ({exc})", file=file) from None
    _unknown(data, _TOP_KEYS, file, None)
    schema = data.get("schema", 1)
    if schema not in SCHEMA_VERSIONS:
        raise SpecError(f"unknown schema version; this program reads {SCHEMA_VERSIONS}",
                        file=file, key="schema", value=schema)
    head = data.get("specification")
    if not isinstance(head, dict):
        raise SpecError("a [specification] table with at least `name` is required", file=file)
    _unknown(head, _SPEC_KEYS, file, "[specification]")
    name = _text(head, "name", file, "[specification]", required=True)
    reqs = data.get("requirement")
    if not isinstance(reqs, list) or not reqs:
        raise SpecError("at least one [[requirement]] table is required", file=file)
    requirements = tuple(_requirement(r, i, file) for i, r in enumerate(reqs, start=1))
    _no_overlap(requirements, file)
    return Specification(
        name=name, requirements=requirements, title=_text(head, "title", file, "[specification]"),
        customer=_text(head, "customer", file, "[specification]"),
        revision=_text(head, "revision", file, "[specification]"), file=file, text=text)


def _unknown(table: dict, known: set, file, where) -> None:
    for key in table:
        if key not in known:
            raise SpecError(f"unknown key; expected one of: {', '.join(sorted(known))}",
                            file=file, where=where, key=key)


def _text(table, key, file, where, required=False) -> str:
    if key not in table:
        if required:
            raise SpecError("is required", file=file, where=where, key=key)
        return ""
    value = table[key]
    if not isinstance(value, str) or (required and not value.strip()):
        raise SpecError("expected a non-empty text in quotes", file=file, where=where, key=key,
                        value=value)
    return value.strip()


def _number(table, key, file, where) -> float:
    value = table[key]
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value:
        raise SpecError("expected a number", file=file, where=where, key=key, value=value)
    return float(value)


def _whole(table, key, file, where, minimum) -> int:
    value = table.get(key)
    if isinstance(value, bool) or not isinstance(value, int) or value < minimum:
        raise SpecError(f"expected a whole number of at least {minimum}", file=file, where=where,
                        key=key, value=value)
    return value


def _one_of(table, keys, file, where) -> str:
    given = [k for k in keys if k in table]
    if len(given) != 1:
        raise SpecError(f"give exactly one of {', '.join(keys)} (found {len(given)})",
                        file=file, where=where)
    return given[0]


def _requirement(table, index, file) -> Requirement:
    where = f"requirement {index}"
    if not isinstance(table, dict):
        raise SpecError("expected a [[requirement]] table", file=file, where=where)
    _unknown(table, _REQ_KEYS, file, where)
    orientation = _text(table, "orientation", file, where, required=True).upper()
    m = _ORIENTATION.match(orientation)
    if not m or m.group(1) == m.group(2):
        raise SpecError("expected an E399 orientation code such as L-T, T-L, S-L or C-R",
                        file=file, where=where, key="orientation", value=table["orientation"])
    t_key = _one_of(table, ("temperature_C", "temperature_F"), file, where)
    T = _number(table, t_key, file, where)
    T = fahrenheit_to_celsius(T) if t_key == "temperature_F" else T
    where = f"requirement {index} ({orientation} at {T:g} °C)"
    tol = DEFAULT_TEMPERATURE_TOLERANCE_C
    if "temperature_tolerance_C" in table:
        tol = _number(table, "temperature_tolerance_C", file, where)
        if tol < 0:
            raise SpecError("expected a tolerance of zero or more, °C", file=file, where=where,
                            key="temperature_tolerance_C", value=table["temperature_tolerance_C"])
    k_key = _one_of(table, ("min_K_Ic_MPa_sqrt_m", "min_K_Ic_ksi_sqrt_in"), file, where)
    K = _number(table, k_key, file, where)
    if K <= 0:
        raise SpecError("expected a minimum toughness greater than zero", file=file, where=where,
                        key=k_key, value=table[k_key])
    K *= K_TO_MPA_SQRT_M["ksi_sqrt_in"] if k_key.endswith("ksi_sqrt_in") else 1.0
    count_K_Q = table.get("count_K_Q", "never")
    if count_K_Q not in COUNT_K_Q:
        raise SpecError(f"expected one of {', '.join(COUNT_K_Q)}", file=file, where=where,
                        key="count_K_Q", value=count_K_Q)
    material = _text(table, "material", file, where) or None
    return Requirement(
        index=index, orientation=orientation, temperature_C=T, temperature_tolerance_C=tol,
        min_K_Ic=K, min_valid=_whole(table, "min_valid", file, where, 1), count_K_Q=count_K_Q,
        retest=_retest(table.get("retest"), file, where), material=material,
        note=_text(table, "note", file, where))


def _retest(table, file, where) -> RetestRule | None:
    if table is None:
        return None
    where = f"{where} [retest]"
    if not isinstance(table, dict):
        raise SpecError("expected a [requirement.retest] table", file=file, where=where)
    _unknown(table, _RETEST_KEYS, file, where)
    return RetestRule(low_results=_whole(table, "low_results", file, where, 1),
                      retests_each=_whole(table, "retests_each", file, where, 1),
                      source=_text(table, "source", file, where, required=True))


def requirements_overlap(a: Requirement, b: Requirement, material: str | None = None) -> bool:
    """Whether one specimen could belong to both requirements.

    Parameters
    ----------
    a, b : Requirement
    material : str, optional
        A heat's material.  Without it, the material texts overlap when one
        contains the other (as the file alone shows); with it, when both
        apply to it (``"7075"`` and ``"T7351"`` both apply to
        ``"7075-T7351 plate"``).

    Examples
    --------
    >>> s = parse_spec('[specification]\\nname = "X"\\n'
    ...     '[[requirement]]\\nmaterial = "7075"\\norientation = "L-T"\\ntemperature_C = 21\\n'
    ...     'min_K_Ic_MPa_sqrt_m = 26\\nmin_valid = 3\\n'
    ...     '[[requirement]]\\nmaterial = "T7351"\\norientation = "L-T"\\ntemperature_C = 21\\n'
    ...     'min_K_Ic_MPa_sqrt_m = 24\\nmin_valid = 3\\n')
    >>> a, b = s.requirements
    >>> requirements_overlap(a, b), requirements_overlap(a, b, "7075-T7351 plate")
    (False, True)
    """
    if a.orientation != b.orientation or (abs(a.temperature_C - b.temperature_C)
                                          > a.temperature_tolerance_C + b.temperature_tolerance_C):
        return False
    if material is not None:
        return a.applies_to_material(material) and b.applies_to_material(material)
    ma, mb = (a.material or "").casefold(), (b.material or "").casefold()
    return ma in mb or mb in ma


def _no_overlap(requirements, file) -> None:
    """Two requirements that could both claim one specimen make the verdict ambiguous.

    What the file alone shows is refused here; overlaps that only a heat's
    material reveals are found at acceptance (:meth:`Specification.overlaps_for`).
    """
    for i, a in enumerate(requirements):
        for b in requirements[i + 1:]:
            if requirements_overlap(a, b):
                raise SpecError(f"overlaps requirement {a.index} ({a.label}): a specimen could "
                                "belong to both; separate their temperatures or materials",
                                file=file, where=f"requirement {b.index} ({b.label})")
