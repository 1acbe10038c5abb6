"""Uncertain numbers: tags of the fit variables and the per-input variance budget.

Every stated input enters the analysis as an :mod:`uncertainties` variable tagged with its name
(``"deflector: length"``); fit covariances become correlated variables tagged
``"fit statistics|<series>"``. :func:`variance_budget` turns any derived value into the share of
each input in its variance, with the fit's components pooled as one entry.
"""

from __future__ import annotations

from uncertainties import UFloat

__all__ = ["FIT_TAG", "variance_budget"]

#: Tag prefix of the variables made from fit covariances (pooled in budgets).
FIT_TAG = "fit statistics"


def variance_budget(value: UFloat | None) -> dict[str, float]:
    """Share of each stated input in the variance of ``value`` (shares add up to 1).

    Components of the fit covariance (internal variables of
    :func:`uncertainties.correlated_values`) are pooled as one ``fit statistics`` entry.
    """
    if value is None or not isinstance(value, UFloat) or value.std_dev == 0:
        return {}
    total = value.std_dev**2
    out: dict[str, float] = {}
    for var, sigma in value.error_components().items():
        tag = var.tag or "unlabelled"
        label = FIT_TAG if tag.startswith(FIT_TAG) else tag
        out[label] = out.get(label, 0.0) + sigma * sigma / total
    return dict(sorted(out.items(), key=lambda kv: -kv[1]))
