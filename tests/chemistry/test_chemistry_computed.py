"""Tests of computed values (polarbeam.chemistry): CSV import, units, cclib import, parity."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from scipy import constants as sc

from polarbeam._util.optional import missing_reason
from polarbeam.chemistry import (
    ALPHA_UNITS,
    COMPARISON_COLUMNS,
    ELECTRONIC_VS_VIBRATIONAL_NOTE,
    PARITY_COLUMNS,
    SERIES_COMPARISON_COLUMNS,
    alpha_a3_from_unit,
    anisotropy,
    compare,
    compare_series,
    isotropic_average,
    orientational_a3,
    parity_table,
    read_computed,
    read_outputs,
)
from polarbeam.errors import InputError, RowValueError

HEADER = "compound,method,alpha,alpha_unit,dipole_D,alpha_xx,alpha_yy,alpha_zz\n"
BOHR_A = sc.physical_constants["Bohr radius"][0] * 1e10


def write(tmp_path, text, name="computed.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


# ---------------------------------------------------------------- unit conversions (CODATA)


def test_bohr3_in_angstrom3_matches_codata():
    # 1 bohr³ = a0³ = 0.148184711 Å³ (CODATA Bohr radius 0.529177210... Å, via scipy.constants)
    assert ALPHA_UNITS["bohr3"] == pytest.approx(BOHR_A**3, rel=1e-12)
    assert alpha_a3_from_unit(1.0, "bohr3") == pytest.approx(0.148184711, rel=1e-8)


def test_atomic_unit_of_polarizability_is_4pi_eps0_a0_cubed():
    # CODATA: atomic unit of electric polarizability e²a0²/Eh = 4πε0·a0³ (scipy.constants)
    au = sc.physical_constants["atomic unit of electric polarizability"][0]
    assert alpha_a3_from_unit(au, "C m2/V") == pytest.approx(BOHR_A**3, rel=1e-9)


def test_si_polarizability_to_angstrom3():
    # 1 Å³ of polarizability volume = 4πε0·1e-30 m³ = 1.11265005545e-40 C m²/V
    # (4πε0 = 1.11265005545e-10 F/m, CODATA via scipy.constants; value from memory)
    assert alpha_a3_from_unit(4 * math.pi * sc.epsilon_0 * 1e-30, "C m2/V") == pytest.approx(1.0)
    assert alpha_a3_from_unit(1.11265005545e-40, "C m2/V") == pytest.approx(1.0, rel=1e-9)
    assert alpha_a3_from_unit(2.5, "A3") == 2.5


def test_unknown_unit_lists_valid_ones():
    with pytest.raises(InputError, match=r"expected one of 'A3', 'bohr3', 'C m2/V', found 'cm3'"):
        alpha_a3_from_unit(1.0, "cm3")


def test_orientational_polarizability_against_hand_value():
    # μ²/(3kT)/(4πε0) for μ = 1.85 D at 300 K, computed here from scipy.constants directly:
    mu = 1.85 * 1e-21 / sc.c
    expected = mu**2 / (3 * sc.k * 300.0) / (4 * math.pi * sc.epsilon_0) * 1e30
    assert orientational_a3(1.85, 300.0) == pytest.approx(expected, rel=1e-12)
    # hand calculation: (6.1709e-30)² / (1.24258e-20) / 1.11265e-40 ≈ 27.54 Å³
    assert orientational_a3(1.85, 300.0) == pytest.approx(27.54, rel=2e-3)


def test_anisotropy_invariant():
    # symmetric top (a, a, b): Δα = |b − a| (definition of the invariant, common practice)
    assert anisotropy(np.diag([1.2, 1.2, 1.8])) == pytest.approx(0.6)
    # rotating the tensor leaves Δα and tr/3 unchanged
    rng = np.random.default_rng(3)
    q, _ = np.linalg.qr(rng.normal(size=(3, 3)))
    t = np.diag([1.3, 1.4, 1.65])
    rotated = q @ t @ q.T
    assert anisotropy(rotated) == pytest.approx(math.sqrt(0.0975), rel=1e-12)
    assert isotropic_average(rotated) == pytest.approx(4.35 / 3, rel=1e-12)


# ---------------------------------------------------------------- CSV import


def test_read_computed_converts_units_and_keeps_methods(tmp_path):
    p = write(
        tmp_path,
        "# invented numbers for the test\n"
        + HEADER
        + "alpha-1,b3lyp/def2-svpd,1.45,A3,1.85,,,\n"
        + "alpha-1,hf/def2-svpd,10.0,bohr3,2.05,,,\n"
        + "\n"
        + "beta-2,b3lyp/def2-svpd,,A3,0,1.2,1.2,1.8\n"
        + f"gamma-3,ccsd,{2.0 * 4 * math.pi * sc.epsilon_0 * 1e-30!r},C m2/V,,,,\n",
    )
    df = read_computed(p)
    assert list(df["compound"]) == ["alpha-1", "alpha-1", "beta-2", "gamma-3"]
    assert df.loc[0, "alpha_computed_A3"] == 1.45
    assert df.loc[1, "alpha_computed_A3"] == pytest.approx(10.0 * 0.148184711, rel=1e-8)
    assert df.loc[2, "alpha_computed_A3"] == pytest.approx(1.4)  # mean of the components
    assert df.loc[2, "anisotropy_A3"] == pytest.approx(0.6)
    assert math.isnan(df.loc[0, "anisotropy_A3"])
    assert df.loc[3, "alpha_computed_A3"] == pytest.approx(2.0)
    assert math.isnan(df.loc[3, "dipole_computed_D"])  # blank dipole = not computed
    assert df.loc[2, "source"] == "computed.csv:6"


def test_components_in_bohr3_are_converted(tmp_path):
    p = write(tmp_path, HEADER + "delta,hf,10,bohr3,0,9,10,11\n")
    df = read_computed(p)
    f = BOHR_A**3
    assert df.loc[0, "alpha_xx_A3"] == pytest.approx(9 * f)
    assert df.loc[0, "anisotropy_A3"] == pytest.approx(math.sqrt(3.0) * f)


def test_missing_column_is_structural(tmp_path):
    p = write(tmp_path, "compound,method,alpha,dipole_D\nx,hf,1.0,0\n")
    with pytest.raises(
        InputError, match=r"computed.csv: line 1: expected columns .*missing alpha_unit"
    ):
        read_computed(p)


def test_missing_file_and_empty_file(tmp_path):
    with pytest.raises(InputError, match=r"nope.csv: computed-values file not found"):
        read_computed(tmp_path / "nope.csv")
    with pytest.raises(InputError, match=r"expected a header row"):
        read_computed(write(tmp_path, "# only a comment\n"))


def test_bad_unit_names_file_line_column(tmp_path):
    p = write(tmp_path, HEADER + "x,hf,1.0,A3,0,,,\ny,hf,1.0,cm3,0,,,\n")
    with pytest.raises(
        RowValueError,
        match=r"computed.csv: line 3 \(compound 'y'\), column alpha_unit: expected one of "
        r"'A3', 'bohr3', 'C m2/V', found 'cm3'",
    ):
        read_computed(p)


def test_non_numeric_value_names_file_line_column(tmp_path):
    p = write(tmp_path, HEADER + "x,hf,abc,A3,0,,,\n")
    with pytest.raises(
        RowValueError,
        match=r"line 2 \(compound 'x'\), column alpha: expected a number, found 'abc'",
    ):
        read_computed(p)
    p = write(tmp_path, HEADER + "x,hf,1.0,A3,-1,,,\n")
    with pytest.raises(RowValueError, match=r"column dipole_D: expected a magnitude >= 0"):
        read_computed(p)


def test_partial_components_and_inconsistent_trace(tmp_path):
    p = write(tmp_path, HEADER + "x,hf,1.0,A3,0,1.0,,1.0\n")
    with pytest.raises(RowValueError, match=r"expected all three or none, found alpha_yy empty"):
        read_computed(p)
    p = write(tmp_path, HEADER + "x,hf,1.5,A3,0,1.0,1.0,1.0\n")
    with pytest.raises(RowValueError, match=r"expected the mean of alpha_xx.*found 1.5"):
        read_computed(p)


def test_duplicate_compound_method(tmp_path):
    p = write(tmp_path, HEADER + "x,hf,1.0,A3,0,,,\nx,hf,1.1,A3,0,,,\n")
    with pytest.raises(RowValueError, match=r"line 3 .*found 'hf' again \(first on line 2\)"):
        read_computed(p)


def test_failures_are_collected_per_compound(tmp_path):
    p = write(
        tmp_path,
        HEADER
        + "good-1,hf,1.0,A3,0,,,\n"
        + "bad-1,hf,1,0,A3,0,,,\n"  # one field too many
        + "bad-2,hf,n/a,A3,0,,,\n"
        + "good-2,hf,2.0,A3,0.5,,,\n",
    )
    failures: list[str] = []
    df = read_computed(p, failures)
    assert list(df["compound"]) == ["good-1", "good-2"]
    assert len(failures) == 2
    assert "line 3" in failures[0] and "expected 8 fields" in failures[0]
    assert "line 4 (compound 'bad-2'), column alpha" in failures[1]


# ---------------------------------------------------------------- comparison and parity


def _computed_table():
    return pd.DataFrame(
        {
            "compound": ["p", "q", "r", "p", "q", "r"],
            "method": ["m1", "m1", "m1", "m2", "m2", "m2"],
            "alpha_computed_A3": [9.6, 19.0, 4.75, 10.2, 20.4, 5.0],
            "dipole_computed_D": [0.0, 1.0, 2.0, 0.0, 1.1, 2.1],
        }
    )


def _measured_table():
    return pd.DataFrame(
        {
            "compound": ["p", "q", "r", "s"],
            "alpha_A3": [10.0, 20.0, 5.0, 7.0],
            "alpha_err_A3": [0.3, 0.2, 0.1, 0.1],
        }
    )


def test_compare_arithmetic():
    cmp = compare(_measured_table(), _computed_table(), temperatures=[300.0])
    assert list(cmp.columns[: len(COMPARISON_COLUMNS)]) == COMPARISON_COLUMNS
    assert len(cmp) == 6  # 's' has no computed value
    row = cmp[(cmp.compound == "q") & (cmp.qc_method == "m1")].iloc[0]
    assert row["alpha_diff_A3"] == pytest.approx(1.0)  # measured − computed = 20 − 19
    assert row["alpha_diff_err_A3"] == 0.2  # experimental error only
    # α + μ²/(3kT) with μ = 1 D, 300 K: μ²/(3kT)/(4πε0) from scipy.constants
    mu = 1e-21 / sc.c
    orient = mu**2 / (3 * sc.k * 300.0) / (4 * math.pi * sc.epsilon_0) * 1e30
    assert row["alpha_eff_computed_A3_300K"] == pytest.approx(19.0 + orient, rel=1e-12)


def test_compare_with_measured_dipole_and_bad_tables():
    meas = _measured_table().assign(dipole_D=[0.0, 1.05, 2.2, 0.0], dipole_err_D=0.05)
    cmp = compare(meas, _computed_table())
    row = cmp[(cmp.compound == "r") & (cmp.qc_method == "m2")].iloc[0]
    assert row["dipole_diff_D"] == pytest.approx(0.1)
    with pytest.raises(
        InputError, match=r"measured table: expected columns .*missing alpha_err_A3"
    ):
        compare(pd.DataFrame({"compound": ["p"], "alpha_A3": [1.0]}), _computed_table())
    dup = pd.concat([_computed_table(), _computed_table().iloc[:1]])
    with pytest.raises(InputError, match=r"computed table: .*'p' / 'm1' more than once"):
        compare(_measured_table(), dup)


def test_compare_series_langevin_debye():
    series = pd.DataFrame(
        {
            "compound": ["r", "r"],
            "temperature_K": [300.0, 400.0],
            "alpha_eff_A3": [70.0, 60.0],
            "alpha_eff_err_A3": [1.0, 2.0],
        }
    )
    out = compare_series(series, _computed_table())
    assert list(out.columns) == SERIES_COMPARISON_COLUMNS
    assert len(out) == 4
    row = out[(out.qc_method == "m1") & (out.temperature_K == 400.0)].iloc[0]
    mu = 2.0e-21 / sc.c  # 2 D
    orient = mu**2 / (3 * sc.k * 400.0) / (4 * math.pi * sc.epsilon_0) * 1e30
    assert row["orientational_computed_A3"] == pytest.approx(orient, rel=1e-12)
    assert row["alpha_eff_diff_A3"] == pytest.approx(60.0 - 4.75 - orient, rel=1e-12)
    assert row["alpha_eff_diff_err_A3"] == 2.0
    bad = series.assign(temperature_K=[300.0, -1.0])
    with pytest.raises(InputError, match=r"row 1: column temperature_K: expected .* found -1.0"):
        compare_series(bad, _computed_table())


def test_parity_table_against_hand_numbers():
    par = parity_table(compare(_measured_table(), _computed_table()))
    assert list(par.columns) == PARITY_COLUMNS
    m1 = par[par.qc_method == "m1"].iloc[0]
    # m1: computed − measured = −0.4, −1.0, −0.25 Å³; relative −4 %, −5 %, −5 %
    assert m1["n_compounds"] == 3
    assert m1["mean_signed_dev_A3"] == pytest.approx(-0.55)
    assert m1["mean_signed_dev_pct"] == pytest.approx(-14.0 / 3)
    assert m1["mean_abs_dev_A3"] == pytest.approx(0.55)
    assert m1["rms_dev_A3"] == pytest.approx(math.sqrt((0.16 + 1.0 + 0.0625) / 3))
    assert m1["max_abs_dev_A3"] == pytest.approx(1.0)
    assert m1["n_within_2sigma"] == 1  # only p: |−0.4| ≤ 0.6
    assert m1["verdict"] == "m1 underestimates the set by 4.7 % on average (n=3)"
    m2 = par[par.qc_method == "m2"].iloc[0]
    # m2: +0.2, +0.4, 0.0 → +2 %, +2 %, 0 %
    assert m2["mean_signed_dev_pct"] == pytest.approx(4.0 / 3)
    assert m2["verdict"].startswith("m2 overestimates the set by 1.3 %")


def test_note_names_both_contributions():
    assert "vibrational" in ELECTRONIC_VS_VIBRATIONAL_NOTE
    assert "electronic only" in ELECTRONIC_VS_VIBRATIONAL_NOTE


# ---------------------------------------------------------------- cclib import


def test_read_outputs_through_cclib(tmp_path):
    pytest.importorskip("cclib", reason=missing_reason("cclib"))
    from _qc_output_writer import nwchem_text

    symbols = ["O", "H", "H"]
    xyz = [(0.0, 0.0, 0.1173), (0.0, 0.757, -0.4691), (0.0, -0.757, -0.4691)]
    alpha_au = [[9.9, 0.0, 0.0], [0.0, 9.3, 0.0], [0.0, 0.0, 9.6]]
    qc = tmp_path / "qc"
    qc.mkdir()
    (qc / "aqua.out").write_text(
        nwchem_text(symbols, xyz, dipole_au=[0.0, 0.0, 0.73], alpha_au=alpha_au)
    )
    (qc / "nopol.out").write_text(nwchem_text(symbols, xyz, dipole_au=[0.0, 0.0, 0.73]))
    (qc / "nodip.out").write_text(nwchem_text(symbols, xyz, alpha_au=alpha_au))
    (qc / "junk.out").write_text("this is not a quantum-chemistry output\n")
    df, notes = read_outputs(["qc/*.out", "missing/*.log"], tmp_path)
    assert sorted(df["compound"]) == ["aqua", "nodip"]
    row = df[df.compound == "aqua"].iloc[0]
    assert row["qc_method"] == "B3LYP/aug-cc-pvdz"
    # polarizability in a.u. → Å³ with the CODATA Bohr radius
    assert row["alpha_computed_A3"] == pytest.approx(9.6 * BOHR_A**3, rel=1e-9)
    assert row["alpha_xx_A3"] == pytest.approx(9.3 * BOHR_A**3, rel=1e-9)
    assert row["anisotropy_A3"] == pytest.approx(math.sqrt(0.27) * BOHR_A**3, rel=1e-9)
    # cclib stores the dipole in debye: 0.73 e·a0 × (e·a0 in D = 2.541746..., CODATA)
    ea0_debye = sc.physical_constants["atomic unit of electric dipole mom."][0] / (1e-21 / sc.c)
    assert row["dipole_computed_D"] == pytest.approx(0.73 * ea0_debye, rel=1e-6)
    assert math.isnan(df[df.compound == "nodip"].iloc[0]["dipole_computed_D"])
    text = "\n".join(notes)
    assert "nopol.out: no polarizability" in text
    assert "junk.out: not a format cclib recognises" in text
    assert "nodip.out: no dipole moment" in text
    assert "missing/*.log: no file matched" in text


def test_missing_cclib_gives_one_line_install_hint(monkeypatch, tmp_path):
    import importlib

    from polarbeam.errors import MissingExtraError

    real = importlib.import_module

    def no_cclib(name, *args, **kwargs):
        if name.split(".")[0] == "cclib":
            raise ImportError("No module named 'cclib'")
        return real(name, *args, **kwargs)

    monkeypatch.setattr(importlib, "import_module", no_cclib)
    with pytest.raises(MissingExtraError, match=r"needs cclib, .*pip install 'polarbeam\[qc\]'"):
        read_outputs(["*.out"], tmp_path)


# ------------------------------------------------- units in the column names (computed.csv)


def test_units_in_the_names_are_read_like_the_old_layout(tmp_path):
    """`qc_method, alpha_A3` (or `alpha_bohr3`) give the same table as `method, alpha,
    alpha_unit`; only the old layout gets the deprecation note."""
    old = write(tmp_path, HEADER + "delta,hf,10,bohr3,0.5,9,10,11\n")
    notes: list[str] = []
    a = read_computed(old, notes=notes)
    assert len(notes) == 1 and "deprecated: name them qc_method, alpha_A3" in notes[0]
    assert "\n" not in notes[0]
    new = tmp_path / "new.csv"
    new.write_text(
        "compound,qc_method,alpha_bohr3,dipole_D,alpha_xx_bohr3,alpha_yy_bohr3,alpha_zz_bohr3\n"
        "delta,hf,10,0.5,9,10,11\n",
        encoding="utf-8",
    )
    notes.clear()
    b = read_computed(new, notes=notes)
    assert notes == []
    cols = ["compound", "qc_method", "alpha_computed_A3", "dipole_computed_D", "alpha_xx_A3"]
    pd.testing.assert_frame_equal(a[cols], b[cols])
    assert b.loc[0, "alpha_computed_A3"] == pytest.approx(10 * BOHR_A**3)


def test_units_in_the_names_errors_name_the_columns_of_the_file(tmp_path):
    p = tmp_path / "computed.csv"
    p.write_text("compound,qc_method,alpha_A3\nx,hf,1\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"expected columns compound, qc_method, alpha_A3, "
                       r"dipole_D, missing dipole_D"):  # fmt: skip
        read_computed(p)
    p.write_text("compound,qc_method,alpha_A3,dipole_D\nx,hf,-1,0\n", encoding="utf-8")
    with pytest.raises(RowValueError, match=r"column alpha_A3: expected a value > 0"):
        read_computed(p)


def test_compute_output_round_trips_through_the_reader(tmp_path):
    """write_computed writes units in the names; read_computed gives back the same values."""
    from polarbeam.chemistry.computed import COMPUTED_CSV_COLUMNS
    from polarbeam.chemistry.qchem import ComputedResult, write_computed

    r = ComputedResult(
        name="w",
        method="hf",
        basis="sto-3g",
        polarizability_method="CPHF",
        alpha_si=1.0e-40,
        dipole_si=5.0e-30,
        geometry=None,
        alpha_tensor_si=((0.9e-40, 0, 0), (0, 1.0e-40, 0), (0, 0, 1.1e-40)),
    )
    out = tmp_path / "computed.csv"
    write_computed([r], out)
    assert out.read_text(encoding="utf-8").splitlines()[0] == ",".join(COMPUTED_CSV_COLUMNS)
    back = read_computed(out)
    assert back.loc[0, "qc_method"] == "hf/sto-3g"
    assert back.loc[0, "alpha_computed_A3"] == pytest.approx(r.alpha_A3, rel=1e-12)
    assert back.loc[0, "dipole_computed_D"] == pytest.approx(r.dipole_D, rel=1e-12)
