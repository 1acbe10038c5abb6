"""Conformer-averaged quantum-chemistry dipoles (polarbeam.chemistry.qchem.ensemble) -- extra [qc].

Physics checked: the Boltzmann average ⟨μ²⟩(T) = Σ w_i μ_i² with w_i ∝ exp(−ΔE_i/kT)
(textbook statistical mechanics; k from scipy.constants), the cache, the refusal before any SCF,
and the ``polarbeam compute --conformers N`` command.  Small calculations (HF/STO-3G) only: the
accuracy against experiment is measured by benchmarks/qchem_conformer_dipoles.py.
"""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest
from scipy import constants as sc
from typer.testing import CliRunner

from polarbeam._util.optional import missing_reason

pytest.importorskip("pyscf", reason=missing_reason("pyscf"))

from polarbeam.chemistry.qchem import (
    ConformerDipoles,
    compute_conformer_dipoles,
    conformer_geometries,
)
from polarbeam.cli.commands import app
from polarbeam.errors import CalculationTooBigError, InputError


@pytest.fixture(scope="module")
def ethanol(tmp_path_factory):
    cache = tmp_path_factory.mktemp("qc")
    return compute_conformer_dipoles("CCO", "hf", "sto-3g", n_conformers=10, cache_dir=cache), cache


def test_conformers_of_ethanol_are_anti_and_two_gauche():
    geoms, energies, n = conformer_geometries("CCO", n_conformers=10)
    assert n == 10 and len(geoms) == 3
    assert energies[0] == 0.0 and energies[1] == pytest.approx(energies[2], abs=1e-6)
    assert geoms[0].label == "CCO" and len(geoms[0].symbols) == 9


def test_boltzmann_average_by_hand(ethanol):
    r, _ = ethanol
    t = 250.0
    e = (np.asarray(r.scf_energies_hartree) - min(r.scf_energies_hartree)) * sc.physical_constants[
        "Hartree energy"
    ][0]
    w = np.exp(-e / (sc.k * t))
    w /= w.sum()
    mu2 = float(w @ (np.asarray(r.dipoles_D) * 1e-21 / sc.c) ** 2)  # 1 D = 1e-21/c C m
    assert r.mean_square_dipole_si(t) == pytest.approx(mu2, rel=1e-10)
    curve = r.mu2_curve_si([100.0, 300.0, 1000.0])
    assert curve[1] == pytest.approx(r.mean_square_dipole_si(300.0))
    # high-temperature limit: the plain mean of μ² over the conformers
    assert r.mean_square_dipole_si(1e9) == pytest.approx(
        np.mean((np.asarray(r.dipoles_D) * 1e-21 / sc.c) ** 2), rel=1e-6
    )
    assert min(r.dipoles_D) <= r.rms_dipole_D(300.0) <= max(r.dipoles_D)
    assert r.rms_dipole_D(300.0, "mmff") > 0
    with pytest.raises(InputError, match="energies: expected 'scf' or 'mmff', found 'x'"):
        r.rms_dipole_D(300.0, "x")


def test_rerun_comes_from_the_cache(ethanol):
    r, cache = ethanol
    again = compute_conformer_dipoles("CCO", "hf", "sto-3g", n_conformers=10, cache_dir=cache)
    assert again.n_cached == len(r.dipoles_D) == 3
    assert again.dipoles_D == r.dipoles_D
    assert isinstance(again, ConformerDipoles) and again.summary()["n_conformers"] == 3


def test_refused_before_any_scf(tmp_path):
    with pytest.raises(CalculationTooBigError, match=r"refusing 3 conformer SCFs .* limit"):
        compute_conformer_dipoles(
            "CCO", "b3lyp", "def2-svpd", n_conformers=10, cache_dir=tmp_path, max_seconds=0.01
        )
    assert not list(tmp_path.iterdir())


def test_compute_conformers_command(tmp_path, monkeypatch):
    monkeypatch.setenv("POLARBEAM_CACHE_DIR", str(tmp_path / "cache"))
    out = tmp_path / "computed.csv"
    args = ["compute", "CCO", "--method", "hf", "--basis", "sto-3g", "--conformers", "10"]
    res = CliRunner().invoke(app, [*args, "--out", str(out)])
    assert res.exit_code == 0, res.output
    row = next(csv.DictReader(out.open(encoding="utf-8")))
    assert "over 3 conformers" in row["source"] and "300 K" in row["source"]
    mu = float(row["dipole_D"])
    assert math.isfinite(mu) and 1.0 < mu < 2.0  # HF/STO-3G ethanol ~1.5 D
    bad = CliRunner().invoke(app, [*args[:-1], "-2", "--out", str(out)])
    assert bad.exit_code == 2 and "--conformers: expected an integer >= 0, found -2" in bad.output
