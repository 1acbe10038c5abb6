"""The structure estimates measured: per-class polarizability schemes, atoms, dipole errors.

Sources: reference_values/polarizabilities.csv (CRC Handbook rows, quoted from memory; column
`check` says which a package confirmed); the Schwerdtfeger–Nagle 2018 table of atomic static
polarizabilities as carried by ``mendeleev`` (read at test time); the NIST CCCBDB experimental
dipoles as carried by ``chemicals.dipole`` (read at test time).
"""

from __future__ import annotations

import math
import sys
import zlib

import numpy as np
import pytest
from _chem_reference import POL
from rdkit import Chem
from scipy import constants as sc

from polarbeam import chemistry as chem
from polarbeam._util.optional import has, missing_reason
from polarbeam.chemistry.accuracy import (
    ALPHA_CLASS_SCATTER,
    CLASS_SCHEME,
    DIPOLE_CLASS_FACTOR,
    SCHEME_KEYS,
    alpha_class_stats,
    choose_class_schemes,
    dipole_factor_from_pairs,
    structure_class,
)
from polarbeam.chemistry.atoms import atom_polarizability_A3
from polarbeam.errors import MissingExtraError

ORGANIC_CLASSES = ("aliphatic", "aromatic", "halogenated", "nos")


def _pol_rows():
    out = []
    for r in POL:
        mol = chem.parse_smiles(r["smiles"])
        vals = dict(zip(SCHEME_KEYS, chem.fast_estimates(mol)[3:7], strict=True))
        out.append((r, structure_class(mol), float(r["alpha_A3"]), vals))
    return out


ROWS = _pol_rows()


# ---------------------------------------------------------------------------- classes


@pytest.mark.parametrize(
    ("smiles", "cls"),
    [
        ("CCCC", "aliphatic"),
        ("C=CC#C", "aliphatic"),
        ("c1ccccc1", "aromatic"),
        ("c1ccncc1", "aromatic"),
        ("CCO", "nos"),
        ("CC(=O)N", "nos"),
        ("ClCCl", "halogenated"),
        ("Fc1ccccc1", "halogenated"),
        ("ClC(Cl)(Cl)Cl", "halogenated"),
        ("O", "inorganic"),
        ("O=C=O", "inorganic"),
        ("FC(F)(F)F", "inorganic"),
        ("[Ar]", "atom"),
        ("[Cs]", "atom"),
    ],
)
def test_structure_class(smiles, cls):
    assert structure_class(chem.parse_smiles(smiles)) == cls


def test_table_classes_match_the_reference_class_column():
    for r, cls, _, _ in ROWS:
        assert (cls in ORGANIC_CLASSES) == (r["class"] == "organic"), r["compound"]


# ---------------------------------------------------------------------------- polarizabilities


def test_measured_scatter_and_class_schemes_are_what_the_table_gives():
    """The constants of polarbeam.chemistry.accuracy are re-measured on reference_values/."""
    stats = alpha_class_stats((cls, a, v) for _, cls, a, v in ROWS)
    assert set(stats) == set(ALPHA_CLASS_SCATTER)
    for cls, per in stats.items():
        for k, s in per.items():
            ref = ALPHA_CLASS_SCATTER[cls][k]
            assert s.n == ref.n
            assert s.mare == pytest.approx(ref.mare, abs=1e-4), (cls, k)
            assert s.rms_rel == pytest.approx(ref.rms_rel, abs=1e-4), (cls, k)
    assert choose_class_schemes(stats) == CLASS_SCHEME


def _default_rel_errors(rows):
    return {
        r["compound"]: (cls, chem.estimate(r["smiles"], r["compound"]).alpha_additive_A3 / a - 1)
        for r, cls, a, _ in rows
    }


