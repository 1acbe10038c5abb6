"""Figures drawn once per content: a figure whose inputs did not change is read back, not redrawn.

Drawing is most of a report's time (matplotlib builds every artist, then writes SVG and PNG).
Each set of figure files in ``figures/`` gets a small key file beside it,
``<stem>.figkey.json``, holding a SHA-256 of everything the figures are drawn from (the result
objects, canonicalised: dataclass fields, numbers by ``repr``, arrays by their bytes,
uncertainties by value, error and budget, tables by their CSV text), the figure builder's name
and the polarbeam version. When ``analyze --resume`` (or any later run into the same folder)
meets the same key and the files are still there, the SVG and PNG are read from disk.
A changed input, a changed polarbeam version or a missing file means a fresh drawing.
"""

from __future__ import annotations

import dataclasses
import enum
import hashlib
import json
import math
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.text import safe_name
from polarbeam._version import __version__

__all__ = [
    "FIGURE_DIR",
    "KEY_SUFFIX",
    "content_key",
    "figures_unchanged",
    "store_key",
    "stored_figures",
]

#: Suffix of the key file written beside a compound's (or a campaign figure's) files.
KEY_SUFFIX = ".figkey.json"
#: The report's figure folder inside a results folder.
FIGURE_DIR = "figures"
#: Bumped when the drawing code changes in a way the version number would not show.
_DRAWING_REVISION = 1


def _feed(h, obj: Any, depth: int = 0) -> None:
    """Feed a canonical text of ``obj`` into the hash ``h`` (deterministic across processes)."""
    if depth > 40:
        h.update(b"<deep>")
        return
    if obj is None or isinstance(obj, bool | int | str | bytes):
        h.update(f"{type(obj).__name__}:{obj!r};".encode())
    elif isinstance(obj, float):
        h.update(f"f:{obj!r};".encode() if math.isfinite(obj) else f"f:{obj};".encode())
    elif isinstance(obj, enum.Enum):
        h.update(f"enum:{obj!r};".encode())
    elif isinstance(obj, np.ndarray):
        h.update(f"nd:{obj.dtype.str}:{obj.shape};".encode())
        if obj.dtype == object:
            for item in obj.ravel():
                _feed(h, item, depth + 1)
        else:
            h.update(np.ascontiguousarray(obj).tobytes())
    elif isinstance(obj, np.generic):
        _feed(h, obj.item(), depth + 1)
    elif dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        h.update(f"dc:{type(obj).__qualname__}(".encode())
        for f in dataclasses.fields(obj):
            h.update(f"{f.name}=".encode())
            _feed(h, getattr(obj, f.name), depth + 1)
        h.update(b")")
    elif isinstance(obj, Mapping):
        h.update(b"{")
        for key in sorted(obj, key=repr):
            _feed(h, key, depth + 1)
            _feed(h, obj[key], depth + 1)
        h.update(b"}")
    elif isinstance(obj, list | tuple):
        h.update(f"{type(obj).__name__}[".encode())
        for item in obj:
            _feed(h, item, depth + 1)
        h.update(b"]")
    elif isinstance(obj, set | frozenset):
        h.update(b"set[")
        for item in sorted(obj, key=repr):
            _feed(h, item, depth + 1)
        h.update(b"]")
    elif hasattr(obj, "nominal_value") and hasattr(obj, "std_dev"):  # an uncertainties number
        h.update(f"u:{obj.nominal_value!r}:{obj.std_dev!r}[".encode())
        components = obj.error_components() if hasattr(obj, "error_components") else {}
        parts = sorted((str(getattr(v, "tag", None)), repr(d)) for v, d in components.items())
        h.update(repr(parts).encode())
        h.update(b"]")
    elif hasattr(obj, "to_csv") and hasattr(obj, "columns"):  # a pandas table
        h.update(b"df:")
        h.update(obj.to_csv().encode())
    elif hasattr(obj, "__dict__"):
        h.update(f"obj:{type(obj).__qualname__}(".encode())
        _feed(h, {k: v for k, v in vars(obj).items() if not k.startswith("_")}, depth + 1)
        h.update(b")")
    else:
        h.update(f"r:{obj!r};".encode())


def content_key(name: str, *inputs: Any) -> str:
    """SHA-256 (hex) of a figure builder's name, the polarbeam version and its inputs."""
    h = hashlib.sha256(f"{name}|{__version__}|{_DRAWING_REVISION}|".encode())
    for item in inputs:
        _feed(h, item)
    return h.hexdigest()


def _read(fdir: Path, stem: str, key: str) -> dict[str, tuple[str, bytes]] | None:
    """The figures stored for ``stem`` if their key is ``key`` and every file is there."""
    try:
        stored = json.loads((fdir / f"{stem}{KEY_SUFFIX}").read_text(encoding="utf-8"))
        if stored.get("key") != key:
            return None
        out = {}
        for kind, file_stem in stored["figures"]:  # in report order
            svg = (fdir / f"{file_stem}.svg").read_text(encoding="utf-8")
            png = (fdir / f"{file_stem}.png").read_bytes()
            out[kind] = (svg, png)
        return out
    except (OSError, ValueError, KeyError, TypeError, AttributeError):
        return None


def stored_figures(fdir: Path | None, stem: str, key: str) -> dict[str, tuple[str, bytes]] | None:
    """{kind: (SVG, PNG)} stored in ``fdir`` for ``stem`` under ``key``, or None (draw them)."""
    return None if fdir is None else _read(fdir, stem, key)


def store_key(fdir: Path, stem: str, key: str, file_stems: Mapping[str, str]) -> None:
    """Write ``<stem>.figkey.json`` once the figure files ({kind: file stem}) are written."""
    record = {"key": key, "figures": [[kind, name] for kind, name in file_stems.items()]}
    write_text_atomic(fdir / f"{stem}{KEY_SUFFIX}", json.dumps(record, sort_keys=True) + "\n")


def figures_unchanged(out: str | Path, compound: Any) -> bool:
    """Whether the figures of ``compound`` in ``out/figures`` were drawn from the same inputs
    (a batch then does not send them to the workers to be drawn again)."""
    stem = safe_name(compound.compound)
    key = content_key("compound_figures", compound)
    return stored_figures(Path(out) / FIGURE_DIR, stem, key) is not None
