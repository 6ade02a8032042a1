"""Command line: ``fitdrag <command> ...``.

A thin layer: each command lives in its own module in :mod:`fitdrag.commands`, which
parses, calls the library, prints, and maps exceptions to exit codes.  Exit codes:
0 success, 2 bad arguments or input, 3 the fit did not converge, 1 anything else.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys

from fitdrag._version import __version__


class _Parser(argparse.ArgumentParser):
    """argparse parser whose errors are one clear line and exit code 2."""

    def error(self, message: str) -> None:  # noqa: D401 - argparse API
        words = self.prog.split()
        name = "fitdrag" if len(words) == 1 else f"fitdrag {words[-1]}"
        self.exit(2, f"{name}: error: {message}\n")


def _command_modules():
    import fitdrag.commands as pkg

    for info in sorted(pkgutil.iter_modules(pkg.__path__), key=lambda m: m.name):
        if info.name.startswith("_"):
            continue
        mod = importlib.import_module(f"fitdrag.commands.{info.name}")
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
        "--speed 8 --angle 30 --fps 500 --frames 200 -o track.csv",
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
        return 2
    if getattr(args, "_run", None) is None:
        parser.print_help()
        return 2
    try:
        return int(args._run(args) or 0)
    except (ValueError, FileNotFoundError, IsADirectoryError, PermissionError) as exc:
        print(f"fitdrag {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except BrokenPipeError:  # output piped into a pager or head
        return 0
    except KeyboardInterrupt:
        print(f"fitdrag {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
