"""cracktip's pipeline: sheets and records in, reduction, validity rules,
store, command line.

The Python API for one record without files is :func:`reduce_arrays`::

    from reduce import Specimen, reduce_arrays
    result = reduce_arrays(load_kN, disp_mm, Specimen(...))
"""

from reduce._version import __version__
from reduce.models import Result, Specimen
from reduce.pipeline import reduce_arrays, reduce_sheet, reduce_specimen

__all__ = ["__version__", "Result", "Specimen", "reduce_arrays", "reduce_sheet", "reduce_specimen"]
