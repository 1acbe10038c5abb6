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


@pytest.mark.parametrize("name", ["analyze", "reduce", "plan", "estimate", "compute", "demo"])
def test_nothing_is_written_into_the_current_folder_unasked(name, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    args = {"demo": [], "compute": ["O"]}.get(name, [str(tmp_path / "missing.toml")])
    out = CliRunner().invoke(app, [name, *args])
    assert out.exit_code == 2  # click's usage error: --out is required
    assert "--out" in out.output
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("name", ["analyze", "reduce", "plan", "estimate", "compute", "demo"])
def test_out_help_says_folder_or_file(name):
    (opt,) = [p for p in _COMMANDS[name].params if "--out" in getattr(p, "opts", ())]
    assert opt.help.startswith(("folder to write", "file to write"))
