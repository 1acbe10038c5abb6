"""Catalogue cases of the results folder: polarbeam owns only what it wrote (its manifest), removes
only those files, cleans its own stale temporaries, and one run at a time holds the folder."""

from __future__ import annotations

import fcntl
import json
import os
from pathlib import Path

import pytest
from _harness import Case, edit, run_case, small_campaign

from polarbeam._util.outfolder import LOCK_FILE, MANIFEST_FILE

USER_FILES = {
    "figures/my-plot.png": b"\x89PNG user figure",
    "figures/my-plot.svg": b"<svg>user</svg>",
    "compounds/my-notes.json": b'{"mine": true}\n',
    "compounds/cmp-1-old.json": b'{"hand made": 1}\n',
    "notes.txt": b"lab notes\n",
    "comparison.csv": b"user,table\n",
}


#: the user's files whose names polarbeam never writes
_OWN_FILES = {k: v for k, v in USER_FILES.items() if k != "comparison.csv"}


def _out(folder: Path) -> Path:
    return folder / "out"


def _analyze(folder: Path, camp: Path, *more: str) -> list[str]:
    return ["analyze", str(camp), "--out", str(_out(folder)), "--quiet", *more]


def _put_user_files(folder: Path, files=USER_FILES) -> None:
    for rel, data in files.items():
        p = _out(folder) / rel
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_bytes(data)


def _manifest(folder: Path) -> dict:
    return json.loads((_out(folder) / MANIFEST_FILE).read_text(encoding="utf-8"))


def _user_files_untouched(folder: Path, files=USER_FILES) -> None:
    for rel, data in files.items():
        assert (_out(folder) / rel).read_bytes() == data, rel
        assert rel not in _manifest(folder)["files"], rel


def _complete_outputs(folder: Path) -> None:
    out = _out(folder)
    doc = _manifest(folder)
    assert doc["complete"] is True
    for name in ("series.csv", "properties.csv", "results.json", "report.md", "report.html"):
        assert (out / name).is_file(), name
        assert name in doc["files"], name
    for rel in doc["files"]:  # the manifest names only files that are there
        assert (out / rel).is_file(), rel
    assert not [p for p in out.rglob(".*.tmp")], "temporaries left behind"


def _user_files_kept(folder: Path) -> None:
    _complete_outputs(folder)
    _user_files_untouched(folder, _OWN_FILES)


def _with_user_files(*more: str):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        _put_user_files(folder, _OWN_FILES)
        return _analyze(folder, camp, *more)

    return build


def _rerun_with_user_files(*more: str):
    """A first run, then the user adds files, then a second run into the same folder."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        run_case(Case("first run", lambda f: _analyze(f, camp, *more), 0), folder)
        _put_user_files(folder, _OWN_FILES)
        return _analyze(folder, camp, *more)

    return build


def _user_comparison_csv(folder: Path) -> list[str]:
    """A file of the user's with a name polarbeam writes only sometimes: this run writes none."""
    camp = small_campaign(folder)
    _put_user_files(folder, {"comparison.csv": USER_FILES["comparison.csv"]})
    return _analyze(folder, camp)


def _user_comparison_kept(folder: Path) -> None:
    _complete_outputs(folder)
    _user_files_untouched(folder, {"comparison.csv": USER_FILES["comparison.csv"]})


def _computed_campaign(folder: Path) -> Path:
    """Campaign A: with computed chemistry, so its run writes comparison.csv."""
    camp = small_campaign(folder / "a", n=2, seed=5)
    (camp.parent / "computed.csv").write_text(
        "compound,method,alpha,alpha_unit,dipole_D\ncmp-1,b3lyp,150,A3,0.0\n"
        "cmp-2,b3lyp,190,A3,1.0\n",
        encoding="utf-8",
    )
    data = 'compounds = "compounds.csv"'
    edit(camp, data, data + '\ncomputed = "computed.csv"')
    return camp


def _other_campaign_after(*first_more: str, second_more: tuple[str, ...] = ()):
    """Campaign A (comparison.csv, compounds cmp-1, cmp-2) then campaign B (three compounds named
    otherwise, no computed chemistry) into the same folder."""

    def build(folder: Path) -> list[str]:
        a = _computed_campaign(folder)
        run_case(Case("campaign A", lambda f: _analyze(f, a, *first_more), 0), folder)
        assert (_out(folder) / "comparison.csv").is_file()
        assert (_out(folder) / "comparison_series.csv").is_file()
        assert len(list((_out(folder) / "compounds").glob("cmp-*.json"))) == 2
        b = small_campaign(folder / "b", n=3, seed=7)
        for name in ("shifts.csv", "compounds.csv"):
            p = b.parent / name
            p.write_text(p.read_text(encoding="utf-8").replace("cmp-", "mol-"), encoding="utf-8")
        return _analyze(folder, b, *second_more)

    return build


