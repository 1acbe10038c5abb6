"""Batches: many campaigns and compounds, in processes or on a Dask cluster, resumable, with one
result file per compound as soon as it is done.

:mod:`~polarbeam.batch.inputs` finds the campaigns and hashes their inputs,
:mod:`~polarbeam.batch.records` encodes compound results exactly, :mod:`~polarbeam.batch.state`
keeps the record files and ``batch-state.json``, :mod:`~polarbeam.batch.workers` runs the work,
:mod:`~polarbeam.batch.progress` shows it and :mod:`~polarbeam.batch.run` ties them together.
"""

from polarbeam.batch.inputs import (
    campaign_key,
    compound_hashes,
    discover_campaigns,
)
from polarbeam.batch.progress import (
    ProgressEvent,
    TerminalProgress,
)
from polarbeam.batch.records import (
    decode_compound,
    encode_compound,
)
from polarbeam.batch.run import (
    run_batch,
    run_cli,
)
from polarbeam.batch.state import (
    BatchOutcome,
    CampaignRun,
)

__all__ = [
    "BatchOutcome",
    "CampaignRun",
    "ProgressEvent",
    "TerminalProgress",
    "campaign_key",
    "compound_hashes",
    "decode_compound",
    "discover_campaigns",
    "encode_compound",
    "run_batch",
    "run_cli",
]
