"""One conformance check over every :class:`ParticleResponse` implementation.

Each implementation: satisfies the protocol, names itself with one of RESPONSE_KINDS, gives α for
μ = 0 at any field, stays between α and α + μ²/(3kT) for a hot molecule in a weak field (every
rigid rotor responds with a fraction R ≤ 1 of Langevin–Debye there, up to the O(B/kT) quantum
excess of an asymmetric top's near-degenerate doublets, and 1 is the ergodic value), and returns
to its E = 0 value as the field vanishes. Langevin–Debye from scipy.constants (CODATA).
"""

from __future__ import annotations

import pytest
from scipy import constants as sc

from polarbeam.beam import (
    RESPONSE_KINDS,
    AsymmetricTop,
    LangevinDebye,
    LinearRotor,
    ParticleResponse,
    SymmetricTop,
)

DEBYE = 1e-21 / sc.c
ALPHA = 4 * 3.141592653589793 * sc.epsilon_0 * 10e-30  # 10 Å³

IMPLEMENTATIONS = [
    LangevinDebye(),
    LinearRotor(3.0e9),
    SymmetricTop(9.0e9, 3.0e9, 3.0e9),
    SymmetricTop(6.0e9, 6.0e9, 3.0e9),
    AsymmetricTop(9.0e9, 3.5e9, 3.0e9, (1.0, 0.0, 0.0)),
    AsymmetricTop(9.0e9, 3.5e9, 3.0e9, (0.8, 0.6, 0.0)),
]


def test_every_response_kind_has_an_implementation():
    assert {r.name for r in IMPLEMENTATIONS} == set(RESPONSE_KINDS)


@pytest.mark.parametrize("resp", IMPLEMENTATIONS, ids=lambda r: type(r).__name__ + r.name)
def test_conformance(resp):
    assert isinstance(resp, ParticleResponse)
    assert resp.name in RESPONSE_KINDS
    for field in (0.0, 1e6):
        assert resp.alpha_eff(ALPHA, 0.0, 300.0, field) == ALPHA
    mu, t = 1.0 * DEBYE, 20.0
    ld = mu**2 / (3 * sc.k * t)
    for field in (0.0, 1e4):
        a = resp.alpha_eff(ALPHA, mu, t, field)
        assert ALPHA < a <= ALPHA + 1.02 * ld
    # the default field is the weak-field limit, and a tiny field approaches it
    assert resp.alpha_eff(ALPHA, mu, t) == resp.alpha_eff(ALPHA, mu, t, 0.0)
    if resp.name in ("linear", "symmetric"):
        assert resp.alpha_eff(ALPHA, mu, t, 1.0) == pytest.approx(
            resp.alpha_eff(ALPHA, mu, t, 0.0), rel=1e-6
        )
