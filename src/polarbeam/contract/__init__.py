"""The input contract: ``campaign.toml`` and the CSV/Parquet tables it names, parsed and validated
into a :class:`~polarbeam.contract.campaign.Campaign` with one-line errors. The only stage that
parses unit strings.
"""

from polarbeam.contract.arguments import (
    parse_duration,
    parse_temperature,
    parse_voltage,
)
from polarbeam.contract.campaign import (
    Campaign,
    load_campaign,
)
from polarbeam.contract.numerical import (
    NUMERICAL_KEYS,
    clear_model_cache,
    numerical_deflector,
    numerical_error_inputs,
    numerical_model,
    numerical_stated_inputs,
    parse_numerical_spec,
)
from polarbeam.contract.plan import (
    CRITERIA,
    PLAN_KEYS,
    Criterion,
    PlanCompound,
    PlanSettings,
    load_plan,
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
    "CRITERIA",
    "FLUORESCENCE_FIT",
    "LASER_KEYS",
    "NUMERICAL_KEYS",
    "OBSERVABLE_COLUMNS",
    "PLAN_KEYS",
    "RECOIL_COLUMNS",
    "SHIFT_COLUMNS_COMMON",
    "AnalysisSettings",
    "Campaign",
    "CompoundData",
    "Criterion",
    "Laser",
    "PlanCompound",
    "PlanSettings",
    "RecoilCompound",
    "RecoilData",
    "RecoilSeries",
    "SeriesData",
    "clear_model_cache",
    "load_campaign",
    "load_plan",
    "load_recoil",
    "numerical_deflector",
    "numerical_error_inputs",
    "numerical_model",
    "numerical_stated_inputs",
    "parse_duration",
    "parse_numerical_spec",
    "parse_temperature",
    "parse_voltage",
]
