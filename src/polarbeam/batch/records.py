"""Records: an exact, JSON-ready encoding of a compound's result.

A record carries every correlated :mod:`uncertainties` value exactly: the nominal value, the
derivative with respect to each independent input and that input's tag and σ, so
:func:`decode_compound` rebuilds values with the same errors, budgets and correlations.  Inputs
stated for the whole campaign (geometry, field) are shared between the compounds decoded together,
as they are in an in-process run.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import fields, is_dataclass
from typing import Any

import numpy as np
from uncertainties import UFloat
from uncertainties.core import AffineScalarFunc, LinearCombination, Variable

from polarbeam.results.objects import CompoundResult, SeriesResult
from polarbeam.results.profiles import ProfileRecord
from polarbeam.results.velocity import VelocityRecord

__all__ = ["RECORD_FORMAT", "decode_compound", "encode_compound"]

#: 2: the output keys were renamed (dipole_rms_D, computed_method from qc_method): records of
#: format 1 are not reused by ``--resume`` but recomputed, so no old name reaches an output.
RECORD_FORMAT = "polarbeam-compound-record/2"

_CLASSES = {
    "CompoundResult": CompoundResult,
    "SeriesResult": SeriesResult,
    "VelocityRecord": VelocityRecord,  # a series' time-of-flight fit (results.velocity)
    "ProfileRecord": ProfileRecord,  # one whole beam profile (results.profiles)
}


def _float(x: float):
    return x if math.isfinite(x) else {"float": repr(x)}


class _Encoder:
    def __init__(self, shared: frozenset[int]):
        self.shared = shared
        self.variables: list[dict[str, Any]] = []
        self.index: dict[int, int] = {}
        self._keep: list[Variable] = []  # keep ids valid while encoding

    def var(self, v: Variable) -> int:
        k = id(v)
        if k not in self.index:
            self.index[k] = len(self.variables)
            self._keep.append(v)
            self.variables.append(
                {
                    "tag": v.tag,
                    "nominal": _float(float(v.nominal_value)),
                    "std": _float(float(v.std_dev)),
                    "shared": k in self.shared,
                }
            )
        return self.index[k]

    def __call__(self, x):
        if x is None or isinstance(x, bool | str):
            return x
        if isinstance(x, int):
            return x
        if isinstance(x, float):
            return _float(x)
        if isinstance(x, np.generic):
            return self(x.item())
        if isinstance(x, UFloat):
            return {
                "ufloat": _float(float(x.nominal_value)),
                "d": [[self.var(v), _float(float(d))] for v, d in x.derivatives.items()],
            }
        if isinstance(x, np.ndarray):
            return {"array": [self(v) for v in x.ravel().tolist()], "shape": list(x.shape)}
        if isinstance(x, tuple):
            return {"tuple": [self(v) for v in x]}
        if isinstance(x, list):
            return [self(v) for v in x]
        if isinstance(x, dict):
            return {"dict": [[str(k), self(v)] for k, v in x.items()]}
        if is_dataclass(x) and type(x).__name__ in _CLASSES:
            return {
                "dataclass": type(x).__name__,
                "fields": {f.name: self(getattr(x, f.name)) for f in fields(x)},
            }
        raise TypeError(f"cannot record a value of type {type(x).__name__}")


def encode_compound(result: CompoundResult, shared: Iterable[Any] = ()) -> dict[str, Any]:
    """JSON-ready record of ``result`` that :func:`decode_compound` turns back into an equal one.

    Parameters
    ----------
    shared
        Independent :mod:`uncertainties` variables that belong to the whole campaign (the stated
        instrument inputs); they are marked so that compounds decoded together share them.
    """
    enc = _Encoder(frozenset(id(v) for v in shared))
    body = enc(result)
    return {"variables": enc.variables, "value": body}


def _unfloat(x) -> float:
    return float(x["float"]) if isinstance(x, dict) else float(x)


def decode_compound(record: Mapping[str, Any], registry: dict | None = None) -> CompoundResult:
    """Rebuild the :class:`~polarbeam.results.objects.CompoundResult` of a record.

    ``registry`` (a dict, shared between the compounds of one campaign) maps each shared input to
    one variable, so that those compounds stay correlated through it.
    """
    registry = {} if registry is None else registry
    variables = []
    for v in record["variables"]:
        key = (v["tag"], _unfloat(v["nominal"]), _unfloat(v["std"]))
        if v.get("shared") and key in registry:
            variables.append(registry[key])
            continue
        var = Variable(key[1], key[2], tag=v["tag"])
        if v.get("shared"):
            registry[key] = var
        variables.append(var)

    def dec(x):
        if isinstance(x, list):
            return [dec(v) for v in x]
        if not isinstance(x, dict):
            return x
        if "float" in x:
            return float(x["float"])
        if "ufloat" in x:
            lin = LinearCombination({variables[i]: _unfloat(d) for i, d in x["d"]})
            return AffineScalarFunc(_unfloat(x["ufloat"]), lin)
        if "array" in x:
            return np.array([dec(v) for v in x["array"]], dtype=float).reshape(x["shape"])
        if "tuple" in x:
            return tuple(dec(v) for v in x["tuple"])
        if "dict" in x:
            return {k: dec(v) for k, v in x["dict"]}
        if "dataclass" in x:
            cls = _CLASSES[x["dataclass"]]
            known = {f.name for f in fields(cls)}
            return cls(**{k: dec(v) for k, v in x["fields"].items() if k in known})
        raise ValueError(f"unknown record entry {sorted(x)}")

    out = dec(record["value"])
    if not isinstance(out, CompoundResult):
        raise ValueError("record does not hold a compound result")
    return out
