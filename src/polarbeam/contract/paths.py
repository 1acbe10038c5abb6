"""Files named in campaign.toml: resolved once, and only regular files are read.

A path in ``[data]`` or ``[deflector]`` may point anywhere (absolute, ``..``, a symlink). It is
accepted when it resolves to a regular file; a directory, FIFO, device or socket, or a symlink
loop, is a one-line :class:`~polarbeam.errors.InputError` naming the key. A path that does not
exist is left to the reader, whose "file not found" message names the table.
"""

from __future__ import annotations

import errno
import os
import stat
from pathlib import Path

from polarbeam.errors import InputError

__all__ = ["input_files", "resolve_data_file"]


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a directory"
    if stat.S_ISFIFO(mode):
        return "a FIFO (named pipe)"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "a device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def resolve_data_file(base: str | os.PathLike, raw: str, where: str) -> Path:
    """The absolute path of ``raw`` (relative to ``base``), checked to be a regular file.

    ``where`` names the key in messages (``"campaign.toml [data] shifts"``).

    Raises
    ------
    InputError
        A symlink loop, or an existing path that is not a regular file.
    """
    candidate = Path(base) / raw
    loop = f"{where}: {raw!r} is a symlink loop; expected a regular file"
    try:
        path = candidate.resolve()
    except RuntimeError:  # Python < 3.13 reports a symlink loop this way
        raise InputError(loop) from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise InputError(loop) from None
        raise InputError(f"{where}: cannot resolve {raw!r} ({exc.strerror})") from None
    try:
        mode = path.stat().st_mode
    except FileNotFoundError:
        return path
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise InputError(loop) from None
        raise InputError(f"{where}: cannot access {raw!r} ({exc.strerror})") from None
    if not stat.S_ISREG(mode):
        raise InputError(f"{where}: expected a regular file, found {_kind(mode)}: {path}")
    return path


def input_files(campaign_path: str | os.PathLike, doc: dict) -> list[Path]:
    """campaign.toml and every existing file its ``[data]``, ``[deflector]`` and ``[beam]``
    tables name (for the provenance of a result; globs and missing files are left out)."""
    path = Path(campaign_path)
    out = [path]
    for table in ("data", "deflector", "beam", "gratings"):
        values = doc.get(table, {})
        if not isinstance(values, dict):
            continue
        for value in values.values():
            for item in value if isinstance(value, list) else [value]:
                if isinstance(item, str) and item and not any(ch in item for ch in "*?["):
                    candidate = path.parent / item
                    try:
                        if candidate.is_file():
                            out.append(candidate)
                    except OSError:  # a name too long or otherwise unusable: not a file
                        continue
    return out
