"""The rotor description of compounds.csv: which particle response a compound follows.

Optional columns (README, docs/rotors.md):

* ``rotor`` — ``linear``, ``symmetric`` or ``asymmetric``; empty: ``ergodic`` (Langevin–Debye);
* ``rot_A_MHz, rot_B_MHz, rot_C_MHz`` — rotational constants, A ≥ B ≥ C; a linear rotor needs
  B only; a prolate symmetric top has B = C, an oblate one A = B;
* ``dipole_axis`` — ``a``, ``b``, ``c`` or components such as ``a:0.8,b:0.6`` (normalised).
  A linear rotor's and a prolate top's dipole lies along a, an oblate top's along c (the default
  for these); an asymmetric top needs it stated.
* ``rotor = auto`` — everything from the structure (``smiles`` column or ``[data] structures``):
  floppy or rigid, the kind of top, the rotational constants of the lowest conformer and the
  dipole direction from its partial charges (:func:`polarbeam.chemistry.rotors.
  rotor_description`); the choice and its reason are written to the results as derived. The
  other rotor columns must then be empty.

Every problem is one :class:`~polarbeam.errors.CompoundError` line naming the file, line, column,
what was expected and what was found: the compound fails, the others go on.
"""

from __future__ import annotations

import math

from polarbeam._util.tables import Table
from polarbeam.beam.response import LangevinDebye
from polarbeam.beam.rotors.responses import ROTOR_KINDS, rotor_response
from polarbeam.chemistry.rotors import rotor_description
from polarbeam.errors import CompoundError

__all__ = ["ROTOR_COLUMNS", "auto_response", "compound_response", "parse_dipole_axis"]

ROTOR_COLUMNS = ("rotor", "rot_A_MHz", "rot_B_MHz", "rot_C_MHz", "dipole_axis")
_AXES = ("a", "b", "c")


def parse_dipole_axis(text: str, where: str) -> tuple[float, float, float]:
    """``a`` / ``b`` / ``c`` or ``a:0.8,b:0.6`` → unit components along (a, b, c)."""
    raw = text.strip().lower()
    if raw in _AXES:
        return tuple(1.0 if ax == raw else 0.0 for ax in _AXES)  # type: ignore[return-value]
    comps = dict.fromkeys(_AXES, 0.0)
    seen = set()
    want = "expected a, b, c or components such as 'a:0.8,b:0.6'"
    for part in raw.replace(";", ",").split(","):
        axis, sep, value = part.partition(":")
        axis = axis.strip()
        try:
            number = float(value)
        except ValueError:
            number = math.nan
        if not sep or axis not in _AXES or axis in seen or not math.isfinite(number):
            raise CompoundError(f"{where}: column 'dipole_axis' {want}, found {text.strip()!r}")
        seen.add(axis)
        comps[axis] = number
    norm = math.sqrt(sum(v * v for v in comps.values()))
    if norm == 0:
        raise CompoundError(
            f"{where}: column 'dipole_axis' expected a non-zero direction, found {text.strip()!r}"
        )
    return tuple(comps[ax] / norm for ax in _AXES)  # type: ignore[return-value]


def _constant(table: Table, i: int, col: str) -> float | None:
    raw = (table.rows[i].get(col) or "").strip()
    if not raw:
        return None
    return table.number(i, col, positive=True) * 1e6  # MHz → Hz


def auto_response(table: Table, i: int, structure=None):
    """(response, reason) of row ``i``: ``rotor = auto`` derives the response from the structure
    (``structure()`` gives the RDKit molecule or None); any other row gives (its response, None).
    """
    row = table.rows[i]
    if (row.get("rotor") or "").strip() != "auto":
        return compound_response(table, i), None
    where = f"{table.name} line {table.lines[i]}"
    given = [col for col in ROTOR_COLUMNS[1:] if (row.get(col) or "").strip()]
    if given:
        raise CompoundError(
            f"{where}: rotor 'auto' derives the rotor columns from the structure; expected "
            f"{', '.join(given)} empty, found values"
        )
    mol = structure() if structure is not None else None
    if mol is None:
        raise CompoundError(
            f"{where}: rotor 'auto' expected a structure (a smiles cell or a [data] structures "
            "record), found none"
        )
    name = (row.get("compound") or "").strip()
    d = rotor_description(mol, name)
    reason = f"rotor auto → {d.kind}: {d.reason} (derived from the structure)"
    if d.kind == "ergodic":
        return LangevinDebye(), reason
    direction = None if d.direction is None else tuple(abs(x) for x in d.direction)
    return rotor_response(d.kind, d.constants_hz, direction or (1.0, 0.0, 0.0)), reason


