"""phases.csv is written by the one atomic writer: the umask's mode, not mkstemp's 0600."""

from __future__ import annotations

import os
import stat

import pandas as pd

from polarbeam._util.atomic import atomic_path
from polarbeam.reduction import write_phases


class _Reduced:  # the attributes write_phases reads
    def __init__(self):
        self.table = pd.DataFrame({"compound": ["a"], "phase_rad": [0.1]})
        self.covariance: dict = {}


def test_phases_file_gets_the_umask_mode(tmp_path):
    old = os.umask(0o022)
    try:
        write_phases(_Reduced(), tmp_path / "phases.csv")
    finally:
        os.umask(old)
    mode = stat.S_IMODE((tmp_path / "phases.csv").stat().st_mode)
    assert mode == 0o644  # common practice: 0666 less the usual umask 022
    assert not list(tmp_path.glob("*.tmp"))


def test_a_failed_write_leaves_the_old_file_and_no_temporary(tmp_path):
    target = tmp_path / "out.csv"
    target.write_text("old\n")
    try:
        with atomic_path(target) as tmp:
            tmp.write_text("half")
            raise RuntimeError("disk full")
    except RuntimeError:
        pass
    assert target.read_text() == "old\n"
    assert not list(tmp_path.glob(".*.tmp"))
