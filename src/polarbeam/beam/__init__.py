"""The beam: velocity distributions (nodes and weights of the velocity average) and the particle's
response to the field or to photons (Langevin–Debye α_eff; photon recoil).
"""

from polarbeam.beam.photon_recoil import (
    PLANCK,
    SPEED_OF_LIGHT,
    emission_factor,
    gaussian_effective_area,
    kick_phase,
    mean_photons,
    photon_energy,
    poisson_phasor,
    recoil_observables,
    recoil_phasor,
    recoil_velocity,
)
from polarbeam.beam.velocity import (
    averaged_phasor_phase,
    mean_inverse_square,
    velocity_nodes,
)

__all__ = [
    "PLANCK",
    "SPEED_OF_LIGHT",
    "averaged_phasor_phase",
    "emission_factor",
    "gaussian_effective_area",
    "kick_phase",
    "mean_inverse_square",
    "mean_photons",
    "photon_energy",
    "poisson_phasor",
    "recoil_observables",
    "recoil_phasor",
    "recoil_velocity",
    "velocity_nodes",
]
