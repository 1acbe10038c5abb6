"""Calibration with reference compounds: the deflector's field factor from compounds of known α.

A reference compound is flown through the same layout and deflector as the unknowns, and its
effective polarizability at each source temperature is known from outside,
α_eff,ref(T) = α_ref + μ_ref²/(3kT).  The fit of its series gives the product α_eff·C/m
(C: coupling of layout and deflector), so each reference series measures the coupling:

    s_r = A_r / B_r,     A_r = α_eff fitted with the stated (or stand-in) C,   B_r = α_eff,ref(T_r)

and ``C_true = s · C_stated``.  A ``uniform`` deflector without ``field_factor`` is calibrated this
way (its g is ``s`` times the stand-in value); for every other model, reference compounds scale the
model's g by ``s``.

Combination and consistency
---------------------------
The ln s_r are combined by generalised least squares with their full covariance (from the
correlated :mod:`uncertainties` values), ln ŝ = Σ w_r ln s_r with w = V⁻¹1 / (1ᵀV⁻¹1).  Working
in logarithms makes the shared multiplicative errors (geometry, a reference's α, its mass)
additive with a constant covariance, so the weights do not pull the estimate low the way a
covariance built from measured values would (Peelle's pertinent puzzle).  The fixed linear
combination is then evaluated with the uncertain numbers themselves, so ŝ carries every reference
input with its correlations: fit statistics, velocity of each reference series, reference masses,
temperatures, the known α and μ, and the shared geometry.

Each reference compound also gets its own calibration ŝ_k (GLS over its series); the χ² of the
ŝ_k about their combination tests whether the references agree (warning at p < 0.01), and the χ²
of each reference's series tests its own temperature dependence (e.g. a polar reference taken as
non-polar).  With ``[analysis] scale_errors = "birge"`` an inconsistent set inflates the
calibration error by sqrt(χ²/ν).

Why the geometry cancels
------------------------
The unknowns are analysed with the coupling ratio C_nominal/C(p) multiplied by ŝ_nominal/ŝ.
Since ŝ contains the same geometry factor (Σw = 1), every input that enters only through C — the
deflector's length and position, the grating or detector positions, the field model and its
numerical error — cancels to first order between reference and unknown; the uncertainties
package does this algebra exactly.  What remains is specific to the references (their fits,
velocities, masses, temperatures and known values) and to the unknown itself.

Known values come from ``compounds.csv`` (columns ``reference``, ``reference_alpha_A3``,
``reference_alpha_err_A3``, optional ``reference_dipole_D``, ``reference_dipole_err_D``) or, when
those are empty, from ``reference_values/polarizabilities.csv`` and ``dipoles.csv`` by compound
name (a reference with neither a stated nor a tabulated dipole is taken as non-polar, and says
so).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from functools import lru_cache
from pathlib import Path
from typing import Any

import numpy as np
import uncertainties
from uncertainties import UFloat, covariance_matrix, ufloat, umath

from polarbeam._util.optional import lazy
from polarbeam._util.tables import CELL_BLANKS, Table, read_table
from polarbeam._util.text import input_label
from polarbeam.constants import (
    BOLTZMANN,
    alpha_a3_from_si,
    alpha_si_from_a3,
    debye_from_si,
    si_from_debye,
)
from polarbeam.errors import CompoundError, InputError
from polarbeam.extraction.context import Context, build_context, field_factor_sensitivities
from polarbeam.quantities import Measured, format_value_error
from polarbeam.results.objects import CompoundResult
from polarbeam.separation.compound import separate, series_temperature
from polarbeam.separation.dipole import dipole_statement
from polarbeam.uncertain import variance_budget

stats = lazy("scipy.stats", "numerical routines")

#: analyse one compound with a context: ``(compound, campaign, context) -> CompoundResult``.
CompoundAnalysis = Callable[[Any, Any, Context], CompoundResult]

__all__ = [
    "Calibration",
    "CalibrationOutcome",
    "ReferenceCalibration",
    "ReferenceValue",
    "calibrate_campaign",
    "calibration_required",
    "gls_log_mean",
    "known_alpha_eff",
    "load_reference_tables",
    "reference_tables_dir",
    "reference_values",
]

_TRUE = ("true", "yes", "y", "1")
_FALSE = ("false", "no", "n", "0", "")
#: p-value below which references (or the series of one reference) are called inconsistent.
CONSISTENCY_P = 0.01


# ---------------------------------------------------------------------------------------------
# Known values
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ReferenceValue:
    """Known static α (C·m²/V) and dipole μ (C·m) of a reference compound, with their sources."""

    compound: str
    alpha: Measured
    dipole: Measured
    alpha_source: str
    dipole_source: str

    def summary(self) -> dict[str, Any]:
        return {
            "alpha_A3": alpha_a3_from_si(self.alpha.value),
            "alpha_err_A3": alpha_a3_from_si(self.alpha.error),
            "dipole_D": debye_from_si(self.dipole.value),
            "dipole_err_D": debye_from_si(self.dipole.error),
            "alpha_source": self.alpha_source,
            "dipole_source": self.dipole_source,
        }


def reference_tables_dir() -> Path | None:
    """The ``reference_values/`` folder of the source tree (None when not found)."""
    here = Path(__file__).resolve()
    for cand in (
        here.parents[3] / "reference_values",
        here.parents[1] / "data" / "reference_values",
    ):
        if (cand / "polarizabilities.csv").is_file():
            return cand
    return None


@lru_cache(maxsize=4)
def load_reference_tables(directory: str | None = None):
    """({name: (α Å³, err, source)}, {name: (μ D, err, source)}) keyed by lower-case name."""
    d = Path(directory) if directory else reference_tables_dir()
    out: list[dict[str, tuple[float, float, str]]] = [{}, {}]
    if d is None:
        return tuple(out)
    for i, (fname, col) in enumerate(
        (("polarizabilities.csv", "alpha"), ("dipoles.csv", "dipole"))
    ):
        path = d / fname
        if not path.is_file():
            continue
        unit = "A3" if col == "alpha" else "D"
        t = read_table(path, ("compound", f"{col}_{unit}", f"{col}_err_{unit}"), "reference table")
        for j, row in enumerate(t.rows):
            src = "; ".join(x for x in (row.get("source", ""), row.get("note", "")) if x)
            out[i][row["compound"].strip().lower()] = (
                t.number(j, f"{col}_{unit}"),
                t.number(j, f"{col}_err_{unit}", nonnegative=True, default=0.0),
                f"reference_values/{fname}: {src}" if src else f"reference_values/{fname}",
            )
    return tuple(out)


def _compounds_table(c) -> Table:
    raw = c.raw.get("data", {}).get("compounds", "compounds.csv")
    return read_table((c.path.parent / raw).resolve(), ("compound", "mass_u"), "compounds")


def _flag(raw: str | None) -> bool | None:
    v = (raw or "").strip().lower()
    return True if v in _TRUE else False if v in _FALSE else None


def _marked(c) -> list[str]:
    """Names of measured compounds whose ``reference`` cell is not plainly false."""
    return [cd.name for cd in c.compounds if _flag(cd.extra.get("reference")) is not False]


def reference_values(c) -> tuple[dict[str, ReferenceValue], dict[str, str]]:
    """Known values of the reference compounds of a campaign, and the problems of the others.

    Returns ``(values, problems)``: both keyed by compound name; a problem is a one-line message
    naming the file, line and column.
    """
    if not _marked(c):
        return {}, {}
    table = _compounds_table(c)
    alphas, dipoles = load_reference_tables()
    where_tab = reference_tables_dir()
    values: dict[str, ReferenceValue] = {}
    problems: dict[str, str] = {}
    measured = {cd.name for cd in c.compounds}
    for i, row in enumerate(table.rows):
        name = row.get("compound", "").strip(CELL_BLANKS)
        if name not in measured or "__bad__" in row:
            continue
        line = f"{table.name} line {table.lines[i]}"
        flag = _flag(row.get("reference"))
        if flag is None:
            problems[name] = (
                f"{line}: column 'reference' expected true or false, found {row['reference']!r}"
            )
            continue
        if not flag:
            continue
        try:
            if row.get("reference_alpha_A3", "").strip():
                a = table.number(i, "reference_alpha_A3", positive=True)
                da = table.number(i, "reference_alpha_err_A3", nonnegative=True, default=0.0)
                a_src = f"{table.name} line {table.lines[i]}"
            elif name.lower() in alphas:
                a, da, a_src = alphas[name.lower()]
            else:
                looked = (
                    f"not in {where_tab / 'polarizabilities.csv'}"
                    if where_tab
                    else "the reference_values/ tables were not found"
                )
                raise CompoundError(
                    f"{line}: reference compound {name!r} has no known α: column "
                    f"'reference_alpha_A3' is empty and the name is {looked}; expected "
                    "reference_alpha_A3 (and reference_alpha_err_A3)"
                )
            if row.get("reference_dipole_D", "").strip():
                mu = table.number(i, "reference_dipole_D", nonnegative=True)
                dmu = table.number(i, "reference_dipole_err_D", nonnegative=True, default=0.0)
                mu_src = f"{table.name} line {table.lines[i]}"
            elif name.lower() in dipoles:
                mu, dmu, mu_src = dipoles[name.lower()]
            else:
                mu, dmu = 0.0, 0.0
                mu_src = (
                    "assumed non-polar (no reference_dipole_D given or tabulated; give it if the "
                    "compound is polar)"
                )
        except CompoundError as exc:
            problems[name] = str(exc)
            continue
        values[name] = ReferenceValue(
            name,
            Measured(alpha_si_from_a3(a), alpha_si_from_a3(da)),
            Measured(si_from_debye(mu), si_from_debye(dmu)),
            a_src,
            mu_src,
        )
    return values, problems


def known_alpha_eff(alpha, dipole, temperature):
    """α_eff = α + μ²/(3kT) (Langevin–Debye, high-T weak-field limit) for floats or ufloats."""
    return alpha + dipole * dipole / (3.0 * BOLTZMANN * temperature)


# ---------------------------------------------------------------------------------------------
# Combination
# ---------------------------------------------------------------------------------------------


def gls_log_mean(values: list[UFloat]) -> tuple[UFloat, float, int]:
    """GLS mean of ln(values) with their full covariance: (ln mean as ufloat, χ², ν).

    The weights come from the covariance of the logarithms; the estimate is the same fixed
    linear combination evaluated with the uncertain numbers, so its error carries every input.
    """
    logs = [umath.log(v) for v in values]
    n = len(logs)
    if n == 1:
        return logs[0], 0.0, 0
    V = np.array(covariance_matrix(logs), dtype=float)
    one = np.ones(n)
    Vi = np.linalg.pinv(V, rcond=1e-12, hermitian=True)
    w = Vi @ one / (one @ Vi @ one)
    mean = sum(float(wi) * li for wi, li in zip(w, logs, strict=True))
    r = np.array([li.nominal_value for li in logs]) - mean.nominal_value
    return mean, float(r @ Vi @ r), n - 1


def _p(chi2: float, ndof: int) -> float:
    return float(stats.chi2.sf(chi2, ndof)) if ndof > 0 else math.nan


@dataclass(frozen=True)
class ReferenceCalibration:
    """One reference compound's own calibration ŝ_k (GLS over its series)."""

    compound: str
    scale: UFloat
    chi2: float
    ndof: int
    n_series: int
    value: ReferenceValue

    @property
    def p_value(self) -> float:
        return _p(self.chi2, self.ndof)

    def summary(self) -> dict[str, Any]:
        return {
            "compound": self.compound,
            "field_scale": self.scale.nominal_value,
            "field_scale_err": self.scale.std_dev,
            "n_series": self.n_series,
            "chi2": self.chi2,
            "ndof": self.ndof,
            "p_value": self.p_value,
            **self.value.summary(),
        }


