"""Batches: many campaigns and compounds, in processes or on a Dask cluster, resumable, with one
result file per compound as soon as it is done.
"""

from polarbeam.batch.run import (
    BatchOutcome,
    CampaignRun,
    ProgressEvent,
    TerminalProgress,
    campaign_key,
    compound_hashes,
    decode_compound,
    discover_campaigns,
    encode_compound,
    run_batch,
    run_cli,
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
