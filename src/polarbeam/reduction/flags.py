"""Scan flags: bit values, their user-visible names and what they mean.

Poor scans are never dropped silently: each gets flags (:data:`FLAG_NAMES`) and a message in
:attr:`~polarbeam.reduction.result.ReducedPhases.messages`; flagged non-reference scans stay in
the output table with ``phase_rad`` and ``phase_err_rad`` set to NaN (visibility as fitted, when
defined), and are left out of the covariance.  Flagged references are not used for
interpolation.
"""

from __future__ import annotations

__all__ = [
    "FLAG_NAMES",
    "ILL_CONDITIONED",
    "LOW_VISIBILITY",
    "NO_REFERENCE_AFTER",
    "NO_REFERENCE_BEFORE",
    "PARTIAL_PERIOD",
    "POOR_CHI2",
    "TOO_FEW_BINS",
    "ZERO_COUNTS",
    "describe_flags",
]

# Flag bits (ScanFits.flags and the reduction); names are what users see.
ZERO_COUNTS = 1 << 0
TOO_FEW_BINS = 1 << 1
PARTIAL_PERIOD = 1 << 2
ILL_CONDITIONED = 1 << 3
LOW_VISIBILITY = 1 << 4
POOR_CHI2 = 1 << 5
NO_REFERENCE_BEFORE = 1 << 6
NO_REFERENCE_AFTER = 1 << 7

#: Flag bit -> name, and what it means.
FLAG_NAMES: dict[int, tuple[str, str]] = {
    ZERO_COUNTS: ("all-zero-counts", "every bin of the scan has zero counts"),
    TOO_FEW_BINS: ("too-few-bins", "fewer bins than needed for a 3-parameter fit with a χ² test"),
    PARTIAL_PERIOD: ("partial-period", "positions do not span a full grating period"),
    ILL_CONDITIONED: ("ill-conditioned", "normal equations singular: no phase coverage"),
    LOW_VISIBILITY: ("low-visibility", "visibility below its error times the threshold"),
    POOR_CHI2: ("poor-chi2", "Pearson χ² p-value below the threshold"),
    NO_REFERENCE_BEFORE: ("no-reference-before", "no usable reference scan earlier in the series"),
    NO_REFERENCE_AFTER: ("no-reference-after", "no usable reference scan later in the series"),
}


def describe_flags(mask: int) -> str:
    """Names of the flags set in ``mask``, joined by ``';'`` (empty string when none).

    Examples
    --------
    >>> describe_flags(ZERO_COUNTS | TOO_FEW_BINS)
    'all-zero-counts;too-few-bins'
    """
    mask = int(mask)
    return ";".join(name for bit, (name, _) in FLAG_NAMES.items() if mask & bit)
