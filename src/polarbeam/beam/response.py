"""The particle's response to the deflecting field: the second plug point of the beam stage.

The mean force on a polarizable particle in an inhomogeneous field is F = α_eff·E·∂E/∂x; a
response model gives α_eff (the mean force per unit E·∂E/∂x) of a compound at a rotational
temperature T and field magnitude E (0 when unknown: the weak-field limit). Floppy molecules whose
orientations stay thermal in the field follow Langevin–Debye, α_eff = α + ⟨μ²⟩/(3kT)
(``ergodic``); rigid molecules entering the field adiabatically follow their Stark states
(``linear``, ``symmetric``, ``asymmetric``: :mod:`polarbeam.beam.rotors`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol, runtime_checkable

from polarbeam.beam.rotors.responses import (
    ROTOR_KINDS,
    AsymmetricTop,
    LinearRotor,
    SymmetricTop,
)
from polarbeam.constants import langevin_debye_si

__all__ = [
    "RESPONSE_KINDS",
    "AsymmetricTop",
    "LangevinDebye",
    "LinearRotor",
    "ParticleResponse",
    "SymmetricTop",
]

#: the names of the implementations (the ``response`` column of properties.csv)
RESPONSE_KINDS = ("ergodic", *ROTOR_KINDS)


@runtime_checkable
class ParticleResponse(Protocol):
    """α_eff (C·m²/V) of a particle of static polarizability α and dipole μ at rotational
    temperature T in a field of magnitude E (V/m; 0 = unknown, the weak-field limit).

    ``name`` is one of :data:`RESPONSE_KINDS`.
    """

    name: str

    def alpha_eff(
        self, alpha_si: float, dipole_si: float, temperature_k: float, field_v_m: float = 0.0
    ) -> float: ...


@dataclass(frozen=True)
class LangevinDebye:
    """Weak field, thermal rotational ensemble: α_eff = α + μ²/(3kT) (Langevin–Debye), whatever
    the field."""

    name = "ergodic"

    def alpha_eff(
        self, alpha_si: float, dipole_si: float, temperature_k: float, field_v_m: float = 0.0
    ) -> float:
        return alpha_si + langevin_debye_si(dipole_si, temperature_k)