def _only_campaign_b(folder: Path) -> None:
    out = _out(folder)
    _complete_outputs(folder)
    assert not (out / "comparison.csv").exists(), "stale comparison.csv of campaign A"
    assert not (out / "comparison_series.csv").exists()
    assert not (out / "phases.csv").exists()
    assert not list((out / "compounds").glob("cmp-*.json")), "records of campaign A"
    props = (out / "properties.csv").read_text(encoding="utf-8")
    assert "cmp-" not in props and props.count("mol-") == 3
    assert not [p for p in (out / "figures").iterdir() if p.name.startswith("cmp-")]


def _stale_temporaries(folder: Path) -> list[str]:
    """A run killed mid-write left the atomic writer's temporaries; a user file ends in .tmp."""
    camp = small_campaign(folder)
    out = _out(folder)
    (out / "compounds").mkdir(parents=True)
    (out / "compounds" / ".cmp-1.json.k3j_x9ab.tmp").write_text("{half", encoding="utf-8")
    (out / ".series.csv.a1b2c3d4.tmp").write_text("compound,", encoding="utf-8")
    (out / "draft.tmp").write_text("user's own", encoding="utf-8")
    return _analyze(folder, camp, "--resume")


def _temporaries_cleaned(folder: Path) -> None:
    out = _out(folder)
    _complete_outputs(folder)
    assert (out / "draft.tmp").read_text(encoding="utf-8") == "user's own"
    assert not (out / "compounds" / ".cmp-1.json.k3j_x9ab.tmp").exists()
    assert not (out / ".series.csv.a1b2c3d4.tmp").exists()


def _held_by_another_run(folder: Path) -> list[str]:
    """A second run while a first one holds the folder (the lock taken here, as the first run
    would: an flock on the lock file that holds its pid)."""
    camp = small_campaign(folder)
    out = _out(folder)
    out.mkdir(parents=True)
    (out / "properties.csv").write_text("earlier,run\n", encoding="utf-8")
    fh = open(out / LOCK_FILE, "w", encoding="utf-8")  # closed by the check
    fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
    fh.write("4242\n")
    fh.flush()
    _HOLDERS.append(fh)
    return _analyze(folder, camp)


_HOLDERS: list = []


def _nothing_written(folder: Path) -> None:
    out = _out(folder)
    for fh in _HOLDERS:
        fh.close()
    _HOLDERS.clear()
    assert (out / "properties.csv").read_text(encoding="utf-8") == "earlier,run\n"
    assert sorted(p.name for p in out.iterdir()) == [LOCK_FILE, "properties.csv"]


def _stale_lock(folder: Path) -> list[str]:
    """The lock file of a run that died (its pid inside, no flock held): taken over."""
    camp = small_campaign(folder)
    out = _out(folder)
    out.mkdir(parents=True)
    (out / LOCK_FILE).write_text("999999\n", encoding="utf-8")
    return _analyze(folder, camp)


def _lock_taken_over(folder: Path) -> None:
    _complete_outputs(folder)
    assert (_out(folder) / LOCK_FILE).read_text(encoding="utf-8").strip() == str(os.getpid())


CASES = [
    Case(
        "user files in the folder are untouched",
        _with_user_files(),
        0,
        None,
        _user_files_kept,
        ("outputs",),
    ),
    Case(
        "user files in the folder are untouched by a second run",
        _rerun_with_user_files("--report-details", "1"),
        0,
        None,
        _user_files_kept,
        ("outputs",),
    ),
    Case(
        "user files untouched by a resumed run",
        _rerun_with_user_files("--resume"),
        0,
        None,
        _user_files_kept,
        ("outputs",),
    ),
    Case(
        "user's comparison.csv is not polarbeam's",
        _user_comparison_csv,
        0,
        None,
        _user_comparison_kept,
        ("outputs",),
    ),
    Case(
        "stale outputs of another campaign are removed",
        _other_campaign_after(),
        0,
        None,
        _only_campaign_b,
        ("outputs",),
    ),
    Case(
        "stale outputs of another campaign are removed on --resume",
        _other_campaign_after(second_more=("--resume",)),
        0,
        None,
        _only_campaign_b,
        ("outputs",),
    ),
    Case(
        "stale temporaries of a killed run are cleaned",
        _stale_temporaries,
        0,
        None,
        _temporaries_cleaned,
        ("outputs", "kill"),
    ),
    Case(
        "a folder held by another run",
        _held_by_another_run,
        2,
        r"out: results folder in use by another polarbeam run \(pid 4242\)",
        _nothing_written,
        ("outputs", "lock"),
    ),
    Case(
        "a stale lock is taken over",
        _stale_lock,
        0,
        None,
        _lock_taken_over,
        ("outputs", "lock"),
    ),
    # --out on a file: a clear error is the "clear errors" area of the catalogue, not this one
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_outputs(case, tmp_path):
    try:
        run_case(case, tmp_path)
    finally:
        for fh in _HOLDERS:
            fh.close()
        _HOLDERS.clear()
