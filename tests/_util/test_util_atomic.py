"""Atomic output: whole files only, ordinary permissions, no temporary files left behind."""

import os
import stat

import pytest

from polarbeam._util.atomic import write_text_atomic


def test_atomic_write_replaces_and_cleans(tmp_path):
    target = tmp_path / "sub" / "a.csv"
    write_text_atomic(target, "one\n")
    write_text_atomic(target, "two\n")
    assert target.read_text() == "two\n"
    assert [p.name for p in target.parent.iterdir()] == ["a.csv"]
    mask = os.umask(0)
    os.umask(mask)
    assert stat.S_IMODE(target.stat().st_mode) == 0o666 & ~mask


def test_failed_write_leaves_old_file(tmp_path, monkeypatch):
    target = tmp_path / "b.txt"
    write_text_atomic(target, "old")

    def boom(*a, **k):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(OSError, match="disk full"):
        write_text_atomic(target, "new")
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["b.txt"]
