"""Test-wide settings: no test touches the user's own records database or settings."""

from __future__ import annotations

import pytest


@pytest.fixture(autouse=True)
def lab_db(tmp_path_factory, monkeypatch):
    """Every test's laboratory records database is a fresh file in a temporary folder
    (FITDRAG_RECORDS), and the user's configuration and data folders are temporary too."""
    home = tmp_path_factory.mktemp("lab")
    monkeypatch.setenv("FITDRAG_RECORDS", str(home / "lab-records.sqlite"))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home / "config"))
    monkeypatch.setenv("XDG_DATA_HOME", str(home / "data"))
    return home / "lab-records.sqlite"
