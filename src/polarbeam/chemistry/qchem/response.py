"""Static response of a converged PySCF SCF solution: polarizability tensor and dipole.

Coupled-perturbed SCF (CPHF/CPKS, PySCF's ``scf.cphf`` Krylov solver with the SCF object's own
response function), finite field (central differences of the dipole under ±F) as fallback and
cross-check, and the dipole moment about the centre of mass.  Everything here is in atomic units.
"""

from __future__ import annotations

from typing import Literal

import numpy as np
from scipy import constants as _sc

from polarbeam._util.optional import require
from polarbeam.errors import CompoundError, InputError

__all__ = [
    "AU_DIPOLE_SI",
    "DEFAULT_FIELD_AU",
    "PolarizabilityScheme",
    "cpscf_polarizability",
    "dipole_au",
    "finite_field_polarizability",
]

#: Atomic unit of electric dipole moment e·a0 in C·m (CODATA via scipy.constants).
AU_DIPOLE_SI = _sc.physical_constants["atomic unit of electric dipole mom."][0]
#: Finite-field strength in atomic units (5.14e8 V/m): small enough that the hyperpolarizability
#: error of a central difference (∝ F²) stays below 1e-5 relative for small molecules.
DEFAULT_FIELD_AU = 1.0e-3

PolarizabilityScheme = Literal["analytic", "finite-field"]


def _charge_centre(mol) -> np.ndarray:
    charges = mol.atom_charges()
    return charges @ mol.atom_coords() / charges.sum()


def cpscf_polarizability(mf, *, tol: float = 1e-9, max_cycle: int = 100) -> np.ndarray:
    """Static dipole polarizability tensor (atomic units) of a closed-shell RHF/RKS solution.

    Solves the coupled-perturbed equations (ε_a − ε_i) U_ai + [K U]_ai = −h_ai for the three
    field directions, h = ⟨a|r|i⟩, with the SCF object's own response function (Coulomb,
    exact exchange and the XC kernel), and returns α_xy = −4 Σ_ai h^x_ai U^y_ai (symmetrised):
    the factor 2 counts both spins, the other 2 the U + Uᵀ density response.
    """
    lib = require("pyscf.lib", "computing polarizabilities with PySCF")
    cphf = require("pyscf.scf.cphf", "computing polarizabilities with PySCF")
    mol = mf.mol
    occ = np.asarray(mf.mo_occ)
    if not np.all(np.isin(occ, (0.0, 2.0))):
        raise CompoundError("CPSCF polarizability: expected a closed-shell RHF/RKS solution")
    coeff = np.asarray(mf.mo_coeff)
    orbo, orbv = coeff[:, occ > 0], coeff[:, occ == 0]
    with mol.with_common_orig(_charge_centre(mol)):
        r = mol.intor_symmetric("int1e_r", comp=3)
    h1 = lib.einsum("xpq,pa,qi->xai", r, orbv, orbo)
    vresp = mf.gen_response(hermi=1)
    nvir, nocc = orbv.shape[1], orbo.shape[1]

    def fvind(u):
        u = u.reshape(-1, nvir, nocc)
        dm1 = lib.einsum("xai,pa,qi->xpq", u, orbv, orbo)
        dm1 = dm1 + dm1.transpose(0, 2, 1)
        # ×2: the closed-shell density response is 2(C_v U C_oᵀ + h.c.)
        v1 = vresp(dm1) * 2.0
        return lib.einsum("xpq,pa,qi->xai", v1, orbv, orbo).ravel()

    u = cphf.solve(fvind, mf.mo_energy, occ, h1, None, max_cycle=max_cycle, tol=tol)[0]
    e2 = np.einsum("xai,yai->xy", h1, u)
    return -2.0 * (e2 + e2.T)


def _field_scf(mf, field_au: np.ndarray, r_ints: np.ndarray, dm0):
    """Copy of ``mf`` re-converged with the term +F·r added to the one-electron Hamiltonian.

    The interaction of an electron (charge −e) with a uniform field F is −(−r)·F = +F·r;
    the nuclear term is a constant and does not change the density.
    """
    h0 = mf.get_hcore()
    pert = mf.copy()
    h = h0 + np.einsum("x,xij->ij", field_au, r_ints)
    pert.get_hcore = lambda *args, **kwargs: h
    pert.kernel(dm0=dm0)
    if not pert.converged:
        raise CompoundError(f"finite field {field_au.tolist()} au: SCF did not converge")
    return pert


def finite_field_polarizability(mf, field_au: float = DEFAULT_FIELD_AU) -> np.ndarray:
    """Static polarizability tensor (atomic units) by central differences of the dipole.

    α_ij = [μ_i(+F e_j) − μ_i(−F e_j)] / (2F), six SCFs started from the field-free density.
    The truncation error is of order γF²/6 relative to α (γ the second hyperpolarizability).
    """
    if not (field_au > 0):
        raise InputError(f"finite field: expected a field strength > 0 au, found {field_au!r}")
    mol = mf.mol
    with mol.with_common_orig(_charge_centre(mol)):
        r = mol.intor_symmetric("int1e_r", comp=3)
    dm0 = mf.make_rdm1()
    alpha = np.zeros((3, 3))
    for j in range(3):
        f = np.zeros(3)
        f[j] = field_au
        mu_p = _field_scf(mf, f, r, dm0).dip_moment(unit="au", verbose=0)
        mu_m = _field_scf(mf, -f, r, dm0).dip_moment(unit="au", verbose=0)
        alpha[:, j] = (np.asarray(mu_p) - np.asarray(mu_m)) / (2.0 * field_au)
    return 0.5 * (alpha + alpha.T)


def dipole_au(mf) -> np.ndarray:
    """Dipole vector (atomic units) of an SCF solution about the centre of mass.

    μ = Σ_A Z_A (R_A − R_cm) − tr(D r_cm).  For a neutral molecule the origin does not matter;
    for an ion the centre of mass is the point the molecule rotates about in a beam.
    """
    mol = mf.mol
    masses = np.asarray(mol.atom_mass_list(isotope_avg=True), dtype=float)
    coords = mol.atom_coords()
    com = masses @ coords / masses.sum()
    with mol.with_common_orig(com):
        r = mol.intor_symmetric("int1e_r", comp=3)
    dm = mf.make_rdm1()
    electronic = np.einsum("xij,ji->x", r, dm).real
    nuclear = mol.atom_charges() @ (coords - com)
    return nuclear - electronic
