"""The cross-check verdict does not explain an implausible ratio as a dipole contribution."""

from __future__ import annotations

from polarbeam.comparison.structure_check import implausible_ratio, verdict


def test_implausible_ratio_range():
    assert implausible_ratio(1.5e7, 15.0) == 1e6
    assert implausible_ratio(-3.0, 15.0) == -0.2
    assert implausible_ratio(0.5, 15.0) is not None  # 0.033 × < 0.05 ×
    assert implausible_ratio(15.0, 15.0) is None
    assert implausible_ratio(299.0, 15.0) is None  # 19.9 ×
    assert implausible_ratio(15.0, None) is None


def test_verdict_of_a_million_fold_excess():
    assert verdict(1e5, [1e5, 1e5], True, ratio=1e6) == "implausible: check units and geometry"
    assert verdict(1e5, [1e5], False, ratio=1e6) == "implausible: check units and geometry"
    # a plausible ratio keeps the old verdicts
    assert verdict(0.0, [5.0], False, ratio=1.3) == (
        "dipole contribution likely (α_eff above the additive estimate)"
    )
    assert verdict(0.0, [0.5], False) == "consistent with the structure prediction"
