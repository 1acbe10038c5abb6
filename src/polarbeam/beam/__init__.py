"""The beam: velocity distributions (nodes and weights of the velocity average) and the particle's
response to the field or to photons (Langevin–Debye α_eff, rigid rotors; photon recoil).
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
    RESPONSE_KINDS,
    AsymmetricTop,
    LangevinDebye,
    LinearRotor,
    ParticleResponse,
    SymmetricTop,
)
from polarbeam.beam.velocity import (
    averaged_phasor_phase,
    fringe_nodes,
    mean_inverse_square,
)

__all__ = [
    "PLANCK",
    "RESPONSE_KINDS",
    "SPEED_OF_LIGHT",
    "AsymmetricTop",
    "FluxVelocity",
    "GaussianVelocity",
    "LangevinDebye",
    "LinearRotor",
    "ParticleResponse",
    "SymmetricTop",
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
