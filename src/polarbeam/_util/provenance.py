"""Provenance of a result: when, with which software, from which exact input files, by which
command. Written to results.json and the report so a number in a paper can be traced back."""

from __future__ import annotations

import datetime as _dt
import hashlib
import sys
from importlib import metadata
from pathlib import Path

__all__ = ["PACKAGES", "command_line", "file_sha256", "provenance", "software_versions"]

#: Packages whose versions are recorded (None when not installed).
PACKAGES = (
    "polarbeam",
    "numpy",
    "scipy",
    "pandas",
    "lmfit",
    "uncertainties",
    "rdkit",
    "pyscf",
    "matplotlib",
)


def software_versions() -> dict[str, str | None]:
    """Python and the installed version of each of :data:`PACKAGES` (metadata only: nothing
    is imported)."""
    out: dict[str, str | None] = {"python": sys.version.split()[0]}
    for name in PACKAGES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = None
    return out


def file_sha256(path: str | Path) -> str | None:
    """SHA-256 of a file's bytes (read in 1 MiB blocks), None when it cannot be read."""
    digest = hashlib.sha256()
    try:
        with Path(path).open("rb") as fh:
            for block in iter(lambda: fh.read(1 << 20), b""):
                digest.update(block)
    except OSError:
        return None
    return digest.hexdigest()


def command_line() -> str:
    """The command as typed when polarbeam runs from its command line, else "Python API"."""
    argv = sys.argv or [""]
    if Path(argv[0]).name.startswith("polarbeam"):
        return " ".join(["polarbeam", *argv[1:]])
    return "Python API"


def provenance(files) -> dict:
    """Date (UTC), software versions, command line and the SHA-256 of each input file."""
    return {
        "date_utc": _dt.datetime.now(_dt.UTC).isoformat(timespec="seconds"),
        "software": software_versions(),
        "command": command_line(),
        "inputs": [{"file": str(p), "sha256": file_sha256(p)} for p in dict.fromkeys(files)],
    }
