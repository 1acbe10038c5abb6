"""Write a small NWChem-style output text that cclib's NWChem parser reads (test helper).

NWChem is an open-source (ECL-2.0) program; the blocks below follow the layout cclib 1.8's
``nwchemparser`` expects: banner, geometry, basis summary, XC information, dipole moment (a.u.)
and the linear-response polarizability (a.u.).  The numbers are whatever the test passes in.
"""

from __future__ import annotations

import numpy as np

_ANG_TO_BOHR = 1.889725989


def nwchem_text(
    symbols,
    coords_angstrom,
    *,
    basis="aug-cc-pvdz",
    functional="B3LYP",
    dipole_au=None,
    alpha_au=None,
) -> str:
    z = {"H": 1, "C": 6, "N": 7, "O": 8, "F": 9}
    out = [
        "              Northwest Computational Chemistry Package (NWChem) 7.2.0",
        "              --------------------------------------------------------",
        "",
        ' Geometry "geometry" -> "geometry"',
        " ---------------------------------",
        "",
        f" Output coordinates in angstroms (scale by  {_ANG_TO_BOHR} to convert to a.u.)",
        "",
        "  No.       Tag          Charge          X              Y              Z",
        " ---- ---------------- ---------- -------------- -------------- --------------",
    ]
    for i, (s, (x, y, zc)) in enumerate(zip(symbols, coords_angstrom, strict=True), start=1):
        out.append(f"  {i:3d} {s:<16} {z[s]:10.4f} {x:14.8f} {y:14.8f} {zc:14.8f}")
    out += [
        "",
        ' Summary of "ao basis" -> "ao basis" (spherical)',
        " " + "-" * 78,
        "       Tag                 Description            Shells   Functions and Types",
        " ---------------- ------------------------------  ------  ---------------------",
    ]
    for s in dict.fromkeys(symbols):
        out.append(f" {s:<24} {basis:<20} 5        9   3s2p")
    out += ["", "              XC Information", "              --------------"]
    out += [f"                         {functional} Method XC Potential", ""]
    if dipole_au is not None:
        d = np.asarray(dipole_au, dtype=float)
        out += [
            "          -------------",
            "          Dipole Moment",
            "          -------------",
            "",
            " Center of charge (in au) is the expansion point",
            "         X =       0.0000000 Y =       0.0000000 Z =       0.0000000",
            "",
            f"   Dipole moment {np.linalg.norm(d):20.10f} A.U.",
            f"             DMX {d[0]:20.10f} DMXEFC        0.0000000000",
            f"             DMY {d[1]:20.10f} DMYEFC        0.0000000000",
            f"             DMZ {d[2]:20.10f} DMZEFC        0.0000000000",
            "",
        ]
    if alpha_au is not None:
        a = np.asarray(alpha_au, dtype=float)
        out += [
            " -------------------------------------------",
            " Linear Response polarizability / au",
            " Frequency  =       0.0000000 / au",
            " Wavelength = -999999.0000000 / nm",
            "              X              Y              Z",
            " " + "-" * 77,
        ]
        for label, row in zip("XYZ", a, strict=True):
            out.append(f" {label} {row[0]:15.7f}{row[1]:15.7f}{row[2]:15.7f}")
        out += [" " + "-" * 77, ""]
    out += [" Total times  cpu:        1.0s     wall:        1.0s", ""]
    return "\n".join(out)
