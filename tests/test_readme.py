"""The README's quick start and the CI script agree (regression checks on the docs)."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

from fitdrag import errors

ROOT = Path(__file__).resolve().parents[1]


def _quick_start_commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```bash\n(.*?)```", section, flags=re.S)
    commands = []
    for block in blocks:
        lines = [ln for ln in block.splitlines() if ln.strip() and not ln.startswith("#")]
        commands.append(" ".join(lines))
    return commands


def _ci_test_command() -> str:
    text = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    m = re.search(r"^TEST_COMMAND=(.*)$", text, flags=re.M)
    assert m, ".ci/run must define TEST_COMMAND"
    return shlex.split(m.group(1))[0]


def test_quick_start_has_two_commands():
    """regression: the quick start shows exactly two commands (run the job; run the tests)."""
    commands = _quick_start_commands()
    assert len(commands) == 2, commands
    assert "fitdrag" in commands[0]
    assert "pytest" in commands[1]


def test_ci_runs_exactly_the_readme_test_command():
    """regression: .ci/run's test command is the README's, character for character."""
    assert _ci_test_command() == _quick_start_commands()[1]


def test_ci_treats_no_tests_as_failure():
    """regression: pytest's exit code 5 (no tests collected) fails CI."""
    text = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert '"$rc" -eq 5' in text and "exit 1" in text


def test_readme_first_paragraph_states_the_job():
    """regression: the first paragraph says who uses fitdrag and for what."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    first = text.split("\n\n")[1]
    for word in ("drag coefficient", "footage", "uncertainty", "certificate"):
        assert word in first


def test_readme_carries_safety_cautions():
    """regression: the README warns about projectiles, lighting and certificates."""
    text = (ROOT / "README.md").read_text(encoding="utf-8").lower()
    for word in ("eye protection", "lamps", "accredit", "local codes"):
        assert word in text


def _exit_code_table() -> dict[int, str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Command line and exit codes", 1)[1].split("\n## ", 1)[0]
    return {int(m.group(1)): m.group(2) for m in re.finditer(r"^\| (\d+) \| (.*) \|$", section,
                                                             flags=re.M)}  # fmt: skip


def test_readme_exit_code_table_matches_the_code():
    """regression: the README's exit-code table lists exactly the codes of fitdrag.errors,
    each with its meaning, and the decisions with the codes errors.DECISION_EXIT_CODES gives."""
    table = _exit_code_table()
    assert sorted(table) == sorted({errors.EXIT_OK, errors.EXIT_BUG, errors.EXIT_BAD_INPUT,
                                    errors.EXIT_NO_CONVERGENCE, errors.EXIT_FAIL,
                                    errors.EXIT_CONDITIONAL_PASS, errors.EXIT_CONDITIONAL_FAIL,
                                    errors.EXIT_RECORDS_NOT_INTACT,
                                    errors.EXIT_OUT_OF_CONTROL})  # fmt: skip
    assert "records verify" in table[errors.EXIT_RECORDS_NOT_INTACT]
    assert "records chart" in table[errors.EXIT_OUT_OF_CONTROL]
    assert "bug" in table[errors.EXIT_BUG]
    assert "bad arguments or input" in table[errors.EXIT_BAD_INPUT]
    assert "did not converge" in table[errors.EXIT_NO_CONVERGENCE]
    for decision, code in errors.DECISION_EXIT_CODES.items():
        assert decision.upper() in table[code].upper(), (decision, table[code])


def test_ci_checks_the_import_layers():
    """regression: CI runs import-linter (the layer contract in pyproject.toml) after ruff."""
    text = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert ".venv/bin/lint-imports || exit 1" in text
    assert text.index("ruff format --check") < text.index("lint-imports")
