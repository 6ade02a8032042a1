"""Tests of the ``fitdrag plan`` command (fitdrag/commands/plan.py), run through fitdrag.cli.main.

Oracle: the Cramér–Rao bound from the finite-difference Jacobian of the independent scipy
integration in tests/reference.py (Kay 1993, eq. 3.31), and the library called directly.
Scenario: an invented lab's 40 mm, 2.7 g training ball (synthetic).
"""

from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest
import reference as ref

from fitdrag.cli import main

SPECIMEN_ARGS = ["--mass", "2.7g", "--diameter", "40mm"]
AIR_ARGS = ["--air-density", "1.225", "--air-viscosity", "1.789e-5"]  # ISA sea level
FLIGHT_ARGS = ["--cd", "0.47", "--speed", "8", "--angle", "30", "--y0", "1.0", "--fps", "250",
               "--frames", "150"]  # fmt: skip


def run_plan(*args) -> int:
    return main(["plan", *SPECIMEN_ARGS, *AIR_ARGS, *FLIGHT_ARGS, *map(str, args)])


def exact(msg: str) -> str:
    return "^" + re.escape(msg) + "$"


def reference_u_cd(noise: float, throws: int) -> float:
    """u(Cd) from σ² (JᵀJ)⁻¹ of the solve_ivp reference, θ = (cd, x0, y0, vx0, vy0)."""
    a = math.radians(30.0)
    theta = np.array([0.47, 0.0, 1.0, 8 * math.cos(a), 8 * math.sin(a)])
    t = np.arange(150) / 250.0
    jac = ref.fd_jacobian(theta, t, ref.Body.sphere(0.0027, 0.040), 1.225)
    return math.sqrt(ref.cramer_rao_white(jac, noise)[0, 0] / throws)


def test_json_prediction_matches_independent_cramer_rao(tmp_path, capsys):
    """closed-form/independent: drag_coefficient.standard_uncertainty in the JSON equals the
    Cramér–Rao bound of the reference integration for 3 throws within 0.1 %."""
    out = tmp_path / "plan.json"
    assert run_plan("--noise", "0.5mm", "--throws", "3", "--json", out) == 0
    stdout = capsys.readouterr().out
    d = json.loads(out.read_text(encoding="utf-8"))
    u = d["drag_coefficient"]["standard_uncertainty"]
    assert u == pytest.approx(reference_u_cd(5e-4, 3), rel=1e-3)
    assert d["drag_coefficient"]["per_throw_standard_uncertainty"] == pytest.approx(
        u * math.sqrt(3), rel=1e-12
    )
    assert d["throws"] == 3 and d["noise"]["position"] == pytest.approx(5e-4)
    assert stdout.startswith(f"Predicted u(Cd) = {u:.2g} (Cd = 0.47")
    assert f"wrote {out}" in stdout


def test_pixel_noise_times_scale(tmp_path):
    """closed-form/independent: --pixel-noise 0.25 --scale 2mm is 0.5 mm of position noise."""
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    assert run_plan("--noise", "0.0005", "--json", a) == 0
    assert run_plan("--pixel-noise", "0.25", "--scale", "2mm", "--json", b) == 0
    da, db = (json.loads(p.read_text(encoding="utf-8")) for p in (a, b))
    assert db["noise"]["position"] == pytest.approx(5e-4, rel=1e-12)
    assert db["drag_coefficient"]["standard_uncertainty"] == pytest.approx(
        da["drag_coefficient"]["standard_uncertainty"], rel=1e-12
    )


def test_target_throws_and_frame_rate(tmp_path, capsys):
    """closed-form/independent: the throws needed for a target are ceil((u_1/target)²)."""
    out = tmp_path / "plan.json"
    u1 = reference_u_cd(5e-4, 1)
    target = u1 / 3.0
    assert run_plan("--noise", "5e-4", "--target", f"{target:.6g}", "--json", out) == 0
    d = json.loads(out.read_text(encoding="utf-8"))
    assert d["target"]["throws_needed"] == math.ceil((u1 / float(f"{target:.6g}")) ** 2 - 1e-6)
    assert d["target"]["fps_needed"] > 250 * 5
    assert "To reach u(Cd) = " in capsys.readouterr().out


def test_lift_and_correlated_noise_options(tmp_path):
    """regression: --fit-lift adds C_L to the planned parameters; --noise-correlation is
    carried into the prediction (correlated noise carries less information: larger u)."""
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    assert run_plan("--noise", "5e-4", "--json", a) == 0
    assert run_plan("--noise", "5e-4", "--fit-lift", "--noise-correlation", "0.7", "--json", b) == 0
    da, db = (json.loads(p.read_text(encoding="utf-8")) for p in (a, b))
    assert "lift_coefficient" in db["parameters_per_throw"]
    assert db["noise"]["ar1_coefficient"] == 0.7
    assert (
        db["drag_coefficient"]["standard_uncertainty"]
        > da["drag_coefficient"]["standard_uncertainty"]
    )


def test_bad_arguments_exit_2(tmp_path, capsys):
    """regression: exact one-line errors and exit code 2."""
    assert run_plan("--pixel-noise", "0.3") == 2
    assert capsys.readouterr().err == (
        "fitdrag plan: error: --pixel-noise: needs --scale M_PER_PX (metres per pixel) to give "
        "the noise in metres.\n"
    )
    assert run_plan("--noise", "1e-3", "--scale", "0.001") == 2
    assert capsys.readouterr().err.endswith(
        "--scale: only used with --pixel-noise; drop it or use --pixel-noise.\n"
    )
    assert run_plan("--noise", "1e-3", "--frames", "4") == 2
    assert "frames: need a whole number of at least 8 frames in view, got 4" in (
        capsys.readouterr().err
    )
    out = tmp_path / "plan.json"
    out.write_text("{}", encoding="utf-8")
    assert run_plan("--noise", "1e-3", "--json", out) == 2
    assert capsys.readouterr().err == (
        f"fitdrag plan: error: --json: {out} exists; pass --force to overwrite it.\n"
    )
    assert out.read_text(encoding="utf-8") == "{}"
    assert run_plan("--noise", "1e-3", "--json", out, "--force") == 0
    with pytest.raises(SystemExit) as exc:
        run_plan("--noise", "1e-3", "--pixel-noise", "0.3")
    assert exc.value.code == 2
    assert "not allowed with argument" in capsys.readouterr().err