@dataclass(frozen=True)
class Calibration:
    """The combined calibration: C_true = ``scale`` · C_model, g = ``field_factor``.

    ``model_field_factor`` is the stated model's g (for a ``uniform`` deflector without
    ``field_factor`` the stand-in value); ``field_factor`` is the calibrated g as an uncertain
    number correlated with every shared input.
    """

    model: str
    quantity: str  # "field_factor" (g was not stated) or "field_scale" (scale on a stated g)
    scale: UFloat
    field_factor: UFloat
    model_field_factor: float
    references: tuple[ReferenceCalibration, ...]
    chi2: float
    ndof: int
    between_chi2: float
    between_ndof: int
    birge_factor: float = 1.0
    warnings: tuple[str, ...] = ()
    correlations: dict[str, float] | None = None

    @property
    def p_value(self) -> float:
        return _p(self.chi2, self.ndof)

    @property
    def between_p_value(self) -> float:
        return _p(self.between_chi2, self.between_ndof)

    def summary(self) -> dict[str, Any]:
        g = self.field_factor
        return {
            "method": "GLS of ln(α_eff fitted / α_eff known) over the reference series",
            "quantity": self.quantity,
            "model": self.model,
            "field_factor_per_m3": g.nominal_value,
            "field_factor_err_per_m3": g.std_dev,
            "field_scale": self.scale.nominal_value,
            "field_scale_err": self.scale.std_dev,
            "model_field_factor_per_m3": self.model_field_factor,
            "field_factor_budget": variance_budget(g),
            "field_factor_correlation_with_inputs": dict(self.correlations or {}),
            "references": [r.summary() for r in self.references],
            "chi2": self.chi2,
            "ndof": self.ndof,
            "p_value": self.p_value,
            "between_references": {
                "chi2": self.between_chi2,
                "ndof": self.between_ndof,
                "p_value": self.between_p_value,
            },
            "birge_factor": self.birge_factor,
            "warnings": list(self.warnings),
        }

    def note(self) -> str:
        g = self.field_factor
        names = ", ".join(r.compound for r in self.references)
        head = (
            f"field factor calibrated from {len(self.references)} reference compound(s) "
            f"({names}): g = {format_value_error(g.nominal_value, g.std_dev)} m⁻³"
        )
        if self.quantity == "field_scale":
            head += (
                f", {format_value_error(self.scale.nominal_value, self.scale.std_dev)} × the "
                f"'{self.model}' model"
            )
        if self.between_ndof > 0:
            head += (
                f"; references agree to χ² = {self.between_chi2:.2f} for {self.between_ndof} dof "
                f"(p = {self.between_p_value:.2g})"
            )
        elif self.ndof == 0:
            head += "; one reference series: no consistency check"
        if self.birge_factor > 1:
            head += f"; error scaled by {self.birge_factor:.2f} (Birge)"
        return head