def test_additive_default_error_on_the_organic_rows_per_class():
    """MARE of the per-class default on the organic rows (CRC values from memory), printed per
    class.  Measured: 2.01 % in-sample (aliphatic 1.57, aromatic 2.10, halogenated 2.86, N/O/S
    1.97 %); the issue's goal of 2.0 % is not met (see the cross-validated test below)."""
    errs = _default_rel_errors([x for x in ROWS if x[1] in ORGANIC_CLASSES])
    per = {c: [abs(e) for cls, e in errs.values() if cls == c] for c in ORGANIC_CLASSES}
    for c, e in per.items():
        print(f"{c:12s} n={len(e):2d} MARE {100 * np.mean(e):.2f} % ({CLASS_SCHEME[c]})")
    mare = np.mean([abs(e) for _, e in errs.values()])
    print(f"organic      n={len(errs)} MARE {100 * mare:.2f} %")
    assert mare <= 0.0205
    for c, e in per.items():
        assert np.mean(e) == pytest.approx(ALPHA_CLASS_SCATTER[c][CLASS_SCHEME[c]].mare, abs=1e-4)


def _loo_mare():
    """Leave-one-out: each organic molecule predicted with the scheme chosen without it."""
    org = [x for x in ROWS if x[1] in ORGANIC_CLASSES]
    errs = []
    for j, (_, cls, a, vals) in enumerate(org):
        rest = [(c, aa, v) for i, (_, c, aa, v) in enumerate(org) if i != j and c == cls]
        key = choose_class_schemes(alpha_class_stats(rest))[cls]
        errs.append(abs(vals[key] / a - 1))
    return float(np.mean(errs))


def test_additive_default_cross_validated():
    """The per-class choice is made on the same 31 rows it is judged on; leave-one-out removes
    that advantage.  Measured 2.14 % (the in-sample 2.01 % is not flattering itself much)."""
    loo = _loo_mare()
    print(f"leave-one-out MARE of the per-class choice: {100 * loo:.2f} %")
    assert loo <= 0.022


@pytest.mark.xfail(strict=True, reason="not met on the from-memory table: LOO MARE 2.14 % > 2.0 %")
def test_additive_default_meets_two_percent_cross_validated():
    assert _loo_mare() <= 0.020


def test_estimate_carries_the_measured_class_scatter():
    e = chem.estimate("c1ccccc1", "benzene")
    bs = ALPHA_CLASS_SCATTER["aromatic"]["bs"]
    assert e.structure_class == "aromatic" and e.default_scheme == "bs"
    assert e.alpha_additive_A3 == e.alpha_bs_A3
    assert e.alpha_additive_err_A3 == pytest.approx(bs.rms_rel * e.alpha_bs_A3)
    assert e.alpha_method == "additive:bs" and "n=3" in e.alpha_err_method
    named = chem.estimate("c1ccccc1", "benzene", scheme="ahc")
    assert named.alpha_additive_A3 == named.alpha_ahc_A3
    assert named.alpha_additive_err_A3 == pytest.approx(
        ALPHA_CLASS_SCATTER["aromatic"]["ahc"].rms_rel * named.alpha_ahc_A3
    )


def test_z_scores_on_the_table_are_of_order_one():
    """With the measured scatter as 1σ the z-scores of the organic rows (combined with the
    table's own 1σ) have an RMS of order one (measured 0.8), not 2-3 as with paper accuracies."""
    z = []
    for r, cls, a, _ in ROWS:
        if cls in ORGANIC_CLASSES:
            e = chem.estimate(r["smiles"], r["compound"])
            z.append(
                (a - e.alpha_additive_A3)
                / math.hypot(e.alpha_additive_err_A3, float(r["alpha_err_A3"]))
            )
    rms = float(np.sqrt(np.mean(np.square(z))))
    print(f"RMS z = {rms:.2f} over {len(z)}")
    assert 0.5 <= rms <= 1.2


# ---------------------------------------------------------------------------- atoms

ATOMS = ["He", "Ne", "Ar", "Kr", "Xe", "Li", "Na", "K", "Rb", "Cs", "Be", "Mg", "Ca", "Sr", "Ba"]


@pytest.mark.skipif(not has("mendeleev"), reason=missing_reason("mendeleev"))
@pytest.mark.parametrize("symbol", ATOMS)
def test_atoms_from_the_schwerdtfeger_nagle_table(symbol):
    """Source: Schwerdtfeger & Nagle 2018 table, read from mendeleev at test time (atomic units,
    converted with scipy.constants: a0^3 = 0.148185 A^3)."""
    from mendeleev import element

    el = element(symbol)
    au_a3 = (sc.physical_constants["Bohr radius"][0] * 1e10) ** 3
    e = chem.estimate(f"[{symbol}]", symbol)
    assert e.structure_class == "atom" and e.alpha_method == "atom-table"
    assert e.default_scheme == "atom"
    assert abs(e.alpha_additive_A3 - el.dipole_polarizability * au_a3) <= (
        el.dipole_polarizability_unc * au_a3 + 1e-9
    )
    assert e.alpha_additive_err_A3 == pytest.approx(el.dipole_polarizability_unc * au_a3)


