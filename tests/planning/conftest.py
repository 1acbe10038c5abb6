"""Fixtures of the planning tests: the worked example of examples/plan (data invented)."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pytest

from polarbeam.planning import load_plan, plan_campaign

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "plan" / "campaign.toml"


@pytest.fixture(scope="module")
def demo_plan():
    """The worked example, restricted to two temperatures and three compounds (fast)."""
    camp, plan, comps = load_plan(EXAMPLE)
    plan = replace(
        plan,
        temperatures_K=(340.0, 640.0),
        temperature_range_K=None,
        n_temperatures=2,
    )
    keep = [c for c in comps if c.name in ("DM-101", "DM-104", "DM-107")]
    return plan_campaign(camp, plan, keep)
