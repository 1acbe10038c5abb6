"""The command line's own texts: --version, and help that shows the contract's bracketed words.

Rich markup reads ``[data]`` or ``polarbeam[qc]`` as style tags and drops them; the app prints
plain help instead, and this test checks every bracketed word of every command's help text and
option help is shown intact.
"""

from __future__ import annotations

import re

import pytest
import typer
from typer.testing import CliRunner

import polarbeam
from polarbeam.cli.commands import app

_COMMANDS = typer.main.get_command(app).commands
_BRACKETED = re.compile(r"[A-Za-z_.]*\[[A-Za-z_.]+\]")


def test_version():
    out = CliRunner().invoke(app, ["--version"])
    assert out.exit_code == 0
    assert out.output.strip() == f"polarbeam {polarbeam.__version__}"


@pytest.mark.parametrize("name", sorted(_COMMANDS))
def test_help_keeps_bracketed_words(name):
    cmd = _COMMANDS[name]
    texts = [cmd.help or ""] + [getattr(p, "help", None) or "" for p in cmd.params]
    words = {w for t in texts for w in _BRACKETED.findall(t)}
    out = CliRunner().invoke(app, [name, "--help"], terminal_width=200)
    assert out.exit_code == 0
    flat = " ".join(out.output.split())
    for w in words:
        assert w in flat, f"{name} --help lost {w!r}"


def test_some_help_text_has_bracketed_words():
    # the check above is not vacuous: the contract's words do appear in help texts
    texts = [c.help or "" for c in _COMMANDS.values()] + [
        getattr(p, "help", None) or "" for c in _COMMANDS.values() for p in c.params
    ]
    assert sum(len(_BRACKETED.findall(t)) for t in texts) >= 2
