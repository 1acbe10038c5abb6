"""SCF for the quantum-chemistry stage: PySCF molecule, RHF/RKS, and one full run.

:func:`run_pyscf` builds the molecule, converges RHF (``method="hf"``) or RKS with the named
exchange-correlation functional (a second-order solver gets one more try), then takes the static
polarizability and the dipole (:mod:`polarbeam.chemistry.qchem.response`) and returns raw
atomic-unit results as a plain dict.
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable

import numpy as np

from polarbeam._util.optional import require
from polarbeam.chemistry.qchem.geometry import Geometry
from polarbeam.chemistry.qchem.response import (
    PolarizabilityScheme,
    cpscf_polarizability,
    dipole_au,
    finite_field_polarizability,
)
from polarbeam.errors import CompoundError, InputError

__all__ = ["build_mol", "converged_scf", "is_hf", "run_pyscf", "run_scf_dipole"]

_HF_NAMES = frozenset({"hf", "rhf"})


def is_hf(method: str) -> bool:
    """Whether ``method`` names Hartree–Fock (``hf``/``rhf``, any case) rather than a functional."""
    return method.strip().lower() in _HF_NAMES


def build_mol(geometry: Geometry, basis: str):
    """PySCF molecule of ``geometry`` in ``basis``; an unusable basis is a one-line InputError."""
    gto = require("pyscf.gto", "computing polarizabilities with PySCF")
    atoms = [(s, xyz) for s, xyz in zip(geometry.symbols, geometry.coords_angstrom, strict=True)]
    try:
        with warnings.catch_warnings():  # PySCF suggests basis-set-exchange for unknown names
            warnings.simplefilter("ignore", UserWarning)
            return gto.M(
                atom=atoms,
                basis=basis,
                charge=geometry.charge,
                spin=geometry.n_electrons % 2,
                unit="Angstrom",
                verbose=0,
            )
    except Exception as exc:  # PySCF raises KeyError/RuntimeError/... for unknown basis names
        elements = ", ".join(sorted(set(geometry.symbols)))
        raise InputError(
            f"basis {basis!r}: expected a basis PySCF knows for {elements}, found it unusable "
            f"({type(exc).__name__}: {str(exc).splitlines()[0] if str(exc) else ''})"
        ) from None


def _make_scf(mol, method: str):
    scf = require("pyscf.scf", "computing polarizabilities with PySCF")
    dft = require("pyscf.dft", "computing polarizabilities with PySCF")
    if is_hf(method):
        mf = scf.RHF(mol)
    else:
        try:
            dft.libxc.parse_xc(method)
        except Exception:
            raise InputError(
                f"method {method!r}: expected 'hf' or an exchange-correlation functional known "
                "to PySCF/libxc (b3lyp, pbe0, pbe, wb97x, cam-b3lyp, ...)"
            ) from None
        mf = dft.RKS(mol)
        mf.xc = method
    mf.conv_tol = 1e-10
    mf.max_cycle = 100
    mf.verbose = 0
    return mf


def converged_scf(mol, method: str, geometry: Geometry, basis: str):
    """Converged RHF/RKS of ``mol`` (a second-order solver gets one more try)."""
    mf = _make_scf(mol, method)
    mf.kernel()
    if not mf.converged:
        mf = mf.newton()
        mf.kernel()
        if not mf.converged:
            raise CompoundError(
                f"{geometry.label or geometry.source}: SCF {method}/{basis} did not converge"
            )
    return mf


def run_scf_dipole(geometry: Geometry, method: str, basis: str) -> dict:
    """SCF and dipole only (no response): raw atomic-unit results as a plain dict."""
    pyscf = require("pyscf", "computing dipoles with PySCF")
    mol = build_mol(geometry, basis)
    t0 = time.perf_counter()
    mf = converged_scf(mol, method, geometry, basis)
    return {
        "energy_hartree": float(mf.e_tot),
        "dipole_au": dipole_au(mf).tolist(),
        "n_basis": int(mol.nao_nr()),
        "scf_seconds": time.perf_counter() - t0,
        "software": f"pyscf {pyscf.__version__}",
    }


def run_pyscf(
    geometry: Geometry,
    method: str,
    basis: str,
    polarizability: PolarizabilityScheme,
    field_au: float,
    report: Callable[[str], None] | None,
) -> dict:
    """Run SCF + response; return raw atomic-unit results (a plain dict, JSON-ready)."""
    pyscf = require("pyscf", "computing polarizabilities with PySCF")
    say = report or (lambda _msg: None)
    mol = build_mol(geometry, basis)
    t0 = time.perf_counter()
    say(f"SCF ({'RHF' if is_hf(method) else 'RKS ' + method}/{basis}, {mol.nao_nr()} functions)")
    mf = converged_scf(mol, method, geometry, basis)
    t1 = time.perf_counter()
    scheme = "CPHF" if is_hf(method) else "CPKS"
    if polarizability == "finite-field":
        say(f"polarizability (finite field, F = {field_au:g} au, 6 SCFs)")
        alpha = finite_field_polarizability(mf, field_au)
        scheme = f"finite field (F = {field_au:g} au)"
    else:
        say(f"polarizability ({scheme})")
        alpha = cpscf_polarizability(mf)
    t2 = time.perf_counter()
    dip = dipole_au(mf)
    return {
        "energy_hartree": float(mf.e_tot),
        "dipole_au": dip.tolist(),
        "alpha_au": np.asarray(alpha, dtype=float).tolist(),
        "n_basis": int(mol.nao_nr()),
        "scheme": scheme,
        "scf_seconds": t1 - t0,
        "response_seconds": t2 - t1,
        "software": f"pyscf {pyscf.__version__}",
    }
