"""``polarbeam compute`` on the command line: option names in refusals, --name, the header."""

from __future__ import annotations

import pytest
from typer.testing import CliRunner

from polarbeam._util.optional import missing_reason
from polarbeam.chemistry import read_computed
from polarbeam.cli.commands import app

pytest.importorskip("pyscf", reason=missing_reason("pyscf"))


def _run(args, tmp_path, monkeypatch):
    monkeypatch.setenv("POLARBEAM_CACHE_DIR", str(tmp_path / "cache"))  # no cache hit
    return CliRunner().invoke(app, ["compute", *args])


def test_a_refusal_names_the_command_line_options(tmp_path, monkeypatch):
    out = tmp_path / "c.csv"
    r = _run(["O", "--method", "hf", "--basis", "sto-3g", "--max-seconds", "10 us", "-o", str(out)],
             tmp_path, monkeypatch)  # fmt: skip
    assert r.exit_code == 2 and not out.exists()
    line = next(ln for ln in r.output.splitlines() if ln.startswith("failed:"))
    # 10 µs given with a unit is the limit the refusal quotes (1e-05 s)
    assert "limit 1e-05 s" in line
    assert "use --d4 for a fast estimate, a smaller --basis, or raise --max-seconds" in line
    assert "max_seconds" not in line and "d4_polarizability()" not in line


def test_a_conformer_refusal_names_the_command_line_options(tmp_path, monkeypatch):
    r = _run(["CCO", "--conformers", "3", "--max-seconds", "1e-6", "-o", str(tmp_path / "c.csv")],
             tmp_path, monkeypatch)  # fmt: skip
    assert r.exit_code == 2
    line = next(ln for ln in r.output.splitlines() if ln.startswith("failed:"))
    assert "a smaller --conformers, a smaller --basis, or raise --max-seconds" in line
    assert "max_seconds" not in line


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["--max-seconds", "0"], "error: --max-seconds: expected a time > 0 s, found '0'"),
        (["--max-seconds", "3 m"], "error: --max-seconds: expected a unit of s, found 'm'"),
        (["--temperature", "3 V"], "error: --temperature: expected a unit of K, found 'V'"),
        (["--name", " "], "error: --name: expected a compound name, found an empty string"),
    ],
)
def test_bad_options_are_one_line_errors_named_as_typed(tmp_path, monkeypatch, args, message):
    r = _run(["O", "-o", str(tmp_path / "c.csv"), *args], tmp_path, monkeypatch)
    assert r.exit_code == 2
    assert next(ln for ln in r.output.splitlines() if ln.startswith("error:")).startswith(message)


def test_name_with_a_csv_is_refused(tmp_path, monkeypatch):
    lib = tmp_path / "lib.csv"
    lib.write_text("compound,smiles\nwater,O\n", encoding="utf-8")
    r = _run([str(lib), "--name", "x", "-o", str(tmp_path / "c.csv")], tmp_path, monkeypatch)
    assert r.exit_code == 2 and "error: --name: expected one molecule" in r.output


def test_name_and_the_header_of_what_was_run(tmp_path, monkeypatch):
    out = tmp_path / "c.csv"
    r = _run(["O", "--method", "hf", "--basis", "sto-3g", "--name", "water", "-o", str(out)],
             tmp_path, monkeypatch)  # fmt: skip
    assert r.exit_code == 0, r.output
    header = "compute: hf/sto-3g, analytic polarizability; 1 molecule(s) -> "
    assert r.output.splitlines()[0].startswith(header)  # the header says what is run
    assert "water:" in r.output.splitlines()
    table = read_computed(out)
    assert list(table["compound"]) == ["water"]
    # RHF/STO-3G water: a small basis without diffuse functions gives a small α (well below the
    # experimental 1.45 Å³, CRC Handbook, from memory) and μ ≈ 1.7 D (PySCF, from memory)
    assert 0.1 < float(table["alpha_computed_A3"].iloc[0]) < 1.0
    assert float(table["dipole_computed_D"].iloc[0]) == pytest.approx(1.71, abs=0.05)


def test_d4_header_does_not_name_an_unused_method(tmp_path, monkeypatch):
    pytest.importorskip("dftd4", reason=missing_reason("dftd4"))
    out = tmp_path / "c.csv"
    r = _run(["O", "--d4", "--name", "water", "-o", str(out)], tmp_path, monkeypatch)
    assert r.exit_code == 0, r.output
    assert r.output.splitlines()[0].startswith("compute: D4 model polarizability (dftd4; no SCF")
    assert "b3lyp" not in r.output and "def2-svpd" not in r.output
    assert out.read_text(encoding="utf-8").splitlines()[1].startswith("water,D4,")


def test_estimate_temperature_takes_a_unit(tmp_path):
    """``estimate --temperature "27 degC"`` is 300.15 K; a bare number stays in kelvin."""
    lib = tmp_path / "lib.csv"
    lib.write_text("compound,smiles\nethanol,CCO\n", encoding="utf-8")
    temps = {}
    for given in ("27 degC", "300.15"):
        out = tmp_path / f"est-{len(temps)}.csv"
        args = ["estimate", str(lib), "--dipoles", "--conformers", "2", "--temperature", given]
        r = CliRunner().invoke(app, [*args, "-o", str(out)])
        assert r.exit_code == 0, r.output
        temps[given] = out.read_text(encoding="utf-8")
    assert temps["27 degC"] == temps["300.15"]  # the same run: the unit was converted
    assert ",300.15," in temps["300.15"]  # the temperature_K column


@pytest.mark.parametrize(
    ("given", "message"),
    [
        ("-3 K", "error: --temperature: expected a temperature > 0 K, found '-3 K'"),
        ("300 kV", "error: --temperature: expected a unit of K, found 'kV'"),
    ],
)
def test_estimate_temperature_errors_name_the_option(tmp_path, given, message):
    lib = tmp_path / "lib.csv"
    lib.write_text("compound,smiles\nethanol,CCO\n", encoding="utf-8")
    r = CliRunner().invoke(
        app, ["estimate", str(lib), "--temperature", given, "-o", str(tmp_path / "e.csv")]
    )
    assert r.exit_code == 2 and r.output.splitlines()[-1].startswith(message)
    assert "temperature_K" not in r.output
