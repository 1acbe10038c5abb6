"""Writing reduced phases (CSV or Parquet) and their per-series covariances (``.npz``).

Every file is written atomically: to a temporary file in the same folder, then renamed over the
target with :func:`os.replace`, so readers see either the old or the whole new file.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from polarbeam._util.atomic import atomic_path
from polarbeam._util.text import guarded_frame
from polarbeam.errors import InputError
from polarbeam.reduction.result import ReducedPhases

__all__ = ["read_phase_covariance", "write_phases"]


def write_phases(
    reduced: ReducedPhases,
    path: str | os.PathLike,
    *,
    covariance_path: str | os.PathLike | None = None,
) -> None:
    """Write the phase table atomically (temporary file in the same folder, then ``os.replace``).

    Parameters
    ----------
    reduced : ReducedPhases
        Output of :func:`~polarbeam.reduction.reduce.reduce_table`.
    path : str or path-like
        ``*.csv`` or ``*.parquet``.
    covariance_path : str or path-like, optional
        Also write the per-series covariance matrices to this ``.npz`` file (see
        :func:`read_phase_covariance`).
    """
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix == ".csv":
        with atomic_path(path) as tmp:
            guarded_frame(reduced.table).to_csv(tmp, index=False)  # spreadsheet-safe names
    elif suffix in (".parquet", ".pq"):
        with atomic_path(path) as tmp:
            reduced.table.to_parquet(tmp, index=False)
    else:
        raise InputError(f"{path}: unknown table format {suffix!r} (expected .csv or .parquet)")
    if covariance_path is not None:
        arrays: dict[str, np.ndarray] = {}
        keys = list(reduced.covariance)
        arrays["compound"] = np.array([k[0] for k in keys], dtype=str)
        arrays["temperature_K"] = np.array([k[1] for k in keys], dtype=float)
        for i, key in enumerate(keys):
            arrays[f"cov_{i}"] = reduced.covariance[key]
            arrays[f"scan_{i}"] = reduced.kept_scans(key)

        with atomic_path(covariance_path) as tmp, open(tmp, "wb") as fh:
            np.savez(fh, **arrays)


def read_phase_covariance(
    path: str | os.PathLike,
) -> dict[tuple[str, float], tuple[np.ndarray, np.ndarray]]:
    """Read a covariance file written by :func:`write_phases`.

    Returns
    -------
    dict
        ``{(compound, temperature_K): (scan_ids, covariance)}``.
    """
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path}: covariance file not found")
    try:
        with np.load(path) as z:
            out = {}
            for i, (comp, temp) in enumerate(zip(z["compound"], z["temperature_K"], strict=True)):
                out[(str(comp), float(temp))] = (z[f"scan_{i}"], z[f"cov_{i}"])
    except (OSError, KeyError, ValueError) as exc:
        raise InputError(f"{path}: not a polarbeam phase-covariance file ({exc})") from exc
    return out
