"""Estimates for a whole library: a CSV or SDF of structures in, one CSV row per structure out.

:func:`estimate_table` is the batch path: the additive schemes through
:func:`~polarbeam.chemistry.additive.fast_estimates` (no conformers unless asked), one output row
per input row, a bad row reported in its own ``status``/``message`` cells without stopping the
others, and an atomic write of the result.
"""

from __future__ import annotations

import csv
import math
import os
from collections.abc import Iterable
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

from polarbeam._util.atomic import atomic_path
from polarbeam._util.optional import lazy
from polarbeam._util.tables import CELL_BLANKS, csv_records, text_problem
from polarbeam._util.text import NOT_A_TABLE, looks_like_header
from polarbeam.chemistry.accuracy import dipole_error_D
from polarbeam.chemistry.additive import SCHEMES, fast_estimates
from polarbeam.chemistry.conformers import (
    DEFAULT_CHARGE_MODEL,
    DEFAULT_SEED,
    ChargeModel,
    check_temperature,
    conformer_ensemble,
)
from polarbeam.chemistry.estimates import DIPOLE_METHOD, default_polarizability
from polarbeam.chemistry.molecules import StructureRecord, read_sdf
from polarbeam.errors import CalculationTooBigError, CompoundError, InputError

Chem = lazy("rdkit.Chem", "reading molecules (SMILES, SDF)")
rdBase = lazy("rdkit.rdBase", "reading molecules (SMILES, SDF)")

__all__ = ["estimate_table"]

_OUT_COLUMNS = [
    "compound",
    "smiles",
    "mass_u",
    "mass_mono_u",
    "n_electrons",
    "alpha_additive_A3",
    "alpha_additive_err_A3",
    "default_scheme",
    "alpha_ahp_A3",
    "alpha_ahp_err_A3",
    "alpha_ahc_A3",
    "alpha_ahc_err_A3",
    "alpha_bs_A3",
    "alpha_bs_err_A3",
    "alpha_llmr_A3",
    "alpha_llmr_err_A3",
    "flags",
    "structure_class",
    "alpha_method",
    "alpha_err_method",
]
_DIPOLE_COLUMNS = [
    "dipole_rms_D",
    "n_conformers",
    "charge_model",
    "temperature_K",
    "dipole_rms_err_D",
    "dipole_method",
]


def _fmt(x: float) -> str:
    return "" if x is None or (isinstance(x, float) and not math.isfinite(x)) else f"{x:.6g}"


_SCHEME_KEYS = ("ahp", "ahc", "bs", "llmr")


def _read_csv_records(path: Path) -> tuple[list[str], list[StructureRecord]]:
    try:
        with path.open(newline="", encoding="utf-8") as fh:
            records = list(csv_records(fh, []))
    except OSError as exc:
        raise InputError(f"{path}: cannot read the file ({exc.strerror})") from exc
    except UnicodeDecodeError as exc:
        raise InputError(text_problem(path, "structures", exc)) from exc
    except csv.Error as exc:
        raise InputError(f"{path}: not a valid CSV file ({exc})") from exc
    header = [h.strip() for h in (records[0][1] if records else [])]
    missing = [c for c in ("compound", "smiles") if c not in header]
    if missing:
        raise InputError(
            f"{path}: expected columns 'compound' and 'smiles', missing {missing}; found "
            + (str(header) if looks_like_header(header, ("compound", "smiles")) else NOT_A_TABLE)
        )
    rows = [(n, dict(zip(header, cells, strict=False))) for n, cells in records[1:]]
    extra_cols = [h for h in header if h not in ("compound", "smiles")]
    recs = []
    with rdBase.BlockLogs():
        for lineno, row in rows:
            name = (row.get("compound") or "").strip(CELL_BLANKS) or f"row {lineno}"
            smi = (row.get("smiles") or "").strip()
            extra = tuple((c, row.get(c) or "") for c in extra_cols)
            mol = Chem.MolFromSmiles(smi) if smi else None
            err = ""
            if mol is None:
                err = f"{path.name} row {lineno}, compound {name!r}: " + (
                    f"RDKit cannot parse SMILES {smi!r}" if smi else "empty SMILES"
                )
            recs.append(StructureRecord(name, smi, mol, err, extra))
    return extra_cols, recs


