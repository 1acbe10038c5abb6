"""Tests of the structure stage against outside references.

References used (source beside each check):
* reference_values/polarizabilities.csv, reference_values/dipoles.csv -- CRC Handbook / NIST
  CCCBDB experimental values, quoted from memory (see the file headers);
* the accuracy each scheme's paper states in its abstract (Miller 1990: 2.2 % ahc, 2.8 % ahp;
  Bosque & Sales 2002: 2.31 %);
* Miller 1990 Table I (src/polarbeam/data/miller1990_table1.csv) and its typing rules;
* RDKit's own Crippen.MolMR and scipy.constants (CODATA).
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
import pytest
from rdkit import Chem
from rdkit.Chem import Crippen
from scipy import constants as sc

from polarbeam import structure as st
from polarbeam.errors import CompoundError, InputError

ROOT = Path(__file__).resolve().parents[1]
REF = ROOT / "reference_values"


def _read_ref(name: str) -> list[dict[str, str]]:
    with (REF / name).open(encoding="utf-8") as fh:
        return list(csv.DictReader(ln for ln in fh if not ln.startswith("#")))


POL = _read_ref("polarizabilities.csv")
DIP = _read_ref("dipoles.csv")
ORGANIC = [r for r in POL if r["class"] == "organic"]

#: Mean relative uncertainty of the organic reference values themselves (about 3 %): an estimator
#: as good as its paper claims should show MARE <= paper figure + this on our table (triangle
#: inequality on |pred - ref| <= |pred - true| + |true - ref|).
REF_REL_ERR = float(np.mean([float(r["alpha_err_A3"]) / float(r["alpha_A3"]) for r in ORGANIC]))


def _mare(key: str) -> float:
    rel = []
    for r in ORGANIC:
        e = st.estimate(r["smiles"], r["compound"])
        rel.append(abs(getattr(e, f"alpha_{key}_A3") / float(r["alpha_A3"]) - 1.0))
    return float(np.mean(rel))


# ---------------------------------------------------------------------------- reference tables


def test_reference_tables_meet_the_brief():
    assert len(POL) >= 25 and len(DIP) >= 15
    for r in POL + DIP:
        assert r["source"].strip(), r
        assert Chem.MolFromSmiles(r["smiles"]) is not None, r
    water = next(r for r in DIP if r["compound"] == "water")
    assert float(water["dipole_D"]) == pytest.approx(1.85, abs=0.01)  # CCCBDB water 1.855 D


# ---------------------------------------------------------------------------- constants, masses


def test_lorentz_lorenz_constant_from_scipy():
    # 3/(4 pi N_A) per cm^3/mol in A^3, N_A from CODATA (scipy.constants): 0.3964245
    expected = 3.0 / (4.0 * math.pi * sc.N_A) * 1e24
    assert st.LL_MR_FACTOR_A3 == pytest.approx(expected, rel=1e-12)
    assert st.LL_MR_FACTOR_A3 == pytest.approx(0.3964245, abs=5e-8)


@pytest.mark.parametrize("smiles", ["c1ccccc1", "CCO", "CC(=O)Nc1ccc(O)cc1", "ClC(Cl)Cl", "C#N"])
def test_llmr_is_lorentz_lorenz_of_rdkit_crippen_mr(smiles):
    # RDKit's own Wildman-Crippen MR (cm^3/mol), converted with 3/(4 pi N_A)
    mr = Crippen.MolMR(Chem.MolFromSmiles(smiles))
    assert st.alpha_llmr_A3(smiles) == pytest.approx(0.3964245 * mr, rel=1e-6)


def test_masses_of_water():
    mol = st.parse_smiles("O", "water")
    # CIAAW standard atomic weights H 1.008, O 15.999 (conventional values): 18.015 u
    assert st.mass_average_u(mol) == pytest.approx(18.015, abs=0.001)
    # AME2020 atomic masses 1H 1.00782503, 16O 15.99491462: 18.0105647 u
    assert st.mass_monoisotopic_u(mol) == pytest.approx(18.0105647, abs=1e-6)


def test_masses_count_explicit_and_implicit_h_alike():
    a = st.parse_smiles("CCO")
    b = Chem.AddHs(a)
    assert st.mass_average_u(a) == pytest.approx(st.mass_average_u(b), abs=1e-9)
    assert st.n_electrons(a) == st.n_electrons(b) == 26  # 2*6 + 8 + 6*1


def test_n_electrons_neutral_molecule():
    assert st.n_electrons("O") == 10  # Z(O) + 2 Z(H)
    assert st.n_electrons("c1ccccc1") == 42  # 6*6 + 6


def test_check_mass_warns_and_uses_stated():
    mass, warn = st.check_mass(100.0, 46.069, "ethanol")
    assert mass == 100.0
    assert warn is not None and "ethanol" in warn and "53.931" in warn and "\n" not in warn
    mass, warn = st.check_mass(46.3, 46.069, "ethanol")
    assert mass == 46.3 and warn is None
    with pytest.raises(CompoundError, match=r"'ethanol'.*> 0 u"):
        st.check_mass(-1.0, 46.069, "ethanol")


# ---------------------------------------------------------------------------- parsing, errors


def test_bad_smiles_names_compound_and_smiles():
    with pytest.raises(CompoundError, match=r"compound 'junk'.*SMILES 'C1CC\(' "):
        st.parse_smiles("C1CC(", "junk")
    with pytest.raises(CompoundError, match=r"compound 'five-valent'.*'C\(C\)\(C\)\(C\)\(C\)C'"):
        st.estimate("C(C)(C)(C)(C)C", "five-valent")


def test_invalid_options_list_the_valid_ones():
    with pytest.raises(InputError, match=r"charge_model must be one of mmff, gasteiger"):
        st.conformer_ensemble("O", charge_model="am1")  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"scheme must be one of ahp, ahc, bs, llmr"):
        st.estimate("O", scheme="xyz")  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"temperature_K must be > 0 K, found -5"):
        st.predicted_alpha_eff_si(1e-40, 1e-59, -5)


# ---------------------------------------------------------------------------- Miller typing


def test_benzene_typing_and_sums():
    # Miller 1990 typing: aromatic C is C(tr); benzene = 6 C(tr) + 6 H.
    assert st.miller_types("c1ccccc1") == {"C.tr": 6, "H": 6}
    # Sums from Miller 1990 Table I by hand: ahp 6*1.352 + 6*0.387 = 10.434 A^3 (the paper's
    # benzene ahp is 10.43 A^3 -- from memory); ahc (4/42)(6*1.433 + 6*0.313)^2 = 10.452 A^3.
    assert st.alpha_ahp_A3("c1ccccc1") == pytest.approx(10.434, abs=1e-9)
    assert st.alpha_ahc_A3("c1ccccc1") == pytest.approx(4 / 42 * (6 * 1.433 + 6 * 0.313) ** 2)


def test_naphthalene_typing_uses_pi_branched_carbon():
    # Miller 1990: the two ring-fusion carbons are C(br); 8 C(tr) + 2 C(br) + 8 H.
    assert st.miller_types("c1ccc2ccccc2c1") == {"C.tr": 8, "C.br": 2, "H": 8}
    # Table I by hand: 8*1.352 + 2*1.896 + 8*0.387 = 17.704 A^3
    assert st.alpha_ahp_A3("c1ccc2ccccc2c1") == pytest.approx(17.704, abs=1e-9)
    tau = 8 * 1.433 + 2 * 1.707 + 8 * 0.313
    assert st.alpha_ahc_A3("c1ccc2ccccc2c1") == pytest.approx(4 / 68 * tau**2)


def test_methane_ahc_reproduces_experiment():
    # (4/10)(1.294 + 4*0.313)^2 = 2.593 A^3; CRC methane 2.593 A^3 (from memory)
    assert st.alpha_ahc_A3("C") == pytest.approx(2.593, abs=0.002)


@pytest.mark.parametrize(
    ("smiles", "expected"),
    [
        # Miller 1990 typing rules (hybrid states of the paper's Table I):
        ("c1ccncc1", {"C.tr": 5, "N.tr2": 1, "H": 5}),  # pyridine N: tr2
        ("c1cc[nH]c1", {"C.tr": 4, "N.pi2": 1, "H": 5}),  # pyrrole N: pi2
        ("Nc1ccccc1", {"C.tr": 6, "N.pi2": 1, "H": 7}),  # aniline N: pi2
        ("CC(N)=O", {"C.te": 1, "C.tr": 1, "N.pi2": 1, "O.tr4": 1, "H": 5}),  # amide N pi2, C=O tr4
        ("CCN(CC)CC", {"C.te": 6, "N.te": 1, "H": 15}),  # amine N: te
        ("c1ccoc1", {"C.tr": 4, "O.pi2": 1, "H": 4}),  # furan O: pi2
        ("CC(=O)OC", {"C.te": 2, "C.tr": 1, "O.tr4": 1, "O.pi2": 1, "H": 6}),  # ester -O-: pi2
        ("COC", {"C.te": 2, "O.te": 1, "H": 6}),  # ether O: te
        ("c1ccsc1", {"C.tr": 4, "S.pi2": 1, "H": 4}),  # thiophene S: pi2
        ("CSC", {"C.te": 2, "S.te": 1, "H": 6}),  # thioether S: te
        ("S=C=S", {"C.di": 1, "S.tr4": 2}),  # thiocarbonyl S: tr4; sp C: di
        ("CC#N", {"C.te": 1, "C.di": 1, "N.di": 1, "H": 3}),  # nitrile: C di, N di
        ("c1ccc2[nH]ccc2c1", {"C.tr": 6, "C.br": 2, "N.pi2": 1, "H": 7}),  # indole fusion C: br
        ("c1ccc(cc1)-c1ccccc1", {"C.tr": 12, "H": 10}),  # biphenyl: no ring fusion, no br
        ("c1ccc2CCCc2c1", {"C.te": 3, "C.tr": 6, "H": 10}),  # indane: fused to a saturated ring
    ],
)
def test_miller_typing_rules(smiles, expected):
    assert st.miller_types(smiles) == expected


def test_table_values_are_the_published_ahp_set():
    # Miller 1990 Table I ahp values (cross-checked against the published table as reproduced
    # in the open-source CDPKit, AtomicHybridPolarizabilities.hpp)
    _tau, ahp = st._miller_params()
    keys = st._MILLER_KEYS
    published = {"H": 0.387, "C.te": 1.061, "C.tr": 1.352, "C.br": 1.896, "C.di": 1.283,
                 "N.te": 0.964, "N.tr2": 1.030, "N.pi2": 1.090, "N.di": 0.956, "O.te": 0.637,
                 "O.tr4": 0.569, "O.pi2": 0.274, "S.te": 3.000, "S.tr4": 3.729, "S.pi2": 2.700,
                 "P.te": 1.538, "F": 0.296, "Cl": 2.315, "Br": 3.013, "I": 5.415}  # fmt: skip
    assert {k: ahp[keys.index(k)] for k in published} == published


# ---------------------------------------------------------------------------- scheme accuracy


@pytest.mark.parametrize(
    ("key", "paper"),
    [
        ("ahc", 0.022),  # Miller 1990 abstract: ahc average error 2.2 % (~400 compounds)
        ("ahp", 0.028),  # Miller 1990 abstract: ahp average error 2.8 %
        ("bs", 0.0231),  # Bosque & Sales 2002 abstract: 2.31 % (working set of 340)
    ],
)
def test_scheme_mare_within_paper_figure(key, paper):
    mare = _mare(key)
    # measured (docs/structure.md): ahc 3.1 %, ahp 3.1 %, bs 4.2 %
    assert mare <= paper + REF_REL_ERR, (key, mare)
    assert st.SCHEMES[key].rel_err == pytest.approx(paper)


def test_llmr_error_within_wildman_crippen_sigma():
    # Wildman & Crippen 1999: MR fit sigma ~1.27 cm^3/mol (from memory) = 0.50 A^3; the mean
    # absolute error on our table must stay below that sigma plus the reference uncertainty.
    errs, ref = [], []
    for r in ORGANIC:
        errs.append(abs(st.alpha_llmr_A3(r["smiles"]) - float(r["alpha_A3"])))
        ref.append(float(r["alpha_err_A3"]))
    assert np.mean(errs) <= 1.27 * st.LL_MR_FACTOR_A3 + np.mean(ref)
    assert _mare("llmr") <= 0.05  # measured 2.8 % (docs/structure.md)


def test_default_scheme_is_the_best_on_the_reference_table():
    mares = {k: _mare(k) for k in ("ahp", "ahc", "bs", "llmr")}
    assert min(mares, key=mares.get) == st.DEFAULT_SCHEME, mares


def test_estimate_carries_errors_from_documented_accuracy():
    e = st.estimate("CCO", "ethanol")
    assert e.alpha_ahp_err_A3 == pytest.approx(0.028 * e.alpha_ahp_A3)  # Miller 1990: 2.8 %
    assert e.alpha_bs_err_A3 == pytest.approx(0.0231 * e.alpha_bs_A3)  # Bosque-Sales: 2.31 %
    assert e.alpha_additive_A3 == getattr(e, f"alpha_{st.DEFAULT_SCHEME}_A3")
    assert e.alpha_additive_si == pytest.approx(
        e.alpha_additive_A3 * 4 * math.pi * sc.epsilon_0 * 1e-30
    )
    d = e.summary()
    json.dumps(d)
    assert d["compound"] == "ethanol" and d["default_scheme"] == st.DEFAULT_SCHEME
    assert "| ahp |" in e.to_markdown()


# ---------------------------------------------------------------------------- domain flags


@pytest.mark.parametrize(
    ("smiles", "flag"),
    [
        ("FC(F)(F)C(F)(F)F", "perfluorinated"),
        ("C[N+](C)(C)C", "charged"),
        ("[CH3]", "radical"),
        ("C[Si](C)(C)C", "miller:no-parameter:Si"),
        ("C[Si](C)(C)C", "bs:no-parameter:Si"),
        ("CC[Sn](CC)(CC)CC", "metal"),
        ("CS(C)(=O)=O", "miller:hypervalent-S-typed-te"),
        ("c1cc2ccc3ccc4ccc5ccc6ccc1c7c2c3c4c5c67", "cage-carbon"),  # coronene: fused sheet
    ],
)
def test_domain_flags(smiles, flag):
    assert flag in st.domain_flags(smiles)


@pytest.mark.parametrize("smiles", ["c1ccc2ccccc2c1", "C1C2CC3CC1CC(C2)C3", "CCO", "Fc1ccccc1"])
def test_no_flags_inside_the_domain(smiles):
    assert st.domain_flags(smiles) == ()


def test_unparametrised_element_gives_nan_not_a_number():
    e = st.estimate("C[Si](C)(C)C", "tetramethylsilane")
    assert math.isnan(e.alpha_ahp_A3) and math.isnan(e.alpha_bs_A3)
    assert math.isfinite(e.alpha_llmr_A3)


# ---------------------------------------------------------------------------- dipoles


RIGID = [r for r in DIP if r["rigid"] == "yes"]


def _dipole_mare(charge_model: str, scale: float | None) -> tuple[float, float]:
    rel, ratio = [], []
    for r in RIGID:
        ens = st.conformer_ensemble(
            r["smiles"], r["compound"], n_conformers=4, charge_model=charge_model,
            dipole_scale=scale,
        )  # fmt: skip
        mu = ens.rms_dipole_D(300.0)
        exp = float(r["dipole_D"])
        rel.append(abs(mu / exp - 1.0))
        ratio.append(mu / exp)
    return float(np.mean(rel)), float(np.mean(ratio))


def test_conformer_dipoles_vs_experiment_rigid_molecules():
    # Force-field charges: expect errors of tens of percent (common practice).
    # Measured on the rigid rows of reference_values/dipoles.csv (docs/structure.md):
    #   MMFF94 raw: MARE 45 %, mean ratio calc/exp 1.36 (overestimate);
    #   MMFF94 x 0.766 (default): MARE 23.5 %;  Gasteiger raw: MARE 44 %.
    mare_default, _ = _dipole_mare(st.DEFAULT_CHARGE_MODEL, None)
    assert mare_default <= 0.30
    mare_mmff_raw, ratio_mmff_raw = _dipole_mare("mmff", 1.0)
    assert ratio_mmff_raw > 1.2  # MMFF charges overestimate gas-phase dipoles
    mare_gast, _ = _dipole_mare("gasteiger", 1.0)
    assert mare_default < mare_gast and mare_default < mare_mmff_raw


@pytest.mark.parametrize(
    ("smiles", "exp_D"),
    [("c1ccncc1", 2.215), ("CCl", 1.892), ("O", 1.855), ("CC#N", 3.925)],  # CRC / CCCBDB
)
def test_single_rigid_dipoles_within_25_percent(smiles, exp_D):
    ens = st.conformer_ensemble(smiles, n_conformers=3)
    assert ens.rms_dipole_D(300.0) == pytest.approx(exp_D, rel=0.25)


def test_symmetric_molecules_have_no_dipole():
    for smi in ("c1ccccc1", "ClC(Cl)(Cl)Cl", "C"):
        assert st.conformer_ensemble(smi, n_conformers=2).rms_dipole_D(300.0) < 0.02


def test_reproducible_with_seed():
    a = st.conformer_ensemble("OCCO", n_conformers=8, seed=7)
    b = st.conformer_ensemble("OCCO", n_conformers=8, seed=7)
    assert a == b
    assert len(a.energies_kcal_mol) >= 2 and min(a.energies_kcal_mol) == 0.0


def test_anti_gauche_ensemble_of_dichloroethane():
    # 1,2-dichloroethane: anti (mu = 0) and two mirror-image gauche minima (both kept).
    ens = st.conformer_ensemble("ClCCCl", n_conformers=12)
    assert len(ens.energies_kcal_mol) == 3
    assert min(ens.dipoles_D) < 0.05 and max(ens.dipoles_D) > 1.5


def test_mmff_charges_neutral_so_dipole_origin_independent():
    mol = Chem.AddHs(Chem.MolFromSmiles("CC(=O)Nc1ccccc1"))
    props = Chem.rdForceFieldHelpers.MMFFGetMoleculeProperties(mol)
    q = np.array([props.GetMMFFPartialCharge(i) for i in range(mol.GetNumAtoms())])
    # sum q = 0 => sum q (r + d) = sum q r for any shift d
    assert abs(q.sum()) < 1e-6


def test_boltzmann_average_against_closed_form():
    ens = st.ConformerEnsemble(
        smiles="X", seed=0, n_embedded=2, force_field="test", charge_model="mmff",
        dipole_scale=1.0, energies_kcal_mol=(0.0, 1.0), dipoles_D=(0.0, 2.0),
    )  # fmt: skip
    t = 300.0
    # independent: 1 kcal/mol = 4184 J/mol (thermochemical calorie); k_B, N_A, c from scipy
    w1 = math.exp(-4184.0 / (sc.R * t))
    debye = 1e-21 / sc.c
    expected = w1 / (1.0 + w1) * (2.0 * debye) ** 2
    assert st.mean_square_dipole(ens, t) == pytest.approx(expected, rel=1e-12)


def test_langevin_debye_term_for_water():
    # mu = 1.855 D (CCCBDB), T = 300 K: mu^2/(3kT) in A^3 = 27.7 (independent arithmetic)
    mu = 1.855e-21 / sc.c
    expected_si = 1e-40 + mu**2 / (3 * sc.k * 300.0)
    got = st.predicted_alpha_eff_si(1e-40, mu**2, 300.0)
    assert got == pytest.approx(expected_si, rel=1e-12)
    orient_A3 = (got - 1e-40) / (4 * math.pi * sc.epsilon_0) * 1e30
    assert orient_A3 == pytest.approx(27.69, abs=0.01)


def test_estimate_with_dipoles():
    e = st.estimate("CC(C)=O", "acetone", dipoles=True, conformers=3, temperature_K=350.0)
    assert e.ensemble is not None and e.temperature_K == 350.0
    assert e.dipole_rms_D == pytest.approx(2.88, rel=0.3)  # CRC 2.88 D; force-field tolerance
    assert e.alpha_eff_si > e.alpha_additive_si
    json.dumps(e.summary())


# ---------------------------------------------------------------------------- D4 (optional)


@pytest.mark.skipif(not st.dftd4_available(), reason="needs the optional 'dftd4' package")
def test_d4_polarizability_of_benzene():
    a = st.alpha_d4_A3("c1ccccc1")
    assert a == pytest.approx(10.32, rel=0.08)  # CRC benzene 10.32 A^3 (from memory)


# ---------------------------------------------------------------------------- batch table


def _read_out(path: Path) -> list[dict[str, str]]:
    with path.open(newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


def test_estimate_table_bad_row_among_good(tmp_path):
    inp = tmp_path / "in.csv"
    inp.write_text(
        "compound,smiles,batch\nbenzene,c1ccccc1,A1\nbroken,C1CC(,A2\nwater,O,A3\nempty,,A4\n",
        encoding="utf-8",
    )
    out = tmp_path / "out.csv"
    stats = st.estimate_table(inp, out)
    assert stats == {"rows": 4, "ok": 2, "failed": 2}
    rows = _read_out(out)
    assert [r["compound"] for r in rows] == ["benzene", "broken", "water", "empty"]
    assert [r["batch"] for r in rows] == ["A1", "A2", "A3", "A4"]
    assert rows[1]["status"] == "failed" and "C1CC(" in rows[1]["message"]
    assert "row 3" in rows[1]["message"] and "'broken'" in rows[1]["message"]
    assert rows[3]["status"] == "failed" and "empty SMILES" in rows[3]["message"]
    assert rows[0]["status"] == "ok" and rows[0]["message"] == ""
    assert float(rows[0]["alpha_ahp_A3"]) == pytest.approx(10.434, abs=1e-4)
    assert float(rows[2]["mass_u"]) == pytest.approx(18.015, abs=1e-3)
    for col in ("alpha_additive_A3", "alpha_additive_err_A3", "alpha_ahc_A3", "alpha_bs_A3",
                "alpha_llmr_A3", "alpha_llmr_err_A3", "flags"):  # fmt: skip
        assert col in rows[0]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in.csv", "out.csv"]  # no temp left


def test_estimate_table_with_dipoles(tmp_path):
    inp = tmp_path / "in.csv"
    inp.write_text("compound,smiles\nformaldehyde,C=O\nfluoromethane,CF\n", encoding="utf-8")
    out = tmp_path / "out.csv"
    st.estimate_table(inp, out, dipoles=True, conformers=2, temperature_K=300.0)
    rows = _read_out(out)
    # CRC: formaldehyde 2.332 D, fluoromethane 1.858 D; force-field tolerance 35 %
    assert float(rows[0]["dipole_rms_D"]) == pytest.approx(2.332, rel=0.35)
    assert float(rows[1]["dipole_rms_D"]) == pytest.approx(1.858, rel=0.35)


def test_estimate_table_reads_sdf(tmp_path):
    sdf = tmp_path / "in.sdf"
    m1 = Chem.MolFromSmiles("CCO")
    m1.SetProp("_Name", "title-ethanol")
    m1.SetProp("compound", "ethanol")
    m2 = Chem.MolFromSmiles("c1ccncc1")
    m2.SetProp("_Name", "pyridine")
    with Chem.SDWriter(str(sdf)) as w:
        w.write(m1)
        w.write(m2)
    with sdf.open("a", encoding="utf-8") as fh:  # a record RDKit cannot read (5-valent C)
        atom = "    0.0000    0.0000    0.0000 C   0  0  0  0  0  0  0  0  0  0  0  0\n"
        fh.write(
            "pentavalent\n     RDKit          2D\n\n  6  5  0  0  0  0  0  0  0  0999 V2000\n"
            + atom * 6
            + "".join(f"  1  {i}  1  0\n" for i in range(2, 7))
            + "M  END\n$$$$\n"
        )
    recs = st.read_sdf(sdf)
    assert [r.compound for r in recs[:2]] == ["ethanol", "pyridine"]
    out = tmp_path / "out.csv"
    stats = st.estimate_table(sdf, out)
    rows = _read_out(out)
    assert rows[0]["compound"] == "ethanol" and rows[0]["status"] == "ok"
    assert rows[1]["smiles"] == "c1ccncc1"
    assert stats == {"rows": 3, "ok": 2, "failed": 1} and len(recs) == 3
    assert rows[2]["compound"] == "pentavalent" and rows[2]["status"] == "failed"
    assert "record 3" in rows[2]["message"] and "in.sdf" in rows[2]["message"]


def test_estimate_table_structural_errors(tmp_path):
    with pytest.raises(InputError, match=r"nothere\.csv: input file not found"):
        st.estimate_table(tmp_path / "nothere.csv", tmp_path / "o.csv")
    bad = tmp_path / "bad.csv"
    bad.write_text("name,structure\nx,C\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"expected columns 'compound' and 'smiles'.*found"):
        st.estimate_table(bad, tmp_path / "o.csv")
