"""Build of the one compiled part: the fast path of the text-record reader.

Everything else about the package is in pyproject.toml.  The extension is
optional: where it cannot be compiled, cracktip installs without it and reads
every text record with pandas (the same results, more slowly).
"""

from setuptools import Extension, setup

setup(ext_modules=[Extension("reduce._scan", sources=["reduce/_scan.c"], optional=True,
                             extra_compile_args=["-O3"])])