@dataclass(frozen=True)
class CalibrationOutcome:
    """Everything the calibration step produced (``calibration`` is None when impossible)."""

    context: Context
    calibration: Calibration | None
    first_pass: dict[str, CompoundResult]
    known: dict[str, tuple[UFloat | float, ...]]
    values: dict[str, ReferenceValue]
    problems: dict[str, str]
    reason: str = ""


def _tag_variables(*values) -> dict[str, Any]:
    out = {}
    for v in values:
        if isinstance(v, UFloat):
            for var in v.derivatives:
                if var.tag:
                    out.setdefault(var.tag, var)
    return out


def _measured_u(m: Measured, tag: str):
    return ufloat(m.value, m.error, tag=tag) if m.error > 0 else m.value


def _model_field_factor_u(c, ctx: Context):
    """The stated model's g as an uncertain number sharing the stated-input variables of C."""
    g0, sens = field_factor_sensitivities(c)
    by_tag = _tag_variables(ctx.coupling_ratio)
    rel = 0.0
    for key, s in sens.items():
        var = by_tag.get(input_label(key))
        if var is not None:
            rel = rel + s * (var - var.nominal_value)
    return g0 * (1.0 + rel), g0


def field_factor_missing(c) -> bool:
    """A ``uniform`` deflector whose ``field_factor`` is left to the references."""
    return c.model == "uniform" and "deflector.field_factor" not in c.stated


