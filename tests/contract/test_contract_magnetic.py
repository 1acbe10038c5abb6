"""The magnetic deflector contract (polarbeam.contract.magnetic): a field map per A², the keys a
magnet needs, and the coupling through the shared flight layouts."""

from __future__ import annotations

import pytest

from polarbeam.constants import MAGNETIC_FIT_SCALE
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError
from polarbeam.instrument.deflectors import coupling
from polarbeam.simulation.magnetic import MagneticTruth, magnet_spec, simulate_magnetic_campaign


def _camp(tmp_path):
    comps = [MagneticTruth("d", 150.0, -80e-6, (300.0, 500.0))]
    return simulate_magnetic_campaign(tmp_path / "c", comps, spec=magnet_spec(), seed=1).path


def _edit(path, old, new):
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


def test_field_map_equals_uniform_block(tmp_path):
    folder = _camp(tmp_path)
    toml = folder / "campaign.toml"
    uni = load_campaign(toml)
    layout, magnet = uni.build()
    assert magnet.field == "magnetic" and magnet.field_factor == 35.0 * MAGNETIC_FIT_SCALE
    # the same 35 T²/(m A²) over the same 0.1 m as a map (z from entrance)
    (folder / "map.csv").write_text(
        "z_m,field_factor_T2_m_A2\n0,35\n0.05,35\n0.1,35\n", encoding="utf-8"
    )
    text = toml.read_text(encoding="utf-8")
    start = text.index('model = "uniform"')
    end = text.index("\n\n[data]")
    defl = text[start:end].splitlines()
    keep = [ln for ln in defl if ln.startswith(("entrance", "length"))]
    new = 'model = "field-map"\nfield_map = "map.csv"\n' + "\n".join(keep)
    toml.write_text(text[:start] + new + text[end:], encoding="utf-8")
    fm = load_campaign(toml)
    lay2, mapped = fm.build()
    assert mapped.model == "field-map"
    assert coupling(lay2, mapped) == pytest.approx(coupling(layout, magnet), rel=1e-9)


@pytest.mark.parametrize(
    ("old", "new", "message"),
    [
        ('field_factor = "35 ± 0.35 T^2/(m A^2)"\n', "", r"\[deflector\] field_factor: required"),
        (
            'model = "uniform"',
            'model = "two-wire"',
            r"\[deflector\] model: expected one of uniform, field-map for a magnetic",
        ),
        (
            'layout = "talbot-lau"',
            'layout = "time-domain"',
            r"field: 'magnetic' expects layout talbot-lau or beam-profile",
        ),
        (
            'shifts = "shifts.csv"',
            'scans = "shifts.csv"',
            r"\[data\] scans: not read for a magnetic deflector",
        ),
    ],
)
def test_magnet_key_errors(tmp_path, old, new, message):
    folder = _camp(tmp_path)
    _edit(folder / "campaign.toml", old, new)
    with pytest.raises(InputError, match=message):
        load_campaign(folder / "campaign.toml")
