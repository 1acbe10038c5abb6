"""Rigid rotors in a static field: Stark states, adiabatic following and the centroid response.

* :mod:`~polarbeam.beam.rotors.operators` — matrices in the symmetric-top basis |J K M⟩;
* :mod:`~polarbeam.beam.rotors.stark` — diagonalisation per symmetry block, adiabatic labels,
  Hellmann–Feynman μ_eff, Boltzmann populations, the truncation rule;
* :mod:`~polarbeam.beam.rotors.limits` — second-order energies, weak-field sums, the closed-form
  high-temperature symmetric-top ratio R(ρ), the classical asymmetric-top limit;
* :mod:`~polarbeam.beam.rotors.responses` — the ``linear``, ``symmetric`` and ``asymmetric``
  implementations of :class:`polarbeam.beam.response.ParticleResponse`.

docs/rotors.md has the physics and its sources.
"""

from polarbeam.beam.rotors.limits import (
    classical_asymmetric_ratio,
    first_order_energy,
    second_order_energy,
    symmetric_high_temperature_ratio,
    weak_field_ratio,
)
from polarbeam.beam.rotors.responses import (
    ROTOR_KINDS,
    AsymmetricTop,
    LinearRotor,
    SymmetricTop,
    rotor_response,
)
from polarbeam.beam.rotors.stark import (
    StarkStates,
    asymmetric_states,
    linear_states,
    symmetric_states,
    truncation_j_max,
)

__all__ = [
    "ROTOR_KINDS",
    "AsymmetricTop",
    "LinearRotor",
    "StarkStates",
    "SymmetricTop",
    "asymmetric_states",
    "classical_asymmetric_ratio",
    "first_order_energy",
    "linear_states",
    "rotor_response",
    "second_order_energy",
    "symmetric_high_temperature_ratio",
    "symmetric_states",
    "truncation_j_max",
    "weak_field_ratio",
]
