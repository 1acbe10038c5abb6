"""Bounded structure work: conformer search limited by size and time, additive schemes linear."""

from __future__ import annotations

import csv
import math

import pytest

from polarbeam import chemistry as chem
from polarbeam.chemistry.additive import CRIPPEN_MAX_ATOMS, fast_estimates
from polarbeam.chemistry.conformers import (
    CONFORMER_TIME_BUDGET_S,
    MAX_CONFORMER_HEAVY_ATOMS,
    conformer_ensemble,
)
from polarbeam.chemistry.molecules import parse_smiles
from polarbeam.errors import CalculationTooBigError, CompoundError

C100 = "C" * 100


def test_limits_are_stated():
    assert MAX_CONFORMER_HEAVY_ATOMS == 60
    assert CONFORMER_TIME_BUDGET_S > 0
    assert issubclass(CalculationTooBigError, CompoundError)


def test_conformers_refused_above_the_size_limit():
    with pytest.raises(CalculationTooBigError, match=r"100 heavy atoms, above the conformer limit"):
        conformer_ensemble(C100, "chain-100")
    with pytest.raises(CalculationTooBigError, match=r"61 heavy atoms"):
        conformer_ensemble("C" * 61, "chain-61")


def test_conformers_refused_when_the_embedding_uses_the_budget():
    # a 60-carbon chain needs several seconds to embed 10 conformers; a 1 s budget is not enough
    with pytest.raises(CalculationTooBigError, match=r"whole time budget of 1 s"):
        conformer_ensemble("C" * 60, "chain-60", time_budget_s=1.0)


def test_estimate_with_dipoles_falls_back_to_additive():
    est = chem.estimate(C100, "chain-100", dipoles=True)
    assert est.ensemble is None and est.dipole_rms_D is None
    assert any("above the conformer limit of 60" in f for f in est.flags)
    assert math.isfinite(est.alpha_additive_A3) and est.alpha_additive_A3 > 0


def test_estimate_table_c100_row_gets_a_note_and_finishes(tmp_path):
    inp = tmp_path / "lib.csv"
    inp.write_text(f"compound,smiles\nchain-100,{C100}\nethanol,CCO\n", encoding="utf-8")
    out = tmp_path / "out.csv"
    stats = chem.estimate_table(inp, out, dipoles=True, conformers=2)
    assert stats == {"rows": 2, "ok": 2, "failed": 0}
    rows = {r["compound"]: r for r in csv.DictReader(out.open(encoding="utf-8"))}
    big = rows["chain-100"]
    assert big["status"] == "ok" and big["dipole_rms_D"] == "" and big["n_conformers"] == "0"
    assert "above the conformer limit of 60" in big["message"]
    assert float(big["alpha_additive_A3"]) > 0
    assert rows["ethanol"]["dipole_rms_D"] != "" and rows["ethanol"]["message"] == ""


def test_additive_schemes_linear_in_chain_length():
    """Additive schemes are sums of atom/group terms (by construction), so for CnH2n+2 the
    increment per CH2 is the same at any length; llmr is left out where RDKit's Crippen typing
    stops (1000 matches of a pattern; observed here: the MR of C5000 equals that of ~C1000)."""
    small = fast_estimates(parse_smiles("C" * 100))
    mid = fast_estimates(parse_smiles("C" * 200))
    big = fast_estimates(parse_smiles("C" * 5000))
    for k in (3, 4, 5):  # ahp, ahc, bs
        per_ch2 = (mid[k] - small[k]) / 100
        assert big[k] - small[k] == pytest.approx(4900 * per_ch2, rel=1e-6)
    assert math.isfinite(small[6]) and math.isnan(big[6])
    assert "llmr:too-large" in big[7] and "llmr:too-large" not in small[7]
    assert math.isfinite(fast_estimates(parse_smiles("C" * CRIPPEN_MAX_ATOMS))[6])


def test_estimate_table_5000_carbons_default_falls_back(tmp_path):
    inp = tmp_path / "lib.csv"
    inp.write_text(f"compound,smiles\nc5000,{'C' * 5000}\n", encoding="utf-8")
    out = tmp_path / "out.csv"
    assert chem.estimate_table(inp, out, dipoles=True)["ok"] == 1
    row = next(csv.DictReader(out.open(encoding="utf-8")))
    assert row["default_scheme"] == "ahc" and row["alpha_additive_A3"] == row["alpha_ahc_A3"]
    assert row["alpha_llmr_A3"] == "" and "above the conformer limit" in row["message"]
