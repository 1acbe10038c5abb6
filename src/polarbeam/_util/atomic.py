"""Atomic file output, the one writer every stage uses.

A file is written to a temporary file in the target's folder and renamed over the target, so
readers (and a run killed half-way) see either the old or the whole new file. The new file gets
the mode an ordinary ``open`` would give it (0666 less the umask), not ``mkstemp``'s 0600.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

from polarbeam.errors import InputError

__all__ = ["add_write_listener", "atomic_path", "write_bytes_atomic", "write_text_atomic"]

#: Called with each target path before it is written (the results-folder manifest,
#: :mod:`polarbeam._util.outfolder`, records its files this way: every writer goes through here).
_LISTENERS: list[Callable[[Path], None]] = []


def add_write_listener(listener: Callable[[Path], None]) -> None:
    """Call ``listener(path)`` before each atomic write of ``path`` (once per listener)."""
    if listener not in _LISTENERS:
        _LISTENERS.append(listener)


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


@contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path``, else it is removed.

    For writers that want a file name (``DataFrame.to_csv``, ``to_parquet``, streamed CSV).
    """
    path = Path(path)
    for listener in _LISTENERS:
        listener(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        os.fchmod(fd, 0o666 & ~_umask())  # outputs are for colleagues too
        os.close(fd)
        yield Path(tmp)
        with open(tmp, "rb") as fh:  # flush the data to disk before the rename
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def write_bytes_atomic(path: str | Path, data: bytes) -> None:
    """Write ``data`` to ``path`` so that readers see either the old or the whole new file."""
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)


def write_text_atomic(path: str | Path, text: str) -> None:
    """:func:`write_bytes_atomic` of UTF-8 text."""
    write_bytes_atomic(path, text.encode("utf-8"))


def make_folder(path: str | Path) -> Path:
    """Create the output folder ``path`` (and its parents); a one-line error when it is a file."""
    path = Path(path)
    if path.exists() and not path.is_dir():
        raise InputError(f"{path}: --out expected a folder, found a file")
    path.mkdir(parents=True, exist_ok=True)
    return path
