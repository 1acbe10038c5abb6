"""Catalogue: bounded work and safe outputs.

Structures bounded by size (a 100- and a 5,000-carbon chain under ``estimate --dipoles``), paths
in campaign.toml (regular files only, never echo a file that is not a table of ours) and hostile
text (Markdown link/image syntax, terminal escape sequences, spreadsheet formulas).
"""

from __future__ import annotations

import csv
import json
import os
import re
import shutil
from pathlib import Path

import pytest
from _harness import Case, edit, run_case, small_campaign

SECRET = "TOPSECRET:x:0:0:do-not-print"
NOT_OURS = r"not a polarbeam table \(first line not shown\)"


def _analyze(folder: Path, camp: Path, *, quiet: bool = True) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), *(["--quiet"] if quiet else [])]


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "properties.csv").exists()


def _secret(folder: Path) -> Path:
    """A file outside the campaign folder whose content must never be printed."""
    p = folder / "private" / "notes.txt"
    p.parent.mkdir(parents=True, exist_ok=True)
    p.write_text(SECRET + "\nsecond line\n", encoding="utf-8")
    return p


def _point(key: str, target):
    """[data] ``key`` set to whatever ``target(folder)`` makes (a path string)."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        value = str(target(folder))
        text = camp.read_text(encoding="utf-8")
        old = f'{key} = "{key}.csv"'
        if old in text:
            edit(camp, old, f'{key} = "{value}"')
        else:
            edit(camp, "[data]\n", f'[data]\n{key} = "{value}"\n')
        return _analyze(folder, camp)

    return build


def _field_map(target):
    """The clean campaign with a field-map deflector whose map is ``target(folder)``."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        edit(camp, 'model = "uniform"', 'model = "field-map"')
        edit(camp, 'field_factor = "150000000 ± 7.5e+05 m^-3"', f'field_map = "{target(folder)}"')
        return _analyze(folder, camp)

    return build


def _directory(folder: Path) -> Path:
    (folder / "adir").mkdir()
    return folder / "adir"


def _fifo(folder: Path) -> Path:
    os.mkfifo(folder / "pipe.csv")
    return folder / "pipe.csv"


def _loop(folder: Path) -> Path:
    os.symlink("loop-b.csv", folder / "loop-a.csv")
    os.symlink("loop-a.csv", folder / "loop-b.csv")
    return folder / "loop-a.csv"


def _outside_copy(folder: Path) -> Path:
    """A real shifts table outside the campaign folder (allowed)."""
    dst = folder / "elsewhere" / "my-shifts.csv"
    dst.parent.mkdir()
    shutil.copy(folder / "camp" / "shifts.csv", dst)
    return dst


