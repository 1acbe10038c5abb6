"""Everything the structure predicts for one molecule, in one object.

:func:`estimate` gathers the masses, the electron count, every additive scheme with its
documented 1σ, the domain flags and, on request, the D4 value and the thermal dipole ensemble
into a :class:`StructureEstimate` (polarizability volumes in Å³; SI through its properties).

The default polarizability (``alpha_additive_A3``) is chosen per structure class by measurement
(:mod:`.accuracy`): the scheme with the smallest error on the experimental set for that class,
carrying that scheme's measured scatter as its 1σ; a single atom takes the Schwerdtfeger–Nagle
table (:mod:`.atoms`).  :func:`default_polarizability` is that choice, shared with
:func:`~polarbeam.chemistry.library.estimate_table`.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass
from typing import Any

from polarbeam._util.optional import lazy
from polarbeam.chemistry.accuracy import (
    ALPHA_CLASS_SCATTER,
    CLASS_SCHEME,
    SCHEME_KEYS,
    alpha_rel_scatter,
    dipole_error_D,
    structure_class,
)
from polarbeam.chemistry.additive import (
    SCHEMES,
    Scheme,
    alpha_d4_A3,
    fast_estimates,
)
from polarbeam.chemistry.atoms import ATOM_METHOD, atom_polarizability_A3, single_atom_symbol
from polarbeam.chemistry.conformers import (
    DEFAULT_CHARGE_MODEL,
    DEFAULT_SEED,
    ChargeModel,
    ConformerEnsemble,
    check_temperature,
    conformer_ensemble,
    predicted_alpha_eff_si,
)
from polarbeam.chemistry.molecules import as_mol
from polarbeam.constants import ANGSTROM3_SI, DEBYE_SI
from polarbeam.errors import CalculationTooBigError, InputError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")

__all__ = [
    "DIPOLE_METHOD",
    "DefaultPolarizability",
    "StructureEstimate",
    "default_polarizability",
    "estimate",
]

#: Name of the conformer-dipole method in the ``dipole_method`` column.
DIPOLE_METHOD = "mmff-conformers"

#: When the class's scheme has no value (an untyped atom, llmr above CRIPPEN_MAX_ATOMS), the
#: first of these that has one is the default (its name is in ``default_scheme``).
_FALLBACK_ORDER = ("ahc", "ahp", "bs", "llmr")


@dataclass(frozen=True)
class DefaultPolarizability:
    """The default polarizability of one molecule: class, scheme, value, 1σ and how it was set."""

    structure_class: str
    scheme: str
    alpha_A3: float
    err_A3: float
    method: str
    err_method: str


def default_polarizability(
    mol: Chem.Mol,
    values: dict[str, float],
    compound: str = "?",
    scheme: str | None = None,
) -> DefaultPolarizability:
    """The default α of a parsed molecule from its additive ``values`` (Å³, keyed by scheme).

    ``scheme=None`` takes the class's measured best scheme (:data:`CLASS_SCHEME`); a named scheme
    is used as asked.  The 1σ is the scheme's measured RMS relative scatter on the class
    (:data:`ALPHA_CLASS_SCATTER`), or its documented accuracy when the class was not measured.
    A single neutral atom takes the Schwerdtfeger–Nagle table (needs ``polarbeam[atoms]``).
    """
    symbol = single_atom_symbol(mol)
    if symbol is not None:
        value, err = atom_polarizability_A3(symbol, compound)
        return DefaultPolarizability(
            "atom", "atom", value, err, ATOM_METHOD, "table uncertainty (Schwerdtfeger-Nagle)"
        )
    cls = structure_class(mol)
    key = scheme or CLASS_SCHEME.get(cls, "llmr")
    if scheme is None and not math.isfinite(values.get(key, math.nan)):
        key = next((k for k in _FALLBACK_ORDER if math.isfinite(values[k])), key)
    value = values[key]
    rel = alpha_rel_scatter(cls, key)
    if math.isfinite(rel):
        n = ALPHA_CLASS_SCATTER[cls][key].n
        err = rel * value
        how = f"measured scatter of {key} on {cls} (n={n}, RMS {100 * rel:.1f} %)"
    else:
        err = SCHEMES[key].error_A3(value) if math.isfinite(value) else math.nan
        how = f"documented accuracy of {key}"
    return DefaultPolarizability(cls, key, value, err, f"additive:{key}", how)


@dataclass(frozen=True)
class StructureEstimate:
    """Everything the structure predicts for one compound (polarizability volumes in Å³).

    ``alpha_<scheme>_err_A3`` are 1σ uncertainties from each scheme's documented accuracy
    (:data:`SCHEMES`); ``alpha_additive_err_A3`` is the measured scatter of the default scheme on
    the molecule's ``structure_class`` (``alpha_err_method`` says which); ``alpha_method`` names
    the method (``additive:<scheme>`` or ``atom-table``).  ``flags`` lists why the molecule may be
    outside a scheme's domain.
    """

    compound: str
    smiles: str
    mass_avg_u: float
    mass_mono_u: float
    n_electrons: int
    alpha_ahp_A3: float
    alpha_ahp_err_A3: float
    alpha_ahc_A3: float
    alpha_ahc_err_A3: float
    alpha_bs_A3: float
    alpha_bs_err_A3: float
    alpha_llmr_A3: float
    alpha_llmr_err_A3: float
    default_scheme: str
    alpha_additive_A3: float
    alpha_additive_err_A3: float
    flags: tuple[str, ...] = ()
    alpha_d4_A3: float | None = None
    alpha_d4_err_A3: float | None = None
    ensemble: ConformerEnsemble | None = None
    temperature_K: float | None = None
    structure_class: str = ""
    alpha_method: str = ""
    alpha_err_method: str = ""

    @property
    def alpha_additive_si(self) -> float:
        """Default additive polarizability in C m²/V."""
        return self.alpha_additive_A3 * ANGSTROM3_SI

    @property
    def alpha_additive_err_si(self) -> float:
        """Its 1σ uncertainty in C m²/V."""
        return self.alpha_additive_err_A3 * ANGSTROM3_SI

    @property
    def mu2_si(self) -> float | None:
        """Boltzmann ⟨μ²⟩ (C² m²) at ``temperature_K``, when an ensemble was computed."""
        if self.ensemble is None or self.temperature_K is None:
            return None
        return self.ensemble.mean_square_dipole_si(self.temperature_K)

    @property
    def dipole_rms_D(self) -> float | None:
        """sqrt⟨μ²⟩ in debye at ``temperature_K``, when an ensemble was computed."""
        mu2 = self.mu2_si
        return None if mu2 is None else math.sqrt(mu2) / DEBYE_SI

    @property
    def dipole_rms_err_D(self) -> float | None:
        """1σ of :attr:`dipole_rms_D`: the measured scatter of the method for the class."""
        mu = self.dipole_rms_D
        return None if mu is None else dipole_error_D(mu, self.structure_class)

    @property
    def dipole_method(self) -> str | None:
        """How the dipole was estimated (None without an ensemble)."""
        return None if self.ensemble is None else DIPOLE_METHOD

    @property
    def alpha_eff_si(self) -> float | None:
        """α_additive + ⟨μ²⟩/(3kT) in C m²/V, when an ensemble was computed."""
        mu2 = self.mu2_si
        if mu2 is None or self.temperature_K is None:
            return None
        return predicted_alpha_eff_si(self.alpha_additive_si, mu2, self.temperature_K)

    def summary(self) -> dict[str, Any]:
        """Plain dict (JSON-ready)."""
        out: dict[str, Any] = {
            "compound": self.compound,
            "smiles": self.smiles,
            "mass_avg_u": self.mass_avg_u,
            "mass_mono_u": self.mass_mono_u,
            "n_electrons": self.n_electrons,
        }
        for k in ("ahp", "ahc", "bs", "llmr"):
            out[f"alpha_{k}_A3"] = getattr(self, f"alpha_{k}_A3")
            out[f"alpha_{k}_err_A3"] = getattr(self, f"alpha_{k}_err_A3")
        out["alpha_d4_A3"] = self.alpha_d4_A3
        out["alpha_d4_err_A3"] = self.alpha_d4_err_A3
        out["default_scheme"] = self.default_scheme
        out["alpha_additive_A3"] = self.alpha_additive_A3
        out["alpha_additive_err_A3"] = self.alpha_additive_err_A3
        out["structure_class"] = self.structure_class
        out["alpha_method"] = self.alpha_method
        out["alpha_err_method"] = self.alpha_err_method
        out["flags"] = list(self.flags)
        out["temperature_K"] = self.temperature_K
        out["dipole_rms_D"] = self.dipole_rms_D
        out["dipole_rms_err_D"] = self.dipole_rms_err_D
        out["dipole_method"] = self.dipole_method
        out["ensemble"] = None if self.ensemble is None else self.ensemble.summary()
        return out

    def to_markdown(self) -> str:
        """Short markdown table of the estimate."""
        lines = [
            f"**{self.compound}** `{self.smiles}` — M = {self.mass_avg_u:.3f} u "
            f"(monoisotopic {self.mass_mono_u:.4f} u), N = {self.n_electrons} electrons",
            "",
            "| scheme | α (Å³) | ±1σ |",
            "| --- | --- | --- |",
        ]
        for k in ("ahp", "ahc", "bs", "llmr"):
            lines.append(
                f"| {k} | {getattr(self, f'alpha_{k}_A3'):.3f} "
                f"| {getattr(self, f'alpha_{k}_err_A3'):.3f} |"
            )
        if self.alpha_d4_A3 is not None:
            lines.append(f"| d4 | {self.alpha_d4_A3:.3f} | {self.alpha_d4_err_A3:.3f} |")
        lines.append(
            f"| **default ({self.default_scheme})** | **{self.alpha_additive_A3:.3f}** "
            f"| {self.alpha_additive_err_A3:.3f} |"
        )
        lines += [
            "",
            f"class {self.structure_class}, method {self.alpha_method}; "
            f"1σ: {self.alpha_err_method}",
        ]
        if self.dipole_rms_D is not None:
            lines += [
                "",
                f"sqrt<mu^2> = {self.dipole_rms_D:.3f} ± {self.dipole_rms_err_D:.3f} D at "
                f"{self.temperature_K} K ({self.dipole_method})",
            ]
        if self.flags:
            lines += ["", "flags: " + ", ".join(self.flags)]
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        return "<pre>" + html.escape(self.to_markdown()) + "</pre>"


def estimate(
    structure: str | Chem.Mol,
    compound: str = "?",
    *,
    dipoles: bool = False,
    conformers: int = 10,
    seed: int = DEFAULT_SEED,
    temperature_K: float = 300.0,
    charge_model: ChargeModel = DEFAULT_CHARGE_MODEL,
    d4: bool = False,
    scheme: Scheme | None = None,
) -> StructureEstimate:
    """All structure-based predictions for one molecule.

    Parameters
    ----------
    structure
        SMILES or RDKit molecule.
    compound
        Name used in messages.
    dipoles
        Also build the conformer ensemble (slow: seconds per molecule).  Above
        :data:`~polarbeam.chemistry.conformers.MAX_CONFORMER_HEAVY_ATOMS` heavy atoms, or when
        the embedding exceeds its time budget, no ensemble is built and ``flags`` says why.
    conformers, seed, charge_model
        Passed to :func:`conformer_ensemble`.
    temperature_K
        Temperature of the Boltzmann average.
    d4
        Also compute the D4 polarizability (needs ``dftd4``).
    scheme
        Scheme used for ``alpha_additive_A3``; default (None) the class's measured best
        (:data:`~polarbeam.chemistry.accuracy.CLASS_SCHEME`).  A single atom always takes the
        Schwerdtfeger–Nagle table.
    """
    if scheme is not None and scheme not in SCHEME_KEYS:
        raise InputError(f"scheme must be one of ahp, ahc, bs, llmr; found {scheme!r}")
    mol = as_mol(structure, compound)
    smiles = structure if isinstance(structure, str) else Chem.MolToSmiles(Chem.RemoveHs(mol))
    m_avg, m_mono, n_el, ahp, ahc, bs, llmr, flags = fast_estimates(mol)
    vals = {"ahp": ahp, "ahc": ahc, "bs": bs, "llmr": llmr}
    errs = {k: SCHEMES[k].error_A3(v) if math.isfinite(v) else math.nan for k, v in vals.items()}
    default = default_polarizability(mol, vals, compound, scheme)
    d4_val = d4_err = None
    if d4:
        d4_val = alpha_d4_A3(mol, compound, seed=seed)
        d4_err = SCHEMES["d4"].error_A3(d4_val)
    ens = None
    if dipoles:
        check_temperature(temperature_K)
        try:
            ens = conformer_ensemble(
                mol, compound, n_conformers=conformers, seed=seed, charge_model=charge_model
            )
        except CalculationTooBigError as exc:
            # bounded work (size or time): keep the additive estimates and say why
            flags = (*flags, str(exc))
    return StructureEstimate(
        compound=compound,
        smiles=smiles,
        mass_avg_u=m_avg,
        mass_mono_u=m_mono,
        n_electrons=n_el,
        alpha_ahp_A3=ahp,
        alpha_ahp_err_A3=errs["ahp"],
        alpha_ahc_A3=ahc,
        alpha_ahc_err_A3=errs["ahc"],
        alpha_bs_A3=bs,
        alpha_bs_err_A3=errs["bs"],
        alpha_llmr_A3=llmr,
        alpha_llmr_err_A3=errs["llmr"],
        default_scheme=default.scheme,
        alpha_additive_A3=default.alpha_A3,
        alpha_additive_err_A3=default.err_A3,
        flags=flags,
        alpha_d4_A3=d4_val,
        alpha_d4_err_A3=d4_err,
        ensemble=ens,
        temperature_K=float(temperature_K) if dipoles else None,
        structure_class=default.structure_class,
        alpha_method=default.method,
        alpha_err_method=default.err_method,
    )
