"""Campaign planning: predicted phases, voltage ladders, expected precision and beam time, and a
rehearsal campaign.
"""

from polarbeam.contract.plan import PlanSettings, load_plan
from polarbeam.planning.ladders import design_ladder, even_ladder
from polarbeam.planning.model import (
    AcquisitionSequence,
    SeriesModel,
    acquisition_sequence,
    phase_noise_crb,
    voltage_max,
)
from polarbeam.planning.output import write_plan
from polarbeam.planning.plan import make_plan, plan_campaign
from polarbeam.planning.precision import (
    BRANCH_Z,
    DebyePrecision,
    LadderPrecision,
    debye_precision,
    ladder_precision,
)
from polarbeam.planning.rehearsal import rehearsal_scans, rehearsal_scatter, write_rehearsal
from polarbeam.planning.results import CampaignPlan, CompoundPlan, SeriesPlan

__all__ = [
    "BRANCH_Z",
    "AcquisitionSequence",
    "CampaignPlan",
    "CompoundPlan",
    "DebyePrecision",
    "LadderPrecision",
    "PlanSettings",
    "SeriesModel",
    "SeriesPlan",
    "acquisition_sequence",
    "debye_precision",
    "design_ladder",
    "even_ladder",
    "ladder_precision",
    "load_plan",
    "make_plan",
    "phase_noise_crb",
    "plan_campaign",
    "rehearsal_scans",
    "rehearsal_scatter",
    "voltage_max",
    "write_plan",
    "write_rehearsal",
]
