"""Inputs of a batch: finding the campaigns, and hashing each compound's inputs for resume."""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

from polarbeam._util.tables import CELL_BLANKS, read_table
from polarbeam._version import __version__
from polarbeam.batch.records import RECORD_FORMAT
from polarbeam.errors import InputError

__all__ = ["campaign_key", "compound_hashes", "discover_campaigns"]


def _campaign_label(path: Path) -> str:
    return path.parent.name if path.name == "campaign.toml" else path.stem


def discover_campaigns(inputs: Sequence[str | Path]) -> list[tuple[str, Path]]:
    """(name, campaign file) for each input, in order.

    An input is a campaign ``.toml`` file or a folder: a folder holding ``campaign.toml`` is one
    campaign; otherwise its ``*.toml`` files and its subfolders' ``campaign.toml`` are (sorted).
    A campaign's name is its file stem, or its folder name for a file named ``campaign.toml``.
    """
    found: list[Path] = []
    for raw in inputs:
        p = Path(raw)
        if p.is_file():
            found.append(p)
        elif p.is_dir():
            if (p / "campaign.toml").is_file():
                found.append(p / "campaign.toml")
                continue
            inner = sorted(
                [q for q in p.glob("*.toml") if q.is_file()]
                + [q for q in p.glob("*/campaign.toml") if q.is_file()]
            )
            if not inner:
                raise InputError(
                    f"{p}: expected campaign .toml files or subfolders with campaign.toml, "
                    "found none"
                )
            found.extend(inner)
        elif p.suffix == ".toml":
            raise InputError(f"{p}: campaign file not found")
        else:
            raise InputError(f"{p}: campaign file or folder not found")
    out: list[tuple[str, Path]] = []
    seen: dict[str, Path] = {}
    resolved: set[Path] = set()
    for p in found:
        if p.resolve() in resolved:
            continue
        resolved.add(p.resolve())
        name = _campaign_label(p.resolve() if p.name == "campaign.toml" else p)
        if name in seen:
            raise InputError(
                f"two campaigns would be written to the same subfolder {name!r}: {seen[name]} and "
                f"{p}; rename one of them"
            )
        seen[name] = p
        out.append((name, p))
    return out


def _sha(obj) -> str:
    text = json.dumps(obj, sort_keys=True, ensure_ascii=False, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def campaign_key(campaign, settings: Mapping[str, Any] | None = None) -> str:
    """Hash of everything campaign-wide a compound's result depends on.

    The instrument, deflector and analysis tables (and any field map or waveform they name), the
    polarbeam version and extra ``settings`` — not the title or the data file names.
    """
    raw = {k: v for k, v in campaign.raw.items() if k not in ("campaign", "data")}
    return _sha(
        {
            "format": RECORD_FORMAT,
            "version": __version__,
            "layout": campaign.layout,
            "model": campaign.model,
            "raw": raw,
            "field_map": campaign.field_map,
            "waveform": campaign.waveform,
            "settings": dict(settings or {}),
        }
    )


def _data_file(campaign, key: str) -> Path:
    return (campaign.path.parent / campaign.raw["data"][key]).resolve()


def _file_sha(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _rows_by_compound(path: Path, what: str) -> dict[str, list]:
    table = read_table(path, ("compound",), what)
    out: dict[str, list] = {}
    for line, row in zip(table.lines, table.rows, strict=True):
        out.setdefault(row.get("compound", "").strip(CELL_BLANKS), []).append((line, row))
    return out


def compound_hashes(campaign, key: str) -> dict[str, str]:
    """Content hash of each compound's inputs: its rows of the shifts and compounds tables, plus
    the campaign-wide ``key`` (:func:`campaign_key`).

    Row positions enter only for compounds with a row problem (their message names the line).
    """
    data = campaign.raw.get("data", {})
    comps = _data_file(campaign, "compounds")
    crows = _rows_by_compound(comps, "compounds")
    whole = {}  # files whose content every compound depends on
    if "structures" in data:
        whole["structures"] = _file_sha(_data_file(campaign, "structures"))
    if "shifts" in data or "profiles" in data:  # whole profiles: rows by compound as well
        table = "shifts" if "shifts" in data else "profiles"
        shifts = _data_file(campaign, table)
        srows = _rows_by_compound(shifts, table)
    else:  # raw scans: the drift/noise estimate may pool series, so the whole file counts
        shifts = _data_file(campaign, "scans")
        whole["scans"] = _file_sha(shifts)
        srows = {}
    if whole:
        key = _sha({"key": key, "files": whole})
    out = {}
    for cd in campaign.compounds:
        with_lines = cd.problem is not None

        def rows(table, name=cd.name, with_lines=with_lines):
            got = table.get(name, [])
            return [(ln, r) if with_lines else r for ln, r in got]

        out[cd.name] = _sha(
            {
                "key": key,
                "compound": cd.name,
                "shifts": rows(srows),
                "compounds": rows(crows),
                "files": [shifts.name, comps.name] if with_lines else None,
            }
        )
    return out
