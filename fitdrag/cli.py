"""Command line: ``fitdrag <command> ...``.

A thin layer: each command lives in its own module in :mod:`fitdrag.commands`, which
parses, calls the library and prints.  Building the parser imports only those modules,
which load the library (numpy, numba, ...) inside their ``run``; so ``fitdrag --help`` and
``fitdrag --version`` start fast.

Exit codes (:mod:`fitdrag.errors`): 0 done (a certificate: PASS or no decision), 1 a bug
(an unexpected exception, printed with its traceback), 2 bad arguments or input, 3 the fit
did not converge, 4 FAIL, 5 conditional pass, 6 conditional fail.
"""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from fitdrag._version import __version__
from fitdrag.errors import EXIT_BAD_INPUT, EXIT_OK, FitdragError

EXIT_CODES_HELP = """\
Exit codes:
  0  done; for a certificate: the decision is PASS, or the job states no specification
  1  a bug: an unexpected error, printed with its traceback (please report it)
  2  bad arguments or input (a file, a value, an option)
  3  the fit, or a re-fit of the uncertainty budget, did not converge
  4  certificate issued; the decision is FAIL
  5  certificate issued; the decision is a conditional pass (guarded acceptance)
  6  certificate issued; the decision is a conditional fail (guarded acceptance)
  7  records verify: records altered or deleted, or certificate files changed
"""

# The file system's own refusals of a path the user gave (no such file, a folder where a file
# was expected, no permission) are bad input too: they exit 2 with one line.  Every other
# exception that is not a fitdrag.errors.FitdragError is a bug (exit 1, with its traceback).
_FILE_SYSTEM_REFUSALS: tuple[type[BaseException], ...] = (
    FileNotFoundError,
    IsADirectoryError,
    NotADirectoryError,
    PermissionError,
)


class _Parser(argparse.ArgumentParser):
    """argparse parser whose errors are one clear line and exit code 2."""

    def error(self, message: str) -> None:  # noqa: D401 - argparse API
        words = self.prog.split()
        name = "fitdrag" if len(words) == 1 else f"fitdrag {words[-1]}"
        self.exit(EXIT_BAD_INPUT, f"{name}: error: {message}\n")


def _command_names() -> list[str]:
    """Names of the command modules: the public ``*.py`` files of :mod:`fitdrag.commands`.

    (A directory listing rather than :func:`pkgutil.iter_modules`, which imports
    :mod:`inspect` and costs a noticeable part of the start-up.)
    """
    import fitdrag.commands as pkg

    names = set()
    for folder in pkg.__path__:
        with os.scandir(folder) as entries:
            for entry in entries:
                stem, dot, ext = entry.name.partition(".")
                if dot and ext == "py" and stem.isidentifier() and not stem.startswith("_"):
                    names.add(stem)
    return sorted(names)


def _command_modules():
    for name in _command_names():
        mod = importlib.import_module(f"fitdrag.commands.{name}")
        if hasattr(mod, "register") and hasattr(mod, "run"):
            yield mod


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="fitdrag",
        description=(
            "Measure the drag coefficient of a specimen from high-speed footage or a track, "
            "with an uncertainty budget and a fit certificate."
        ),
        epilog="Example: fitdrag simulate --mass 0.0027 --diameter 0.04 --cd 0.47 "
        "--speed 8 --angle 30 --fps 500 --frames 200 -o track.csv\n\n" + EXIT_CODES_HELP,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"fitdrag {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    for mod in _command_modules():
        sp = mod.register(sub)
        sp.set_defaults(_run=mod.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args, extra = parser.parse_known_args(argv)
    if extra:
        name = f"fitdrag {args.command}" if getattr(args, "command", None) else "fitdrag"
        print(f"{name}: error: unrecognized arguments: {' '.join(extra)}", file=sys.stderr)
        return EXIT_BAD_INPUT
    if getattr(args, "_run", None) is None:
        parser.print_help()
        return EXIT_BAD_INPUT
    try:
        return int(args._run(args) or EXIT_OK)
    except FitdragError as exc:
        print(f"fitdrag {args.command}: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except _FILE_SYSTEM_REFUSALS as exc:
        print(f"fitdrag {args.command}: error: {exc}", file=sys.stderr)
        return EXIT_BAD_INPUT
    except BrokenPipeError:  # output piped into a pager or head
        return EXIT_OK
    except KeyboardInterrupt:
        print(f"fitdrag {args.command}: interrupted", file=sys.stderr)
        return 130
    # any other exception is a bug: it propagates, Python prints its traceback and exits 1


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
