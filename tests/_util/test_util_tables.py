"""CSV reading with line numbers (polarbeam._util.tables)."""

from __future__ import annotations

import pytest

from polarbeam._util.tables import read_table
from polarbeam.errors import InputError

BODY = (
    '# a comment line\nname, mass_u ,note\n"Ring, substituted",120.5,"says ""hi"""\n\nplain,80,x\n'
)


def test_quoted_fields_and_line_numbers(tmp_path):
    p = tmp_path / "compounds.csv"
    p.write_text(BODY, encoding="utf-8")
    t = read_table(p, ("name", "mass_u"))
    # expected values from the CSV quoting rules of RFC 4180 (doubled quote inside quotes)
    assert t.columns == ("name", "mass_u", "note")
    assert t.rows[0] == {"name": "Ring, substituted", "mass_u": "120.5", "note": 'says "hi"'}
    assert t.rows[1]["name"] == "plain"
    assert t.lines == (3, 5)  # file lines, counted by hand: comment and blank line skipped
    assert t.number(0, "mass_u", positive=True) == 120.5


def test_missing_column_is_one_line_naming_the_file(tmp_path):
    p = tmp_path / "compounds.csv"
    p.write_text(BODY, encoding="utf-8")
    with pytest.raises(InputError) as exc:
        read_table(p, ("name", "temperature_K"))
    msg = str(exc.value)
    assert "\n" not in msg
    assert msg == (
        "compounds.csv: missing column(s) temperature_K; expected name, temperature_K, "
        "found name, mass_u, note"
    )


def test_missing_file_is_one_line(tmp_path):
    with pytest.raises(InputError, match=r"nothere\.csv: table file not found$"):
        read_table(tmp_path / "nothere.csv", ("name",))
