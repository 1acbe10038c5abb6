"""Typed result objects (series, compound, campaign, photon recoil) and their JSON records. Read by
the renderers; compute nothing beyond unit conversions.
"""

from polarbeam.results.objects import (
    CampaignResult,
    CompoundResult,
    SeriesResult,
    register_writer,
    writer,
)
from polarbeam.results.recoil import (
    RECOIL_OUTPUT_COLUMNS,
    CrossSectionFit,
    RecoilCampaignResult,
    RecoilCompoundResult,
    RecoilResult,
    nominal_values,
    std_devs,
    with_recoil,
)

__all__ = [
    "RECOIL_OUTPUT_COLUMNS",
    "CampaignResult",
    "CompoundResult",
    "CrossSectionFit",
    "RecoilCampaignResult",
    "RecoilCompoundResult",
    "RecoilResult",
    "SeriesResult",
    "nominal_values",
    "register_writer",
    "std_devs",
    "with_recoil",
    "writer",
]