def compound_response(table: Table, i: int):
    """The particle response of row ``i`` of compounds.csv (LangevinDebye when ``rotor`` is
    empty), or a one-line :class:`CompoundError`."""
    row = table.rows[i]
    where = f"{table.name} line {table.lines[i]}"
    kind = (row.get("rotor") or "").strip()
    a, b, c = (_constant(table, i, col) for col in ROTOR_COLUMNS[1:4])
    axis_text = (row.get("dipole_axis") or "").strip()
    if not kind:
        given = [col for col, v in zip(ROTOR_COLUMNS[1:], (a, b, c, axis_text), strict=True) if v]
        if given:
            raise CompoundError(
                f"{where}: column 'rotor' expected one of {', '.join(ROTOR_KINDS)} for the "
                f"rotor columns given ({', '.join(given)}), found ''"
            )
        return LangevinDebye()
    if kind not in ROTOR_KINDS:
        raise CompoundError(
            f"{where}: column 'rotor' expected one of {', '.join(ROTOR_KINDS)} (or empty: "
            f"ergodic), found {kind!r}"
        )
    direction = parse_dipole_axis(axis_text, where) if axis_text else None
    if kind == "linear":
        extra = [col for col, v in (("rot_A_MHz", a), ("rot_C_MHz", c)) if v is not None]
        if b is None or extra:
            raise CompoundError(
                f"{where}: a linear rotor expected rot_B_MHz only, found "
                + (", ".join(extra) if extra else "no rot_B_MHz")
            )
        _along(direction, (1.0, 0.0, 0.0), where, "a linear rotor's dipole lies along its axis a")
        return rotor_response("linear", (None, b, None))
    missing = [col for col, v in zip(ROTOR_COLUMNS[1:4], (a, b, c), strict=True) if v is None]
    if missing:
        raise CompoundError(
            f"{where}: a {kind} top expected rot_A_MHz, rot_B_MHz and rot_C_MHz, found no "
            + ", ".join(missing)
        )
    if not a >= b >= c:
        raise CompoundError(
            f"{where}: columns rot_A_MHz, rot_B_MHz, rot_C_MHz expected A ≥ B ≥ C, found "
            f"A = {a / 1e6:g}, B = {b / 1e6:g}, C = {c / 1e6:g} MHz"
        )
    if kind == "asymmetric":
        if direction is None:
            raise CompoundError(
                f"{where}: column 'dipole_axis' expected a, b, c or components for an "
                "asymmetric top, found ''"
            )
        return rotor_response("asymmetric", (a, b, c), direction)
    prolate, oblate = math.isclose(b, c, rel_tol=1e-9), math.isclose(a, b, rel_tol=1e-9)
    if not (prolate or oblate):
        raise CompoundError(
            f"{where}: a symmetric top expected B = C (prolate) or A = B (oblate), found "
            f"A = {a / 1e6:g}, B = {b / 1e6:g}, C = {c / 1e6:g} MHz"
        )
    if prolate and oblate:  # a spherical top: any figure axis
        if direction is not None and not (
            _is_along(direction, (1.0, 0.0, 0.0)) or _is_along(direction, (0.0, 0.0, 1.0))
        ):
            raise CompoundError(
                f"{where}: column 'dipole_axis' expected a or c for a symmetric top, found "
                f"{axis_text!r}"
            )
    elif prolate:
        _along(direction, (1.0, 0.0, 0.0), where, "a prolate top's dipole lies along a")
    else:
        _along(direction, (0.0, 0.0, 1.0), where, "an oblate top's dipole lies along c")
    return rotor_response("symmetric", (a, b, c))


def _is_along(direction, axis) -> bool:
    return abs(sum(d * x for d, x in zip(direction, axis, strict=True))) > 1 - 1e-9


def _along(direction, axis, where: str, why: str) -> None:
    if direction is not None and not _is_along(direction, axis):
        name = _AXES[axis.index(1.0)]
        raise CompoundError(
            f"{where}: column 'dipole_axis' expected {name} ({why}), found "
            + ", ".join(f"{ax}:{v:.3g}" for ax, v in zip(_AXES, direction, strict=True) if v)
        )
