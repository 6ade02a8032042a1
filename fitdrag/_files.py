"""Writing output files safely: never half-written, never overwritten unasked.

Every output (track CSV, JSON, figures, lens files) goes through :func:`write_atomic`:
the content is written to a temporary file in the destination folder, flushed, given the
usual permissions, and only then moved into place, so a crash leaves either the old file
or the new one, never a fragment.  Without ``force`` an existing file is refused, and the
final step uses a hard link so that a file appearing meanwhile is not clobbered either.

:func:`temporary_path` names a temporary file beside a final one, for writers that render
several files first and publish them together later (the certificate and its record).
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from pathlib import Path

from fitdrag.errors import InputError, InputFileNotFoundError, OutputExistsError

__all__ = [
    "OutputExistsError",
    "check_output",
    "temporary_path",
    "write_atomic",
    "write_text_atomic",
]


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def check_output(path: str | os.PathLike, *, force: bool = False) -> Path:
    """Validate an output path before any work is done; returns it as a Path.

    Raises ValueError for a directory, FileNotFoundError for a missing folder and
    OutputExistsError for an existing file without ``force``.
    """
    p = Path(path)
    if p.is_dir():
        raise InputError(f"{p}: is a directory; give the path of the output file to write.")
    parent = p.parent if str(p.parent) else Path(".")
    if not parent.is_dir():
        raise InputFileNotFoundError(
            f"{p}: the directory {str(parent)!r} does not exist; create it first or choose "
            f"another output path."
        )
    if p.exists() and not force:
        raise OutputExistsError(f"{p}: file exists; pass --force (force=True) to overwrite it.")
    return p


def write_atomic(path: str | os.PathLike, write: Callable[[Path], None], *,
                 force: bool = False, check: Callable[[Path], object] | None = None) -> Path:  # fmt: skip
    """Create ``path`` through ``write(temporary_path)``, atomically.

    Parameters
    ----------
    path : path-like
        Destination file.
    write : callable
        Writes the whole content to the temporary path it is given (the temporary name
        ends in ``.tmp``: pass the format explicitly, e.g. ``savefig(p, format="png")``).
    force : bool
        Replace an existing file.
    check : callable, optional
        ``check(temporary_path)`` may raise to refuse the content before it replaces
        anything (e.g. "the file must load back as a track").

    Returns
    -------
    pathlib.Path
    """
    p = check_output(path, force=force)
    parent = p.parent if str(p.parent) else Path(".")
    fd, name = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".tmp", dir=parent)
    os.close(fd)
    tmp = Path(name)
    try:
        write(tmp)
        if check is not None:
            check(tmp)
        with open(tmp, "rb+") as fh:
            os.fsync(fh.fileno())
        os.chmod(tmp, 0o666 & ~_umask())
        if force:
            os.replace(tmp, p)
        else:
            try:
                os.link(tmp, p)  # fails if the file appeared meanwhile: never clobber
            except FileExistsError:
                raise OutputExistsError(
                    f"{p}: file exists; pass --force (force=True) to overwrite it."
                ) from None
            except OSError:  # a file system without hard links
                if p.exists():
                    raise OutputExistsError(
                        f"{p}: file exists; pass --force (force=True) to overwrite it."
                    ) from None
                os.replace(tmp, p)
    finally:
        if tmp.exists():
            tmp.unlink()
    return p


def write_text_atomic(path: str | os.PathLike, text: str, *, force: bool = False) -> Path:
    """Write ``text`` (UTF-8, ``\\n`` line ends) to ``path`` atomically; see write_atomic."""
    return write_atomic(
        path, lambda t: t.write_text(text, encoding="utf-8", newline="\n"), force=force
    )


def temporary_path(final: str | os.PathLike) -> Path:
    """A temporary file name beside ``final`` (same folder, so ``os.replace`` is atomic).

    The name is ``.NAME.PID.tmp``: hidden, unique to this process, and recognisable as a
    leftover if the process dies before renaming it.
    """
    final = Path(final)
    return final.with_name(f".{final.name}.{os.getpid()}.tmp")