def _rename(old: str, new: str, title: str | None = None):
    """The clean campaign with compound ``old`` renamed ``new`` in every table (CSV-quoted)."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        cell = '"' + new.replace('"', '""') + '"' if any(c in new for c in ',"') else new
        for table in ("compounds.csv", "shifts.csv"):
            p = camp.parent / table
            p.write_text(p.read_text(encoding="utf-8").replace(old, cell), encoding="utf-8")
        if title is not None:
            edit(camp, 'title = "simulated campaign"', f"title = {json.dumps(title)}")
        return _analyze(folder, camp, quiet=False)

    return build


IMAGE = "![x](http://evil/x.png)"
LINK_TITLE = "[click](https://evil/)"


def _report_is_text(folder: Path) -> None:
    out = folder / "out"
    md = (out / "report.md").read_text(encoding="utf-8")
    hostile = [ln for ln in md.splitlines() if "evil" in ln]
    assert len(hostile) >= 3  # title, summary row, compound heading
    for ln in hostile:  # no unescaped bracket: no link, image or reference can form
        assert not re.search(r"(?<!\\)[\[\]]", ln) and "://" not in ln, ln
    assert "# \\[click\\](https:&#47;/evil/)" in md
    assert "## !\\[x\\](http:&#47;/evil/x.png)" in md
    try:  # rendered by markdown-it (CommonMark + tables) when it is installed
        import markdown_it
    except ImportError:
        pass
    else:
        html = markdown_it.MarkdownIt("commonmark").enable("table").render(md)
        assert "<img" not in html and 'href="http' not in html
    names = [c["compound"] for c in json.loads((out / "results.json").read_text())["compounds"]]
    assert IMAGE in names  # the JSON keeps the exact name
    assert LINK_TITLE in (out / "results.json").read_text(encoding="utf-8")


FORMULA = "=1+2"
AT = "@SUM(A1)"


def _formula_guarded(folder: Path) -> None:
    out = folder / "out"
    for name in ("properties.csv", "series.csv"):
        with (out / name).open(encoding="utf-8", newline="") as fh:
            cells = {r["compound"] for r in csv.DictReader(fh)}
        assert cells == {"'" + FORMULA, "'" + AT}, (name, cells)
        text = (out / name).read_text(encoding="utf-8")
        assert ",-" in text or name == "properties.csv"  # negative numbers stay numbers
    names = {c["compound"] for c in json.loads((out / "results.json").read_text())["compounds"]}
    assert names == {FORMULA, AT}


def _estimate(n_carbons: int):
    def build(folder: Path) -> list[str]:
        inp = folder / "lib.csv"
        inp.write_text(f"compound,smiles\nchain,{'C' * n_carbons}\nethanol,CCO\n", "utf-8")
        return ["estimate", str(inp), "--out", str(folder / "est.csv"), "--dipoles"]

    return build


def _chain_row_noted(folder: Path) -> None:
    with (folder / "est.csv").open(encoding="utf-8", newline="") as fh:
        rows = {r["compound"]: r for r in csv.DictReader(fh)}
    chain = rows["chain"]
    assert chain["status"] == "ok" and chain["dipole_rms_D"] == "" and chain["n_conformers"] == "0"
    assert "above the conformer limit of 60" in chain["message"]
    assert float(chain["alpha_additive_A3"]) > 0
    assert rows["ethanol"]["dipole_rms_D"] != ""


CASES = [
    # --- structures: bounded by size (finishes; the row gets a note) ---
    Case("estimate --dipoles on a 100-carbon chain", _estimate(100), 0, None, _chain_row_noted),
    Case("estimate --dipoles on a 5000-carbon chain", _estimate(5000), 0, None, _chain_row_noted),
    # --- paths in campaign.toml ---
    Case(
        "shifts outside the folder, not a table: content never echoed",
        _point("shifts", _secret),
        2,
        rf"notes\.txt: {NOT_OURS}; expected columns compound",
        _no_outputs,
        tags=("no-echo",),
    ),
    Case(
        "compounds outside the folder, not a table: content never echoed",
        _point("compounds", _secret),
        2,
        rf"notes\.txt: {NOT_OURS}",
        _no_outputs,
        tags=("no-echo",),
    ),
    Case(
        "computed outside the folder, not a table: content never echoed",
        _point("computed", _secret),
        2,
        NOT_OURS,
        _no_outputs,
        tags=("no-echo",),
    ),
    Case(
        "shifts is a directory",
        _point("shifts", _directory),
        2,
        r"campaign\.toml \[data\] shifts: expected a regular file, found a directory",
        _no_outputs,
    ),
    Case(
        "shifts is a FIFO",
        _point("shifts", _fifo),
        2,
        r"\[data\] shifts: expected a regular file, found a FIFO",
        _no_outputs,
    ),
    Case(
        "compounds is a device",
        _point("compounds", lambda f: "/dev/null"),
        2,
        r"\[data\] compounds: expected a regular file, found a device",
        _no_outputs,
    ),
    Case(
        "shifts is a symlink loop",
        _point("shifts", _loop),
        2,
        r"campaign\.toml \[data\] shifts: '.*loop-a\.csv' is a symlink loop; expected a regular",
        _no_outputs,
    ),
    Case(
        "computed is a symlink loop",
        _point("computed", _loop),
        2,
        r"\[data\] computed: .* is a symlink loop",
        _no_outputs,
    ),
    Case(
        "field map is a directory",
        _field_map(_directory),
        2,
        r"campaign\.toml \[deflector\] field_map: expected a regular file, found a directory",
        _no_outputs,
    ),
    Case(
        "field map outside the folder, not a table: content never echoed",
        _field_map(_secret),
        2,
        rf"notes\.txt: {NOT_OURS}; expected columns z_m, field_factor_m3",
        _no_outputs,
        tags=("no-echo",),
    ),
    Case(
        "shifts outside the folder, a regular table: allowed",
        _point("shifts", _outside_copy),
        0,
    ),
    # --- hostile text ---
    Case(
        "compound name and title with Markdown image and link syntax",
        _rename("cmp-1", IMAGE, title=LINK_TITLE),
        0,
        None,
        _report_is_text,
        tags=("no-escape",),
    ),
    Case(
        "compound names starting with spreadsheet formula characters",
        lambda f: _rename("cmp-2", AT)(f) and _rename_again(f, "cmp-1", FORMULA),
        0,
        None,
        _formula_guarded,
    ),
    Case(
        "compound name and title with terminal escape sequences",
        _rename("cmp-1", "evil\x1b[2J\x1b]0;owned\x07", title="t\x1b[31mred\u009b1m"),
        0,
        None,
        tags=("no-escape",),
    ),
]
if Path("/etc/passwd").is_file():
    CASES.append(
        Case(
            "shifts = /etc/passwd: first line never echoed",
            _point("shifts", lambda f: "/etc/passwd"),
            2,
            rf"passwd: {NOT_OURS}",
            _no_outputs,
            tags=("no-echo",),
        )
    )


def _rename_again(folder: Path, old: str, new: str) -> list[str]:
    camp = folder / "camp" / "campaign.toml"
    for table in ("compounds.csv", "shifts.csv"):
        p = camp.parent / table
        p.write_text(p.read_text(encoding="utf-8").replace(old, new), encoding="utf-8")
    return _analyze(folder, camp)


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_bounded(case, tmp_path):
    result = run_case(case, tmp_path)
    if "no-echo" in case.tags:
        assert SECRET not in result.output and "do-not-print" not in result.output
        assert "root:" not in result.output
    if "no-escape" in case.tags:
        assert "\x1b" not in result.output and "\x9b" not in result.output
