"""Fringe fields at the deflector ends and the effective length.

The force ``alpha E dE/dy`` scales as ``E**2`` along the beam, so the deflector acts like one of
effective length ``integral (E/E0)**2 dz``.  Three routes: Maxwell's closed form for thin
semi-infinite plates (:func:`maxwell_fringe_extension`, :func:`maxwell_edge_field`), a 2-D solve
in the ``(z, y)`` plane (:func:`fringe_extension_numerical`), or a measured map
(:func:`read_fringe_map_csv`, :func:`effective_length_from_map`).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Literal

import numpy as np

from polarbeam._util.optional import lazy
from polarbeam._util.tables import csv_records, text_problem
from polarbeam._util.text import NOT_A_TABLE, looks_like_header
from polarbeam.errors import InputError
from polarbeam.instrument.fields.checks import finite, fmt_mm
from polarbeam.instrument.fields.geometry import CrossSection
from polarbeam.instrument.fields.shapes import BoundaryBox, Polygon
from polarbeam.instrument.fields.solve import SolverMode, solve_laplace

_integrate = lazy("scipy.integrate", "numerical routines")

__all__ = [
    "FringeResult",
    "effective_length",
    "effective_length_from_map",
    "fringe_extension_numerical",
    "maxwell_edge_field",
    "maxwell_fringe_extension",
    "read_fringe_map_csv",
]


def maxwell_fringe_extension(gap: float) -> float:
    """Per-end extension of the effective length for a ``E**2``-weighted force: ``gap / (2 pi)``.

    For two thin semi-infinite plates at ``+-V/2`` (gap ``d = 2a``) Maxwell's conformal map
    ``z = (a/pi) (1 + w + exp(w))`` gives on the mid-plane ``E/E0 = 1/(1 + exp(u))`` at
    ``z = (a/pi)(1 + u + exp(u))``, so ``integral (E/E0)**2 dz`` over the fringe equals
    ``(a/pi) integral du/(1 + e**u)``, which exceeds the geometric length up to the plate edge by
    exactly ``a/pi = d/(2 pi)``.  The deflecting force ``alpha E dE/dy`` scales as ``E**2`` when
    the transverse shape of the field is preserved, so ``L_eff = L + d/pi`` for a deflector with
    two such ends (no end shields; derivation in this docstring, map from J. C. Maxwell,
    *A Treatise on Electricity and Magnetism*, vol. 1, art. 195-196).
    """
    d = finite(gap, "fringe gap")
    if d <= 0:
        raise InputError(f"fringe gap: expected > 0, found {d!r}")
    return d / (2.0 * math.pi)


def maxwell_edge_field(x, y, gap: float, voltage: float) -> dict:
    """Field of two thin semi-infinite plates (Maxwell's condenser edge), closed form.

    Plates at ``y = +-gap/2`` for ``x <= 0`` at potentials ``+-voltage/2``.  With ``a = gap/2``
    the map ``z = (a/pi)(1 + w + exp(w))`` takes the strip ``|Im w| < pi`` onto the plane cut
    along the plates and ``phi = voltage Im(w) / (2 pi)``; ``w(z)`` is found by Newton's method.

    Returns
    -------
    dict
        ``potential`` (V), ``Ex``, ``Ey``, ``E`` (V/m) and ``u``, ``v`` (the map coordinates).
    """
    a = 0.5 * finite(gap, "Maxwell edge gap")
    z = np.asarray(x, dtype=float) + 1j * np.asarray(y, dtype=float)
    zz = np.pi * z / a
    inner = (z.real < 0.0) & (np.abs(z.imag) < a)  # between the plates: u < 0
    w = np.where(inner, zz - 1.0, np.log(np.where(zz == 0, 1e-300, zz) + 1.0 + 0j))
    # near the plate edges z = +-i a the map is quadratic: z -+ i a = -(a / 2 pi) (w -+ i pi)^2
    for sgn in (1.0, -1.0):
        zt = z - sgn * 1j * a
        near = np.abs(zt) < 0.5 * a
        dl = np.sqrt(-2.0 * np.pi * zt / a + 0j)
        dl = np.where(sgn * dl.imag > 0, -dl, dl)  # stay inside the strip |Im w| <= pi
        w = np.where(near, sgn * 1j * np.pi + dl, w)
    for _ in range(200):
        ew = np.exp(np.minimum(w.real, 700.0)) * np.exp(1j * w.imag)
        F = 1.0 + w + ew - zz
        step = F / (1.0 + ew)
        big = np.abs(step) > 0.5
        step = np.where(big, 0.5 * step / np.abs(np.where(big, step, 1.0)), step)
        w = w - step
        w = w.real + 1j * np.clip(w.imag, -np.pi, np.pi)
        if np.all(np.abs(step) < 1e-15 * (1.0 + np.abs(w))):
            break
    dzdw = (a / np.pi) * (1.0 + np.exp(w))
    dphidw = voltage / (2.0 * np.pi)  # phi = Im(Omega), Omega = voltage w / (2 pi)
    dOmega_dz = dphidw / dzdw  # = phi_y + i phi_x
    return {
        "potential": voltage * w.imag / (2.0 * np.pi),
        "Ex": -dOmega_dz.imag,
        "Ey": -dOmega_dz.real,
        "E": np.abs(dOmega_dz),
        "u": w.real,
        "v": w.imag,
    }


@dataclass(frozen=True, eq=False)
class FringeResult:
    """Effective length from a longitudinal profile of the relative field factor."""

    length: float
    effective_length: float
    extension_per_end: float
    coefficient: float  # L_eff = L + coefficient * gap (both ends)
    z: np.ndarray
    g_rel: np.ndarray
    method: str
    numerical_error: float = math.nan  # on effective_length (m), from grid refinement

    def summary(self) -> dict:
        return {
            "length_m": self.length,
            "effective_length_m": self.effective_length,
            "extension_per_end_m": self.extension_per_end,
            "coefficient_per_gap": self.coefficient,
            "numerical_error_m": self.numerical_error,
            "method": self.method,
        }


def _midplane_profile(cs: CrossSection, cells: tuple[int, int], solver: str):
    sol = solve_laplace(cs, shape=(cells[0] + 1, cells[1] + 1), solver=solver)
    j0 = cells[1] // 2  # cells[1] is even: a grid line on y = 0
    E = np.abs((sol.phi[j0 + 1] - sol.phi[j0 - 1]) / (2 * sol.hy))
    Ec = float(np.interp(0.0, sol.x, E))
    g_rel = (E / Ec) ** 2
    return sol.x, g_rel, float(_integrate.trapezoid(g_rel, sol.x))


def fringe_extension_numerical(
    length: float,
    gap: float,
    *,
    thickness: float | None = None,
    shield_distance: float | None = None,
    shield_aperture: float | None = None,
    box_margin: float | None = None,
    h: float | None = None,
    solver: SolverMode = "auto",
) -> FringeResult:
    """Effective length from a 2-D solve in the ``(z, y)`` plane along the beam.

    Models the deflector ends as a pair of plates (gap ``gap``, ``thickness`` (default
    ``gap/10``), length ``length``) at ``+-1/2`` V centred in a grounded box reaching
    ``box_margin`` (default ``8 gap``) beyond them, optionally with grounded end shields (plates
    ``shield_distance`` beyond each end with a slit ``shield_aperture`` (default ``gap``) on the
    axis).  The relative field factor on the mid-plane is ``g_rel(z) = (E(z)/E(0))**2``
    (transverse field shape assumed preserved, see :func:`maxwell_fringe_extension`) and
    ``L_eff = integral g_rel dz``.  Solved at ``2h`` and ``h`` (default ``h = gap/40``); the
    difference is the numerical error (the plate corners limit the convergence to order ~4/3, so
    it bounds the fine-grid error).  The default grid takes a few seconds.  A curved-electrode
    deflector approximated by plates of the
    same on-axis gap is an approximation; a 3-D solve would be needed for better.
    """
    L = finite(length, "fringe length")
    d = finite(gap, "fringe gap")
    if L <= 0 or d <= 0:
        raise InputError(f"fringe: expected length > 0 and gap > 0, found {L!r}, {d!r}")
    t = 0.1 * d if thickness is None else finite(thickness, "fringe thickness")
    m = 8.0 * d if box_margin is None else finite(box_margin, "fringe box_margin")
    h = d / 40.0 if h is None else finite(h, "fringe h")
    if t <= 0 or m <= 0 or h <= 0:
        raise InputError(
            f"fringe: expected thickness, box_margin and h > 0, found {t!r}, {m!r}, {h!r}"
        )
    half = 0.5 * L
    zmax = half + m
    ymax = 0.5 * d + t + m
    box = BoundaryBox(-zmax, zmax, -ymax, ymax, 0.0)

    def rect(z0, z1, y0, y1, pot, name):
        return Polygon(((z0, y0), (z1, y0), (z1, y1), (z0, y1)), pot, name=name)

    els = [
        rect(-half, half, 0.5 * d, 0.5 * d + t, 0.5, "upper"),
        rect(-half, half, -0.5 * d - t, -0.5 * d, -0.5, "lower"),
    ]
    sd = math.nan
    if shield_distance is not None:
        sd = finite(shield_distance, "fringe shield_distance")
        ap = d if shield_aperture is None else finite(shield_aperture, "fringe shield_aperture")
        if sd <= 0 or sd + t >= m or not (0 < ap < 2 * ymax):
            raise InputError(
                f"fringe shields: expected 0 < shield_distance < box_margin - thickness and "
                f"0 < aperture, found distance {fmt_mm(sd)} mm, aperture {fmt_mm(ap)} mm"
            )
        for sgn, tag in ((1, "right"), (-1, "left")):
            z0, z1 = sgn * (half + sd), sgn * (half + sd + t)
            za, zb = min(z0, z1), max(z0, z1)
            els.append(rect(za, zb, 0.5 * ap, ymax, 0.0, f"shield {tag} upper"))
            els.append(rect(za, zb, -ymax, -0.5 * ap, 0.0, f"shield {tag} lower"))
    cs = CrossSection(tuple(els), box)
    cz = max(math.ceil(2 * zmax / (2 * h)), 4)
    cy = max(math.ceil(2 * ymax / (2 * h)), 4)
    cy += cy % 2
    _z, _g, Lc = _midplane_profile(cs, (cz, cy), solver)
    z, g_rel, Leff = _midplane_profile(cs, (2 * cz, 2 * cy), solver)
    ext = 0.5 * (Leff - L)
    method = (
        f"2-D (z, y) finite-difference solve, plates gap {fmt_mm(d)} mm, thickness "
        f"{fmt_mm(t)} mm, grounded box {fmt_mm(m)} mm beyond"
        + ("" if shield_distance is None else f", grounded shields at {fmt_mm(sd)} mm")
    )
    return FringeResult(L, Leff, ext, 2 * ext / d, z, g_rel, method, abs(Leff - Lc))


def effective_length(
    length: float,
    gap: float,
    *,
    method: Literal["maxwell", "numerical"] = "maxwell",
    **numerical_options,
) -> FringeResult:
    """Effective deflector length ``L_eff = L + c * gap`` for an ``E**2``-weighted force.

    ``method="maxwell"``: ``c = 1/pi`` (two open ends, thin plates, see
    :func:`maxwell_fringe_extension`); ``method="numerical"``: ``c`` from
    :func:`fringe_extension_numerical` (finite thickness, grounded box, optional shields; keyword
    options are passed on).
    """
    L = finite(length, "effective length: length")
    d = finite(gap, "effective length: gap")
    if L <= 0 or d <= 0:
        raise InputError(f"effective length: expected length > 0 and gap > 0, found {L!r}, {d!r}")
    if method == "maxwell":
        ext = maxwell_fringe_extension(d)
        z = np.array([-0.5 * L - ext, -0.5 * L - ext, 0.5 * L + ext, 0.5 * L + ext])
        return FringeResult(
            L,
            L + 2 * ext,
            ext,
            2 * ext / d,
            z,
            np.array([0.0, 1.0, 1.0, 0.0]),
            "Maxwell thin-plate edge, E**2 weighted: L + gap/pi",
        )
    if method == "numerical":
        return fringe_extension_numerical(L, d, **numerical_options)
    raise InputError(
        f"effective length method: expected 'maxwell' or 'numerical', found {method!r}"
    )


def effective_length_from_map(
    z, g_rel, *, reference: float | None = None, where: str = "fringe map"
) -> FringeResult:
    """Effective length ``integral g(z) dz / g_ref`` of a field-factor map (trapezoid rule).

    Parameters
    ----------
    z
        Positions along the beam (m), strictly increasing; the map must reach where ``g`` is
        negligible on both sides.
    g_rel
        Field factor (any unit; relative is fine) at ``z``.
    reference
        The field factor of the uniform inner region; default: the maximum of ``g_rel``.
    """
    z = np.asarray(z, dtype=float)
    g = np.asarray(g_rel, dtype=float)
    if z.ndim != 1 or z.shape != g.shape or z.size < 3:
        raise InputError(
            f"{where}: expected z and g columns of equal length >= 3, found {z.shape} and {g.shape}"
        )
    if not (np.all(np.isfinite(z)) and np.all(np.isfinite(g))):
        raise InputError(f"{where}: expected finite numbers, found NaN or inf")
    bad = np.nonzero(np.diff(z) <= 0)[0]
    if bad.size:
        raise InputError(
            f"{where}: expected strictly increasing z, found z[{bad[0] + 1}] <= z[{bad[0]}]"
        )
    ref = float(g.max()) if reference is None else finite(reference, f"{where} reference")
    if ref <= 0:
        raise InputError(f"{where}: expected a positive reference field factor, found {ref!r}")
    Leff = float(_integrate.trapezoid(g, z)) / ref
    return FringeResult(math.nan, Leff, math.nan, math.nan, z, g / ref, f"map integral ({where})")


def read_fringe_map_csv(path: str | Path) -> tuple[np.ndarray, np.ndarray]:
    """Read a fringe map CSV with columns ``z_m`` (or ``z_mm``) and ``g_rel``.

    Returns ``(z, g_rel)`` with ``z`` in metres.
    """
    p = Path(path)
    try:
        with p.open(encoding="utf-8", newline="") as handle:
            records = list(csv_records(handle, []))
    except OSError as exc:
        raise InputError(f"{p}: cannot read fringe map ({exc.strerror})") from None
    except UnicodeDecodeError as exc:
        raise InputError(text_problem(p, "fringe map", exc)) from None
    except csv.Error as exc:
        raise InputError(f"{p}: not a valid CSV file ({exc})") from None
    rows = [cells for _, cells in records]
    numbers = [n for n, _ in records]
    if not rows:
        raise InputError(f"{p}: empty fringe map, expected header 'z_m,g_rel'")
    header = [c.strip() for c in rows[0]]
    if "g_rel" not in header or not ({"z_m", "z_mm"} & set(header)):
        found = header if looks_like_header(header, ("z_m", "z_mm", "g_rel")) else NOT_A_TABLE
        raise InputError(f"{p}: expected columns 'z_m' (or 'z_mm') and 'g_rel', found {found}")
    zcol = "z_m" if "z_m" in header else "z_mm"
    scale = 1.0 if zcol == "z_m" else 1e-3
    iz, ig = header.index(zcol), header.index("g_rel")
    z, g = [], []
    for n, row in zip(numbers[1:], rows[1:], strict=True):
        if all(not c.strip() for c in row):
            continue
        try:
            zv, gv = float(row[iz]), float(row[ig])
        except (ValueError, IndexError):
            raise InputError(
                f"{p} row {n}: expected numbers in '{zcol}' and 'g_rel', found {row}"
            ) from None
        if not (math.isfinite(zv) and math.isfinite(gv)):
            raise InputError(f"{p} row {n}: expected finite numbers, found {row}")
        z.append(zv * scale)
        g.append(gv)
    return np.array(z), np.array(g)
