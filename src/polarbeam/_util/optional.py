"""Optional dependencies, detected in one place.

The core install stays light: every optional package is imported only when a function needs it,
through :func:`require`, which turns a missing package into a one-line
:class:`MissingExtraError` naming the pip package and the extra that brings it. Tests skip with
:func:`missing_reason` so a skipped test says which extra is missing.
"""

from __future__ import annotations

import importlib
import importlib.util
from types import ModuleType

from polarbeam.errors import MissingExtraError

__all__ = [
    "EXTRAS",
    "extra_for",
    "has",
    "missing_reason",
    "require",
]

#: import name → (pip package, extra of polarbeam that installs it).
EXTRAS: dict[str, tuple[str, str]] = {
    "pyscf": ("pyscf", "qc"),
    "cclib": ("cclib", "qc"),
    "dftd4": ("dftd4", "qc"),
    "pyarrow": ("pyarrow", "parquet"),
    "matplotlib": ("matplotlib", "plots"),
    "dask": ("dask[distributed]", "batch"),
    "distributed": ("dask[distributed]", "batch"),
    "rich": ("rich", "batch"),
    "pyamg": ("pyamg", "fields"),
    "mendeleev": ("mendeleev", "atoms"),
    "chemicals": ("chemicals", "test"),
}


def has(module: str) -> bool:
    """Whether ``module`` can be imported (without importing it)."""
    try:
        return importlib.util.find_spec(module) is not None
    except (ImportError, ValueError):  # a parent package missing, or a broken install
        return False


def extra_for(module: str) -> tuple[str, str]:
    """(pip package, polarbeam extra) for an import name; unknown names map to themselves."""
    top = module.split(".")[0]
    return EXTRAS.get(top, (top, "all"))


def missing_reason(module: str) -> str:
    """Why something needing ``module`` is skipped: the pip package and the extra to install."""
    pip_name, extra = extra_for(module)
    return f"needs {pip_name}, which is not installed: pip install 'polarbeam[{extra}]'"


def require(module: str, purpose: str) -> ModuleType:
    """Import ``module`` or raise :class:`MissingExtraError` saying what to install.

    Parameters
    ----------
    module
        Import name (``"pyscf"``, ``"cclib"``, ``"dftd4.interface"``, ``"pyarrow.parquet"``).
    purpose
        What the caller wanted to do, for the message (``"computing polarizabilities"``).
    """
    try:
        return importlib.import_module(module)
    except ImportError:
        pip_name, extra = extra_for(module)
        raise MissingExtraError(
            f"{purpose} needs {pip_name}, which is not installed: "
            f"pip install 'polarbeam[{extra}]' (or pip install {pip_name})"
        ) from None