def calibration_required(c) -> bool:
    """Whether the analysis goes through :func:`analyze_with_references`."""
    if field_factor_missing(c):
        return True
    return c.settings.calibration != "off" and bool(_marked(c))


def first_pass(
    c,
    ctx: Context,
    values: dict[str, ReferenceValue],
    problems: dict[str, str],
    analyze_one: CompoundAnalysis = separate,
):
    """Analyse each reference with the stated field; its known α_eff per series (ufloats).

    ``analyze_one(compound, campaign, context)`` gives a compound's result (the pipeline passes
    its own, which adds the structure cross-check).

    The known α_eff = α_ref + μ_ref²/(3kT) use the temperature the separation uses (the
    rotational one when stated, else the source temperature with the shared thermometer offset:
    :func:`~polarbeam.separation.compound.series_temperature`) and reuse the temperature
    variables of the compound's own Debye fit (found by tag), so the reference's reported α
    stays correlated with them.
    """
    first, known = {}, {}
    for cd in c.compounds:
        if cd.name not in values:
            continue
        r1 = analyze_one(cd, c, ctx)
        if r1.status == "failed":
            problems[cd.name] = r1.message
            continue
        ref = values[cd.name]
        temps = _tag_variables(r1.alpha, r1.mu2)
        a_u = _measured_u(ref.alpha, f"reference α: {cd.name}")
        mu_u = _measured_u(ref.dipole, f"reference μ: {cd.name}")
        ks = []
        for s in cd.series:  # the warnings were given by the separation already
            t_u = series_temperature(s, ctx.temperature_offset, [], variables=temps)
            ks.append(known_alpha_eff(a_u, mu_u, t_u))  # a float when exactly known
        first[cd.name], known[cd.name] = r1, tuple(ks)
    return first, known


