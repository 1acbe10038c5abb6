"""Error messages quote a file's first line only when it looks like a table header of ours."""

from __future__ import annotations

import pytest

from polarbeam._util.tables import read_table
from polarbeam._util.text import NOT_A_TABLE, header_for_message, looks_like_header
from polarbeam.errors import InputError


def test_headers_of_ours_are_shown():
    assert looks_like_header(["compund", "alpha_A3"])  # a typo is still worth showing
    assert looks_like_header(["compound"], known=("compound",))
    assert header_for_message(["a", "b"]) == "a, b"


@pytest.mark.parametrize(
    "cells",
    [["root:x:0:0:root:/root:/bin/bash"], ["API_KEY=abc"], ["token"], ["-----BEGIN KEY-----"], []],
)
def test_other_first_lines_are_hidden(cells):
    assert not looks_like_header(cells, known=("compound",))
    assert header_for_message(cells, ("compound",)) == NOT_A_TABLE


def test_read_table_never_echoes_a_foreign_first_line(tmp_path):
    p = tmp_path / "notes.txt"
    p.write_text("secret:value:42\nmore\n", encoding="utf-8")
    with pytest.raises(InputError) as exc:
        read_table(p, ("compound", "mass_u"), "compounds")
    assert "secret" not in str(exc.value)
    assert str(exc.value) == f"notes.txt: {NOT_A_TABLE}; expected columns compound, mass_u"


def test_read_table_shows_a_header_of_ours(tmp_path):
    p = tmp_path / "c.csv"
    p.write_text("compund,mass_u\nx,1\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"found compund, mass_u"):
        read_table(p, ("compound", "mass_u"), "compounds")
