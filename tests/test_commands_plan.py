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


# --------------------------------------------------------------------- cameras in 3-D (--distance)

ROOT = __import__("pathlib").Path(__file__).resolve().parents[1]
BALL_ARGS = ["--mass", "24g", "--diameter", "65mm", "--cd", "0.5", "--speed", "9", "--angle",
             "30", "--fps", "500", "--frames", "120", "--pixel-noise", "0.3"]  # fmt: skip


def readme_plan_example() -> tuple[list[str], str]:
    """The README's `fitdrag plan --distance` example: its arguments and its printed output."""
    import shlex

    text = (ROOT / "README.md").read_text(encoding="utf-8")
    block = text.split("  ```console\n  $ fitdrag plan ", 1)[1].split("  ```\n", 1)[0]
    lines = [line[2:] if line.startswith("  ") else line for line in block.splitlines()]
    cmd, i = lines[0], 0
    while cmd.endswith("\\"):
        i += 1
        cmd = cmd[:-1] + " " + lines[i].strip()
    return shlex.split(cmd), "".join(line + "\n" for line in lines[i + 1 :])


def test_readme_example_prints_what_the_readme_shows(capsys):
    """regression: the README's one-camera vs two-cameras example, run as written, prints
    exactly the output the README shows."""
    args, shown = readme_plan_example()
    assert "--distance" in args
    assert main(["plan", *args]) == 0
    assert capsys.readouterr().out == shown


def test_camera_plan_json_equals_the_library_and_field_of_view(tmp_path, capsys):
    """closed-form/independent: the JSON carries plan_views' figures for the same inputs;
    --field-of-view 2·atan(640/900) is the 900 px focal length over 1280 px (pinhole,
    Hartley and Zisserman sec. 6.1), giving the same u(Cd)."""
    from fitdrag.fit.plan_views import plan_views
    from fitdrag.physics.air import Air
    from fitdrag.physics.forces import Conditions
    from fitdrag.physics.specimen import Sphere

    a, b = tmp_path / "a.json", tmp_path / "b.json"
    cam = ["--distance", "300cm", "--readout-time", "0.5ms", "--diameter-noise", "0.4",
           "--camera-angle", "5deg", "--throws", "2", "--air-density", "1.2",
           "--air-viscosity", "1.8e-5", "--gravity", "9.80665"]  # fmt: skip
    assert main(["plan", *BALL_ARGS, *cam, "--focal-length", "900", "--json", str(a)]) == 0
    fov = 2 * math.degrees(math.atan(640 / 900))
    assert main(["plan", *BALL_ARGS, *cam, "--field-of-view", f"{fov:.10f}deg", "--json",
                 str(b)]) == 0  # fmt: skip
    out = capsys.readouterr().out
    assert "two cameras at ±20°, in 3-D" in out and f"wrote {b}" in out
    da, db = (json.loads(p.read_text(encoding="utf-8")) for p in (a, b))
    lib = plan_views(
        Sphere(0.024, 0.065), Conditions(Air(1.2, 1.8e-5), gravity=9.80665),
        speed=9.0, elevation=30.0, fps=500.0, frames=120, distance=3.0, focal_length=900.0,
        pixel_noise=0.3, diameter_noise=0.4, camera_angle=5.0, readout_time=5e-4, throws=2,
        drag_params=(0.5,),
    )  # fmt: skip
    su = da["standard_uncertainty"]
    assert su["one_camera_3d"] == pytest.approx(lib.u_cd_one, rel=1e-9)
    assert su["two_cameras_3d"] == pytest.approx(lib.u_cd_two, rel=1e-9)
    assert su["one_camera_in_plane"] == pytest.approx(lib.u_cd_plane, rel=1e-9)
    assert da["out_of_plane"]["tolerable_angle_deg"] == pytest.approx(lib.tolerable_angle)
    assert da["cameras"]["focal_length_px"] == 900.0
    assert db["cameras"]["focal_length_px"] == pytest.approx(900.0, rel=1e-9)
    assert db["standard_uncertainty"]["two_cameras_3d"] == pytest.approx(
        su["two_cameras_3d"], rel=1e-6
    )


def test_camera_plan_bad_arguments_exit_2(capsys):
    """regression: exact one-line errors and exit code 2 for the camera options."""
    cases = [
        (["--distance", "3"], "--distance: needs the lens, --focal-length PX or --field-of-view "
         "DEG; e.g. --focal-length 900."),
        (["--distance", "3", "--focal-length", "900", "--scale", "1mm"], "--scale: not used "
         "with --distance (the scale follows from the distance and the focal length); drop it."),
        (["--focal-length", "900", "--scale", "1mm"], "--focal-length: only used with "
         "--distance (the 3-D plan); add --distance M."),
        (["--distance", "3", "--focal-length", "900", "--image-size", "1280"], "--image-size: "
         "expected WIDTHxHEIGHT in whole pixels (at least 16 each), got '1280'; e.g. 1280x800."),
        (["--distance", "3", "--focal-length", "900", "--wind", "1"], "--fit-lift, "
         "--lift-coefficient, --wind: the 3-D plan (--distance) covers drag only; drop them, or "
         "plan in the plane without --distance."),
        (["--distance", "3", "--focal-length", "900", "--pair-angle", "1deg"], "pair_angle: "
         "the two cameras need an angle of at least 2 deg to the normal (4 deg apart) to "
         "triangulate, got 1.0; e.g. 20."),
    ]  # fmt: skip
    for extra, msg in cases:
        assert main(["plan", *BALL_ARGS, *extra]) == 2, extra
        assert capsys.readouterr().err == f"fitdrag plan: error: {msg}\n"
    args = [a for a in BALL_ARGS if a not in ("--pixel-noise", "0.3")]
    assert main(["plan", *args, "--noise", "1mm", "--distance", "3", "--focal-length", "900"]) == 2
    assert capsys.readouterr().err == (
        "fitdrag plan: error: --noise: with --distance the noise is in the image; give "
        "--pixel-noise PX instead.\n"
    )


def test_help_shows_the_camera_example(capsys):
    """regression: `fitdrag plan --help` ends with examples, the 3-D one among them."""
    with pytest.raises(SystemExit):
        main(["plan", "--help"])
    out = capsys.readouterr().out
    assert "--distance 3m --focal-length 900" in out and "--field-of-view" in out
