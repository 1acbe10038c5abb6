"""The campaign context of every fit: nominal layout and deflector, and the coupling C with every
stated input attached.

C = (layout scale)·∫ w g ds turns α_eff·V²/m into the observable. :func:`build_context`
differentiates C with respect to every stated input (central differences of the model) and
returns the ratio C_nominal/C as an uncertain number tagged per input, so each α_eff carries the
geometry, field and mass errors with their correlations. :func:`field_factor_sensitivities` does
the same for the field factor g alone (used by the calibration and ``polarbeam field``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from uncertainties import ufloat

from polarbeam._util.text import input_label
from polarbeam.contract.campaign import Campaign
from polarbeam.errors import InputError
from polarbeam.instrument.deflectors import coupling

__all__ = [
    "Context",
    "acceleration_kappa",
    "build_context",
    "field_factor_sensitivities",
    "log_sensitivities",
    "temperature_offset",
]


@dataclass(frozen=True)
class Context:
    """Campaign-wide pieces shared by every compound: nominal set-up and uncertain coupling."""

    layout: object
    deflector: object
    coupling: float
    coupling_ratio: object  # C_nominal / C as an uncertain number
    sensitivities: dict[str, float]  # ∂ln C/∂p per stated input
    field_per_volt: float | None
    #: ``[source] thermometer_offset`` as one uncertain number tagged "source: thermometer
    #: offset", shared by every compound (0.0 when not stated)
    temperature_offset: object = 0.0
    #: Talbot–Lau phase constant κ₀ = 2π·a·W_tot/d of ``[instrument] background_acceleration``
    #: (rad·m²/s²; every class turns by κ₀/v² at zero field), an uncertain number tagged
    #: "instrument: background acceleration" when a has an error (0.0 when not stated)
    kappa_zero: object = 0.0


def build_context(c: Campaign) -> Context:
    """Nominal layout and deflector, and C with every stated input attached (tagged)."""
    layout, deflector = c.build()
    c0 = coupling(layout, deflector)
    if not (math.isfinite(c0) and c0 > 0) and c.layout == "time-domain":
        a, b = (t - layout.t1 for t in deflector.span)
        raise InputError(
            f"{c.path.name} [deflector] field_on/field_duration: the switched field "
            f"[{a * 1e6:.6g}, {b * 1e6:.6g}] us (from the first pulse) does not overlap the pulse "
            f"sequence [0, {(layout.t3 - layout.t1) * 1e6:.6g}] us; expected a field window inside "
            "it, so no phase can be produced"
        )
    if not (math.isfinite(c0) and c0 > 0):
        raise InputError(
            f"{c.path.name}: the deflector does not overlap the flight layout (coupling {c0!r}); "
            "check [deflector] entrance/length (or field_on) against the grating or detector "
            "positions"
        )
    sens = log_sensitivities(c, lambda built: coupling(*built), c0)
    shift = 0.0
    for key, s_key in sens.items():
        m = c.stated[key]
        u = ufloat(m.value, m.error, tag=input_label(key))
        shift = shift + s_key * (u - m.value)
    ratio = 1.0 / (1.0 + shift)
    fpv = deflector.field_per_volt
    return Context(
        layout,
        deflector,
        c0,
        ratio,
        sens,
        fpv,
        temperature_offset(c),
        acceleration_kappa(c, layout),
    )


def acceleration_kappa(c: Campaign, layout):
    """κ₀ = 2π·a·W_tot/d with W_tot = ∫ w dz over the interferometer, L2(L1 + L2)/2, for
    ``[instrument] background_acceleration`` a (an uncertain number when a has an error)."""
    m = getattr(c.velocity, "acceleration", None)
    if m is None or c.layout != "talbot-lau":
        return 0.0
    per_a = layout.scale * layout.weight_integral(layout.z1, layout.z3)
    if m.error <= 0:
        return per_a * m.value
    return per_a * ufloat(m.value, m.error, tag=input_label("instrument.background_acceleration"))


def temperature_offset(c: Campaign):
    """The campaign's shared thermometer offset δ (every source temperature becomes T + δ) as
    one uncertain number tagged ``"source: thermometer offset"``, or 0.0 when not stated."""
    m = c.thermometer_offset
    if m is None:
        return 0.0
    if m.error <= 0:
        return m.value
    return ufloat(m.value, m.error, tag=input_label("source.thermometer offset"))


def field_factor_sensitivities(c) -> tuple[float, dict[str, float]]:
    """Nominal g of the campaign's deflector and ∂ln g/∂p for every stated input with an error.

    Central differences of the model, as :func:`build_context` does for the
    coupling (for the numerical model they act on its first-order expansion, so they are exact).
    """
    _lay, d0 = c.build()
    g0 = float(d0.field_factor)
    sens = log_sensitivities(c, lambda built: float(built[1].field_factor), g0)
    sens = {k: v for k, v in sens.items() if v != 0}
    return g0, sens


def log_sensitivities(c, value_of, v0: float) -> dict[str, float]:
    """∂ln Q/∂p of a quantity Q of the built (layout, deflector) for every stated input p with an
    error: central differences (one-sided where a step leaves the valid geometry), step
    max(10⁻³ σ, 10⁻⁹ |p|). Inputs whose every step is invalid are left out."""
    nominal = c.nominal()
    sens: dict[str, float] = {}
    for key, m in c.stated.items():
        if m.error <= 0:
            continue
        h = max(m.error * 1e-3, abs(m.value) * 1e-9, 1e-300)
        vals = []
        for sgn in (+1, -1):
            try:
                vals.append(value_of(c.build({**nominal, key: m.value + sgn * h})))
            except InputError:
                vals.append(None)
        if vals[0] is not None and vals[1] is not None:
            d = (vals[0] - vals[1]) / (2 * h)
        elif vals[0] is not None:
            d = (vals[0] - v0) / h
        elif vals[1] is not None:
            d = (v0 - vals[1]) / h
        else:
            continue
        sens[key] = d / v0
    return sens
