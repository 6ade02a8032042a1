"""``fitdrag new-job PATH``: write a commented job-file template to fill in."""

from __future__ import annotations

import argparse
from pathlib import Path


def register(subparsers) -> argparse.ArgumentParser:
    p = subparsers.add_parser(
        "new-job",
        help="write a commented job-file template",
        description=(
            "Write a job file describing an invented, synthetic measurement, with a comment on "
            "every key (unit, meaning). Edit it for your own specimen, then run it with "
            "'fitdrag run'."
        ),
        epilog="Example: fitdrag new-job ball.toml && fitdrag run ball.toml\n\n"
        "Exit codes: 0 written, 1 a bug (with a traceback), 2 bad arguments or the file "
        "exists (pass --force).",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    p.add_argument("path", metavar="PATH", help="job file to create (.toml)")
    p.add_argument("--force", action="store_true", help="overwrite an existing file")
    return p


def run(args) -> int:
    from fitdrag.run.job_template import write_template

    path = write_template(Path(args.path), force=args.force)
    print(f"wrote {path}; edit it, then run: fitdrag run {path}")
    return 0
