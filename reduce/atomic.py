"""Atomic output: a file appears whole or not at all."""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager
from pathlib import Path


@contextmanager
def atomic_path(target):
    """Yield a temporary path beside ``target``; on success it replaces ``target``.

    If the body raises, the temporary file is removed and ``target`` is left
    as it was (absent, or its old content).
    """
    target = Path(target)
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".part", dir=target.parent)
    os.close(fd)
    # mkstemp makes the file private (0600); give it the mode a plain open() would
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    try:
        yield Path(tmp)
        os.replace(tmp, target)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def write_text_atomic(target, text: str) -> None:
    """Write text (UTF-8) to ``target`` atomically."""
    with atomic_path(target) as tmp:
        tmp.write_text(text, encoding="utf-8")


def write_bytes_atomic(target, data: bytes) -> None:
    """Write bytes to ``target`` atomically."""
    with atomic_path(target) as tmp:
        tmp.write_bytes(data)
