"""The particle's response to the deflecting field: the second plug point of the beam stage.

The mean force on a polarizable particle in an inhomogeneous field is F = α_eff·E·∂E/∂x; a
response model gives α_eff (the mean force per unit E·∂E/∂x) of a compound at a source
temperature. Floppy molecules in the weak-field, high-temperature limit follow Langevin–Debye,
α_eff = α + ⟨μ²⟩/(3kT); rotor models for rigid or cold molecules are further implementations of
:class:`ParticleResponse`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol, runtime_checkable

from polarbeam.constants import langevin_debye_si

__all__ = ["LangevinDebye", "ParticleResponse"]


@runtime_checkable
class ParticleResponse(Protocol):
    """α_eff (C·m²/V) of a particle of static polarizability α and dipole μ at temperature T."""

    def alpha_eff(self, alpha_si: float, dipole_si: float, temperature_k: float) -> float: ...


@dataclass(frozen=True)
class LangevinDebye:
    """Weak field, thermal rotational ensemble: α_eff = α + μ²/(3kT) (Langevin–Debye)."""

    def alpha_eff(self, alpha_si: float, dipole_si: float, temperature_k: float) -> float:
        return alpha_si + langevin_debye_si(dipole_si, temperature_k)
