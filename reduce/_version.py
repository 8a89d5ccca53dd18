"""The program's version, and the version that identifies the exact code.

``__version__`` is the release number.  ``PROGRAM_VERSION`` adds a digest of
the program's own source and data files (the three packages' ``.py``, ``.c`` and
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
            if path.suffix in (".py", ".toml", ".c") and path.is_file():
                h.update(f"{package}/{path.name}\0".encode())
                h.update(path.read_bytes())
    return h.hexdigest()[:12]


def __getattr__(name):
    # PROGRAM_VERSION is worked out when first asked for (it reads every source
    # file), not on import: `cracktip reduce` starts without it
    if name == "PROGRAM_VERSION":
        value = f"{__version__}+src.{source_digest()}"
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
