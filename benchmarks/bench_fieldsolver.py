"""Benchmark: 2-D deflector field solve on a 1000 x 1000 grid.

Run on demand (not part of the test suite)::

    PYTHONPATH=src python benchmarks/bench_fieldsolver.py [--quick]

Times the default solver (``solver="auto"``: pyamg multigrid above 250 000 unknowns, SuperLU
below) and, as the baseline timed in the same run, SciPy's SuperLU direct solver on the same
matrix.  ``--quick`` replaces the 1000 x 1000 direct baseline by a 500 x 500 direct solve
scaled by the ideal nested-dissection cost N^1.5 (an optimistic estimate for SuperLU/COLAMD).
"""

from __future__ import annotations

import argparse
import time

from polarbeam.instrument.fields import (
    Beam,
    BoundaryBox,
    Circle,
    CrossSection,
    beam_field,
    solve_laplace,
    two_wire_analytic,
    two_wire_cross_section,
)

A, Y1, Y2, V = 2.0e-3, 1.6e-3, 3.4e-3, 1.0e4


def open_pair() -> CrossSection:
    """Two cylinders in a large grounded box: almost every node is an unknown."""
    box = BoundaryBox(-10e-3, 10e-3, -10e-3, 10e-3)
    return CrossSection(
        (
            Circle((0.0, -1.5e-3), 1.0e-3, 5e3, name="hv"),
            Circle((0.0, 1.5e-3), 1.0e-3, -5e3, name="lv"),
        ),
        box,
    )


def timed(cs, shape, solver):
    t0 = time.perf_counter()
    sol = solve_laplace(cs, shape=shape, solver=solver)
    return time.perf_counter() - t0, sol


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="scaled 500 x 500 direct baseline")
    args = ap.parse_args()
    shape = (1000, 1000)
    beam = Beam(0.0, 1.2 * A)
    ref = float(two_wire_analytic(0.0, 1.2 * A, A, Y1, Y2, V)["field_factor"])
    for label, cs in (
        ("two-wire cross-section", two_wire_cross_section(A, Y1, Y2, V)),
        ("open cylinder pair", open_pair()),
    ):
        t_fast, sol = timed(cs, shape, "auto")
        print(f"{label}: grid {shape[0]} x {shape[1]}, {sol.n_unknowns} unknowns")
        print(
            f"  {sol.solver}: {t_fast:.2f} s (assembly {sol.info['assemble_s']:.2f} s, "
            f"solve {sol.info['solve_s']:.2f} s)"
        )
        if label.startswith("two-wire"):
            g = beam_field(sol, beam).field_factor
            print(
                f"  g at the beam: {abs(g):.7e} m^-3, analytic {abs(ref):.7e}, "
                f"rel. error {g / ref - 1:.1e}"
            )
        if args.quick:
            t_small, small = timed(cs, (500, 500), "direct")
            t_base = t_small * (sol.n_unknowns / small.n_unknowns) ** 1.5
            base = f"SuperLU 500 x 500 ({t_small:.2f} s) scaled by N^1.5"
        else:
            t_base, _ = timed(cs, shape, "direct")
            base = "SuperLU, same grid"
        print(f"  baseline {base}: {t_base:.2f} s  ->  speed-up x{t_base / t_fast:.1f}")


if __name__ == "__main__":
    main()
