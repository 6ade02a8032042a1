"""Tests of fitdrag.cli: version, help of every command, exit codes and one-line errors.

Oracles: the installed distribution's metadata (importlib.metadata) for the version, the
project rules for the CLI (every command's help carries an example; bad arguments exit 2 with
one line; the exit codes of fitdrag.errors: 0 ok, 1 bug, 2 bad input, 3 no convergence,
4/5/6 the decisions), the Python interpreter itself (``python -m fitdrag``, ``sys.modules``
of a fresh interpreter) and the library's own constants (the parser's written-out defaults).
"""

from __future__ import annotations

import argparse
import importlib.metadata
import re
import subprocess
import sys
import types

import pytest

import fitdrag
from fitdrag import cli, errors


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
     (lambda: 5, 5, ""),
     (_raise(errors.InputError("mass: bad; fix it.")), 2,
      "fitdrag probe: error: mass: bad; fix it.\n"),
     (_raise(errors.InputFileNotFoundError("x.csv: no such file; check the path.")), 2,
      "fitdrag probe: error: x.csv: no such file; check the path.\n"),
     (_raise(errors.OutputExistsError("out.json: exists; pass --force.")), 2,
      "fitdrag probe: error: out.json: exists; pass --force.\n"),
     (_raise(errors.ConvergenceError("the fit did not converge")), 3,
      "fitdrag probe: error: the fit did not converge\n"),
     (_raise(errors.FitdragError("refused on purpose")), 1,
      "fitdrag probe: error: refused on purpose\n"),
     # the file system's own refusals of a path are bad input too
     (_raise(FileNotFoundError("x.csv: no such file")), 2,
      "fitdrag probe: error: x.csv: no such file\n"),
     (_raise(IsADirectoryError("out/: is a folder")), 2,
      "fitdrag probe: error: out/: is a folder\n"),
     (_raise(PermissionError("out.csv: permission denied")), 2,
      "fitdrag probe: error: out.csv: permission denied\n"),
     (_raise(KeyboardInterrupt()), 130, "fitdrag probe: interrupted\n"),
     (_raise(BrokenPipeError()), 0, "")],
)  # fmt: skip
def test_exit_code_mapping(monkeypatch, capsys, behaviour, code, err):
    """regression: cli.main maps a command's return value and exceptions to exit codes
    (0 ok, a FitdragError to its exit code with one line, 2 bad input with one line, other
    codes passed through, 130 on interrupt)."""
    _fake_command(monkeypatch, behaviour)
    got, _, got_err = run_cli(["probe"], capsys)
    assert (got, got_err) == (code, err)


@pytest.mark.parametrize("exc", [RuntimeError("bug"), KeyError("bug"), TypeError("bug"),
                                 LookupError("bug"), ValueError("bug")])  # fmt: skip
def test_unexpected_exception_propagates(monkeypatch, exc):
    """regression: a programming error is not disguised as bad input (it propagates; the
    interpreter exits 1 with a traceback)."""
    _fake_command(monkeypatch, _raise(exc))
    with pytest.raises(type(exc), match="bug"):
        cli.main(["probe"])


def test_a_bug_exits_1_with_a_traceback(tmp_path):
    """closed-form/independent: in a fresh interpreter an unexpected exception in a command
    ends the process with exit code 1 and Python's traceback (checked with the interpreter
    itself, not with cli.main)."""
    script = (
        "import sys, types\n"
        "from fitdrag import cli\n"
        "def register(sub):\n"
        "    return sub.add_parser('probe', epilog='Example: fitdrag probe')\n"
        "def run(args):\n"
        "    raise RuntimeError('a bug in probe')\n"
        "mod = types.SimpleNamespace(register=register, run=run)\n"
        "cli._command_modules = lambda: iter([mod])\n"
        "sys.exit(cli.main(['probe']))\n"
    )
    res = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                         timeout=120, cwd=tmp_path)  # fmt: skip
    assert res.returncode == 1
    assert "Traceback (most recent call last)" in res.stderr
    assert res.stderr.rstrip().endswith("RuntimeError: a bug in probe")


# ----------------------------------------------------------------------------- start-up

HEAVY_MODULES = ("numpy", "numba", "scipy", "cv2", "matplotlib", "pint")


