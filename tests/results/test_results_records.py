"""Result records: JSON round trip of summary() and the exit-code rules."""

from __future__ import annotations

import json
import math

import pytest
from scipy import constants as sc
from uncertainties import ufloat

from polarbeam.results.objects import CampaignResult, CompoundResult

A3 = 4 * math.pi * sc.epsilon_0 * 1e-30  # 1 Å³ in C·m²/V (SI definition, scipy.constants)
DEBYE = 1e-21 / sc.c  # 1 D in C·m (definition, c from scipy.constants)


def _ok(name: str) -> CompoundResult:
    geometry = ufloat(1.0, 0.03, tag="deflector geometry")
    mass = ufloat(1.0, 0.04, tag="mass")
    alpha = 21.5 * A3 * geometry * mass  # σ² shares 0.03² : 0.04² = 36 % : 64 %
    dipole = ufloat(1.8 * DEBYE, 0.2 * DEBYE, tag="fit statistics")
    return CompoundResult(
        compound=name,
        status="ok",
        message="",
        mass_u=250.0,
        alpha=alpha,
        dipole=dipole,
        mu2=dipole**2,
        method="debye",
    )


def _failed(name: str) -> CompoundResult:
    return CompoundResult(compound=name, status="failed", message="no mass")


def _campaign(*compounds) -> CampaignResult:
    return CampaignResult("records", "camp.toml", "beam-profile", "parallel-plate", compounds)


def test_summary_json_round_trip_keeps_alpha_mu_and_budget():
    res = _campaign(_ok("cmp-a"), _failed("cmp-b"))
    back = json.loads(json.dumps(res.summary()))
    a = back["compounds"][0]
    assert a["alpha"]["A3"] == pytest.approx(21.5, rel=1e-12)
    assert a["alpha"]["err_A3"] == pytest.approx(21.5 * math.hypot(0.03, 0.04), rel=1e-12)
    assert a["alpha"]["SI"] == pytest.approx(21.5 * A3, rel=1e-12)
    assert a["dipole"]["D"] == pytest.approx(1.8, rel=1e-12)
    assert a["dipole"]["err_D"] == pytest.approx(0.2, rel=1e-12)
    # variance shares by hand: 0.04²/(0.03² + 0.04²) = 0.64, 0.03²/… = 0.36
    assert a["alpha_budget"] == pytest.approx({"mass": 0.64, "deflector geometry": 0.36})
    assert list(a["alpha_budget"]) == ["mass", "deflector geometry"]  # largest share first
    assert a["dipole_budget"] == pytest.approx({"fit statistics": 1.0})
    assert back["compounds"][1]["alpha"]["A3"] is None
    assert back["compounds"][1]["status"] == "failed"
    assert back == res.summary()  # nothing lost or changed by the JSON round trip


@pytest.mark.parametrize(
    "statuses,code",
    [
        (("ok", "ok"), 0),
        (("ok", "failed"), 1),
        (("failed", "failed"), 2),
        ((), 2),
    ],
)
def test_exit_code_rules(statuses, code):
    comps = [_ok(f"c{i}") if s == "ok" else _failed(f"c{i}") for i, s in enumerate(statuses)]
    assert _campaign(*comps).exit_code == code


def test_results_reach_the_renderers_through_the_registry(tmp_path):
    # the report stage registers itself; results never import it (docs/architecture.md)
    import polarbeam.report  # noqa: F401
    from polarbeam.errors import PolarbeamError
    from polarbeam.results.objects import CampaignResult, writer

    result = CampaignResult("t", "src", "talbot-lau", "uniform", ())
    assert result.to_markdown().startswith("# t")
    result.to_report(tmp_path / "out", html=False)
    assert (tmp_path / "out" / "properties.csv").exists()
    with pytest.raises(PolarbeamError, match="no 'pdf' renderer is registered"):
        writer("pdf")
