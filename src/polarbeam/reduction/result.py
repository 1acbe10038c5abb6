"""The result of a reduction: phases, their covariances, references, noise and messages."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from html import escape

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.reduction.drift import SymmetricTriplets
from polarbeam.reduction.fit import ScanFits
from polarbeam.reduction.noise import NoiseEstimate

pd = lazy("pandas", "reading and writing tables")

__all__ = ["DenseOnAccess", "ReducedPhases", "SeriesKey"]

SeriesKey = tuple[str, float]


def _shape0(cov, key) -> int:
    return (cov._sparse[key] if isinstance(cov, DenseOnAccess) else cov[key]).shape[0]


class DenseOnAccess(Mapping):
    """Read-only mapping of series covariances kept sparse (banded) and handed out dense.

    The reduction itself needs only the diagonals (``phase_err_rad``); a dense n×n matrix is made
    (once, then cached) when a fit asks for it.
    """

    def __init__(self, blocks: dict):
        self._sparse = dict(blocks)
        self._dense: dict = {}

    def __getitem__(self, key):
        if key not in self._dense:
            self._dense[key] = self._sparse[key].toarray()
        return self._dense[key]

    def __contains__(self, key) -> bool:  # without making the matrix dense
        return key in self._sparse

    def __iter__(self):
        return iter(self._sparse)

    def __len__(self) -> int:
        return len(self._sparse)

    def sparse(self, key):
        """The covariance of ``key`` as a SciPy CSR matrix (no dense copy)."""
        block = self._sparse[key]
        return block.tocsr() if isinstance(block, SymmetricTriplets) else block


@dataclass(frozen=True, eq=False)
class ReducedPhases:
    """Drift-corrected fringe phases of a campaign.

    Attributes
    ----------
    table : DataFrame
        One row per non-reference scan, in scan order, with
        :data:`~polarbeam.reduction.columns.OUTPUT_COLUMNS`.  Flagged rows have ``phase_rad`` and
        ``phase_err_rad`` NaN and their flag names in ``flags``.
    covariance : dict
        ``{(compound, temperature_K): C}`` with ``C`` the full covariance (rad²) of the kept
        (finite-phase) rows of that series, in table order; ``phase_err_rad`` is ``sqrt(diag C)``.
    references : DataFrame
        One row per reference scan: series, scan, time, unwrapped phase and its error,
        visibility and its error, flags.
    reference_visibility : dict
        ``{(compound, temperature_K): (mean, error)}``: inverse-variance mean visibility of the
        good references (NaN when none).
    noise : dict
        ``{(compound, temperature_K): NoiseEstimate}`` used in the covariance.
    messages : tuple of str
        One line per flagged scan or noteworthy series condition.
    source : str
        Name of the input (for messages).
    period_m : float
        Grating period used, m.
    """

    table: pd.DataFrame
    covariance: dict[SeriesKey, np.ndarray]
    references: pd.DataFrame
    reference_visibility: dict[SeriesKey, tuple[float, float]]
    noise: dict[SeriesKey, NoiseEstimate]
    messages: tuple[str, ...]
    source: str
    period_m: float
    scan_fits: ScanFits | None = field(default=None, repr=False)

    def kept_scans(self, key: SeriesKey) -> np.ndarray:
        """Scan ids of the rows of series ``key`` that enter :attr:`covariance` (table order)."""
        t = self.table
        sel = (t["compound"] == key[0]) & (t["temperature_K"] == key[1]) & t["phase_rad"].notna()
        return t.loc[sel, "scan"].to_numpy()

    def relative_visibility(self) -> pd.DataFrame:
        """Visibility of each row divided by its series' reference visibility, with 1σ error."""
        t = self.table
        keys = list(zip(t["compound"], t["temperature_K"], strict=True))
        ref = np.array([self.reference_visibility.get(k, (np.nan, np.nan)) for k in keys])
        ref = ref.reshape(-1, 2)
        ratio = t["visibility"].to_numpy() / ref[:, 0]
        err = np.abs(ratio) * np.hypot(
            t["visibility_err"].to_numpy() / t["visibility"].to_numpy(), ref[:, 1] / ref[:, 0]
        )
        out = t[["compound", "temperature_K", "voltage_V", "scan"]].copy()
        out["relative_visibility"] = ratio
        out["relative_visibility_err"] = err
        return out

    def summary(self) -> dict:
        """Plain-dict summary for JSON."""
        t = self.table
        return {
            "source": self.source,
            "period_m": self.period_m,
            "scans": len(t),
            "kept": int(t["phase_rad"].notna().sum()),
            "flagged": int((t["flags"] != "").sum()),
            "references": len(self.references),
            "series": [
                {
                    "compound": k[0],
                    "temperature_K": k[1],
                    "kept": int(_shape0(self.covariance, k)),
                    "reference_visibility": self.reference_visibility.get(k, (np.nan, np.nan)),
                    "noise": self.noise[k].summary() if k in self.noise else None,
                }
                for k in self.covariance
            ],
            "messages": list(self.messages),
        }

    def report(self) -> str:
        """Short plain-text rendering."""
        s = self.summary()
        lines = [
            f"{s['source']}: {s['kept']} of {s['scans']} scans kept, {s['flagged']} flagged, "
            f"{s['references']} references"
        ]
        for ser in s["series"]:
            nz = ser["noise"]
            lines.append(
                f"  {ser['compound']} at {ser['temperature_K']:g} K: {ser['kept']} phases, "
                f"reference visibility {ser['reference_visibility'][0]:.3f}, excess noise "
                f"{nz['model'] if nz else 'none'} {nz['level'] if nz else 0.0:.3g}"
            )
        lines.extend(f"  ! {m}" for m in self.messages)
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        return "<pre>" + escape(self.report()) + "</pre>"
