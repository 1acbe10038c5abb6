"""Paths named in campaign.toml: only regular files are accepted, a symlink loop is one line."""

from __future__ import annotations

import os

import pytest

from polarbeam.contract.paths import resolve_data_file
from polarbeam.errors import InputError


def test_regular_file_inside_and_outside(tmp_path):
    (tmp_path / "camp").mkdir()
    (tmp_path / "camp" / "a.csv").write_text("x\n")
    (tmp_path / "b.csv").write_text("x\n")
    assert resolve_data_file(tmp_path / "camp", "a.csv", "k") == (tmp_path / "camp" / "a.csv")
    assert resolve_data_file(tmp_path / "camp", "../b.csv", "k") == tmp_path / "b.csv"


def test_missing_file_is_left_to_the_reader(tmp_path):
    assert resolve_data_file(tmp_path, "none.csv", "k") == tmp_path / "none.csv"


def test_directory_fifo_device_and_loop(tmp_path):
    os.mkfifo(tmp_path / "fifo")
    os.symlink("l2", tmp_path / "l1")
    os.symlink("l1", tmp_path / "l2")
    with pytest.raises(InputError, match=r"^k: expected a regular file, found a directory"):
        resolve_data_file(tmp_path, ".", "k")
    with pytest.raises(InputError, match=r"found a FIFO"):
        resolve_data_file(tmp_path, "fifo", "k")
    with pytest.raises(InputError, match=r"found a device"):
        resolve_data_file(tmp_path, "/dev/null", "k")
    with pytest.raises(InputError, match=r"^k: 'l1' is a symlink loop; expected a regular file$"):
        resolve_data_file(tmp_path, "l1", "k")
