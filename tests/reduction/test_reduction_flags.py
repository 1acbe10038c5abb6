"""Bad scans (polarbeam.reduction.flags): every branch flags and says so.

The ``small_series`` fixture (tests/reduction/conftest.py) is one simulated series in the
acquisition order R0 S1 S2 R3 S4 S5 R6 S7 S8 R9.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from polarbeam.reduction import describe_flags, fit_scans, reduce_table

PERIOD = 2.0e-7


def _flag_of(red, scan):
    return red.table.set_index("scan").loc[scan, "flags"]


def _assert_dropped(red, scan, flag):
    row = red.table.set_index("scan").loc[scan]
    assert flag in row["flags"].split(";")
    assert math.isnan(row["phase_rad"]) and math.isnan(row["phase_err_rad"])
    assert any(f"scan {scan} " in m and flag in m and "dropped" in m for m in red.messages)
    key = (row["compound"], row["temperature_K"])
    assert scan not in red.kept_scans(key)
    assert red.covariance[key].shape[0] == red.table["phase_rad"].notna().sum()


def test_flag_all_zero_counts(small_series):
    df = small_series.table.copy()
    df.loc[df.scan == 4, "counts"] = 0.0
    red = reduce_table(df, PERIOD)
    _assert_dropped(red, 4, "all-zero-counts")
    assert red.table["phase_rad"].notna().sum() == 5


def test_flag_one_bin(small_series):
    df = small_series.table
    df = df[(df.scan != 5) | (df.index == df.index[df.scan == 5][0])]
    red = reduce_table(df, PERIOD)
    _assert_dropped(red, 5, "too-few-bins")


def test_flag_partial_period(small_series):
    df = small_series.table
    half = df.index[df.scan == 7][20:]
    red = reduce_table(df.drop(index=half), PERIOD)
    _assert_dropped(red, 7, "partial-period")


def test_flag_ill_conditioned_and_low_visibility():
    d = 1.0
    x_same = np.arange(10) * d  # every bin at the same fringe phase
    x = np.arange(40) * d / 40
    rng = np.random.default_rng(1)
    ids = np.r_[np.zeros(10, int), np.ones(40, int)]
    counts = np.r_[np.full(10, 100.0), rng.poisson(100.0, 40)]  # scan 1: no fringe at all
    fit = fit_scans(ids, np.r_[x_same, x], counts, d)
    assert "ill-conditioned" in describe_flags(fit.flags[0])
    assert np.isnan(fit.phase[0])
    assert describe_flags(fit.flags[1]) == "low-visibility"


def test_flag_poor_chi2():
    d = 1.0
    x = np.arange(40) * d / 40
    counts = 1000 * (1 + 0.3 * np.cos(2 * np.pi * x))
    counts[5] += 400.0  # a glitch: far outside Poisson scatter
    fit = fit_scans(np.zeros(40, int), x, counts, d)
    assert describe_flags(fit.flags[0]) == "poor-chi2"
    assert fit.pvalue[0] < 1e-6


@pytest.mark.parametrize(
    ("ref_scan", "flag", "lost"),
    [(0, "no-reference-before", [1, 2]), (9, "no-reference-after", [7, 8])],
)
def test_flag_missing_reference(small_series, ref_scan, flag, lost):
    df = small_series.table
    red = reduce_table(df[df.scan != ref_scan], PERIOD)
    for scan in lost:
        _assert_dropped(red, scan, flag)
    assert red.table["phase_rad"].notna().sum() == 4


def test_bad_reference_is_skipped_with_message(small_series):
    df = small_series.table.copy()
    df.loc[df.scan == 3, "counts"] = 0.0
    red = reduce_table(df, PERIOD)
    assert red.table["phase_rad"].notna().all()  # S1, S2, S4, S5 interpolate between R0 and R6
    assert any("reference scan 3" in m and "not used" in m for m in red.messages)
    ref = red.references.set_index("scan")
    assert ref.loc[3, "flags"] == "all-zero-counts"


def test_no_references_at_all(small_series):
    df = small_series.table
    red = reduce_table(df[df.voltage_V != 0], PERIOD)
    assert red.table["phase_rad"].isna().all()
    assert (red.table["flags"] == "no-reference-before;no-reference-after").all()
