"""Units at the boundary.

Inside cracktip every number is in one convention, the one the specimen
functions use (see :mod:`specimens`):

==========  ============
quantity    internal unit
==========  ============
load        kN
length      mm
stress      MPa
modulus     MPa
K           MPa·m^½
time        s
temperature °C
==========  ============

Data are converted when they enter (sheet columns, record channels) and when
they leave (the ``_ksi_sqrt_in`` keys of the JSON).  The factors below follow
from the definitions of the units: 1 in = 25.4 mm exactly (international
yard and pound agreement, 1959), 1 lbf = 4.4482216152605 N exactly (from the
avoirdupois pound 0.45359237 kg and standard gravity 9.80665 m/s²), so
1 psi = 4.4482216152605 N / (25.4 mm)² = 6894.757293 Pa.

A hand-written table is used rather than a units library: the set of units a
rig or a sheet writes is small and fixed, and keeping the import of the
command fast matters (see the README's performance section).
"""

from __future__ import annotations

import math

INCH_MM = 25.4
LBF_N = 4.4482216152605
PSI_MPA = LBF_N / INCH_MM**2  # N/mm² = MPa
KSI_MPA = 1000.0 * PSI_MPA
#: 1 ksi·in^½ in MPa·m^½ = 6.894757 MPa × √(0.0254 m) = 1.098843
KSI_SQRT_IN_MPA_SQRT_M = KSI_MPA * math.sqrt(INCH_MM / 1000.0)

#: load units a rig may write, as factors to kN
LOAD_TO_KN = {
    "n": 1e-3,
    "kn": 1.0,
    "mn": 1e3,  # meganewton; millinewton is never used on a toughness rig
    "lbf": LBF_N * 1e-3,
    "lb": LBF_N * 1e-3,
    "lbs": LBF_N * 1e-3,
    "kip": LBF_N,
    "kips": LBF_N,
    "klbf": LBF_N,
    "newton": 1e-3,
    "newtons": 1e-3,
    "kilonewton": 1.0,
    "kilonewtons": 1.0,
    "kipf": LBF_N,
}

#: displacement units, as factors to mm
LENGTH_TO_MM = {
    "mm": 1.0,
    "um": 1e-3,
    "µm": 1e-3,
    "μm": 1e-3,  # Greek mu, as some rigs write it
    "micron": 1e-3,
    "microns": 1e-3,
    "in": INCH_MM,
    "inch": INCH_MM,
    "mil": INCH_MM * 1e-3,
    "m": 1000.0,
    "cm": 10.0,
    "millimetre": 1.0,
    "millimeter": 1.0,
    "millimetres": 1.0,
    "millimeters": 1.0,
    "micrometre": 1e-3,
    "micrometer": 1e-3,
    "micrometres": 1e-3,
    "micrometers": 1e-3,
    "inches": INCH_MM,
}

#: time units, as factors to s
TIME_TO_S = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "min": 60.0, "h": 3600.0}
TIME_TO_S.update(
    {"secs": 1.0, "second": 1.0, "seconds": 1.0, "msec": 1e-3, "mins": 60.0, "minute": 60.0, "minutes": 60.0}
)

#: stress and modulus units, as factors to MPa
STRESS_TO_MPA = {"mpa": 1.0, "gpa": 1000.0, "ksi": KSI_MPA, "psi": PSI_MPA, "msi": 1000.0 * KSI_MPA}

#: stress-intensity units, as factors to MPa·m^½
K_TO_MPA_SQRT_M = {"mpa_sqrt_m": 1.0, "ksi_sqrt_in": KSI_SQRT_IN_MPA_SQRT_M}


def fahrenheit_to_celsius(t_F: float) -> float:
    """Temperature in °C from °F.

    >>> fahrenheit_to_celsius(-40.0)
    -40.0
    """
    return (t_F - 32.0) * 5.0 / 9.0


def mpa_sqrt_m_to_ksi_sqrt_in(K_MPa_sqrt_m: float) -> float:
    """K in ksi·in^½ from MPa·m^½.

    >>> round(mpa_sqrt_m_to_ksi_sqrt_in(1.0988), 4)
    1.0
    """
    return K_MPa_sqrt_m / KSI_SQRT_IN_MPA_SQRT_M
