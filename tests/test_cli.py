"""Tests of fitdrag.cli: version, help of every command, exit codes and one-line errors.

Oracles: the installed distribution's metadata (importlib.metadata) for the version, the
project rules for the CLI (every command's help carries an example; bad arguments exit 2 with
one line; exit codes 0 ok, 2 bad input, 3 no convergence), and the Python interpreter itself
(``python -m fitdrag``).
"""

from __future__ import annotations

import argparse
import importlib.metadata
import subprocess
import sys
import types

import pytest

import fitdrag
from fitdrag import cli


def run_cli(argv, capsys):
    try:
        code = cli.main(list(argv))
    except SystemExit as exc:
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def _command_names():
    parser = cli.build_parser()
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            return sorted(action.choices)
    raise AssertionError("no sub-commands registered")


COMMANDS = _command_names()


def test_version(capsys):
    """closed-form/independent: --version prints the installed distribution's version."""
    code, out, err = run_cli(["--version"], capsys)
    assert code == 0
    assert out == f"fitdrag {importlib.metadata.version('fitdrag')}\n"
    assert fitdrag.__version__ == importlib.metadata.version("fitdrag")


def test_python_dash_m_runs_the_cli():
    """closed-form/independent: ``python -m fitdrag --version`` works from a fresh interpreter."""
    res = subprocess.run([sys.executable, "-m", "fitdrag", "--version"], capture_output=True,
                         text=True, timeout=120)  # fmt: skip
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip() == f"fitdrag {fitdrag.__version__}"


def test_top_level_help_lists_commands_and_example(capsys):
    """regression: fitdrag --help names every command and shows an example."""
    code, out, _ = run_cli(["--help"], capsys)
    assert code == 0
    assert "Example" in out
    for name in COMMANDS:
        assert name in out


def test_simulate_is_registered():
    """regression: the simulate command of issue 2 is discovered."""
    assert "simulate" in COMMANDS


@pytest.mark.parametrize("name", COMMANDS)
def test_every_command_help_has_example(name, capsys):
    """regression (project rule): ``fitdrag <command> --help`` exits 0 and carries an example
    that invokes that very command."""
    code, out, err = run_cli([name, "--help"], capsys)
    assert code == 0
    assert err == ""
    assert "Example" in out
    after = out[out.index("Example") :]
    assert f"fitdrag {name}" in after


def test_no_command_prints_help_and_exits_2(capsys):
    """regression: plain ``fitdrag`` prints the help and exits 2."""
    code, out, _ = run_cli([], capsys)
    assert code == 2
    assert out.startswith("usage: fitdrag")


def _one_line(err):
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    return lines[0]


def test_unknown_command_exits_2_with_one_line(capsys):
    """regression: an unknown command exits 2 with one line listing the valid ones."""
    code, out, err = run_cli(["frobnicate"], capsys)
    assert code == 2
    assert out == ""
    line = _one_line(err)
    assert "invalid choice: 'frobnicate'" in line
    for name in COMMANDS:
        assert repr(name) in line


def test_unknown_top_level_option_exits_2_with_one_line(capsys):
    """regression: an unknown option exits 2 with one line."""
    code, _, err = run_cli(["--bogus"], capsys)
    assert code == 2
    assert "unrecognized arguments: --bogus" in _one_line(err)


def test_top_level_error_prefix_is_not_doubled(capsys):
    """regression: top-level errors start with 'fitdrag: error:' (the sub-command errors use
    'fitdrag <command>: error:'); earlier the program name was repeated."""
    _, _, err = run_cli(["--bogus"], capsys)
    assert err.startswith("fitdrag: error: ")


@pytest.mark.parametrize("name", COMMANDS)
def test_every_command_bad_option_exits_2_with_one_line(name, capsys):
    """regression (project rule): bad arguments to any command exit 2 with exactly one line
    starting 'fitdrag <command>: error:' (no usage block)."""
    code, out, err = run_cli([name, "--no-such-option-xyz"], capsys)
    assert code == 2
    assert out == ""
    assert _one_line(err).startswith(f"fitdrag {name}: error: ")


# ----------------------------------------------------------------------------- exit-code mapping


def _fake_command(monkeypatch, behaviour):
    """Replace the command discovery by one fake command 'probe' whose run() does
    ``behaviour()``."""

    def register(sub):
        return sub.add_parser("probe", help="test probe", epilog="Example: fitdrag probe")

    def run(args):
        return behaviour()

    mod = types.SimpleNamespace(register=register, run=run)
    monkeypatch.setattr(cli, "_command_modules", lambda: iter([mod]))


def _raise(exc):
    def f():
        raise exc

    return f


@pytest.mark.parametrize(
    ("behaviour", "code", "err"),
    [(lambda: 0, 0, ""),
     (lambda: None, 0, ""),
     (lambda: 3, 3, ""),
     (_raise(ValueError("mass: bad; fix it.")), 2, "fitdrag probe: error: mass: bad; fix it.\n"),
     (_raise(FileNotFoundError("x.csv: no such file")), 2,
      "fitdrag probe: error: x.csv: no such file\n"),
     (_raise(KeyboardInterrupt()), 130, "fitdrag probe: interrupted\n"),
     (_raise(BrokenPipeError()), 0, "")],
)  # fmt: skip
def test_exit_code_mapping(monkeypatch, capsys, behaviour, code, err):
    """regression: cli.main maps a command's return value and exceptions to exit codes
    (0 ok, 2 bad input with one line, 3 passed through, 130 on interrupt)."""
    _fake_command(monkeypatch, behaviour)
    got, _, got_err = run_cli(["probe"], capsys)
    assert (got, got_err) == (code, err)


def test_unexpected_exception_propagates(monkeypatch):
    """regression: a programming error is not disguised as bad input (it propagates; the
    interpreter exits 1 with a traceback)."""
    _fake_command(monkeypatch, _raise(RuntimeError("bug")))
    with pytest.raises(RuntimeError, match="^bug$"):
        cli.main(["probe"])
