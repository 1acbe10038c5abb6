"""The result of one calculation: :class:`ComputedResult` and the table of several.

Values are SI inside (C·m²/V, C·m); Å³ and debye are properties for tables.
:func:`results_table` gives the layout of :data:`~polarbeam.chemistry.computed.COMPUTED_COLUMNS`,
so the comparisons take on-the-spot results and imported ones alike.
"""

from __future__ import annotations

import html
import math
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.chemistry.computed import COMPUTED_COLUMNS, anisotropy
from polarbeam.chemistry.qchem.geometry import Geometry
from polarbeam.constants import alpha_a3_from_si, debye_from_si
from polarbeam.errors import InputError

pd = lazy("pandas", "reading and writing tables")

__all__ = ["RESULT_SCHEMA", "ComputedResult", "results_table"]

#: Version of the JSON layout of :meth:`ComputedResult.summary` (part of every cache key).
RESULT_SCHEMA = 1


@dataclass(frozen=True)
class ComputedResult:
    """Computed static polarizability and dipole of one molecule (SI inside).

    ``alpha_tensor_si`` / ``dipole_vector_si`` are ``None`` for models that give only an
    isotropic value (D4); ``dipole_si`` is NaN then.
    """

    name: str
    method: str
    basis: str
    polarizability_method: str
    alpha_si: float
    dipole_si: float
    geometry: Geometry
    alpha_tensor_si: tuple[tuple[float, float, float], ...] | None = None
    dipole_vector_si: tuple[float, float, float] | None = None
    energy_hartree: float = math.nan
    n_basis: int = 0
    elapsed_s: float = math.nan
    software: str = ""
    cache_key: str = ""
    from_cache: bool = field(default=False, compare=False)

    @property
    def label(self) -> str:
        """Method label used in tables: ``"b3lyp/def2-svpd"``, ``"D4"``."""
        return f"{self.method}/{self.basis}" if self.basis else self.method

    @property
    def alpha_A3(self) -> float:
        return float(alpha_a3_from_si(self.alpha_si))

    @property
    def dipole_D(self) -> float:
        return float(debye_from_si(self.dipole_si))

    @property
    def alpha_tensor_A3(self) -> np.ndarray | None:
        if self.alpha_tensor_si is None:
            return None
        return alpha_a3_from_si(np.asarray(self.alpha_tensor_si, dtype=float))

    @property
    def principal_A3(self) -> tuple[float, float, float] | None:
        t = self.alpha_tensor_A3
        return None if t is None else tuple(float(v) for v in np.sort(np.linalg.eigvalsh(t)))

    @property
    def anisotropy_A3(self) -> float:
        t = self.alpha_tensor_A3
        return math.nan if t is None else anisotropy(t)

    def summary(self) -> dict:
        """Plain, JSON-ready dict (SI values plus Å³/debye for reading); inverse: from_summary."""
        return {
            "schema": RESULT_SCHEMA,
            "name": self.name,
            "method": self.method,
            "basis": self.basis,
            "polarizability_method": self.polarizability_method,
            "alpha_si": self.alpha_si,
            "dipole_si": None if math.isnan(self.dipole_si) else self.dipole_si,
            "alpha_tensor_si": None
            if self.alpha_tensor_si is None
            else [list(r) for r in self.alpha_tensor_si],
            "dipole_vector_si": None
            if self.dipole_vector_si is None
            else list(self.dipole_vector_si),
            "energy_hartree": None if math.isnan(self.energy_hartree) else self.energy_hartree,
            "n_basis": self.n_basis,
            "elapsed_s": None if math.isnan(self.elapsed_s) else self.elapsed_s,
            "software": self.software,
            "cache_key": self.cache_key,
            "geometry": self.geometry.summary(),
            "alpha_A3": self.alpha_A3,
            "anisotropy_A3": None if math.isnan(self.anisotropy_A3) else self.anisotropy_A3,
            "dipole_D": None if math.isnan(self.dipole_si) else self.dipole_D,
        }

    @classmethod
    def from_summary(cls, d: dict, *, from_cache: bool = False) -> ComputedResult:
        def num(v):
            return math.nan if v is None else float(v)

        if d.get("schema") != RESULT_SCHEMA:
            raise InputError(
                f"computed result: expected schema {RESULT_SCHEMA}, found {d.get('schema')}"
            )
        tensor = d.get("alpha_tensor_si")
        vec = d.get("dipole_vector_si")
        return cls(
            name=d["name"],
            method=d["method"],
            basis=d["basis"],
            polarizability_method=d["polarizability_method"],
            alpha_si=float(d["alpha_si"]),
            dipole_si=num(d.get("dipole_si")),
            geometry=Geometry.from_summary(d["geometry"]),
            alpha_tensor_si=None if tensor is None else tuple(tuple(map(float, r)) for r in tensor),
            dipole_vector_si=None if vec is None else tuple(map(float, vec)),
            energy_hartree=num(d.get("energy_hartree")),
            n_basis=int(d.get("n_basis", 0)),
            elapsed_s=num(d.get("elapsed_s")),
            software=d.get("software", ""),
            cache_key=d.get("cache_key", ""),
            from_cache=from_cache,
        )

    def _rows(self) -> list[tuple[str, str]]:
        rows = [
            ("compound", self.name),
            ("method", f"{self.label} ({self.polarizability_method})"),
            ("α (isotropic)", f"{self.alpha_A3:.4f} Å³"),
        ]
        if self.principal_A3 is not None:
            p = self.principal_A3
            rows.append(("principal α", f"{p[0]:.4f}, {p[1]:.4f}, {p[2]:.4f} Å³"))
            rows.append(("Δα", f"{self.anisotropy_A3:.4f} Å³"))
        if not math.isnan(self.dipole_si):
            rows.append(("μ", f"{self.dipole_D:.4f} D"))
        if self.n_basis:
            rows.append(("basis functions", str(self.n_basis)))
        rows.append(("geometry", self.geometry.source))
        cost = "from cache" if self.from_cache else f"{self.elapsed_s:.2f} s"
        rows.append(("time", f"{cost} ({self.software})"))
        return rows

    def to_markdown(self) -> str:
        lines = ["| quantity | value |", "| --- | --- |"]
        lines += [f"| {k} | {v} |" for k, v in self._rows()]
        return "\n".join(lines)

    def __str__(self) -> str:
        return "\n".join(f"{k:>16}: {v}" for k, v in self._rows())

    def _repr_html_(self) -> str:
        body = "".join(
            f"<tr><th style='text-align:left'>{html.escape(k)}</th><td>{html.escape(v)}</td></tr>"
            for k, v in self._rows()
        )
        return f"<table>{body}</table>"


def results_table(results: Iterable[ComputedResult]) -> pd.DataFrame:
    """Computed results as a table in the layout of :func:`~polarbeam.chemistry.read_computed`.

    ``alpha_xx_A3`` … hold the principal values (ascending); the method is ``result.label``.
    """
    rows = []
    for r in results:
        p = r.principal_A3 or (math.nan, math.nan, math.nan)
        rows.append(
            {
                "compound": r.name,
                "qc_method": r.label,
                "alpha_computed_A3": r.alpha_A3,
                "dipole_computed_D": r.dipole_D,
                "alpha_xx_A3": p[0],
                "alpha_yy_A3": p[1],
                "alpha_zz_A3": p[2],
                "anisotropy_A3": r.anisotropy_A3,
                "source": f"{r.software} ({r.polarizability_method})",
            }
        )
    return pd.DataFrame(rows, columns=COMPUTED_COLUMNS)
