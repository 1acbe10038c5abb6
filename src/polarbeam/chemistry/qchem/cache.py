"""Result cache: one JSON file per calculation, named by a hash of everything that matters.

The key is a SHA-256 over the canonical structure, the coordinates (1e-6 Å), the charge, the
method and basis (lower case), the response scheme (plus the field for finite field) and the
schema version.  An unreadable or stale file is ignored and overwritten.
"""

from __future__ import annotations

import hashlib
import json
import os
from pathlib import Path

from polarbeam._util.atomic import write_text_atomic
from polarbeam.chemistry.qchem.geometry import Geometry
from polarbeam.chemistry.qchem.result import RESULT_SCHEMA, ComputedResult
from polarbeam.errors import InputError

__all__ = ["cache_key", "default_cache_dir", "read_cached", "write_cached"]


def default_cache_dir() -> Path:
    """``$POLARBEAM_CACHE_DIR``, else ``$XDG_CACHE_HOME/polarbeam/qchem``, else ~/.cache/…."""
    env = os.environ.get("POLARBEAM_CACHE_DIR")
    if env:
        return Path(env)
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "polarbeam" / "qchem"


def cache_key(geometry: Geometry, method: str, basis: str, scheme: str, field_au: float) -> str:
    """Cache key (32 hex digits) of one calculation."""
    payload = {
        "schema": RESULT_SCHEMA,
        "structure": geometry.fingerprint(),
        "method": method.strip().lower(),
        "basis": basis.strip().lower(),
        "polarizability": scheme,
    }
    if scheme == "finite-field":
        payload["field_au"] = float(field_au)
    text = json.dumps(payload, sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:32]


def read_cached(path: Path) -> ComputedResult | None:
    """The cached result in ``path``, or None when the file is unreadable or stale."""
    try:
        return ComputedResult.from_summary(json.loads(path.read_text()), from_cache=True)
    except (OSError, ValueError, KeyError, TypeError, InputError):
        return None  # unreadable or stale entry: recompute and overwrite


def write_cached(path: Path, result: ComputedResult) -> None:
    """Write ``result`` to ``path`` (temporary file in the same folder, then os.replace)."""
    write_text_atomic(path, json.dumps(result.summary(), indent=1, sort_keys=True))
