"""Reading scan tables and writing phases (polarbeam.reduction.reading, .columns, .writing).

Readers give one-line errors naming the file, the row and the column.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from polarbeam.errors import InputError, PolarbeamError, RowValueError
from polarbeam.reduction import (
    INPUT_COLUMNS,
    OUTPUT_COLUMNS,
    read_phase_covariance,
    read_scans,
    reduce_file,
    reduce_table,
    write_phases,
)

PERIOD = 2.0e-7


# --------------------------------------------------------------------------------------------
# Output table, writing and reading
# --------------------------------------------------------------------------------------------


def test_output_columns_and_scan_order(small_series):
    df = small_series.table.sample(frac=1.0, random_state=0)  # rows shuffled
    red = reduce_table(df, PERIOD)
    assert tuple(red.table.columns) == OUTPUT_COLUMNS
    assert list(red.table["scan"]) == [1, 2, 4, 5, 7, 8]
    assert (red.table["velocity_m_s"] == 180.0).all()
    assert red.summary()["kept"] == 6


def test_write_phases_atomic_round_trip(small_series, tmp_path):
    red = reduce_table(small_series.table, PERIOD)
    for name in ("phases.csv", "phases.parquet"):
        write_phases(red, tmp_path / name, covariance_path=tmp_path / "cov.npz")
        back = (
            pd.read_csv(tmp_path / name)
            if name.endswith("csv")
            else pd.read_parquet(tmp_path / name)
        )
        back["flags"] = back["flags"].astype(object).fillna("")
        pd.testing.assert_frame_equal(back, red.table, check_dtype=False)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cov.npz", "phases.csv", "phases.parquet"]
    cov = read_phase_covariance(tmp_path / "cov.npz")
    scans, c = cov[("demo-molecule", 300.0)]
    np.testing.assert_array_equal(scans, red.table["scan"])
    np.testing.assert_allclose(c, red.covariance[("demo-molecule", 300.0)])
    with pytest.raises(InputError, match=r"expected \.csv or \.parquet"):
        write_phases(red, tmp_path / "phases.xlsx")


# --------------------------------------------------------------------------------------------
# (e) Readers: one-line errors naming file, row and column
# --------------------------------------------------------------------------------------------


@pytest.mark.parametrize("ext", ["csv", "parquet"])
def test_reader_round_trip(tiny_table, tmp_path, ext):
    path = tmp_path / f"scans.{ext}"
    tiny_table.to_csv(path, index=False) if ext == "csv" else tiny_table.to_parquet(path)
    df = read_scans(path)
    assert isinstance(df["compound"].dtype, pd.CategoricalDtype)
    df = df.astype({"compound": object})
    pd.testing.assert_frame_equal(
        df[list(INPUT_COLUMNS)], tiny_table, check_dtype=False, check_exact=False
    )


@pytest.mark.parametrize("ext", ["csv", "parquet"])
def test_reader_missing_columns(tiny_table, tmp_path, ext):
    path = tmp_path / f"scans.{ext}"
    df = tiny_table.drop(columns=["velocity_m_s", "counts"])
    df.to_csv(path, index=False) if ext == "csv" else df.to_parquet(path)
    with pytest.raises(
        InputError, match=rf"scans\.{ext}: missing column\(s\) velocity_m_s, counts"
    ):
        read_scans(path)


def test_reader_missing_file_and_bad_extension(tmp_path):
    with pytest.raises(InputError, match=r"nothere\.csv: scans file not found"):
        read_scans(tmp_path / "nothere.csv")
    (tmp_path / "scans.xlsx").write_text("x")
    with pytest.raises(InputError, match=r"unknown table format '\.xlsx'"):
        read_scans(tmp_path / "scans.xlsx")
    (tmp_path / "broken.parquet").write_bytes(b"not a parquet file")
    with pytest.raises(InputError, match=r"broken\.parquet: cannot read Parquet file"):
        read_scans(tmp_path / "broken.parquet")


def test_reader_bad_values_name_row_and_column(tiny_table, tmp_path):
    path = tmp_path / "scans.csv"
    df = tiny_table.astype({"counts": object})
    df.loc[2, "counts"] = "abc"
    df.to_csv(path, index=False)
    with pytest.raises(
        RowValueError,
        match=r"scans\.csv: row 3 \(line 4\), column 'counts': expected a number, "
        r"found 'abc'",
    ):
        read_scans(path)
    df = tiny_table.copy()
    df.loc[4, "counts"] = -1.0
    df.to_parquet(tmp_path / "neg.parquet")
    with pytest.raises(RowValueError, match=r"row 5 \(line 6\), column 'counts': expected a "):
        read_scans(tmp_path / "neg.parquet")
    df = tiny_table.copy()
    df.loc[0, "time_s"] = np.nan
    df.to_csv(path, index=False)
    with pytest.raises(
        RowValueError, match=r"row 1 \(line 2\), column 'time_s': expected a finite"
    ):
        read_scans(path)


def test_scan_with_two_voltages_is_an_input_error(tiny_table):
    df = tiny_table.copy()
    df.loc[df.index[df.scan == 1][3], "voltage_V"] = 5.0
    with pytest.raises(InputError, match=r"run\.csv: scan 1 has more than one voltage_V"):
        reduce_table(df, PERIOD, source="run.csv")
    with pytest.raises(InputError, match="noise_model must be one of random-walk, jitter, none"):
        reduce_table(tiny_table, PERIOD, noise_model="brownian")
    with pytest.raises(InputError, match="grating period must be a positive length"):
        reduce_table(tiny_table, -1.0)


_GARBAGE = st.one_of(
    st.text(max_size=12),
    st.sampled_from(["", "nan", "inf", "-", "1e999", "True", "2020-01-01", '"', "1,2", "\n", "Ω"]),
    st.binary(max_size=6).map(lambda b: b.decode("latin-1")),
)


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    row=st.integers(0, 5),
    col=st.integers(0, len(INPUT_COLUMNS) - 1),
    cell=_GARBAGE,
    raw_bytes=st.booleans(),
)
def test_reader_fuzz_raises_only_polarbeam_errors(row, col, cell, raw_bytes):
    header = ",".join(INPUT_COLUMNS)
    good = ["demo-a", "300", "1", "180", "2", "25", "0", "0", "0.5", "0", "100"]
    lines = []
    for i in range(6):
        cells = list(good)
        cells[7] = str(i // 3)
        cells[9] = str(i * 1e-7 / 3)
        if i == row:
            cells[col] = cell
        lines.append(",".join(cells))
    text = header + "\n" + "\n".join(lines) + "\n"
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "fuzz.csv"
        if raw_bytes:
            path.write_bytes(text.encode("utf-8", "surrogatepass"))
        else:
            path.write_bytes(text.encode("latin-1", "replace"))
        read_error = None
        try:
            df = read_scans(path)
        except PolarbeamError as exc:
            assert "fuzz.csv" in str(exc)
            assert "\n" not in str(exc)
            read_error = exc
        else:
            assert list(df.columns[: len(INPUT_COLUMNS)]) == list(INPUT_COLUMNS)
            assert np.isfinite(df["counts"]).all()
        # The reduction validates per scan where it can, but names a bad cell exactly as the
        # row-by-row validation does.
        try:
            reduce_file(path, 1e-7)
        except PolarbeamError as exc:
            assert "\n" not in str(exc)
            if read_error is not None:
                assert type(exc) is type(read_error)
                assert str(exc).split(": ", 1)[1] == str(read_error).split(": ", 1)[1]
        else:
            assert read_error is None
        assert os.listdir(tmp) == ["fuzz.csv"]
