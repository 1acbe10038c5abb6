"""Rotor descriptions from structures (``rotor = auto``): kind, rotational constants, dipole axis.

Rotational constants are compared with microwave values (from memory, ground-state constants of
the textbook examples: pyridine A, B, C ≈ 6039, 5805, 2959 MHz; fluorobenzene ≈ 5663, 2570,
1767 MHz); the force-field geometry of the lowest conformer is good to a few per cent. The
classification follows the principal moments (Gordy & Cook, Microwave Molecular Spectra, ch. 2):
a linear molecule, a prolate top (CH₃CN), an oblate top (CHF₃), asymmetric tops; water's dipole
lies along its b axis (textbook).
"""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam.chemistry.rotors import principal_axes, rotor_description


@pytest.mark.parametrize(
    ("smiles", "ref_mhz"),
    [("c1ccncc1", (6039.0, 5805.0, 2959.0)), ("Fc1ccccc1", (5663.0, 2570.0, 1767.0))],
)
def test_asymmetric_constants_against_microwave_values(smiles, ref_mhz):
    d = rotor_description(smiles, smiles)
    assert d.kind == "asymmetric"
    got = np.array(d.constants_hz) / 1e6
    assert np.all(np.abs(got / np.array(ref_mhz) - 1.0) < 0.03), got
    assert d.constants_hz[0] >= d.constants_hz[1] >= d.constants_hz[2]
    assert abs(d.direction[0]) > 0.99  # both dipoles lie along a (C2 axis)
    assert "derived" not in d.reason and "lowest conformer" in d.reason


def test_kinds_from_the_structure():
    lin = rotor_description("O=C=S", "ocs")
    assert lin.kind == "linear" and lin.constants_hz[0] is None and lin.constants_hz[2] is None
    pro = rotor_description("CC#N", "acn")
    assert pro.kind == "symmetric" and pro.constants_hz[1] == pro.constants_hz[2]
    assert pro.direction == (1.0, 0.0, 0.0)
    obl = rotor_description("FC(F)F", "tfm")
    assert obl.kind == "symmetric" and obl.constants_hz[0] == obl.constants_hz[1]
    assert obl.direction == (0.0, 0.0, 1.0)
    water = rotor_description("O", "w")
    assert water.kind == "asymmetric" and abs(water.direction[1]) > 0.99  # along b
    floppy = rotor_description("CCCCO", "butanol")
    assert floppy.kind == "ergodic" and floppy.rotatable_bonds == 2 and "floppy" in floppy.reason
    assert rotor_description("[Ar]", "ar").kind == "ergodic"


def test_principal_axes_of_a_rigid_rod():
    # two unit masses at ±1 Å on z: I = 2 u Å² about x and y, 0 about z (textbook)
    m, axes, com = principal_axes(np.array([1.0, 1.0]), np.array([[0, 0, 1.0], [0, 0, -1.0]]))
    assert np.allclose(m, [0.0, 2.0, 2.0]) and np.allclose(com, 0.0)
    assert abs(axes[2, 0]) == pytest.approx(1.0)
