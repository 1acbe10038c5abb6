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
    "LazyModule",
    "extra_for",
    "has",
    "lazy",
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


class LazyModule:
    """A module imported on first attribute access (through :func:`require`).

    ``pd = lazy("pandas", "reading tables")`` at the top of a module keeps ``pd.read_csv(...)``
    as written while the import waits until a function first needs it, so a fresh process
    that never reaches that code never pays for the import.
    """

    __slots__ = ("_module", "_name", "_purpose")

    def __init__(self, name: str, purpose: str):
        self._name = name
        self._purpose = purpose
        self._module: ModuleType | None = None

    def __getattr__(self, attr: str):
        module = self._module
        if module is None:
            module = require(self._name, self._purpose)
            self._module = module
        return getattr(module, attr)

    def __repr__(self) -> str:
        state = "loaded" if self._module is not None else "not loaded yet"
        return f"<lazy module {self._name!r} ({state})>"


def lazy(module: str, purpose: str) -> LazyModule:
    """``module`` as a :class:`LazyModule`: imported when first used, not now."""
    return LazyModule(module, purpose)
