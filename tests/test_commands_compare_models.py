"""Tests of ``fitdrag compare-models`` (fitdrag/commands/compare_models.py) through fitdrag.cli.

Tracks: the independent scipy integration of tests/reference.py (constant Cd 0.47) plus
seeded noise, written with fitdrag.write_track (synthetic 40 mm, 2.7 g training ball).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import reference as ref

from fitdrag import Track, write_track
from fitdrag.cli import main

SPECIMEN_ARGS = ["--mass", "2.7g", "--diameter", "40mm"]
AIR_ARGS = ["--air-density", "1.225", "--air-viscosity", "1.789e-5"]  # ISA sea level
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # ISO/IEC 15948:2004 §5.2


BASE = ref.Scenario()  # Cd 0.47, 400 frames at 400 Hz


def _track(path, seed, sc=BASE):
    rng = np.random.default_rng(seed)
    xy = sc.truth()
    tr = Track(
        sc.t, xy[:, 0] + rng.normal(0, sc.sigma, sc.n), xy[:, 1] + rng.normal(0, sc.sigma, sc.n)
    )
    return write_track(tr, path)


@pytest.fixture
def tracks(tmp_path):
    second = ref.Scenario(launch=(0.2, 1.2, 9.0, 2.0), n=300)
    return [_track(tmp_path / "throw1.csv", 1), _track(tmp_path / "throw2.csv", 2, second)]


def run(*args) -> int:
    return main(["compare-models", *map(str, args), *SPECIMEN_ARGS, *AIR_ARGS])


def test_table_json_and_plot(tracks, tmp_path, capsys):
    """closed-form/independent: two constant-Cd throws (true Cd 0.47) are recommended as a
    constant Cd, recovered within 3 u; regression: table, JSON keys, PNG written."""
    out, png = tmp_path / "cmp.json", tmp_path / "cd.png"
    assert run(*tracks, "--json", out, "--plot", png) == 0
    stdout = capsys.readouterr().out
    assert "*constant" in stdout
    assert "The data support a constant Cd; Re-dependence not detectable over Re " in stdout
    d = json.loads(out.read_text(encoding="utf-8"))
    assert d["recommended"] == "constant"
    assert [c["label"] for c in d["candidates"]] == ["constant", "sphere-scaled", "power-law"]
    cd = d["candidates"][0]["parameters"]["cd"]
    assert abs(cd["value"] - 0.47) < 3 * cd["standard_uncertainty"]
    assert {"aic", "bic", "reduced_chi_square", "residual_rms"} <= set(d["candidates"][2])
    assert d["nested_tests"][0]["simpler"] == "constant"
    assert png.read_bytes()[:8] == PNG_SIGNATURE


def test_models_and_lift_options(tracks, tmp_path):
    """regression: --models picks the candidates, --lift adds each with a lift coefficient."""
    out = tmp_path / "cmp.json"
    assert run(tracks[0], "--models", "constant,power-law", "--lift", "--json", out) == 0
    d = json.loads(out.read_text(encoding="utf-8"))
    assert sorted(c["label"] for c in d["candidates"]) == [
        "constant", "constant + lift", "power-law", "power-law + lift",
    ]  # fmt: skip
    assert d["recommended"] == "constant"
    assert "no lift detectable" in d["recommendation"]


def test_bad_input_exit_2(tracks, tmp_path, capsys):
    """regression: exact one-line errors and exit code 2."""
    assert run(tracks[0], "--models", "constant,cubic") == 2
    err = capsys.readouterr().err
    assert err.startswith("fitdrag compare-models: error: drag model: unknown name 'cubic'; ")
    out = tmp_path / "cmp.json"
    out.write_text("{}", encoding="utf-8")
    assert run(tracks[0], "--json", out) == 2
    assert capsys.readouterr().err == (
        f"fitdrag compare-models: error: --json: {out} exists; pass --force to overwrite it.\n"
    )
    assert run(tmp_path / "missing.csv") == 2
