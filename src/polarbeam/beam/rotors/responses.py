"""Rigid-rotor implementations of :class:`polarbeam.beam.response.ParticleResponse`.

Each gives α_eff = α + ⟨μ_eff⟩/E, the mean force per unit E·∂E/∂x of a rigid molecule that
enters the field adiabatically with a Boltzmann rotational distribution at T (the αE term of each
state is the α of the sum). Written as α + R·μ²/(3kT), R is the ratio to Langevin–Debye
(:meth:`ratio`). How R is computed (``method = "auto"``):

* ``linear`` — diagonalisation (tridiagonal per M) unless the rotor is hot and the field weak
  (J_max > 150 and μE/kT ≤ 0.02) or J_max > 400: then the exact second-order sum (fast path);
* ``symmetric`` — diagonalisation per (K, M) unless J_max > 60 and μE/kT ≤ 0.02, or
  J_max > 100: then the exact second-order sum (→ the closed form R(ρ) as kT/B → ∞);
* ``asymmetric`` — dense diagonalisation per M while J_max ≤ 26, else the classical limit
  (hot: μE between the asymmetry doublets and kT).

E = 0 (field unknown) gives the weak-field limit (second order) for linear rotors and symmetric
tops; an asymmetric top then returns to Langevin–Debye apart from quantum corrections, so its R is
computed at a field of 10⁻⁶ B/μ (full) or set to 1 (classical).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

from polarbeam.beam.rotors.limits import (
    classical_asymmetric_ratio,
    symmetric_high_temperature_ratio,
    weak_field_ratio,
)
from polarbeam.beam.rotors.stark import (
    StarkStates,
    asymmetric_states,
    linear_states,
    symmetric_states,
    truncation_j_max,
)
from polarbeam.constants import BOLTZMANN, PLANCK

__all__ = [
    "ROTOR_KINDS",
    "AsymmetricTop",
    "LinearRotor",
    "SymmetricTop",
    "rotor_response",
]

ROTOR_KINDS = ("linear", "symmetric", "asymmetric")

#: below this μE/kT (and above the J_max limits) the second-order sums replace diagonalisation
WEAK_FIELD = 0.02
LINEAR_FULL_J_MAX = 150
SYMMETRIC_FULL_J_MAX = 60
#: beyond these the diagonalisation is too costly whatever the field: the second-order sums
#: (their error grows as ≈ 0.45 μE/kT for linear rotors, ≈ 0.08 μE/kT for prolate tops)
LINEAR_HARD_J_MAX = 400
SYMMETRIC_HARD_J_MAX = 100
ASYMMETRIC_FULL_J_MAX = 26


@dataclass(frozen=True)
class LinearRotor:
    """A rigid linear rotor (B in Hz), dipole along its axis."""

    b_hz: float
    method: str = "auto"  # "auto" | "full" | "fast"
    name = "linear"

    def states(self, dipole_si: float, temperature_k: float, field_v_m: float) -> StarkStates:
        """The adiabatic Stark states (full diagonalisation)."""
        return linear_states(PLANCK * self.b_hz, dipole_si, field_v_m, BOLTZMANN * temperature_k)

    def ratio(self, dipole_si: float, temperature_k: float, field_v_m: float = 0.0) -> float:
        """R = ⟨μ_eff⟩/E ÷ μ²/(3kT) (see the module docstring for the method)."""
        return _linear_ratio(self.b_hz, dipole_si, temperature_k, abs(field_v_m), self.method)

    def alpha_eff(self, alpha_si, dipole_si, temperature_k, field_v_m: float = 0.0) -> float:
        return _alpha_eff(self, alpha_si, dipole_si, temperature_k, field_v_m)


@dataclass(frozen=True)
class SymmetricTop:
    """A rigid symmetric top (A ≥ B ≥ C in Hz; B = C prolate, A = B oblate), dipole along the
    figure axis (a for prolate, c for oblate)."""

    a_hz: float
    b_hz: float
    c_hz: float
    method: str = "auto"
    name = "symmetric"

    @property
    def axis_hz(self) -> float:
        """The constant about the figure axis: A (prolate) or C (oblate)."""
        return self.a_hz if _close(self.b_hz, self.c_hz) else self.c_hz

    @property
    def rho(self) -> float:
        """ρ = B_⊥/B_axis of the closed-form high-temperature ratio."""
        return self.b_hz / self.axis_hz

    def high_temperature_ratio(self) -> float:
        return symmetric_high_temperature_ratio(self.rho)

    def states(self, dipole_si: float, temperature_k: float, field_v_m: float) -> StarkStates:
        return symmetric_states(
            PLANCK * self.b_hz,
            PLANCK * self.axis_hz,
            dipole_si,
            field_v_m,
            BOLTZMANN * temperature_k,
        )

    def ratio(self, dipole_si: float, temperature_k: float, field_v_m: float = 0.0) -> float:
        return _symmetric_ratio(
            self.b_hz, self.axis_hz, dipole_si, temperature_k, abs(field_v_m), self.method
        )

    def alpha_eff(self, alpha_si, dipole_si, temperature_k, field_v_m: float = 0.0) -> float:
        return _alpha_eff(self, alpha_si, dipole_si, temperature_k, field_v_m)


@dataclass(frozen=True)
class AsymmetricTop:
    """A rigid asymmetric top (A ≥ B ≥ C in Hz), dipole along the unit ``direction`` (a, b, c)."""

    a_hz: float
    b_hz: float
    c_hz: float
    direction: tuple[float, float, float] = (1.0, 0.0, 0.0)
    method: str = "auto"
    name = "asymmetric"

    def states(self, dipole_si: float, temperature_k: float, field_v_m: float) -> StarkStates:
        return asymmetric_states(
            (PLANCK * self.a_hz, PLANCK * self.b_hz, PLANCK * self.c_hz),
            self.direction,
            dipole_si,
            field_v_m,
            BOLTZMANN * temperature_k,
        )

    def classical_ratio(self) -> float:
        return _classical(self.a_hz, self.b_hz, self.c_hz, self.direction)

    def ratio(self, dipole_si: float, temperature_k: float, field_v_m: float = 0.0) -> float:
        return _asymmetric_ratio(
            (self.a_hz, self.b_hz, self.c_hz),
            self.direction,
            dipole_si,
            temperature_k,
            abs(field_v_m),
            self.method,
        )

    def alpha_eff(self, alpha_si, dipole_si, temperature_k, field_v_m: float = 0.0) -> float:
        return _alpha_eff(self, alpha_si, dipole_si, temperature_k, field_v_m)


def _close(x: float, y: float) -> bool:
    return math.isclose(x, y, rel_tol=1e-9)


def _alpha_eff(resp, alpha_si, dipole_si, temperature_k, field_v_m) -> float:
    if dipole_si == 0.0:
        return alpha_si
    ld = dipole_si**2 / (3.0 * BOLTZMANN * temperature_k)
    return alpha_si + resp.ratio(dipole_si, temperature_k, field_v_m) * ld


def _ld(mu: float, t: float) -> float:
    return mu**2 / (3.0 * BOLTZMANN * t)


@lru_cache(maxsize=256)
def _weak(b_hz: float, axis_hz: float | None, t: float) -> float:
    return weak_field_ratio(
        PLANCK * b_hz, None if axis_hz is None else PLANCK * axis_hz, BOLTZMANN * t
    )


def _use_fast(method, kt, mu_e, j_max, full_limit, hard_limit) -> bool:
    if method in ("fast", "full"):
        return method == "fast" or mu_e == 0.0
    return mu_e == 0.0 or j_max > hard_limit or (j_max > full_limit and mu_e <= WEAK_FIELD * kt)


@lru_cache(maxsize=4096)
def _linear_ratio(b_hz, mu, t, field, method) -> float:
    b, kt = PLANCK * b_hz, BOLTZMANN * t
    j_max = truncation_j_max(kt, b, mu * field)
    if _use_fast(method, kt, mu * field, j_max, LINEAR_FULL_J_MAX, LINEAR_HARD_J_MAX):
        return _weak(b_hz, None, t)
    return linear_states(b, mu, field, kt, j_max).mean_mu_eff / field / _ld(mu, t)


@lru_cache(maxsize=4096)
def _symmetric_ratio(b_hz, axis_hz, mu, t, field, method) -> float:
    b, ba, kt = PLANCK * b_hz, PLANCK * axis_hz, BOLTZMANN * t
    j_max = truncation_j_max(kt, min(b, ba), mu * field)
    if _use_fast(method, kt, mu * field, j_max, SYMMETRIC_FULL_J_MAX, SYMMETRIC_HARD_J_MAX):
        return _weak(b_hz, axis_hz, t)
    return symmetric_states(b, ba, mu, field, kt, j_max).mean_mu_eff / field / _ld(mu, t)


@lru_cache(maxsize=64)
def _classical(a_hz, b_hz, c_hz, direction) -> float:
    return classical_asymmetric_ratio((a_hz, b_hz, c_hz), direction)


@lru_cache(maxsize=1024)
def _asymmetric_ratio(consts_hz, direction, mu, t, field, method) -> float:
    consts = tuple(PLANCK * c for c in consts_hz)
    kt = BOLTZMANN * t
    j_max = truncation_j_max(kt, min(consts), mu * field)
    full = method == "full" or (method == "auto" and j_max <= ASYMMETRIC_FULL_J_MAX)
    if not full:
        return 1.0 if field == 0.0 else _classical(*consts_hz, direction)
    if field == 0.0:
        field = 1e-6 * min(consts) / mu
    return asymmetric_states(consts, direction, mu, field, kt).mean_mu_eff / field / _ld(mu, t)


def rotor_response(
    kind: str,
    constants_hz: tuple[float | None, float, float | None],
    direction: tuple[float, float, float] = (1.0, 0.0, 0.0),
):
    """The response of a rotor description (already validated): ``kind`` one of
    :data:`ROTOR_KINDS`, (A, B, C) in Hz (a linear rotor needs B only)."""
    a, b, c = constants_hz
    if kind == "linear":
        return LinearRotor(b)
    if kind == "symmetric":
        return SymmetricTop(a, b, c)
    return AsymmetricTop(a, b, c, tuple(float(x) for x in direction))
