"""Fast paths of the reduction give the same answers as the plain ones.

All series reduced in one vectorised pass equal each series reduced alone; Parquet columns read
in chunks and CSV scan ids written as decimals reduce like the table itself.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from polarbeam.errors import InputError, RowValueError
from polarbeam.reduction import reduce_file, reduce_table
from polarbeam.simulation.scans import simulate_scan_table

PERIOD = 2.0e-7


def _multi_series(seed=4, n_series=4):
    rng = np.random.default_rng(seed)
    specs = []
    for i in range(n_series):
        v = rng.permutation(np.resize([800.0, 1600.0, 2400.0], 12))
        specs.append(
            dict(
                shifts_rad=3e-7 * v**2,
                voltages_V=v,
                compound=f"series-{i % 2}",
                temperature_K=300.0 + 100.0 * (i // 2),
            )
        )
    return simulate_scan_table(specs, rng=rng, bins=20, signal_per_bin=80.0).table


def test_all_series_at_once_equals_one_series_at_a_time():
    # The drift stage works on every series in one vectorised pass; reducing each series
    # alone (noise estimated per series) must give the same phases, errors and covariances.
    df = _multi_series()
    whole = reduce_table(df, PERIOD)
    for key, part in df.groupby(["compound", "temperature_K"]):
        alone = reduce_table(part, PERIOD)
        sub = whole.table[
            (whole.table["compound"] == key[0]) & (whole.table["temperature_K"] == key[1])
        ].reset_index(drop=True)
        pd.testing.assert_frame_equal(sub, alone.table, rtol=1e-12)
        np.testing.assert_allclose(whole.covariance[key], alone.covariance[key], rtol=1e-12)
        assert whole.noise[key].level == pytest.approx(alone.noise[key].level, rel=1e-12)


def test_parquet_in_many_row_groups_reduces_like_the_table(tmp_path):
    # Parquet columns arrive in chunks; per-scan columns are checked chunk by chunk without
    # being concatenated.  Small row groups put chunk edges inside scans.
    df = _multi_series(seed=6, n_series=3)
    path = tmp_path / "scans.parquet"
    df.to_parquet(path, index=False, row_group_size=333)
    pd.testing.assert_frame_equal(
        reduce_file(path, PERIOD).table, reduce_table(df, PERIOD, source=path.name).table
    )
    shuffled = df.sample(frac=1.0, random_state=3)  # rows out of scan order: sorted first
    shuffled.to_parquet(path, index=False, row_group_size=333)
    pd.testing.assert_frame_equal(
        reduce_file(path, PERIOD).table, reduce_table(df, PERIOD, source=path.name).table
    )
    bad = df.copy()
    row = int(bad.index[bad.scan == bad.scan.iloc[700]][5])
    bad.loc[row, "temperature_K"] = np.nan
    bad.to_parquet(path, index=False, row_group_size=333)
    with pytest.raises(
        RowValueError,
        match=rf"scans\.parquet: row {row + 1} \(line {row + 2}\), column 'temperature_K': "
        r"expected a finite number",
    ):
        reduce_file(path, PERIOD)
    bad.loc[row, "temperature_K"] = 301.0
    bad.to_parquet(path, index=False, row_group_size=333)
    with pytest.raises(InputError, match=r"has more than one temperature_K \(300\.0 and 301\.0\)"):
        reduce_file(path, PERIOD)
    bad.loc[row, "temperature_K"] = -5.0
    bad.to_parquet(path, index=False, row_group_size=333)
    with pytest.raises(
        RowValueError, match=rf"row {row + 1} .*'temperature_K': expected a value > 0"
    ):
        reduce_file(path, PERIOD)


def test_csv_scan_ids_written_as_decimals(tiny_table, tmp_path):
    path = tmp_path / "scans.csv"
    tiny_table.astype({"scan": float}).to_csv(path, index=False)  # "0.0", "1.0", ...
    expected = reduce_table(tiny_table, PERIOD, source="scans.csv").table
    pd.testing.assert_frame_equal(reduce_file(path, PERIOD).table, expected)
    df = tiny_table.astype({"scan": float})
    df.loc[3, "scan"] = 0.5
    df.to_csv(path, index=False)
    with pytest.raises(RowValueError, match=r"row 4 \(line 5\), column 'scan': expected a whole"):
        reduce_file(path, PERIOD)
