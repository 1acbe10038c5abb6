"""A compound measured by whole beam profiles: α, μ and T_rot from the Poisson profile fit.

The rotor model comes from compounds.csv (a rigid rotor is required: a profile is the sum over
the rotor's Stark states); α is fitted unless ``alpha_known_A3`` is given. The errors are the
counting statistics of the fit (:mod:`polarbeam.extraction.profiles`) combined with the stated
coupling and mass errors, which scale α and μ² like the centroid's α_eff.
"""

from __future__ import annotations

import math

from uncertainties import ufloat

from polarbeam.errors import CompoundError
from polarbeam.extraction.profiles import fit_profiles
from polarbeam.results.objects import CompoundResult
from polarbeam.uncertain import FIT_TAG

__all__ = ["profile_result"]


def profile_result(cd, c, ctx, mass_u: float) -> CompoundResult:
    """CompoundResult of a profile compound (raises CompoundError for bad data)."""
    resp = cd.response
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
    first_free = next((i for i, e in enumerate(fit.rotational_err_k) if e > 0), None)
    extra = {"response": resp.name, "mu_E_over_kT": None}
    if first_free is not None:
        extra["rotational_temperature_K"] = fit.rotational_k[first_free]
        extra["rotational_temperature_err_K"] = fit.rotational_err_k[first_free]
    return CompoundResult(
        compound=cd.name,
        status="ok",
        message=message,
        mass_u=mass_u,
        alpha=alpha,
        dipole=dipole,
        dipole_interval_si=(
            dipole.nominal_value - dipole.std_dev,
            dipole.nominal_value + dipole.std_dev,
        ),
        dipole_cl=(0.6827, c.settings.upper_limit_cl),
        mu2=dipole**2,
        method="profile fit",
        extra=extra,
    )
