"""Library runs of the quantum-chemistry step: jobs from the input, option checks, failures."""

from __future__ import annotations

import pytest

from polarbeam.chemistry.qchem import check_scheme, compute_jobs, compute_library
from polarbeam.errors import InputError


def test_jobs_from_a_csv_a_file_and_a_smiles(tmp_path):
    csv = tmp_path / "lib.csv"
    csv.write_text('compound,smiles\nwater,O\n"a, b",CC\n', encoding="utf-8")
    assert compute_jobs(str(csv)) == [("water", "O"), ("a, b", "CC")]
    xyz = tmp_path / "mol-7.xyz"
    xyz.write_text("1\n\nH 0 0 0\n")
    assert compute_jobs(str(xyz)) == [("mol-7", str(xyz))]
    assert compute_jobs("CCO") == [("CCO", "CCO")]


def test_a_csv_without_the_smiles_column_is_one_line_error(tmp_path):
    csv = tmp_path / "lib.csv"
    csv.write_text("compound,formula\nwater,H2O\n")
    with pytest.raises(InputError, match=r"lib\.csv") as err:
        compute_jobs(str(csv))
    assert "\n" not in str(err.value)


def test_unknown_scheme_names_the_valid_ones():
    with pytest.raises(InputError, match=r"expected one of analytic, finite-field, found 'cphf'"):
        check_scheme("cphf")


def test_a_failing_molecule_is_reported_and_the_others_go_on():
    seen = []
    # an unreadable structure fails in the geometry step, before any quantum chemistry runs
    results, failures = compute_library(
        [("bad", "not-a-smiles((")],
        on_start=seen.append,
        on_failure=lambda name, msg: seen.append(f"failed {name}"),
    )
    assert results == [] and [n for n, _ in failures] == ["bad"]
    assert seen == ["bad", "failed bad"]