def calibrate_campaign(c, analyze_one: CompoundAnalysis = separate) -> CalibrationOutcome:
    """Fit every reference series with the stated model, combine, and check consistency."""
    values, problems = reference_values(c)
    ctx = build_context(c)
    st = c.settings
    first, known = first_pass(c, ctx, values, problems, analyze_one)
    per_ref, series_ratio = [], []
    for name in list(first):
        r1 = first[name]
        bad = [s for s in r1.series if not s.alpha_eff.nominal_value > 0]
        if bad:
            problems[name] = (
                f"reference compound {name!r}: a series gave α_eff ≤ 0 "
                f"({alpha_a3_from_si(bad[0].alpha_eff.nominal_value):.3g} Å³ at "
                f"{bad[0].temperature_K:g} K); it cannot calibrate the field"
            )
            del first[name], known[name]
            continue
        ratios = [s.alpha_eff / b for s, b in zip(r1.series, known[name], strict=True)]
        lnk, chi2k, ndofk = gls_log_mean(ratios)
        per_ref.append(
            ReferenceCalibration(name, umath.exp(lnk), chi2k, ndofk, len(ratios), values[name])
        )
        series_ratio.extend(ratios)
    if not per_ref:
        why = "; ".join(f"{k}: {v}" for k, v in problems.items()) or (
            "compounds.csv marks no measured compound as reference"
        )
        return CalibrationOutcome(ctx, None, first, known, values, problems, why)
    ln_s, chi2, ndof = gls_log_mean(series_ratio)
    between, bndof = 0.0, 0
    if len(per_ref) > 1:
        _m, between, bndof = gls_log_mean([r.scale for r in per_ref])
    warnings = []
    if bndof > 0 and _p(between, bndof) < CONSISTENCY_P:
        warnings.append(
            "inconsistent references: their calibrations "
            + ", ".join(
                f"{r.compound} {format_value_error(r.scale.nominal_value, r.scale.std_dev)}"
                for r in per_ref
            )
            + f" disagree (χ² = {between:.1f} for {bndof} dof, p = {_p(between, bndof):.1e}); "
            "check their known α and μ and the field model"
        )
    for r in per_ref:
        if r.ndof > 0 and r.p_value < CONSISTENCY_P:
            warnings.append(
                f"the series of reference {r.compound} disagree with α_ref + μ_ref²/3kT "
                f"(χ² = {r.chi2:.1f} for {r.ndof} dof, p = {r.p_value:.1e}); check its dipole "
                f"({r.value.dipole_source})"
            )
    birge = 1.0
    if st.scale_errors == "birge" and ndof > 0 and chi2 / ndof > 1:
        birge = math.sqrt(chi2 / ndof)
        extra = ln_s.std_dev * math.sqrt(birge * birge - 1.0)
        ln_s = ln_s + ufloat(0.0, extra, tag="calibration: reference scatter (Birge)")
    scale = umath.exp(ln_s)
    g_model_u, g0 = _model_field_factor_u(c, ctx)
    g_cal = g_model_u * scale
    corr = {}
    if g_cal.std_dev > 0:
        for var, d in g_cal.derivatives.items():
            if var.tag and var.std_dev > 0 and not var.tag.startswith("fit statistics"):
                corr[var.tag] = corr.get(var.tag, 0.0) + d * var.std_dev / g_cal.std_dev
    cal = Calibration(
        model=c.model,
        quantity="field_factor" if field_factor_missing(c) else "field_scale",
        scale=scale,
        field_factor=g_cal,
        model_field_factor=g0,
        references=tuple(per_ref),
        chi2=chi2,
        ndof=ndof,
        between_chi2=between,
        between_ndof=bndof,
        birge_factor=birge,
        warnings=tuple(warnings),
        correlations=corr,
    )
    return CalibrationOutcome(ctx, cal, first, known, values, problems)


# ---------------------------------------------------------------------------------------------
# The analysis with references
# ---------------------------------------------------------------------------------------------


def _ref_extra(ref: ReferenceValue) -> dict[str, Any]:
    return {
        "reference_alpha_A3": alpha_a3_from_si(ref.alpha.value),
        "reference_alpha_err_A3": alpha_a3_from_si(ref.alpha.error),
        "reference_dipole_D": debye_from_si(ref.dipole.value),
        "reference_dipole_err_D": debye_from_si(ref.dipole.error),
        "reference_source": ref.alpha_source,
    }


