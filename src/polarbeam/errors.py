"""One error hierarchy for polarbeam.

Every error a user can cause carries a one-line message naming the file, the row or key, what was
expected and what was found.  Two families matter to the pipeline:

* :class:`InputError` -- structural problems (unreadable TOML, unknown key, missing file or column,
  a unit that does not fit the key, unknown layout or model).  They stop a run (exit code 2).
* :class:`CompoundError` -- a problem confined to one compound (bad values in its rows, too few
  voltages, a failed fit).  The compound is reported as ``failed`` and the others go on.
"""

from __future__ import annotations

__all__ = [
    "CalculationTooBigError",
    "CompoundError",
    "FitError",
    "FolderInUseError",
    "InputError",
    "MissingExtraError",
    "PolarbeamError",
    "QuantityError",
    "RowValueError",
]


class PolarbeamError(Exception):
    """Base class of every error raised on purpose by polarbeam."""


class InputError(PolarbeamError, ValueError):
    """A structural problem with the inputs: the run cannot go on (exit code 2)."""


class QuantityError(InputError):
    """A quantity string that cannot be parsed or whose unit does not fit its key."""


class CompoundError(PolarbeamError, ValueError):
    """A problem confined to one compound; the batch goes on without it."""


class RowValueError(CompoundError):
    """A bad value in a data row (non-numeric, NaN, out of range)."""


class FitError(CompoundError):
    """A fit that did not converge or gave no usable covariance."""


class MissingExtraError(InputError, ImportError):
    """An optional package needed for the requested step is not installed."""


class CalculationTooBigError(CompoundError):
    """The estimated run time of a quantum-chemistry calculation exceeds the configured limit."""


class FolderInUseError(InputError):
    """Another polarbeam run holds the results folder (exit code 2)."""
