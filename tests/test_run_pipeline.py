"""Tests of fitdrag.run.pipeline's helpers that stand alone (the measurement and issuing
themselves are exercised through `fitdrag run` in test_commands_run.py)."""

from __future__ import annotations

import pytest

from fitdrag.run.pipeline import issued_paths


def test_issued_paths_never_overwrite(tmp_path):
    """regression: the three files of an issued certificate or lot report, by number; one
    already there is refused with the reason (an issued file is never overwritten)."""
    got = issued_paths(tmp_path, "FD-2026-000007", "lot_report")
    assert got == {
        "lot_report_pdf": tmp_path / "FD-2026-000007.pdf",
        "lot_report_png": tmp_path / "FD-2026-000007.png",
        "result_json": tmp_path / "FD-2026-000007.json",
    }
    (tmp_path / "FD-2026-000007.png").write_bytes(b"")
    with pytest.raises(ValueError) as e:
        issued_paths(tmp_path, "FD-2026-000007", "certificate")
    assert str(e.value) == (
        f"{tmp_path / 'FD-2026-000007.png'}: already exists; an issued certificate file is "
        f"never overwritten. Is another records database numbering into this folder? Use the "
        f"laboratory's one database (FITDRAG_RECORDS), or another [output] directory."
    )