def estimate_table(
    input_path: str | os.PathLike,
    out_path: str | os.PathLike,
    *,
    dipoles: bool = False,
    conformers: int = 10,
    seed: int = DEFAULT_SEED,
    temperature_K: float = 300.0,
    charge_model: ChargeModel = DEFAULT_CHARGE_MODEL,
    jobs: int = 1,
) -> dict[str, int]:
    """Estimate every structure of a CSV (``compound, smiles, ...``) or SDF file into a CSV.

    One output row per input row: the input's other columns are carried through after the
    estimate columns; ``status`` is ``ok`` or ``failed`` and ``message`` says why a row failed
    (a bad row never stops the others) or, on an ``ok`` row, why it has no dipole (the molecule
    is above the conformer size limit or its embedding ran out of time: the additive estimates
    stand, ``n_conformers`` is 0).  The file is written atomically (temporary file in the
    output directory, then :func:`os.replace`).

    With ``dipoles`` and ``jobs`` > 1 the rows are computed in that many processes (0: one per
    core); each molecule's conformer work is bounded as in :func:`conformer_ensemble` and its seed
    is the same in any process, so the file is identical for any ``jobs``.

    Returns
    -------
    dict
        ``{"rows": n, "ok": n_ok, "failed": n_failed}``.

    Raises
    ------
    InputError
        Missing/unreadable input, missing ``compound``/``smiles`` columns, unknown suffix.
    """
    inp = Path(input_path)
    out = Path(out_path)
    if not inp.is_file():
        raise InputError(f"{inp}: input file not found")
    if dipoles:
        check_temperature(temperature_K)
    suffix = inp.suffix.lower()
    if suffix in (".sdf", ".sd", ".mol"):
        recs = read_sdf(inp)
        extra_cols = sorted({k for r in recs for k, _ in r.extra})
    elif suffix in (".csv", ".txt", ""):
        extra_cols, recs = _read_csv_records(inp)
    else:
        raise InputError(f"{inp}: expected a .csv or .sdf file, found suffix {inp.suffix!r}")

    base = list(_OUT_COLUMNS) + (_DIPOLE_COLUMNS if dipoles else [])
    n_out = len(base)
    reserved = set(base) | {"status", "message"}
    header = [*base, "status", "message"]
    header += [f"input_{c}" if c in reserved else c for c in extra_cols]
    jobs = (os.cpu_count() or 1) if jobs == 0 else jobs
    args = (extra_cols, n_out, dipoles, conformers, seed, temperature_K, charge_model)
    if jobs > 1 and dipoles and len(recs) > 1:
        # conformer work is bounded per molecule (conformer_ensemble) and spread over processes
        with ProcessPoolExecutor(max_workers=jobs) as pool:
            done = list(pool.map(estimate_row, recs, *[[a] * len(recs) for a in args], chunksize=4))
    else:
        done = [estimate_row(rec, *args) for rec in recs]
    rows = [row for row, _ in done]
    n_ok = sum(ok for _, ok in done)

    _write_csv_atomic(out, header, rows)
    return {"rows": len(rows), "ok": n_ok, "failed": len(rows) - n_ok}


def estimate_row(
    rec: StructureRecord,
    extra_cols: list[str],
    n_out: int,
    dipoles: bool,
    conformers: int,
    seed: int,
    temperature_K: float,
    charge_model: ChargeModel,
) -> tuple[list[str], bool]:
    """One output row of :func:`estimate_table` and whether it is ``ok`` (never raises for a
    bad molecule: the row says why). The same seed per molecule: a row does not depend on
    which process computed it."""
    scheme_acc = [SCHEMES[k] for k in _SCHEME_KEYS]
    with rdBase.BlockLogs():
        return _estimate_row(
            rec,
            extra_cols,
            n_out,
            dipoles,
            conformers,
            seed,
            temperature_K,
            charge_model,
            scheme_acc,
        )


def _estimate_row(
    rec, extra_cols, n_out, dipoles, conformers, seed, temperature_K, charge_model, scheme_acc
):
    extra = dict(rec.extra)
    tail = [extra.get(c, "") for c in extra_cols]
    failed = [rec.compound, rec.smiles] + [""] * (n_out - 2)
    if rec.mol is None:
        return [*failed, "failed", rec.error, *tail], False
    try:
        m_avg, m_mono, n_el, ahp, ahc, bs, llmr, flags = fast_estimates(rec.mol)
        vals = (ahp, ahc, bs, llmr)
        errs = [
            s.error_A3(v) if math.isfinite(v) else math.nan
            for s, v in zip(scheme_acc, vals, strict=True)
        ]
        dflt = default_polarizability(
            rec.mol, dict(zip(_SCHEME_KEYS, vals, strict=True)), rec.compound
        )
        row = [
            rec.compound,
            rec.smiles,
            _fmt(m_avg),
            _fmt(m_mono),
            str(n_el),
            _fmt(dflt.alpha_A3),
            _fmt(dflt.err_A3),
            dflt.scheme,
        ]
        for v, e in zip(vals, errs, strict=True):
            row += [_fmt(v), _fmt(e)]
        row += [";".join(flags), dflt.structure_class, dflt.method, dflt.err_method]
        note = ""
        if dipoles:
            try:
                ens = conformer_ensemble(
                    rec.mol,
                    rec.compound,
                    n_conformers=conformers,
                    seed=seed,
                    charge_model=charge_model,
                )
            except CalculationTooBigError as exc:
                # bounded work: the additive estimates stand, the row says why no dipole
                note = str(exc)
                row += ["", "0", "", _fmt(float(temperature_K)), "", ""]
            else:
                mu = ens.rms_dipole_D(temperature_K)
                row += [
                    _fmt(mu),
                    str(len(ens.energies_kcal_mol)),
                    ens.charge_model,
                    _fmt(float(temperature_K)),
                    _fmt(dipole_error_D(mu, dflt.structure_class)),
                    DIPOLE_METHOD,
                ]
        return [*row, "ok", note, *tail], True
    except (CompoundError, ValueError, RuntimeError) as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        return [*failed, "failed", f"compound {rec.compound!r}: {msg}", *tail], False


def _write_csv_atomic(out: Path, header: list[str], rows: Iterable[list[str]]) -> None:
    directory = out.parent if str(out.parent) else Path(".")
    if not directory.is_dir():
        raise InputError(f"{out}: output directory {directory} does not exist")
    with atomic_path(out) as tmp, open(tmp, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
