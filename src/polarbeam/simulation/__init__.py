"""What-if tools beside the pipeline: campaigns with known truth in the input contract (shifts,
raw scans, reference compounds, photon recoil) and the invented demo.
"""

from polarbeam.simulation.calibration import (
    CalibrationTruth,
    calibration_campaign,
)
from polarbeam.simulation.campaigns import (
    CompoundTruth,
    InstrumentSpec,
    SimulationTruth,
    random_beam_conditions,
    random_campaign,
    random_time_domain_campaign,
    simulate_campaign,
    simulate_scan_campaign,
)
from polarbeam.simulation.demo import (
    DEMO_COMPOUNDS,
    DEMO_COMPUTED,
    write_demo,
    write_demo_scans,
)
from polarbeam.simulation.recoil import (
    LaserTruth,
    RecoilCompoundTruth,
    RecoilSimulationTruth,
    random_recoil_campaign,
    simulate_recoil_campaign,
)
from polarbeam.simulation.scans import (
    SimulatedScans,
    fringe_counts,
    simulate_scan_table,
    simulate_series,
)
from polarbeam.simulation.truth import TRUTH_FILE, truth_record, write_truth

__all__ = [
    "DEMO_COMPOUNDS",
    "DEMO_COMPUTED",
    "TRUTH_FILE",
    "CalibrationTruth",
    "CompoundTruth",
    "InstrumentSpec",
    "LaserTruth",
    "RecoilCompoundTruth",
    "RecoilSimulationTruth",
    "SimulatedScans",
    "SimulationTruth",
    "calibration_campaign",
    "fringe_counts",
    "random_beam_conditions",
    "random_campaign",
    "random_recoil_campaign",
    "random_time_domain_campaign",
    "simulate_campaign",
    "simulate_recoil_campaign",
    "simulate_scan_campaign",
    "simulate_scan_table",
    "simulate_series",
    "truth_record",
    "write_demo",
    "write_demo_scans",
    "write_truth",
]
