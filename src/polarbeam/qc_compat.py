"""Optional quantum-chemistry dependencies (extra ``polarbeam[qc]``), detected in one place.

The core install stays light: PySCF, cclib and dftd4 are imported only when a function needs
them, through :func:`require`, which turns a missing package into a one-line
:class:`MissingExtraError` naming the pip package and the extra.
"""

from __future__ import annotations

import importlib
import importlib.util
from types import ModuleType

from .errors import InputError

__all__ = ["QC_PACKAGES", "MissingExtraError", "has", "require"]

#: import name → pip package name, for the extra ``polarbeam[qc]``.
QC_PACKAGES = {"pyscf": "pyscf", "cclib": "cclib", "dftd4": "dftd4"}


class MissingExtraError(InputError, ImportError):
    """An optional package needed for the requested step is not installed."""


def has(module: str) -> bool:
    """Whether ``module`` can be imported (without importing it)."""
    return importlib.util.find_spec(module) is not None


def require(module: str, purpose: str) -> ModuleType:
    """Import ``module`` or raise :class:`MissingExtraError` saying what to install.

    Parameters
    ----------
    module
        Import name (``"pyscf"``, ``"cclib"``, ``"dftd4.interface"``).
    purpose
        What the caller wanted to do, for the message (``"computing polarizabilities"``).
    """
    top = module.split(".")[0]
    try:
        return importlib.import_module(module)
    except ImportError:
        pip_name = QC_PACKAGES.get(top, top)
        raise MissingExtraError(
            f"{purpose} needs {pip_name}, which is not installed: "
            f"pip install 'polarbeam[qc]' (or pip install {pip_name})"
        ) from None