def test_building_the_parser_imports_no_heavy_library(tmp_path):
    """closed-form/independent: a fresh interpreter that builds the whole parser (what
    ``fitdrag --help`` and ``fitdrag --version`` do) has loaded none of numpy, numba, scipy,
    cv2, matplotlib or pint (read from the interpreter's own sys.modules); the commands
    import the library only when they run."""
    script = (
        "import sys\n"
        "import fitdrag.cli\n"
        "fitdrag.cli.build_parser()\n"
        f"heavy = {HEAVY_MODULES!r}\n"
        "print(','.join(m for m in heavy if m in sys.modules))\n"
    )
    res = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                         timeout=120, cwd=tmp_path)  # fmt: skip
    assert res.returncode == 0, res.stderr
    assert res.stdout.strip() == ""


def test_python_dash_m_help_imports_no_heavy_library(tmp_path):
    """closed-form/independent: ``python -m fitdrag --help`` runs without loading numpy,
    numba, scipy, cv2, matplotlib or pint (``python -X importtime`` lists every module the
    interpreter imported, on stderr)."""
    res = subprocess.run([sys.executable, "-X", "importtime", "-m", "fitdrag", "--help"],
                         capture_output=True, text=True, timeout=120, cwd=tmp_path)  # fmt: skip
    assert res.returncode == 0, res.stderr
    assert "Exit codes:" in res.stdout
    imported = {ln.rsplit("|", 1)[-1].strip() for ln in res.stderr.splitlines()
                if ln.startswith("import time:")}  # fmt: skip
    assert "fitdrag.cli" in imported
    assert not imported & set(HEAVY_MODULES)


def test_parser_copies_of_library_constants_agree():
    """regression: defaults the parser writes out (so that it need not import the library)
    equal the library's own constants."""
    from fitdrag.commands import _import_options, _options
    from fitdrag.commands import demo as demo_cmd
    from fitdrag.commands import records as records_cmd
    from fitdrag.physics.air import STANDARD_GRAVITY
    from fitdrag.run.demo import DEFAULT_DIRECTORY
    from fitdrag.run.records import DEFAULT_FILENAME
    from fitdrag.tracks import UNITS

    assert tuple(_import_options.UNIT_CHOICES) == tuple(UNITS)
    assert float(_options._STANDARD_GRAVITY_TEXT) == STANDARD_GRAVITY
    assert demo_cmd.DEFAULT_DIRECTORY == DEFAULT_DIRECTORY
    assert records_cmd.DEFAULT_FILENAME == DEFAULT_FILENAME


# ----------------------------------------------------------------------------- exit codes in help


def test_top_level_help_lists_every_exit_code(capsys):
    """regression: ``fitdrag --help`` documents the exit codes of fitdrag.errors."""
    code, out, _ = run_cli(["--help"], capsys)
    assert code == 0
    table = out[out.index("Exit codes:") :]
    for value in (errors.EXIT_OK, errors.EXIT_BUG, errors.EXIT_BAD_INPUT,
                  errors.EXIT_NO_CONVERGENCE, errors.EXIT_FAIL, errors.EXIT_CONDITIONAL_PASS,
                  errors.EXIT_CONDITIONAL_FAIL):  # fmt: skip
        assert f"\n  {value}  " in table


@pytest.mark.parametrize("name", COMMANDS)
def test_every_command_help_states_its_exit_codes(name, capsys):
    """regression: every command's help states its exit codes, at least 0 and 2."""
    code, out, _ = run_cli([name, "--help"], capsys)
    assert code == 0
    after = " ".join(out[out.index("Exit codes:") :].split())
    assert "0 " in after and "2 bad" in after


@pytest.mark.parametrize("name", ["run", "demo"])
def test_commands_that_decide_document_the_decision_codes(name, capsys):
    """regression: the commands that issue a certificate with a decision document the exit
    codes 3 (no convergence), 4 (FAIL), 5 (conditional pass) and 6 (conditional fail)."""
    _, out, _ = run_cli([name, "--help"], capsys)
    after = " ".join(out[out.index("Exit codes:") :].split())
    for pattern in (r"\b3 the fit", r"\b4 [^0-9]*FAIL", r"\b5 [^0-9]*conditional pass",
                    r"\b6 [^0-9]*conditional fail"):  # fmt: skip
        assert re.search(pattern, after), (pattern, after)
