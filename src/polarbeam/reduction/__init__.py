"""Raw fringe-scan reduction: per-scan phase fits, drift correction and correlated phase errors.

This stage turns the counting bins of stepped-grating scans into one drift-corrected fringe phase
per non-reference scan, with the full covariance of those phases within each series (one
compound at one temperature).

A raw scan table is read and checked (:mod:`~polarbeam.reduction.reading`,
:mod:`~polarbeam.reduction.columns`); every scan is fitted with ``c0 + a cos + b sin`` by Poisson
maximum likelihood, all scans at once (:mod:`~polarbeam.reduction.fit`, which states the sign
convention: a positive fringe shift gives a positive phase).  The reference scans at 0 V are
interpolated to the time of each signal scan and subtracted (:mod:`~polarbeam.reduction.drift`);
the excess noise of the interferometer phase is estimated from the references
(:mod:`~polarbeam.reduction.noise`) and enters the covariance; the 2π branch of each phase is
chosen (:mod:`~polarbeam.reduction.branches`).  Poor scans are flagged, never dropped silently
(:mod:`~polarbeam.reduction.flags`).  :func:`reduce_table` runs these stages for all series
together (:mod:`~polarbeam.reduction.reduce`) and returns a :class:`ReducedPhases`;
:func:`write_phases` writes it (:mod:`~polarbeam.reduction.writing`).
"""

from __future__ import annotations

from polarbeam.reduction.branches import choose_branches
from polarbeam.reduction.columns import (
    CARRIED_COLUMNS,
    INPUT_COLUMNS,
    OPTIONAL_COLUMNS,
    OUTPUT_COLUMNS,
    row_problems,
    validate_scans,
)
from polarbeam.reduction.drift import corrected_phase_covariance, interpolation_weights
from polarbeam.reduction.fit import ScanFits, fit_scans
from polarbeam.reduction.flags import (
    FLAG_NAMES,
    ILL_CONDITIONED,
    LOW_VISIBILITY,
    NO_REFERENCE_AFTER,
    NO_REFERENCE_BEFORE,
    PARTIAL_PERIOD,
    POOR_CHI2,
    TOO_FEW_BINS,
    ZERO_COUNTS,
    describe_flags,
)
from polarbeam.reduction.groups import TWO_PI
from polarbeam.reduction.linalg import Sym6
from polarbeam.reduction.noise import NoiseEstimate, NoiseModel, NoiseScope, estimate_excess_noise
from polarbeam.reduction.reading import read_scans, read_table
from polarbeam.reduction.reduce import reduce_file, reduce_table
from polarbeam.reduction.result import DenseOnAccess, ReducedPhases, SeriesKey
from polarbeam.reduction.writing import read_phase_covariance, write_phases

__all__ = [
    "CARRIED_COLUMNS",
    "FLAG_NAMES",
    "ILL_CONDITIONED",
    "INPUT_COLUMNS",
    "LOW_VISIBILITY",
    "NO_REFERENCE_AFTER",
    "NO_REFERENCE_BEFORE",
    "OPTIONAL_COLUMNS",
    "OUTPUT_COLUMNS",
    "PARTIAL_PERIOD",
    "POOR_CHI2",
    "TOO_FEW_BINS",
    "TWO_PI",
    "ZERO_COUNTS",
    "DenseOnAccess",
    "NoiseEstimate",
    "NoiseModel",
    "NoiseScope",
    "ReducedPhases",
    "ScanFits",
    "SeriesKey",
    "Sym6",
    "choose_branches",
    "corrected_phase_covariance",
    "describe_flags",
    "estimate_excess_noise",
    "fit_scans",
    "interpolation_weights",
    "read_phase_covariance",
    "read_scans",
    "read_table",
    "reduce_file",
    "reduce_table",
    "row_problems",
    "validate_scans",
    "write_phases",
]
