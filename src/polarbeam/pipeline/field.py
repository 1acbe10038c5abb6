"""The deflector field at the beam for one voltage (``polarbeam field``).

:func:`deflector_field` loads a campaign, builds its deflector (solving the cross-section for the
``numerical`` model, calibrating g from reference compounds where asked) and reports E, ∂E/∂x,
E·∂E/∂x and g at the beam with their variation across it and the numerical error;
:func:`plot_deflector_field` draws the electrodes, equipotentials and the beam.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

from polarbeam._util.text import input_label as _label
from polarbeam.calibration.calibrate import (
    calibrate_campaign,
    calibration_required,
    check_calibration_inputs,
    field_factor_missing,
)
from polarbeam.contract.arguments import parse_voltage
from polarbeam.contract.campaign import Campaign, load_campaign
from polarbeam.contract.numerical import numerical_model
from polarbeam.errors import InputError
from polarbeam.extraction.context import field_factor_sensitivities
from polarbeam.instrument import fields as fs
from polarbeam.uncertain import variance_budget

__all__ = [
    "FieldReport",
    "deflector_field",
    "plot_deflector_field",
]


@dataclass(frozen=True)
class FieldReport:
    """The deflector field at the beam for one voltage (SI, magnitudes)."""

    model: str
    method: str
    voltage_V: float
    field_factor_per_m3: float
    E_V_per_m: float | None = None
    dE_dx_V_per_m2: float | None = None
    E_dE_dx_V2_per_m3: float | None = None
    field_factor_rel_variation: float | None = None
    field_factor_rel_rms: float | None = None
    numerical_error_per_m3: float | None = None
    numerical_error_note: str = ""
    tolerance_sigma_per_m3: float | None = None
    tolerance_budget: dict[str, float] = field(default_factory=dict)
    beam: dict[str, float] = field(default_factory=dict)
    grid_h_m: float | None = None
    observed_order: float | None = None
    effective_length_m: float | None = None
    fringe: str = ""
    calibration: dict[str, Any] | None = None
    notes: tuple[str, ...] = ()

    def summary(self) -> dict[str, Any]:
        """Plain dict for JSON (NaN → None)."""

        def clean(x):
            if isinstance(x, float) and not math.isfinite(x):
                return None
            if isinstance(x, dict):
                return {k: clean(v) for k, v in x.items()}
            if isinstance(x, list | tuple):
                return [clean(v) for v in x]
            return x

        return clean(
            {
                "model": self.model,
                "method": self.method,
                "voltage_V": self.voltage_V,
                "E_V_per_m": self.E_V_per_m,
                "dE_dx_V_per_m2": self.dE_dx_V_per_m2,
                "E_dE_dx_V2_per_m3": self.E_dE_dx_V2_per_m3,
                "field_factor_per_m3": self.field_factor_per_m3,
                "field_factor_rel_variation": self.field_factor_rel_variation,
                "field_factor_rel_rms": self.field_factor_rel_rms,
                "numerical_error_per_m3": self.numerical_error_per_m3,
                "numerical_error_note": self.numerical_error_note,
                "field_factor_err_per_m3": self.tolerance_sigma_per_m3,  # 1σ from stated inputs
                "tolerance_budget": dict(self.tolerance_budget),
                "beam": dict(self.beam),
                "grid_h_m": self.grid_h_m,
                "observed_order": self.observed_order,
                "effective_length_m": self.effective_length_m,
                "fringe": self.fringe,
                "calibration": self.calibration,
                "notes": list(self.notes),
            }
        )

    def to_text(self) -> str:
        """The terminal rendering."""

        def sci(x, unit):
            return "—" if x is None else f"{x:.5g} {unit}"

        lines = [
            f"deflector model '{self.model}' at {self.voltage_V:g} V ({self.method})",
            "  coordinates: x deflection direction, y height across it, z beam axis",
            f"  E            = {sci(self.E_V_per_m, 'V/m')}",
            f"  dE/dx        = {sci(self.dE_dx_V_per_m2, 'V/m²')}",
            f"  E·dE/dx      = {sci(self.E_dE_dx_V2_per_m3, 'V²/m³')}",
            f"  g            = {sci(self.field_factor_per_m3, 'm⁻³')}",
        ]
        if self.tolerance_sigma_per_m3 is not None and self.field_factor_per_m3:
            rel = self.tolerance_sigma_per_m3 / self.field_factor_per_m3
            lines.append(
                f"  σ_g (stated inputs) = {sci(self.tolerance_sigma_per_m3, 'm⁻³')} ({rel:.2%})"
            )
            for k, share in sorted(self.tolerance_budget.items(), key=lambda kv: -kv[1]):
                lines.append(f"      {k}: {share:.1%}")
        if self.field_factor_rel_variation is not None:
            lines.append(
                f"  variation of g across the beam: (max − min)/mean = "
                f"{self.field_factor_rel_variation:.3g}, rms {self.field_factor_rel_rms:.3g}"
            )
        if self.numerical_error_per_m3 is not None:
            rel = (
                self.numerical_error_per_m3 / self.field_factor_per_m3
                if self.field_factor_per_m3
                else math.nan
            )
            lines.append(
                f"  numerical error of g: {self.numerical_error_per_m3:.3g} m⁻³ ({rel:.2e} "
                f"relative){'; ' + self.numerical_error_note if self.numerical_error_note else ''}"
            )
        if self.grid_h_m is not None:
            lines.append(
                f"  finest grid h = {self.grid_h_m * 1e3:.4g} mm, observed order "
                f"{self.observed_order:.3g}"
            )
        if self.beam.get("height_m") is not None:
            b = self.beam
            lines.append(
                f"  beam centre: x = {b['height_m'] * 1e3:.4g} mm (beam_height), "
                f"y = {b.get('x_m', 0.0) * 1e3:.4g} mm (beam_x); extent "
                f"{b.get('thickness_m', 0.0) * 1e3:.3g} mm in x (beam_thickness), "
                f"{b.get('width_m', 0.0) * 1e3:.3g} mm in y (beam_width)"
            )
        if self.effective_length_m is not None:
            lines.append(f"  effective length = {self.effective_length_m:.6g} m ({self.fringe})")
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)


def _load(campaign):
    return campaign if isinstance(campaign, Campaign) else load_campaign(campaign)


def deflector_field(campaign, voltage) -> FieldReport:
    """The field at the beam of a campaign's deflector at ``voltage`` (V or ``"10 kV"``).

    Two-wire: the analytic line-charge field on the axis (no numerical error).  Numerical: the
    solved, beam-averaged, extrapolated field with its mesh-refinement error.  Uniform and
    field-map: the stated (or, without ``field_factor``, reference-calibrated) g; E only when
    ``field_per_volt`` is given.
    """
    c = _load(campaign)
    V = parse_voltage(voltage)
    _lay, d = c.build()
    tol_sigma, budget = None, {}
    calib = None
    notes: list[str] = []
    g = float(d.field_factor)
    check_calibration_inputs(c)
    cal = None
    if calibration_required(c) and c.settings.calibration == "auto":
        cal = calibrate_campaign(c)
        if cal.calibration is not None:
            calib = cal.calibration.summary()
    if field_factor_missing(c):  # the references are the only source of g
        if cal is None or cal.calibration is None:
            raise InputError(
                f"{c.path.name}: the field factor cannot be calibrated: "
                f"{cal.reason if cal else 'no reference compound'}"
            )
        gcal = cal.calibration.field_factor
        g, tol_sigma = gcal.nominal_value, gcal.std_dev
        budget = variance_budget(gcal)
        notes.append(
            f"g calibrated from {len(cal.calibration.references)} reference compound(s); its "
            "error is the calibration's"
        )
    else:
        g_nom, sens = field_factor_sensitivities(c)
        contrib = {_label(k): abs(s * g_nom * c.stated[k].error) for k, s in sens.items()}
        var = sum(x * x for x in contrib.values())
        tol_sigma = math.sqrt(var)
        budget = {k: x * x / var for k, x in contrib.items()} if var > 0 else {}
        if calib is not None:
            notes.append(
                f"the reference compounds scale this g by {calib['field_scale']:.5g} ± "
                f"{calib['field_scale_err']:.2g} (see 'calibration'); the analysis uses the "
                "calibrated value"
            )
    E = dEdx = None
    variation = rms = num_err = h = order = Leff = None
    num_note, fringe, beam = "", "", {}
    if c.model == "two-wire" and c.layout != "time-domain":
        E = d.field_per_volt * V
        z, a = d.beam_height, d.line_half_spacing
        dEdx = E * 2 * z / (a * a + z * z)
        method = "analytic (line-charge model), on the symmetry axis"
        num_err, num_note = 0.0, "analytic: no numerical error"
        variation, rms = 0.0, 0.0
        notes.append("the two-wire model evaluates g on the axis at beam_height (a point beam)")
        beam = {"x_m": 0.0, "height_m": z, "width_m": 0.0, "thickness_m": 0.0}
    elif c.model == "numerical":
        m = numerical_model(c)
        f = m.field
        E = m.field_per_volt * V
        dEdx = f["dE_dx_V_per_m2"] * V
        variation, rms = f["field_factor_rel_variation"], f["field_factor_rel_rms"]
        num_err = m.numerical_error
        num_note = "size of the Richardson correction (estimated error of the finest grid)"
        h, order = f["grid_h_m"], f["observed_order"]
        method = f["method"]
        b = m.solution.beam
        beam = {"x_m": b.x0, "height_m": b.y0, "width_m": b.width, "thickness_m": b.height}
        Leff, fringe = d.effective_length, m.fringe_method
        if m.spec.fringe == "map":
            Leff = None
    else:
        fpv = d.field_per_volt
        if fpv:
            E = fpv * V
            dEdx = g * V * V / E
        else:
            notes.append("E and dE/dx need field_per_volt (E/V) in [deflector]")
        method = "stated field factor" if calib is None else "calibrated from reference compounds"
        if c.model == "field-map":
            method = "field map: peak of the scaled map" if calib is None else method
    return FieldReport(
        model=c.model,
        method=method,
        voltage_V=V,
        field_factor_per_m3=g,
        E_V_per_m=E,
        dE_dx_V_per_m2=dEdx,
        E_dE_dx_V2_per_m3=g * V * V,
        field_factor_rel_variation=variation,
        field_factor_rel_rms=rms,
        numerical_error_per_m3=num_err,
        numerical_error_note=num_note,
        tolerance_sigma_per_m3=tol_sigma,
        tolerance_budget=budget,
        beam=beam,
        grid_h_m=h,
        observed_order=order,
        effective_length_m=Leff,
        fringe=fringe,
        calibration=calib,
        notes=tuple(notes),
    )


def plot_deflector_field(campaign, path, voltage) -> Path:
    """Equipotentials, electrodes and the beam of the campaign's cross-section (``--plot``).

    The electrodes are labelled with the applied potentials: the analytic two-wire potentials
    (line pair, 0 at infinity) are shown relative to the trough (trough 0, convex V).
    """
    c = _load(campaign)
    V = parse_voltage(voltage)
    _lay, d = c.build()
    if c.model == "numerical":
        m = numerical_model(c)
        sol = m.solution.finest
        cs = sol.cross_section.scaled(V)
        sol = replace(sol, phi=sol.phi * V, cross_section=cs)
        beam = m.solution.beam
        analytic = m.spec.kind != "electrodes" and m.spec.potentials == "analytic"
    elif c.model == "two-wire" and c.layout != "time-domain":
        a = d.line_half_spacing
        cs = fs.two_wire_cross_section(a, d.convex_crossing, d.concave_crossing, V)
        sol = fs.solve_laplace(cs, a / 40.0, solver="direct")
        beam = fs.Beam(0.0, d.beam_height)
        analytic = True
    else:
        raise InputError(
            f"--plot: the {c.model!r} model has no electrode geometry to draw; use the "
            "'two-wire' or 'numerical' model"
        )
    offset = min(e.potential for e in cs.electrodes) if analytic else 0.0
    title = f"{c.model} deflector at {fs.format_potential(V)} (x: deflection, z: beam axis)"
    return fs.plot_cross_section(sol, path, beam=beam, offset=offset, title=title)
