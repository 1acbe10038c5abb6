"""Computed against measured: comparison tables and per-method parity statistics.

* :func:`compare` puts computed and measured static polarizabilities side by side;
* :func:`compare_series` compares the computed α + μ²/(3kT) (Langevin–Debye) with every measured
  effective polarizability of a temperature series;
* :func:`parity_table` condenses a comparison into per-method statistics ("method X
  underestimates our set by 4 %").

The computed side is any table in the layout of
:data:`~polarbeam.chemistry.computed.COMPUTED_COLUMNS`.  Read
:data:`ELECTRONIC_VS_VIBRATIONAL_NOTE` before drawing conclusions from a parity table.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam.constants import alpha_a3_from_si, langevin_debye_si, si_from_debye
from polarbeam.errors import InputError

pd = lazy("pandas", "reading and writing tables")

__all__ = [
    "COMPARISON_COLUMNS",
    "ELECTRONIC_VS_VIBRATIONAL_NOTE",
    "PARITY_COLUMNS",
    "SERIES_COMPARISON_COLUMNS",
    "compare",
    "compare_series",
    "orientational_a3",
    "parity_table",
]

#: Caveat to print next to every computed-vs-measured comparison.
ELECTRONIC_VS_VIBRATIONAL_NOTE = (
    "A static-field deflection measures the full static polarizability, which includes the "
    "vibrational (nuclear-relaxation) contribution as well as the electronic one; "
    "refractive-index values and most computed values (CPHF/CPKS at a fixed geometry, D4) are "
    "electronic only. Expect measured > computed by the vibrational part (a few per cent for "
    "small rigid molecules, more for floppy or ionic-bonded ones) even for an exact method."
)

#: Columns of :func:`compare` (``comparison.csv``), in order; optional extras follow.
COMPARISON_COLUMNS = [
    "compound",
    "qc_method",
    "alpha_computed_A3",
    "dipole_computed_D",
    "alpha_measured_A3",
    "alpha_measured_err_A3",
    "alpha_diff_A3",
    "alpha_diff_err_A3",
]

#: Columns of :func:`compare_series`.
SERIES_COMPARISON_COLUMNS = [
    "compound",
    "qc_method",
    "temperature_K",
    "alpha_computed_A3",
    "dipole_computed_D",
    "orientational_computed_A3",
    "alpha_eff_computed_A3",
    "alpha_eff_measured_A3",
    "alpha_eff_measured_err_A3",
    "alpha_eff_diff_A3",
    "alpha_eff_diff_err_A3",
]

#: Columns of :func:`parity_table`.
PARITY_COLUMNS = [
    "qc_method",
    "n_compounds",
    "mean_signed_dev_A3",
    "mean_signed_dev_pct",
    "mean_abs_dev_A3",
    "mean_abs_dev_pct",
    "rms_dev_A3",
    "max_abs_dev_A3",
    "n_within_2sigma",
    "verdict",
]


def orientational_a3(dipole_d, temperature_k):
    """Orientational polarizability volume μ²/(3kT) in Å³ for a dipole in debye.

    Uses :func:`polarbeam.constants.langevin_debye_si` (high-temperature, rigid-rotor limit).
    """
    mu_si = si_from_debye(np.asarray(dipole_d, dtype=float))
    out = alpha_a3_from_si(langevin_debye_si(mu_si, np.asarray(temperature_k, dtype=float)))
    return float(out) if np.ndim(out) == 0 else out


# --------------------------------------------------------------------------------------------
# comparison with the measurement
# --------------------------------------------------------------------------------------------

_MEASURED_ALIASES = {
    "alpha_measured_A3": "alpha_A3",
    "alpha_measured_err_A3": "alpha_err_A3",
    "dipole_measured_D": "dipole_D",
    "dipole_measured_err_D": "dipole_err_D",
}


def _need_columns(df: pd.DataFrame, required: Iterable[str], what: str) -> None:
    if not isinstance(df, pd.DataFrame):
        raise InputError(f"{what}: expected a pandas DataFrame, found {type(df).__name__}")
    missing = [c for c in required if c not in df.columns]
    if missing:
        raise InputError(
            f"{what}: expected columns {', '.join(required)}, missing {', '.join(missing)} "
            f"(found {', '.join(map(str, df.columns))})"
        )


def _computed_view(computed: pd.DataFrame) -> pd.DataFrame:
    if "qc_method" not in getattr(computed, "columns", ()) and "method" in getattr(
        computed, "columns", ()
    ):  # a table in the layout of older versions
        computed = computed.rename(columns={"method": "qc_method"})
    _need_columns(
        computed,
        ["compound", "qc_method", "alpha_computed_A3", "dipole_computed_D"],
        "computed table",
    )
    dup = computed.duplicated(["compound", "qc_method"], keep=False)
    if dup.any():
        first = computed.loc[dup, ["compound", "qc_method"]].iloc[0]
        raise InputError(
            f"computed table: expected one row per compound and method, found "
            f"{first['compound']!r} / {first['qc_method']!r} more than once"
        )
    return computed[["compound", "qc_method", "alpha_computed_A3", "dipole_computed_D"]].copy()


def compare(
    measured: pd.DataFrame, computed: pd.DataFrame, *, temperatures: Sequence[float] = ()
) -> pd.DataFrame:
    """Computed vs measured static polarizability, one row per (compound, qc_method).

    Parameters
    ----------
    measured
        One row per compound with ``compound, alpha_A3, alpha_err_A3`` (1σ) and optionally
        ``dipole_D, dipole_err_D``.  The names ``alpha_measured_A3`` … are accepted too.
    computed
        A table with at least ``compound, qc_method, alpha_computed_A3, dipole_computed_D``
        (:func:`~polarbeam.chemistry.computed.read_computed`,
        :func:`~polarbeam.chemistry.computed.read_outputs`,
        :func:`polarbeam.chemistry.qchem.results_table`).
    temperatures
        Optional temperatures in K: for each T a column ``alpha_eff_computed_A3_<T>K`` with the
        computed α + μ²/(3kT) is added (what a deflection at that source temperature would give).

    Returns
    -------
    pandas.DataFrame
        :data:`COMPARISON_COLUMNS` (``comparison.csv``), then ``dipole_measured_D``,
        ``dipole_measured_err_D``, ``dipole_diff_D`` when the measured table has dipoles, then the
        per-temperature columns.  Only compounds present in both tables appear.

    Notes
    -----
    ``alpha_diff_A3`` is measured − computed.  Its error ``alpha_diff_err_A3`` is the
    experimental 1σ only: a computed value has no statistical error, its method error is what
    :func:`parity_table` measures over a set of compounds.  See
    :data:`ELECTRONIC_VS_VIBRATIONAL_NOTE`.
    """
    measured = measured.rename(columns=_MEASURED_ALIASES)
    _need_columns(measured, ["compound", "alpha_A3", "alpha_err_A3"], "measured table")
    if measured["compound"].duplicated().any():
        name = measured.loc[measured["compound"].duplicated(), "compound"].iloc[0]
        raise InputError(f"measured table: expected one row per compound, found {name!r} twice")
    comp = _computed_view(computed)
    cols = ["compound", "alpha_A3", "alpha_err_A3"]
    has_dipole = "dipole_D" in measured.columns
    if has_dipole:
        if "dipole_err_D" not in measured.columns:
            measured = measured.assign(dipole_err_D=np.nan)
        cols += ["dipole_D", "dipole_err_D"]
    out = comp.merge(measured[cols], on="compound", how="inner", sort=False)
    out = out.rename(
        columns={
            "alpha_A3": "alpha_measured_A3",
            "alpha_err_A3": "alpha_measured_err_A3",
            "dipole_D": "dipole_measured_D",
            "dipole_err_D": "dipole_measured_err_D",
        }
    )
    out["alpha_diff_A3"] = out["alpha_measured_A3"] - out["alpha_computed_A3"]
    out["alpha_diff_err_A3"] = out["alpha_measured_err_A3"].astype(float)
    order = list(COMPARISON_COLUMNS)
    if has_dipole:
        out["dipole_diff_D"] = out["dipole_measured_D"] - out["dipole_computed_D"]
        order += ["dipole_measured_D", "dipole_measured_err_D", "dipole_diff_D"]
    for t in temperatures:
        t = float(t)
        if not (math.isfinite(t) and t > 0):
            raise InputError(f"compare temperatures: expected values > 0 K, found {t!r}")
        name = f"alpha_eff_computed_A3_{t:g}K"
        out[name] = out["alpha_computed_A3"] + orientational_a3(
            out["dipole_computed_D"].to_numpy(float), t
        )
        order.append(name)
    return out[order].reset_index(drop=True)


def compare_series(series: pd.DataFrame, computed: pd.DataFrame) -> pd.DataFrame:
    """Computed α + μ²/(3kT) against each measured effective polarizability of a series.

    Parameters
    ----------
    series
        One row per measured series: ``compound, temperature_K, alpha_eff_A3, alpha_eff_err_A3``
        (1σ).
    computed
        As for :func:`compare`.

    Returns
    -------
    pandas.DataFrame
        :data:`SERIES_COMPARISON_COLUMNS`, one row per (series, method).
        ``orientational_computed_A3`` = μ²/(3kT) from the computed dipole (Langevin–Debye, rigid
        rotor, high-T limit); ``alpha_eff_diff_A3`` = measured − computed with the experimental
        1σ as its error.  A row whose computed dipole is missing gets NaN there.
    """
    _need_columns(
        series, ["compound", "temperature_K", "alpha_eff_A3", "alpha_eff_err_A3"], "series table"
    )
    temps = pd.to_numeric(series["temperature_K"], errors="coerce")
    bad = ~(np.isfinite(temps) & (temps > 0))
    if bad.any():
        i = int(np.flatnonzero(bad.to_numpy())[0])
        raise InputError(
            f"series table row {i}: column temperature_K: expected a temperature > 0 K, "
            f"found {series['temperature_K'].iloc[i]}"
        )
    comp = _computed_view(computed)
    out = series[["compound", "temperature_K", "alpha_eff_A3", "alpha_eff_err_A3"]].merge(
        comp, on="compound", how="inner", sort=False
    )
    out = out.rename(
        columns={
            "alpha_eff_A3": "alpha_eff_measured_A3",
            "alpha_eff_err_A3": "alpha_eff_measured_err_A3",
        }
    )
    out["orientational_computed_A3"] = orientational_a3(
        out["dipole_computed_D"].to_numpy(float), out["temperature_K"].to_numpy(float)
    )
    out["alpha_eff_computed_A3"] = out["alpha_computed_A3"] + out["orientational_computed_A3"]
    out["alpha_eff_diff_A3"] = out["alpha_eff_measured_A3"] - out["alpha_eff_computed_A3"]
    out["alpha_eff_diff_err_A3"] = out["alpha_eff_measured_err_A3"].astype(float)
    return out[SERIES_COMPARISON_COLUMNS].reset_index(drop=True)


def parity_table(comparison: pd.DataFrame) -> pd.DataFrame:
    """Per-method statistics of computed vs measured α over the compared set.

    Deviations here are **computed − measured** (the benchmarking convention, so a negative
    mean signed deviation means the method underestimates); note the opposite sign of
    ``alpha_diff_A3`` in :func:`compare`.  Relative values are in per cent of the measured α.

    Parameters
    ----------
    comparison
        Output of :func:`compare` (needs ``qc_method, alpha_computed_A3, alpha_measured_A3,
        alpha_measured_err_A3``).

    Returns
    -------
    pandas.DataFrame
        :data:`PARITY_COLUMNS`, one row per method (rows with a missing value are left out of
        that method's statistics).  ``n_within_2sigma`` counts compounds whose
        |deviation| ≤ 2 × experimental σ; ``verdict`` is a sentence such as
        ``"b3lyp/def2-svpd underestimates the set by 4.0 % on average (n=5)"``.
    """
    _need_columns(
        comparison,
        ["qc_method", "alpha_computed_A3", "alpha_measured_A3", "alpha_measured_err_A3"],
        "comparison table",
    )
    rows = []
    for method, grp in comparison.groupby("qc_method", sort=True):
        c = grp["alpha_computed_A3"].to_numpy(float)
        m = grp["alpha_measured_A3"].to_numpy(float)
        s = grp["alpha_measured_err_A3"].to_numpy(float)
        ok = np.isfinite(c) & np.isfinite(m) & (m != 0)
        c, m, s = c[ok], m[ok], s[ok]
        n = int(ok.sum())
        if n == 0:
            rows.append({"qc_method": method, "n_compounds": 0, "verdict": "no usable compound"})
            continue
        dev = c - m
        rel = 100.0 * dev / m
        msd_pct = float(rel.mean())
        if abs(msd_pct) < 0.05:
            verdict = f"{method} matches the set within 0.05 % on average (n={n})"
        else:
            word = "underestimates" if msd_pct < 0 else "overestimates"
            verdict = f"{method} {word} the set by {abs(msd_pct):.1f} % on average (n={n})"
        rows.append(
            {
                "qc_method": method,
                "n_compounds": n,
                "mean_signed_dev_A3": float(dev.mean()),
                "mean_signed_dev_pct": msd_pct,
                "mean_abs_dev_A3": float(np.abs(dev).mean()),
                "mean_abs_dev_pct": float(np.abs(rel).mean()),
                "rms_dev_A3": float(np.sqrt(np.mean(dev**2))),
                "max_abs_dev_A3": float(np.abs(dev).max()),
                "n_within_2sigma": int(np.sum(np.abs(dev) <= 2.0 * np.where(np.isfinite(s), s, 0))),
                "verdict": verdict,
            }
        )
    return pd.DataFrame(rows, columns=PARITY_COLUMNS)
