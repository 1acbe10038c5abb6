"""The input contract: ``campaign.toml`` and the CSV/Parquet tables it names, parsed and validated
into a :class:`~polarbeam.contract.campaign.Campaign` with one-line errors. The only stage that
parses unit strings.
"""

from polarbeam.contract.campaign import (
    Campaign,
    load_campaign,
)
from polarbeam.contract.numerical import (
    NUMERICAL_KEYS,
    numerical_deflector,
    numerical_error_inputs,
    numerical_model,
    numerical_stated_inputs,
    parse_numerical_spec,
)
from polarbeam.contract.recoil import (
    FLUORESCENCE_FIT,
    LASER_KEYS,
    RECOIL_COLUMNS,
    Laser,
    RecoilCompound,
    RecoilData,
    RecoilSeries,
    load_recoil,
)
from polarbeam.contract.schema import (
    OBSERVABLE_COLUMNS,
    SHIFT_COLUMNS_COMMON,
    AnalysisSettings,
    CompoundData,
    SeriesData,
)

__all__ = [
    "FLUORESCENCE_FIT",
    "LASER_KEYS",
    "NUMERICAL_KEYS",
    "OBSERVABLE_COLUMNS",
    "RECOIL_COLUMNS",
    "SHIFT_COLUMNS_COMMON",
    "AnalysisSettings",
    "Campaign",
    "CompoundData",
    "Laser",
    "RecoilCompound",
    "RecoilData",
    "RecoilSeries",
    "SeriesData",
    "load_campaign",
    "load_recoil",
    "numerical_deflector",
    "numerical_error_inputs",
    "numerical_model",
    "numerical_stated_inputs",
    "parse_numerical_spec",
]
