"""Text helpers of the renderers: Markdown escaping of user strings."""

from __future__ import annotations

__all__ = ["md_escape"]


def md_escape(s: str) -> str:
    """Escape a user string for Markdown table cells and text."""
    out = str(s).replace("\\", "\\\\").replace("|", "\\|").replace("<", "&lt;").replace(">", "&gt;")
    return out.replace("\n", " ")