def _compared_series(r1: CompoundResult, known, scale):
    """Reference series scaled by 1/scale, with the known α_eff and the pull against it."""
    out, pulls = [], []
    for s, b in zip(r1.series, known, strict=True):
        a = s.alpha_eff / scale if scale is not None else s.alpha_eff
        d = a - b
        bn, bs = uncertainties.nominal_value(b), uncertainties.std_dev(b)
        pull = d.nominal_value / d.std_dev if d.std_dev > 1e-9 * abs(bn) else None
        pulls.append(pull)
        extra = {
            **s.extra,
            "reference_alpha_eff_A3": alpha_a3_from_si(bn),
            "reference_alpha_eff_err_A3": alpha_a3_from_si(bs),
            "reference_pull": pull,
        }
        out.append(replace(s, alpha_eff=a, extra=extra))
    return tuple(out), pulls


def reference_result(r1, ref, known, scale, st, own: ReferenceCalibration | None, mode: str):
    series, pulls = _compared_series(r1, known, scale)
    alpha = mu2 = dipole = upper = None
    if r1.method == "temperature series" and r1.alpha is not None:
        alpha = r1.alpha / scale if scale is not None else r1.alpha
        mu2 = r1.mu2 / scale if scale is not None else r1.mu2
        statement = dipole_statement(mu2, limit_cl=st.upper_limit_cl)
        dipole, upper = statement.value, statement.limit
    warnings = [w for w in r1.warnings if not w.startswith("single source temperature")]
    a_txt = format_value_error(alpha_a3_from_si(ref.alpha.value), alpha_a3_from_si(ref.alpha.error))
    mu_txt = format_value_error(debye_from_si(ref.dipole.value), debye_from_si(ref.dipole.error))
    parts = [
        (
            "reference: calibrates the field"
            if mode == "auto"
            else "reference (check only, not used for calibration)"
        )
        + f" with α_ref = {a_txt} Å³ ({ref.alpha_source}), μ_ref = {mu_txt} D "
        f"({ref.dipole_source})"
    ]
    if own is not None:
        parts.append(
            f"own calibration {format_value_error(own.scale.nominal_value, own.scale.std_dev)}"
            + (f" (series χ² = {own.chi2:.2f} for {own.ndof} dof)" if own.ndof else "")
        )
    shown = [
        f"{s.temperature_K:g} K: {p:+.2f}"
        for s, p in zip(series, pulls, strict=True)
        if p is not None
    ]
    if shown:
        parts.append("pulls of α_eff against the known value " + ", ".join(shown))
    extra = {**r1.extra, **_ref_extra(ref), "role": "reference"}
    if own is not None:
        extra.update(
            {
                "calibration_scale": own.scale.nominal_value,
                "calibration_scale_err": own.scale.std_dev,
            }
        )
    return CompoundResult(
        compound=r1.compound,
        status="warning" if warnings else "ok",  # the role column says "reference"
        message="; ".join(parts + warnings),
        mass_u=r1.mass_u,
        series=series,
        alpha=alpha,
        dipole=dipole,
        dipole_upper_si=upper,
        mu2=mu2,
        method=r1.method if alpha is not None else "reference",
        debye_chi2=r1.debye_chi2 if alpha is not None else None,
        debye_ndof=r1.debye_ndof if alpha is not None else None,
        warnings=tuple(warnings),
        extra=extra,
    )


def check_calibration_inputs(c) -> None:
    """Raise :class:`~polarbeam.errors.InputError` when a missing ``field_factor`` cannot be
    calibrated (no reference compound, or calibration switched off)."""
    fname = c.path.name
    mode = c.settings.calibration
    if not field_factor_missing(c):
        return
    if mode != "auto":
        raise InputError(
            f"{fname} [deflector] field_factor: missing, and [analysis] calibration = {mode!r} "
            "does not calibrate it; expected a field_factor or calibration = 'auto' with "
            "reference compounds"
        )
    if not _marked(c):
        raise InputError(
            f"{fname} [deflector] field_factor: missing and no measured compound is a reference "
            "(compounds.csv column 'reference' = true); expected a field_factor, or at least one "
            "reference compound of known α to calibrate it"
        )


# ---------------------------------------------------------------------------------------------
# Simulated campaigns with reference compounds
# ---------------------------------------------------------------------------------------------
