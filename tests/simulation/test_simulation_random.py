"""The random campaign behind `polarbeam simulate`: deterministic by seed, valid contract."""

from __future__ import annotations

import pytest

from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError
from polarbeam.simulation.campaigns import LAYOUT_PRESETS, simulate_random_campaign


@pytest.mark.parametrize("layout", sorted(LAYOUT_PRESETS))
def test_same_seed_same_campaign_and_it_loads(tmp_path, layout):
    t1, c1 = simulate_random_campaign(tmp_path / "a", seed=5, layout=layout)
    t2, c2 = simulate_random_campaign(tmp_path / "b", seed=5, layout=layout)
    assert c1 == c2
    assert (t1.path / "shifts.csv").read_bytes() == (t2.path / "shifts.csv").read_bytes()
    camp = load_campaign(t1.path / "campaign.toml")
    assert camp.layout == layout and [cd.name for cd in camp.compounds] == ["sample-1"]
    assert 10 <= c1.alpha_A3 <= 80 and 0 <= c1.dipole_D <= 3


def test_unknown_layout_lists_the_presets(tmp_path):
    with pytest.raises(InputError, match="expected one of talbot-lau, beam-profile, time-domain"):
        simulate_random_campaign(tmp_path, layout="no-such-layout")
