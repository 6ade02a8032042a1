"""The package's exceptions, and the exit codes the command line maps them to.

Only these errors are expected: a :class:`InputError` is bad input (a file, a value, an
option) and names the input, the value received and the fix; a :class:`ConvergenceError`
is a fit or a re-fit that did not converge.  Any other exception is a bug.  Both input
errors remain :class:`ValueError` (and a missing file a :class:`FileNotFoundError`), so
code that catches the built-in types keeps working.
"""

from __future__ import annotations

from types import MappingProxyType

__all__ = [
    "DECISION_EXIT_CODES",
    "ConvergenceError",
    "EXIT_BAD_INPUT",
    "EXIT_BUG",
    "EXIT_CONDITIONAL_FAIL",
    "EXIT_CONDITIONAL_PASS",
    "EXIT_FAIL",
    "EXIT_NO_CONVERGENCE",
    "EXIT_OK",
    "EXIT_OUT_OF_CONTROL",
    "EXIT_RECORDS_NOT_INTACT",
    "FitdragError",
    "InputError",
    "InputFileNotFoundError",
    "OutputExistsError",
    "exit_code_for_decision",
]

#: Done; for a certificate with a decision: the decision is PASS.
EXIT_OK = 0
#: An unexpected exception: a bug, printed with its traceback.
EXIT_BUG = 1
#: Bad input: a file, a value or an option (:class:`InputError`).
EXIT_BAD_INPUT = 2
#: The fit or a re-fit did not converge (:class:`ConvergenceError`).
EXIT_NO_CONVERGENCE = 3
#: Certificate issued; the decision is FAIL.
EXIT_FAIL = 4
#: Certificate issued; the decision is a conditional pass (guarded acceptance).
EXIT_CONDITIONAL_PASS = 5
#: Certificate issued; the decision is a conditional fail (guarded acceptance).
EXIT_CONDITIONAL_FAIL = 6
#: ``records verify``: records altered or deleted, or certificate files changed.
EXIT_RECORDS_NOT_INTACT = 7
#: ``fitdrag records chart``: the latest result of the check standard is out of control.
EXIT_OUT_OF_CONTROL = 8


#: Each conformity decision (the strings of :mod:`fitdrag.uncertainty.decision`) and the exit
#: code of a command that issued a certificate with it.
DECISION_EXIT_CODES = MappingProxyType(
    {
        "pass": EXIT_OK,
        "conditional pass": EXIT_CONDITIONAL_PASS,
        "conditional fail": EXIT_CONDITIONAL_FAIL,
        "fail": EXIT_FAIL,
    }
)


def exit_code_for_decision(decision: str | None) -> int:
    """The exit code of a command whose certificate carries ``decision``.

    Parameters
    ----------
    decision : str or None
        One of :data:`fitdrag.uncertainty.decision.DECISIONS`, or None when the job states
        no specification (no decision: exit code 0).

    Raises
    ------
    LookupError
        An unknown decision string: a bug, not bad input.
    """
    if decision is None:
        return EXIT_OK
    try:
        return DECISION_EXIT_CODES[decision]
    except KeyError:
        raise LookupError(
            f"unknown conformity decision {decision!r}; expected one of "
            f"{', '.join(map(repr, DECISION_EXIT_CODES))}"
        ) from None


class FitdragError(Exception):
    """Base of every error fitdrag raises on purpose.

    ``exit_code`` is the command line's exit code for it; the command line prints the
    message as one line (no traceback).
    """

    exit_code: int = EXIT_BUG


class InputError(FitdragError, ValueError):
    """Bad input: the message names the input, the value received and the fix."""

    exit_code = EXIT_BAD_INPUT


class InputFileNotFoundError(InputError, FileNotFoundError):
    """An input file or folder that does not exist."""


class OutputExistsError(InputError, FileExistsError):
    """An output file exists and overwriting was not asked for."""


class ConvergenceError(FitdragError, RuntimeError):
    """A fit, or a re-fit of the uncertainty budget, did not converge."""

    exit_code = EXIT_NO_CONVERGENCE