@pytest.mark.skipif(not has("mendeleev"), reason=missing_reason("mendeleev"))
def test_atom_values_against_remembered_table_entries():
    # Schwerdtfeger-Nagle 2018 (from memory): He 1.38375(2), Ne 2.6611(3), Na 162.7(5) a.u.
    au_a3 = (sc.physical_constants["Bohr radius"][0] * 1e10) ** 3
    for sym, au in (("He", 1.38375), ("Ne", 2.6611), ("Na", 162.7)):
        assert atom_polarizability_A3(sym)[0] == pytest.approx(au * au_a3, rel=1e-4)


def test_atom_without_mendeleev_is_one_line(monkeypatch):
    atom_polarizability_A3.cache_clear()
    monkeypatch.setitem(sys.modules, "mendeleev", None)
    with pytest.raises(
        MissingExtraError,
        match=r"^the polarizability of a single atom needs "
        r"mendeleev, which is not installed: pip install 'polarbeam\[atoms\]'",
    ):
        chem.estimate("[Xe]", "xenon")
    atom_polarizability_A3.cache_clear()


def test_atom_row_fails_alone_without_mendeleev(monkeypatch, tmp_path):
    atom_polarizability_A3.cache_clear()
    monkeypatch.setitem(sys.modules, "mendeleev", None)
    inp = tmp_path / "lib.csv"
    inp.write_text("compound,smiles\nxenon,[Xe]\nethanol,CCO\n", encoding="utf-8")
    counts = chem.estimate_table(inp, tmp_path / "out.csv")
    assert counts == {"rows": 2, "ok": 1, "failed": 1}
    text = (tmp_path / "out.csv").read_text(encoding="utf-8")
    assert "compound 'xenon': the polarizability of a single atom needs mendeleev" in text
    atom_polarizability_A3.cache_clear()


# ---------------------------------------------------------------------------- dipoles


def _cccbdb_pairs():
    """(class, μ_exp, μ_est, name) for the CCCBDB molecules above 0.5 D (chemicals.dipole)."""
    from polarbeam.chemistry.refdata import cccbdb_dipoles

    allowed = {1, 6, 7, 8, 9, 15, 16, 17, 35, 53}
    out = []
    for r in cccbdb_dipoles():
        if r.dipole_D <= 0.5 or "." in r.smiles:
            continue
        mol = chem.parse_smiles(r.smiles)
        if Chem.GetFormalCharge(mol) or any(a.GetNumRadicalElectrons() for a in mol.GetAtoms()):
            continue
        elements = {a.GetAtomicNum() for a in Chem.AddHs(mol).GetAtoms()}
        if not elements <= allowed or len(elements) < 2:
            continue
        ens = chem.conformer_ensemble(mol, r.name, n_conformers=10)
        out.append((structure_class(mol), r.dipole_D, ens.rms_dipole_D(300.0), r.name))
    return out


@pytest.fixture(scope="module")
def cccbdb_pairs():
    if not has("chemicals"):
        pytest.skip(missing_reason("chemicals"))
    return _cccbdb_pairs()


@pytest.mark.slow
def test_dipole_error_covers_cccbdb_organics(cccbdb_pairs):
    """Source: NIST CCCBDB experimental dipoles (chemicals.dipole), organics with μ > 0.5 D.
    The fraction with |exp − estimate| < dipole_rms_err_D must lie in 0.60–0.80 (a 1σ)."""
    org = [p for p in cccbdb_pairs if p[0] in ORGANIC_CLASSES]
    inside = [abs(e - c) < chem.dipole_error_D(c, cls) for cls, e, c, _ in org]
    mare = np.mean([abs(c / e - 1) for _, e, c, _ in org])
    frac = float(np.mean(inside))
    print(f"CCCBDB organics n={len(org)}: fraction inside 1σ {frac:.3f}, MARE {100 * mare:.1f} %")
    assert len(org) >= 180  # 191 with chemicals 1.5.2
    assert 0.60 <= frac <= 0.80
    assert 0.15 <= mare <= 0.35  # measured 24.3 % (coverage 0.681): rough, and its error says so


