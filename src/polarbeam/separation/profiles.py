"""A compound measured by whole beam profiles: α, μ and T_rot from the Poisson profile fit.

The rotor model comes from compounds.csv (a rigid rotor is required: a profile is the sum over
the rotor's Stark states); α is fitted unless ``alpha_known_A3`` is given. The errors are the
counting statistics of the fit (:mod:`polarbeam.extraction.profiles`) combined with the stated
coupling and mass errors, which scale α and μ² like the centroid's α_eff.

The dipole is stated with the unified-interval rules of the Debye separation
(:mod:`polarbeam.separation.dipole`): ⟨μ²⟩ = μ̂² with its error 2μ̂σ_μ (the correlated budget
of the fit and the stated inputs) gives the 68.3 % interval [μ_lo, μ_hi] always, and μ ± the half
width of that interval when the ``upper_limit_cl`` interval excludes zero, else an upper limit.
Every recorded profile becomes a :class:`~polarbeam.results.profiles.ProfileRecord` (a
``series.csv`` row): its centroid and rms width measured and modelled, and the ratio of the
rotor's orientational response to Langevin–Debye at its field.
"""

from __future__ import annotations

import math

from threadpoolctl import threadpool_limits
from uncertainties import ufloat

from polarbeam.constants import debye_from_si
from polarbeam.errors import CompoundError
from polarbeam.extraction.profiles import fit_profiles, profile_moments
from polarbeam.results.objects import CompoundResult
from polarbeam.results.profiles import ProfileRecord
from polarbeam.separation.dipole import LIMIT_CL, DipoleStatement, dipole_statement
from polarbeam.uncertain import FIT_TAG

__all__ = ["profile_dipole_statement", "profile_records", "profile_result"]


def profile_dipole_statement(dipole, limit_cl: float = LIMIT_CL) -> DipoleStatement:
    """The unified-interval statement of a fitted μ (C·m, uncertain): ⟨μ²⟩ = μ̂² ± 2μ̂σ_μ
    through :func:`polarbeam.separation.dipole.dipole_statement` (interval, value or limit)."""
    return dipole_statement(dipole**2, limit_cl=limit_cl)


def profile_result(cd, c, ctx, mass_u: float) -> CompoundResult:
    """CompoundResult of a profile compound (raises CompoundError for bad data)."""
    resp = cd.response
    reason = getattr(cd, "response_reason", None)  # rotor = auto: the derived choice
    if reason and (resp is None or resp.name == "ergodic"):
        raise CompoundError(
            f"compound {cd.name!r}: profile data need a rigid rotor; expected rotor 'auto' to "
            f"find one, found {reason.removeprefix('rotor auto → ')}"
        )
    if resp is None or resp.name == "ergodic":
        raise CompoundError(
            f"compound {cd.name!r}: profile data need a rigid rotor; expected the rotor columns "
            "of compounds.csv (rotor, rot_A_MHz, rot_B_MHz, rot_C_MHz, dipole_axis), found none"
        )
    known = cd.alpha_known.value if cd.alpha_known is not None else None
    fit = fit_profiles(
        list(cd.profiles),
        resp,
        ctx.coupling / cd.mass.value,
        ctx.field_per_volt,
        name=cd.name,
        alpha_known=known,
    )
    # stated inputs: α_eff ∝ (C_nominal/C)(m/m_nominal) for every state, so α and μ² scale alike
    scale = ctx.coupling_ratio
    if cd.mass.error > 0:
        scale = scale * ufloat(1.0, cd.mass.error / cd.mass.value, tag=f"mass: {cd.name}")
    alpha = (
        ufloat(fit.alpha, fit.alpha_err, tag=f"{FIT_TAG}|{cd.name}")
        if fit.alpha_err > 0
        else fit.alpha
    ) * scale
    mu = ufloat(fit.dipole, fit.dipole_err, tag=f"{FIT_TAG}|{cd.name} μ")
    dipole = mu * (scale**0.5 if hasattr(scale, "std_dev") else math.sqrt(scale))
    temps = "; ".join(
        f"{s.label}: T_rot = {t:.3g}" + (f" ± {e:.2g} K (fitted)" if e > 0 else " K (stated)")
        for s, t, e in zip(cd.profiles, fit.rotational_k, fit.rotational_err_k, strict=True)
    )
    message = (
        f"profile fit with the rigid {resp.name} rotor: deviance {fit.deviance:.1f} for "
        f"{fit.ndof} dof; {temps}"
    )
    statement = profile_dipole_statement(dipole, c.settings.upper_limit_cl)
    if statement.limit is not None:
        message += (
            f"; no significant dipole: μ < {debye_from_si(statement.limit):.2f} D "
            f"({c.settings.upper_limit_cl:.0%} CL)"
        )
    with threadpool_limits(limits=1, user_api="blas"):  # small eigenproblems (see extraction)
        records = profile_records(cd, fit, resp, ctx.field_per_volt)
    first_free = next((i for i, e in enumerate(fit.rotational_err_k) if e > 0), None)
    extra = {"response": resp.name, "mu_E_over_kT": None}
    if reason:
        extra["response_reason"] = reason
        message = f"{reason}; {message}"
    if first_free is not None:
        extra["rotational_temperature_K"] = fit.rotational_k[first_free]
        extra["rotational_temperature_err_K"] = fit.rotational_err_k[first_free]
    return CompoundResult(
        compound=cd.name,
        status="ok",
        message=message,
        mass_u=mass_u,
        alpha=alpha,
        dipole=statement.value,
        dipole_upper_si=statement.limit,
        dipole_interval_si=(statement.lower, statement.upper),
        dipole_cl=(statement.interval_cl, statement.limit_cl),
        mu2=dipole**2,
        method="profile fit",
        extra=extra,
        profiles=records,
    )


def profile_records(cd, fit, response, field_per_volt: float) -> tuple[ProfileRecord, ...]:
    """One record per recorded profile: counts, model, measured and model moments."""
    out = []
    for s, models, bg, t, dt in zip(
        cd.profiles,
        fit.models,
        fit.backgrounds,
        fit.rotational_k,
        fit.rotational_err_k,
        strict=True,
    ):
        temperature = math.nan if s.temperature_k is None else float(s.temperature_k)
        for prof, model in zip(s.profiles, models, strict=True):
            c, dc, w, dw = profile_moments(prof.positions, prof.counts, bg)
            mc, _, mw, _ = profile_moments(prof.positions, model, bg)
            field = field_per_volt * abs(prof.voltage)
            ratio = response.ratio(fit.dipole, t, field) if fit.dipole > 0 else None
            out.append(
                ProfileRecord(
                    compound=cd.name,
                    temperature_K=temperature,
                    voltage_V=prof.voltage,
                    positions=prof.positions,
                    counts=prof.counts,
                    model=model,
                    background=bg,
                    centroid_m=c,
                    centroid_err_m=dc,
                    width_m=w,
                    width_err_m=dw,
                    model_centroid_m=mc,
                    model_width_m=mw,
                    rotational_temperature_K=t,
                    rotational_temperature_err_K=dt,
                    velocity_m_s=s.velocity,
                    velocity_spread_m_s=s.spread,
                    ld_ratio=ratio,
                )
            )
    return tuple(out)
