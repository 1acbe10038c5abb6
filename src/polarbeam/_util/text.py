"""Small text and number helpers shared by the stages (no physics)."""

from __future__ import annotations

import hashlib
import math
import re

__all__ = ["finite_or_none", "input_label", "join_message", "safe_name"]

_UNSAFE = re.compile(r"[^A-Za-z0-9._-]+")


def input_label(key: str) -> str:
    """The tag of a stated input in budgets: ``"deflector.length"`` → ``"deflector: length"``."""
    table, _, name = key.partition(".")
    return f"{table}: {name}"


def safe_name(name: str) -> str:
    """A file name for a compound: its safe characters (≤ 60) and 10 hex digits of its hash."""
    stem = _UNSAFE.sub("_", name).strip("._")[:60] or "compound"
    return f"{stem}-{hashlib.sha256(name.encode('utf-8')).hexdigest()[:10]}"


def finite_or_none(x) -> float | None:
    """``float(x)`` when it is a finite number, else ``None`` (JSON null, blank CSV cell)."""
    if x is None:
        return None
    try:
        x = float(x)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def join_message(message: str, note: str) -> str:
    """Append ``note`` to a compound message (``"ok"`` or empty is replaced)."""
    return note if message in ("", "ok") else f"{message}; {note}"