@pytest.mark.slow
def test_dipole_factors_are_what_cccbdb_gives(cccbdb_pairs):
    for cls, f in DIPOLE_CLASS_FACTOR.items():
        pairs = [(e, c) for k, e, c, _ in cccbdb_pairs if k == cls]
        assert dipole_factor_from_pairs(pairs) == pytest.approx(f, abs=0.002), cls


@pytest.mark.slow
def test_dipole_error_model_holds_out_of_sample(cccbdb_pairs):
    """Two-fold cross-validation (split by a hash of the name): factors fitted on one half cover
    0.60–0.80 of the other half.  Measured 0.72 and 0.67."""
    org = [p for p in cccbdb_pairs if p[0] in ORGANIC_CLASSES]
    fold = [zlib.crc32(name.encode()) % 2 for *_, name in org]
    for k in (0, 1):
        fit = {
            cls: dipole_factor_from_pairs(
                [(e, c) for (c0, e, c, _), f in zip(org, fold, strict=True) if f == k and c0 == cls]
            )
            for cls in ORGANIC_CLASSES
        }
        test = [(cls, e, c) for (cls, e, c, _), f in zip(org, fold, strict=True) if f != k]
        frac = np.mean([abs(e - c) < fit[cls] * max(c, 0.5) for cls, e, c in test])
        print(f"fold {k}: fitted {fit}, coverage on the other half {frac:.3f}")
        assert 0.60 <= frac <= 0.80


# ---------------------------------------------------------------------------- estimate table

OLD_COLUMNS = [
    "compound", "smiles", "mass_u", "mass_mono_u", "n_electrons", "alpha_additive_A3",
    "alpha_additive_err_A3", "default_scheme", "alpha_ahp_A3", "alpha_ahp_err_A3",
    "alpha_ahc_A3", "alpha_ahc_err_A3", "alpha_bs_A3", "alpha_bs_err_A3", "alpha_llmr_A3",
    "alpha_llmr_err_A3", "flags",
]  # fmt: skip
OLD_DIPOLE_COLUMNS = ["dipole_rms_D", "n_conformers", "charge_model", "temperature_K"]


def test_estimate_table_keeps_its_columns_and_adds_uncertainty_and_method(tmp_path):
    import csv

    inp = tmp_path / "lib.csv"
    inp.write_text("compound,smiles\nethanol,CCO\nbenzene,c1ccccc1\n", encoding="utf-8")
    out = tmp_path / "out.csv"
    assert chem.estimate_table(inp, out, dipoles=True)["ok"] == 2
    with out.open(encoding="utf-8") as fh:
        header = next(csv.reader(fh))
    assert [c for c in header if c in OLD_COLUMNS + OLD_DIPOLE_COLUMNS] == (
        OLD_COLUMNS + OLD_DIPOLE_COLUMNS
    )
    new = ["structure_class", "alpha_method", "alpha_err_method"]
    assert {*new, "dipole_rms_err_D", "dipole_method"} <= set(header)
    rows = {r["compound"]: r for r in csv.DictReader(out.open(encoding="utf-8"))}
    eth = rows["ethanol"]
    assert eth["structure_class"] == "nos" and eth["alpha_method"] == "additive:llmr"
    mu = float(eth["dipole_rms_D"])
    assert float(eth["dipole_rms_err_D"]) == pytest.approx(
        DIPOLE_CLASS_FACTOR["nos"] * max(mu, 0.5), rel=1e-5
    )
    assert eth["dipole_method"] == "mmff-conformers"
    assert float(eth["alpha_additive_err_A3"]) == pytest.approx(
        ALPHA_CLASS_SCATTER["nos"]["llmr"].rms_rel * float(eth["alpha_llmr_A3"]), rel=1e-5
    )
    assert rows["benzene"]["default_scheme"] == "bs"
