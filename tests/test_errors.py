"""Tests of fitdrag.errors: the error classes and the exit codes they map to.

Oracles: the documented exit-code table (README "Exit codes", fitdrag.cli's help) and the
decision strings of fitdrag.uncertainty.decision (ILAC-G8:09/2019's four outcomes of guarded
acceptance: pass, conditional pass, conditional fail, fail).
"""

from __future__ import annotations

import pytest

from fitdrag import errors
from fitdrag.uncertainty import decision


def test_exit_code_values_are_the_documented_ones():
    """regression: the exit codes keep the numbers the README and the help document."""
    assert (errors.EXIT_OK, errors.EXIT_BUG, errors.EXIT_BAD_INPUT, errors.EXIT_NO_CONVERGENCE,
            errors.EXIT_FAIL, errors.EXIT_CONDITIONAL_PASS,
            errors.EXIT_CONDITIONAL_FAIL) == (0, 1, 2, 3, 4, 5, 6)  # fmt: skip


def test_every_decision_has_its_exit_code():
    """closed-form/independent: each of the four decisions of fitdrag.uncertainty.decision
    (ILAC-G8 guarded acceptance) maps to its documented exit code, and no other string does."""
    assert set(errors.DECISION_EXIT_CODES) == set(decision.DECISIONS)
    assert errors.exit_code_for_decision(decision.PASS) == 0
    assert errors.exit_code_for_decision(decision.FAIL) == 4
    assert errors.exit_code_for_decision(decision.CONDITIONAL_PASS) == 5
    assert errors.exit_code_for_decision(decision.CONDITIONAL_FAIL) == 6


def test_no_decision_is_exit_0():
    """regression: a certificate without a specification (no decision) exits 0."""
    assert errors.exit_code_for_decision(None) == errors.EXIT_OK


def test_unknown_decision_is_a_bug_not_bad_input():
    """regression: an unknown decision string raises LookupError (a bug, exit 1), not a
    ValueError that the command line would report as bad input."""
    with pytest.raises(LookupError, match="unknown conformity decision 'maybe'"):
        errors.exit_code_for_decision("maybe")
    with pytest.raises(LookupError):
        errors.exit_code_for_decision("PASS")  # the strings are lower case


@pytest.mark.parametrize(
    ("cls", "builtin", "code"),
    [(errors.InputError, ValueError, 2),
     (errors.InputFileNotFoundError, FileNotFoundError, 2),
     (errors.InputFileNotFoundError, ValueError, 2),
     (errors.OutputExistsError, FileExistsError, 2),
     (errors.ConvergenceError, RuntimeError, 3),
     (errors.FitdragError, Exception, 1)],
)  # fmt: skip
def test_classes_keep_the_builtin_types_and_carry_their_exit_code(cls, builtin, code):
    """regression: every error is a FitdragError and still the built-in type callers catch,
    and carries the exit code the command line returns for it."""
    exc = cls("x: bad; fix it.")
    assert isinstance(exc, errors.FitdragError)
    assert isinstance(exc, builtin)
    assert exc.exit_code == code
