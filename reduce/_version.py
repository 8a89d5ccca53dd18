"""The program's version, and the version that identifies the exact code.

``__version__`` is the release number.  ``PROGRAM_VERSION`` adds a digest of
the program's own source and data files (the three packages' ``.py`` and
``.toml`` files), so the store and every certificate can tell two builds of
the same release apart.
"""

import hashlib
from pathlib import Path

__version__ = "0.1.0"


def source_digest() -> str:
    """First 12 hex digits of the SHA-256 over the program's source and data files."""
    root = Path(__file__).resolve().parent.parent
    h = hashlib.sha256()
    for package in ("specimens", "reduce", "reports"):
        for path in sorted((root / package).glob("*")):
            if path.suffix in (".py", ".toml") and path.is_file():
                h.update(f"{package}/{path.name}\0".encode())
                h.update(path.read_bytes())
    return h.hexdigest()[:12]


PROGRAM_VERSION = f"{__version__}+src.{source_digest()}"
