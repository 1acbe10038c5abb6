"""Batch records: the exact, JSON-ready encoding of a compound's result.

These are software checks of the batch machinery (routes, records, resume); the physics they
carry is checked elsewhere.  The reference for every "same result" below is the project's
in-process pipeline, and for correlations the :mod:`uncertainties` package's own propagation.
"""

from __future__ import annotations

import json

import numpy as np
from uncertainties import covariance_matrix

from polarbeam.batch import decode_compound, encode_compound
from polarbeam.pipeline.analysis import analyze


def test_record_round_trip_is_exact(camp):
    ref = analyze(camp)
    for c in ref.compounds:
        rec = json.loads(json.dumps(encode_compound(c)))  # through JSON text
        back = decode_compound(rec)
        assert back.summary() == c.summary()
        cov_a = covariance_matrix([c.alpha, c.mu2, *(s.alpha_eff for s in c.series)])
        cov_b = covariance_matrix([back.alpha, back.mu2, *(s.alpha_eff for s in back.series)])
        # summed in another order by uncertainties: equal to the last bits only
        np.testing.assert_allclose(np.asarray(cov_b), np.asarray(cov_a), rtol=1e-13, atol=0)
