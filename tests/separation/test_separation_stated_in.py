"""Which stated inputs were written in campaign.toml and which are defaults (the report's
instrument-inputs table marks the defaults)."""

from polarbeam.separation.compound import stated_in


def test_stated_keys_and_defaults():
    doc = {
        "instrument": {"grating_period": "266 nm", "grating_positions": ["0 m", "0.38 m"]},
        "deflector": {"length": "0.1 m"},
    }
    assert stated_in(doc, "instrument.grating_period")
    assert stated_in(doc, "instrument.grating_positions[1]")
    assert stated_in(doc, "deflector.length")
    assert not stated_in(doc, "deflector.beam_height")  # a default (1.2 a for the two-wire)
    assert not stated_in(doc, "source.thermometer_offset")
