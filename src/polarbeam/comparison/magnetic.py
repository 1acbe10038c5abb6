"""The structure cross-check of a magnetic compound: Pascal's χ_dia and the spin-only moment.

χ_dia measured (the intercept of χ_eff against 1/T) is compared with Pascal's additive sum
(polarbeam.chemistry.magnetism; 5 % 1σ for the scheme) as a z-score; the moment (or its upper
limit) with the spin-only values g√(S(S+1)) μ_B (polarbeam.beam.magnetic) of S = 0, 1/2, …, 5/2,
giving a verdict such as "consistent with S = 1/2", and with the S of the structure's radical
electrons (RDKit) when a structure is given.
"""

from __future__ import annotations

import math
from dataclasses import replace

from polarbeam._util.text import join_message
from polarbeam.beam.magnetic import spin_only_moment
from polarbeam.chemistry import parse_smiles
from polarbeam.chemistry.magnetism import pascal_chi_dia, radical_spin
from polarbeam.contract.campaign import Campaign, CompoundData
from polarbeam.errors import CompoundError
from polarbeam.results.objects import CompoundResult

__all__ = ["SPINS", "magnetic_cross_check", "magnetic_structure_check", "spin_text", "spin_verdict"]

#: the spins the verdict considers
SPINS = (0.0, 0.5, 1.0, 1.5, 2.0, 2.5)
#: relative allowance for g ≠ 2.0023 and orbital contributions of organic radicals (1σ)
G_ALLOWANCE = 0.02


def spin_text(s: float) -> str:
    """ "1/2", "1", "3/2" …"""
    return f"{round(2 * s)}/2" if round(2 * s) % 2 else f"{round(s)}"


def spin_verdict(
    moment_muB: float | None,
    err_muB: float | None,
    upper_muB: float | None,
    mu2_z: float | None = None,
) -> tuple[str, tuple[float, ...]]:
    """(verdict, spins within 2σ) for a measured moment ± error or an upper limit.

    ``mu2_z`` is ⟨m²⟩/σ(⟨m²⟩) of the Curie slope: below 3 a reported moment is also consistent
    with S = 0 (the error of √⟨m²⟩ near zero does not measure that distance)."""
    if moment_muB is None:
        if upper_muB is None:
            return "no moment statement", ()
        ok = tuple(s for s in SPINS if spin_only_moment(s) <= upper_muB)
        return f"consistent with S = 0 (m < {upper_muB:.3g} μ_B)", ok
    ok = [0.0] if mu2_z is not None and mu2_z < 3.0 else []
    for s in SPINS[len(ok) :]:
        mu = spin_only_moment(s)
        sigma = math.hypot(err_muB or 0.0, G_ALLOWANCE * mu)
        if abs(moment_muB - mu) <= 2.0 * sigma:
            ok.append(s)
    if not ok:
        return (
            f"not a spin-only moment of S ≤ 5/2 ({moment_muB:.3g} ± {err_muB:.2g} μ_B)",
            (),
        )
    return "consistent with " + " or ".join(f"S = {spin_text(s)}" for s in ok), tuple(ok)


def magnetic_cross_check(result: CompoundResult, smiles: str | None, mol) -> CompoundResult:
    """Attach Pascal's χ_dia (z-score) and the spin verdict to a magnetic compound result."""
    if result.status == "failed":
        return result
    e = result.extra
    mu2 = result.mu2
    z = mu2.nominal_value / mu2.std_dev if mu2 is not None and mu2.std_dev > 0 else None
    verdict, spins = spin_verdict(
        e.get("moment_muB"), e.get("moment_err_muB"), e.get("moment_upper_muB"), z
    )
    extra = {**e, "spin_verdict": verdict}
    notes = [verdict]
    warnings = list(result.warnings)
    try:
        if mol is None and smiles:
            mol = parse_smiles(smiles, result.compound)
        if mol is not None:
            est = pascal_chi_dia(mol, result.compound)
            s_struct = radical_spin(mol)
            extra["chi_dia_pascal_cm3_mol"] = est.chi_cgs
            extra["chi_dia_pascal_err_cm3_mol"] = est.chi_err_cgs
            extra["spin_structure"] = s_struct
            extra["moment_spin_only_muB"] = spin_only_moment(s_struct)
            if e.get("chi_dia_cm3_mol") is not None:
                z = (e["chi_dia_cm3_mol"] - est.chi_cgs) / math.hypot(
                    e["chi_dia_err_cm3_mol"], est.chi_err_cgs
                )
                extra["chi_dia_pascal_z"] = z
                if abs(z) > 3:
                    warnings.append(
                        f"χ_dia differs from Pascal's sum {est.chi_cgs * 1e6:.4g} ×10⁻⁶ cm³/mol "
                        f"by {z:+.1f}σ"
                    )
            if s_struct not in spins:
                warnings.append(
                    f"structure S = {spin_text(s_struct)} (spin-only "
                    f"{spin_only_moment(s_struct):.3g} μ_B) is not what the moment says"
                )
            else:
                notes.append(f"structure S = {spin_text(s_struct)} agrees")
    except CompoundError as exc:
        notes.append(f"structure cross-check skipped: {exc}")
    message = result.message
    for n in notes + warnings[len(result.warnings) :]:
        message = join_message(message, n)
    return replace(
        result,
        extra=extra,
        message=message,
        warnings=tuple(warnings),
        status="warning" if warnings else result.status,
    )


def magnetic_structure_check(result: CompoundResult, cd: CompoundData, c: Campaign):
    """:func:`magnetic_cross_check` with the compound's structure (an SDF record by name wins
    over the ``smiles`` column of compounds.csv)."""
    rec = c.structures.get(cd.name)
    if isinstance(rec, str):
        note = f"structure cross-check skipped: record {cd.name!r} could not be read ({rec})"
        return replace(result, message=join_message(result.message, note))
    smiles = (cd.extra.get("smiles") or "").strip() or None
    return magnetic_cross_check(result, smiles, rec)
