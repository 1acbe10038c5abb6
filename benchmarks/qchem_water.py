"""Timings of the on-the-spot PySCF stage (run on demand: ``python benchmarks/qchem_water.py``).

Times water (RDKit/MMFF geometry) SCF + CPHF/CPKS and finite field for a few method/basis pairs,
prints α, μ and each wall time as a ratio to the HF/def2-SVPD baseline timed in the same run,
then checks the refusal cost model against one larger molecule.  The numbers feed
``polarbeam.chemistry.qchem.DEFAULT_COST_MODELS`` and docs/computed.md.  Needs the extra
polarbeam[qc].
"""

from __future__ import annotations

import time

from polarbeam.chemistry import qchem

CASES = [
    ("hf", "def2-svpd"),
    ("b3lyp", "def2-svpd"),
    ("b3lyp", "aug-cc-pvdz"),
    ("pbe0", "def2-tzvpd"),
]


def timed(fn, *args, **kwargs):
    t0 = time.perf_counter()
    out = fn(*args, **kwargs)
    return out, time.perf_counter() - t0


def main() -> None:
    water = qchem.geometry_from_smiles("O")
    qchem.run_pyscf(water, "hf", "sto-3g", "analytic", 1e-3, None)  # warm-up (imports, libxc)
    _, base = timed(qchem.run_pyscf, water, "hf", "def2-svpd", "analytic", 1e-3, None)
    print(f"baseline HF/def2-SVPD water SCF+CPHF: {base:.2f} s")
    print(
        f"{'method/basis':22} {'N':>4} {'a_CP/A3':>8} {'a_FF/A3':>8} {'rel':>9} {'mu/D':>6}"
        f" {'t_CP/s':>7} {'t_FF/s':>7} {'CP/base':>7} {'FF/CP':>6}"
    )
    for method, basis in CASES:
        cp, t_cp = timed(qchem.run_pyscf, water, method, basis, "analytic", 1e-3, None)
        ff, t_ff = timed(qchem.run_pyscf, water, method, basis, "finite-field", 1e-3, None)
        a_cp = sum(cp["alpha_au"][i][i] for i in range(3)) / 3 * 0.148184711
        a_ff = sum(ff["alpha_au"][i][i] for i in range(3)) / 3 * 0.148184711
        mu = sum(v * v for v in cp["dipole_au"]) ** 0.5 * 2.541746
        print(
            f"{method + '/' + basis:22} {cp['n_basis']:4d} {a_cp:8.4f} {a_ff:8.4f} "
            f"{a_ff / a_cp - 1:9.2e} {mu:6.3f} {t_cp:7.2f} {t_ff:7.2f} {t_cp / base:7.2f} "
            f"{t_ff / t_cp:6.2f}"
        )
    ethanol = qchem.geometry_from_smiles("CCO")
    est = qchem.estimate_cost(ethanol, "b3lyp", "def2-svpd")
    _, t = timed(qchem.run_pyscf, ethanol, "b3lyp", "def2-svpd", "analytic", 1e-3, None)
    print(
        f"ethanol B3LYP/def2-SVPD: N={est.n_basis}, estimated {est.seconds_low:.1f}-"
        f"{est.seconds_high:.1f} s (decision {est.seconds:.1f} s), measured {t:.1f} s"
    )


if __name__ == "__main__":
    main()
