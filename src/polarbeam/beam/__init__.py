"""The beam: velocity distributions (nodes and weights of the velocity average) and the particle's
response to the field or to photons (Langevin–Debye α_eff; photon recoil).
"""

from polarbeam.beam.distributions import (
    FluxVelocity,
    GaussianVelocity,
    TabulatedVelocity,
    VelocityDistribution,
    distribution_from_moments,
)
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
from polarbeam.beam.response import (
    LangevinDebye,
    ParticleResponse,
)
from polarbeam.beam.velocity import (
    averaged_phasor_phase,
    fringe_nodes,
    mean_inverse_square,
)

__all__ = [
    "PLANCK",
    "SPEED_OF_LIGHT",
    "FluxVelocity",
    "GaussianVelocity",
    "LangevinDebye",
    "ParticleResponse",
    "TabulatedVelocity",
    "VelocityDistribution",
    "averaged_phasor_phase",
    "distribution_from_moments",
    "emission_factor",
    "fringe_nodes",
    "gaussian_effective_area",
    "kick_phase",
    "mean_inverse_square",
    "mean_photons",
    "photon_energy",
    "poisson_phasor",
    "recoil_observables",
    "recoil_phasor",
    "recoil_velocity",
]
