"""The results-folder hold: manifest of polarbeam's files, lock, stale temporaries (no physics)."""

from __future__ import annotations

import json
import os
import sys

import pytest

from polarbeam._util.atomic import write_text_atomic
from polarbeam._util.outfolder import (
    LOCK_FILE,
    MANIFEST_FILE,
    held_folder,
    is_stale_temporary,
    output_folder,
    written_files,
)
from polarbeam.errors import FolderInUseError, InputError


def _manifest(out):
    return json.loads((out / MANIFEST_FILE).read_text(encoding="utf-8"))


def test_manifest_lists_what_was_written_and_only_that_is_replaced(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    (out / "mine.csv").write_text("user", encoding="utf-8")
    with output_folder(out):
        write_text_atomic(out / "a.csv", "1")
        write_text_atomic(out / "sub" / "b.json", "2")
    assert _manifest(out) == {
        "format": "polarbeam-manifest/1",
        "complete": True,
        "files": ["a.csv", "sub/b.json"],
    }
    with output_folder(out):  # the next run writes only a.csv: sub/b.json goes, mine.csv stays
        write_text_atomic(out / "a.csv", "3")
    assert _manifest(out)["files"] == ["a.csv"]
    assert not (out / "sub" / "b.json").exists()
    assert (out / "mine.csv").read_text(encoding="utf-8") == "user"
    assert (out / "a.csv").read_text(encoding="utf-8") == "3"


def test_fresh_run_clears_before_its_first_file_resume_keeps_until_the_end(tmp_path):
    out = tmp_path / "out"
    with output_folder(out):
        write_text_atomic(out / "old.csv", "old")
    with output_folder(out):
        write_text_atomic(out / "new.csv", "new")
        assert not (out / "old.csv").exists()  # never a mix of two runs
    with output_folder(out, resume=True) as held:
        write_text_atomic(out / "third.csv", "x")
        assert (out / "new.csv").exists()  # a resumed run may still reuse it
        held.keep([out / "new.csv"])
    assert _manifest(out)["files"] == ["new.csv", "third.csv"]


def test_a_run_that_stops_leaves_a_manifest_naming_its_files(tmp_path):
    out = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt), output_folder(out):
        write_text_atomic(out / "a.csv", "1")
        raise KeyboardInterrupt
    doc = _manifest(out)
    assert doc["complete"] is False and doc["files"] == ["a.csv"]
    assert held_folder(out) is None


def test_nested_holds_join_and_innermost_folder_owns_the_file(tmp_path):
    out = tmp_path / "out"
    with output_folder(out) as top:
        with output_folder(out) as again:
            assert again is top
        with output_folder(out / "camp"):
            write_text_atomic(out / "camp" / "series.csv", "s")
        write_text_atomic(out / "campaigns.csv", "c")
    assert _manifest(out)["files"] == ["campaigns.csv"]
    assert _manifest(out / "camp")["files"] == ["series.csv"]


@pytest.mark.skipif(sys.platform == "win32", reason="flock is POSIX")
def test_second_hold_is_refused_with_the_holder_pid(tmp_path):
    out = tmp_path / "out"
    with output_folder(out):
        fcntl = pytest.importorskip("fcntl")
        fh = open(out / LOCK_FILE, encoding="utf-8")  # another open file: as another process
        with pytest.raises(OSError):
            fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        fh.close()
        assert (out / LOCK_FILE).read_text(encoding="utf-8") == f"{os.getpid()}\n"
    assert issubclass(FolderInUseError, InputError)


def test_manifest_entries_outside_the_folder_are_ignored(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    victim = tmp_path / "victim.txt"
    victim.write_text("keep", encoding="utf-8")
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    (elsewhere / "x.png").write_text("keep", encoding="utf-8")
    (out / "figures").symlink_to(elsewhere)
    (out / MANIFEST_FILE).write_text(
        json.dumps({"files": ["../victim.txt", str(victim), "figures/x.png"]}), encoding="utf-8"
    )
    with output_folder(out):
        write_text_atomic(out / "a.csv", "1")
    assert victim.read_text(encoding="utf-8") == "keep"
    assert (elsewhere / "x.png").read_text(encoding="utf-8") == "keep"


def test_stale_temporaries_are_the_atomic_writers_only(tmp_path):
    assert is_stale_temporary(".series.csv.k3j_x9ab.tmp")
    assert is_stale_temporary(".cmp-1-d36a9a6177.json.abcdefgh.tmp")
    assert not is_stale_temporary("draft.tmp")
    assert not is_stale_temporary(".notes.tmp")
    out = tmp_path / "out"
    (out / "compounds").mkdir(parents=True)
    (out / "compounds" / ".a.json.abcdefgh.tmp").write_text("{", encoding="utf-8")
    (out / "draft.tmp").write_text("mine", encoding="utf-8")
    with output_folder(out):
        pass
    assert not (out / "compounds" / ".a.json.abcdefgh.tmp").exists()
    assert (out / "draft.tmp").exists()


def test_written_files_lists_what_this_run_wrote(tmp_path):
    (tmp_path / "notes.txt").write_text("mine", encoding="utf-8")
    with output_folder(tmp_path):
        for name in ("report.tex", "properties.csv", "series.csv", "batch-state.json"):
            write_text_atomic(tmp_path / name, "x")
        (tmp_path / "figures").mkdir()
        write_text_atomic(tmp_path / "figures" / "a.png", "x")
    # main tables first, then the rest sorted; state files, sub-folders and user files left out
    assert written_files(tmp_path) == ["series.csv", "properties.csv", "report.tex"]
