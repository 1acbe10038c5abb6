"""Atomic file output: write to a temporary file in the same folder, then rename over the target."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

__all__ = ["write_bytes_atomic", "write_text_atomic"]


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_bytes_atomic(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` so that readers see either the old or the whole new file."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.fchmod(fd, 0o666 & ~_umask())  # mkstemp makes 0600; outputs are for colleagues too
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
        raise


def write_text_atomic(path: str | Path, text: str) -> None:
    write_bytes_atomic(path, text.encode("utf-8"))
