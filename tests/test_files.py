"""Atomic, no-clobber output writing (fitdrag._files) — regression tests."""

from __future__ import annotations

import pytest

from fitdrag._files import OutputExistsError, temporary_path, write_atomic, write_text_atomic


def test_writes_and_refuses_to_overwrite(tmp_path):
    """regression: a new file is written; an existing one is kept unless force=True."""
    p = tmp_path / "out.txt"
    write_text_atomic(p, "first\n")
    assert p.read_text() == "first\n"
    with pytest.raises(OutputExistsError, match=r"out\.txt: file exists; pass --force"):
        write_text_atomic(p, "second\n")
    assert p.read_text() == "first\n"
    write_text_atomic(p, "second\n", force=True)
    assert p.read_text() == "second\n"


def test_failed_write_leaves_nothing_behind(tmp_path):
    """regression: an exception while writing leaves neither the file nor a temporary."""
    p = tmp_path / "fig.png"

    def boom(tmp):
        tmp.write_bytes(b"partial")
        raise RuntimeError("renderer crashed")

    with pytest.raises(RuntimeError, match="renderer crashed"):
        write_atomic(p, boom)
    assert list(tmp_path.iterdir()) == []


def test_bad_destinations(tmp_path):
    """regression: a directory or a missing folder is refused with the fix in the message."""
    with pytest.raises(ValueError, match="is a directory; give the path of the output file"):
        write_text_atomic(tmp_path, "x")
    with pytest.raises(FileNotFoundError, match="does not exist; create it first"):
        write_text_atomic(tmp_path / "no" / "such.txt", "x")


def test_temporary_path_is_hidden_beside_the_final_file(tmp_path):
    """regression: the temporary name is in the final file's folder (so os.replace is a
    rename within one file system, POSIX rename(2)), hidden, per process, and not the final
    name."""
    import os

    final = tmp_path / "FD-2026-000001.pdf"
    tmp = temporary_path(final)
    assert tmp.parent == final.parent and tmp != final
    assert tmp.name == f".FD-2026-000001.pdf.{os.getpid()}.tmp"
