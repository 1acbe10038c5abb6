"""Tests of estimate_table: a library of structures in, one CSV row per structure out.

References used (source beside each check): Miller 1990 Table I sums by hand, CIAAW standard
atomic weights, CRC Handbook dipoles (formaldehyde 2.332 D, fluoromethane 1.858 D).
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from rdkit import Chem

from polarbeam import chemistry as chem
from polarbeam.errors import InputError

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
    stats = chem.estimate_table(inp, out)
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
    chem.estimate_table(inp, out, dipoles=True, conformers=2, temperature_K=300.0)
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
    recs = chem.read_sdf(sdf)
    assert [r.compound for r in recs[:2]] == ["ethanol", "pyridine"]
    out = tmp_path / "out.csv"
    stats = chem.estimate_table(sdf, out)
    rows = _read_out(out)
    assert rows[0]["compound"] == "ethanol" and rows[0]["status"] == "ok"
    assert rows[1]["smiles"] == "c1ccncc1"
    assert stats == {"rows": 3, "ok": 2, "failed": 1} and len(recs) == 3
    assert rows[2]["compound"] == "pentavalent" and rows[2]["status"] == "failed"
    assert "record 3" in rows[2]["message"] and "in.sdf" in rows[2]["message"]


def test_estimate_table_structural_errors(tmp_path):
    with pytest.raises(InputError, match=r"nothere\.csv: input file not found"):
        chem.estimate_table(tmp_path / "nothere.csv", tmp_path / "o.csv")
    bad = tmp_path / "bad.csv"
    bad.write_text("name,structure\nx,C\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"expected columns 'compound' and 'smiles'.*found"):
        chem.estimate_table(bad, tmp_path / "o.csv")


def test_dipoles_in_two_processes_write_the_same_file(tmp_path):
    """--jobs spreads the conformer work over processes; every row stays the same."""
    from polarbeam.chemistry.library import estimate_table

    src = tmp_path / "lib.csv"
    src.write_text(
        "compound,smiles,note\nw1,CCO,a\nw2,CC(=O)C,b\nbad,C1CC,c\nw3,OCCO,d\nw4,CCN,e\n",
        encoding="utf-8",
    )
    one, two = tmp_path / "one.csv", tmp_path / "two.csv"
    c1 = estimate_table(src, one, dipoles=True, conformers=3, jobs=1)
    c2 = estimate_table(src, two, dipoles=True, conformers=3, jobs=2)
    assert c1 == c2 == {"rows": 5, "ok": 4, "failed": 1}
    assert one.read_bytes() == two.read_bytes()
