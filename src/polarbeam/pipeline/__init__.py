"""The pipeline: load → analyse → compare → write, for one campaign (:func:`analyze`), and the
deflector-field report behind ``polarbeam field``.
"""

from polarbeam.pipeline.analysis import (
    analyze,
    analyze_campaign,
    analyze_compound,
    analyze_with_references,
)
from polarbeam.pipeline.field import (
    FieldReport,
    deflector_field,
    plot_deflector_field,
)
from polarbeam.pipeline.outputs import (
    write_outputs,
)

__all__ = [
    "FieldReport",
    "analyze",
    "analyze_campaign",
    "analyze_compound",
    "analyze_with_references",
    "deflector_field",
    "plot_deflector_field",
    "write_outputs",
]
