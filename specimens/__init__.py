"""Specimen geometry: pure functions of the dimensions, no I/O.

Units throughout this package: load P in kN, lengths (B, B_N, W, a, S, X,
r1, r2) in mm, modulus E in MPa, stress intensity K in MPa·m^½.

Each standard geometry is one :class:`~specimens.base.Geometry` definition in
its own module; :func:`geometry` finds one by its standard designation.
Adding a geometry means adding one definition and registering it in
:data:`GEOMETRIES`, nothing else in the pipeline.
"""

from specimens.base import Geometry, K_UNIT_FACTOR, effective_thickness, lookup_geometry as geometry, GEOMETRIES
from specimens import compact, bend, disk, arc_tension, arc_bend  # noqa: F401  (register the definitions)
from specimens.compliance import compliance_from_crack_length, crack_length_from_compliance
from specimens.crack_front import crack_front_average

__all__ = ["Geometry", "GEOMETRIES", "geometry", "K_UNIT_FACTOR", "effective_thickness",
           "crack_length_from_compliance", "compliance_from_crack_length", "crack_front_average"]
