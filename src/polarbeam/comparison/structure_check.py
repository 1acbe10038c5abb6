"""Cross-check of measured values against what the molecular structure predicts.

For every compound with a structure (``smiles`` in compounds.csv, or a record of the campaign's
``[data] structures`` SDF file matched by name) the additive schemes of :mod:`polarbeam.chemistry`
give α_additive ± its documented accuracy, and an MMFF conformer ensemble gives ⟨μ²⟩(T); the
predicted α_eff(T) = α_additive + ⟨μ²⟩/(3kT) is set against each measured series, and the
measured α against α_additive, as z-scores using both uncertainties.

Force-field charges give rough dipoles: the default charge model (scaled MMFF94 charges) was
measured at ~23 % mean absolute error on the rigid molecules of ``reference_values/dipoles.csv``
and 24.5 % on the NIST CCCBDB organics (docs/structure.md).  The predicted ⟨μ²⟩ carries a 1σ
relative error of twice the dipole's: the measured scatter of its structure class
(:func:`polarbeam.chemistry.dipole_error_D`), or 25 % when no ensemble was built.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

from polarbeam import chemistry as st
from polarbeam.constants import AMU, alpha_a3_from_si, langevin_debye_si
from polarbeam.errors import CompoundError
from polarbeam.separation.compound import PLAUSIBILITY_HINT

__all__ = [
    "DIPOLE_REL_ERROR",
    "IMPLAUSIBLE_VERDICT",
    "PLAUSIBLE_RATIO",
    "StructurePrediction",
    "implausible_ratio",
    "predict_for_compound",
    "verdict",
]

#: 1σ relative error of a force-field (scaled MMFF) dipole; see module docstring.
DIPOLE_REL_ERROR = 0.25
Z_LIMIT = 2.0
#: Measured over structure-estimated α outside this range is no chemistry (additive schemes are
#: good to ~10–20 %, dipole terms rarely exceed a few times α): a unit or geometry slip.
PLAUSIBLE_RATIO = (0.05, 20.0)
IMPLAUSIBLE_VERDICT = f"implausible: {PLAUSIBILITY_HINT}"


@dataclass(frozen=True)
class StructurePrediction:
    """Structure-based numbers for one compound (Å³, debye)."""

    smiles: str
    mass_u: float
    alpha_additive_A3: float
    alpha_additive_err_A3: float
    schemes: dict[str, float]
    flags: tuple[str, ...]
    mu2_si: dict[float, float] = field(default_factory=dict)  # T → ⟨μ²⟩ (C² m²)
    dipole_rms_D: float | None = None
    notes: tuple[str, ...] = ()
    dipole_rel_err: float = DIPOLE_REL_ERROR

    def alpha_eff_pred_A3(self, temperature_K: float) -> tuple[float, float]:
        """Predicted α_eff and its 1σ at ``temperature_K`` (Å³)."""
        mu2 = self.mu2_si.get(temperature_K, 0.0)
        orient = alpha_a3_from_si(langevin_debye_si(math.sqrt(mu2), temperature_K))
        err = math.hypot(self.alpha_additive_err_A3, 2 * self.dipole_rel_err * orient)
        return self.alpha_additive_A3 + orient, err

    def columns(self) -> dict[str, Any]:
        out: dict[str, Any] = {
            "alpha_additive_A3": self.alpha_additive_A3,
            "alpha_additive_err_A3": self.alpha_additive_err_A3,
        }
        for k in ("ahp", "ahc", "bs", "llmr", "d4"):
            if k in self.schemes:
                out[f"alpha_{k}_A3"] = self.schemes[k]
        out["dipole_rms_D"] = self.dipole_rms_D  # the name `polarbeam estimate` writes
        out["structure_mass_u"] = self.mass_u
        out["structure_flags"] = ";".join(self.flags)
        return out


def predict_for_compound(
    name: str,
    smiles: str | None,
    mol=None,
    *,
    temperatures: tuple[float, ...] = (),
    conformers: int = 10,
    seed: int | None = None,
) -> StructurePrediction:
    """Structure predictions for one compound (raises :class:`CompoundError` on a bad structure)."""
    src = mol if mol is not None else smiles
    if src is None or (isinstance(src, str) and not src.strip()):
        raise CompoundError(f"compound {name!r}: no structure")
    kw = {} if seed is None else {"seed": seed}
    est = st.estimate(src, name, dipoles=False)
    schemes = {k: getattr(est, f"alpha_{k}_A3") for k in ("ahp", "ahc", "bs", "llmr")}
    mu2: dict[float, float] = {}
    rms = None
    rel_err = DIPOLE_REL_ERROR
    notes = []
    if conformers > 0:
        try:
            ens = st.conformer_ensemble(src, name, n_conformers=conformers, **kw)
            for t in temperatures:
                mu2[t] = ens.mean_square_dipole_si(t)
            if temperatures:
                rms = ens.rms_dipole_D(min(temperatures))
                if rms > 0:
                    rel_err = st.dipole_error_D(rms, est.structure_class) / rms
        except CompoundError as exc:
            notes.append(f"no conformer dipole ({exc})")
    return StructurePrediction(
        smiles=est.smiles,
        mass_u=est.mass_avg_u,
        alpha_additive_A3=est.alpha_additive_A3,
        alpha_additive_err_A3=est.alpha_additive_err_A3,
        schemes=schemes,
        flags=tuple(est.flags),
        mu2_si=mu2,
        dipole_rms_D=rms,
        notes=tuple(notes),
        dipole_rel_err=rel_err,
    )


def z_score(measured: float, err_m: float, predicted: float, err_p: float) -> float:
    den = math.hypot(err_m, err_p)
    return (measured - predicted) / den if den > 0 else math.nan


def implausible_ratio(measured: float | None, predicted: float | None) -> float | None:
    """``measured / predicted`` when it lies outside :data:`PLAUSIBLE_RATIO` (or is ≤ 0)."""
    if measured is None or not predicted or not (math.isfinite(measured) and predicted > 0):
        return None
    ratio = measured / predicted
    lo, hi = PLAUSIBLE_RATIO
    return None if lo <= ratio <= hi else ratio


def verdict(
    alpha_z: float | None,
    eff_z: list[float],
    dipole_predicted: bool,
    ratio: float | None = None,
) -> str:
    """The cross-check in words.

    ``alpha_z`` compares the measured α with α_additive; ``eff_z`` compares each measured α_eff
    with α_additive + predicted ⟨μ²⟩/3kT.  The series of one compound share their systematics,
    so their z-scores are averaged rather than tested one by one.  ``ratio`` is the measured
    over the predicted value: outside :data:`PLAUSIBLE_RATIO` no z-score is explained by
    chemistry (a 10⁶ excess is not a dipole contribution).
    """
    if ratio is not None and not PLAUSIBLE_RATIO[0] <= ratio <= PLAUSIBLE_RATIO[1]:
        return IMPLAUSIBLE_VERDICT
    zs = [z for z in eff_z if math.isfinite(z)]
    mean_eff = sum(zs) / len(zs) if zs else math.nan
    za = alpha_z if alpha_z is not None and math.isfinite(alpha_z) else math.nan
    if mean_eff < -Z_LIMIT or za < -Z_LIMIT:
        return "measured below prediction — check mass, fragmentation, velocity"
    if mean_eff > Z_LIMIT:
        if dipole_predicted:
            return "above prediction — the dipole contribution exceeds the force-field estimate"
        return "dipole contribution likely (α_eff above the additive estimate)"
    if za > Z_LIMIT:
        return "α above the additive estimate — check for clusters or vibrational contributions"
    return "consistent with the structure prediction"


def stated_mass_check(stated_kg: float, structure_u: float, name: str) -> str | None:
    """Warning text when the stated mass and the structure's average mass differ by > 0.5 u."""
    stated_u = stated_kg / AMU
    if abs(stated_u - structure_u) > 0.5:
        return (
            f"stated mass {stated_u:.3f} u differs from the structure's average mass "
            f"{structure_u:.3f} u by more than 0.5 u; the stated mass is used"
        )
    return None
