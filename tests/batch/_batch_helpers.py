"""Helpers of the batch tests: small campaigns written by the project's simulator (data invented
by the simulator) and the output files a batch is compared by."""

from __future__ import annotations

import json
import re

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

OUTPUTS = ("series.csv", "properties.csv", "results.json", "report.md", "report.html")
TEMPS = (300.0, 450.0, 600.0)


def make_campaign(path, n=5, seed=11):
    comps = [
        CompoundTruth(f"mol-{i}", 100.0 + 40 * i, 15.0 + 5 * i, 0.8 * i, TEMPS) for i in range(n)
    ]
    simulate_campaign(path, comps, spec=InstrumentSpec.talbot_lau(), seed=seed, n_voltages=6)
    return path / "campaign.toml"


def _without_provenance(raw: bytes) -> bytes:
    """results.json without its provenance block (date and command differ between runs by
    design; everything else must be byte-identical)."""
    doc = json.loads(raw)
    doc.pop("provenance", None)
    return json.dumps(doc, sort_keys=True).encode()


def _report_without_provenance(name: str, raw: bytes) -> bytes:
    """report.html / report.md without their provenance section (date and command line)."""
    text = raw.decode("utf-8")
    if name == "report.html":
        text = re.sub(r'<section id="provenance">.*?</section>', "", text, flags=re.S)
    else:
        text = text.split("\n## Provenance\n")[0]
    return text.encode("utf-8")


def output_files(folder):
    out = {name: (folder / name).read_bytes() for name in OUTPUTS}
    out["results.json"] = _without_provenance(out["results.json"])
    for name in ("report.html", "report.md"):
        out[name] = _report_without_provenance(name, out[name])
    for f in sorted((folder / "compounds").glob("*.json")):
        out[f"compounds/{f.name}"] = f.read_bytes()
    return out


def comparable_summary(result) -> dict:
    """A campaign result's summary without the provenance block (date and command)."""
    doc = result.summary()
    doc.pop("provenance", None)
    return doc
