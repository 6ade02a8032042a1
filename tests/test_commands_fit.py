"""Tests of the ``fitdrag fit`` command (fitdrag/commands/fit.py), run through fitdrag.cli.main.

Tracks are synthetic: the independent reference integration of tests/reference.py (scipy
solve_ivp DOP853) plus seeded noise, written with fitdrag.write_track.

Labels: closed-form/independent (compared with the reference truth, hashlib's SHA-256, the
PNG file signature of ISO/IEC 15948:2004 §5.2, or the library called directly), regression
(fixed behaviour: exit codes, exact messages, JSON keys required by issue 3).
"""

from __future__ import annotations

import hashlib
import json
import math
import re
from importlib.metadata import version
from pathlib import Path

import numpy as np
import pytest
import reference as ref
from scipy import stats

from fitdrag import Air, Sphere, Track, fit_tracks, read_track, write_track
from fitdrag.cli import main

BASE = ref.Scenario()  # synthetic 40 mm, 2.7 g training ball, Cd 0.47, 400 frames at 400 Hz
SECOND = ref.Scenario(launch=(0.2, 1.2, 9.0, 2.0), n=300)
SPECIMEN_ARGS = ["--mass", "2.7g", "--diameter", "40mm"]  # converted to SI at the edge
AIR_ARGS = ["--air-density", "1.225", "--air-viscosity", "1.789e-5"]  # ISA sea level


def exact(msg: str) -> str:
    return "^" + re.escape(msg) + "$"


def synthetic(sc: ref.Scenario, seed: int, frame0: int = 0, outliers=()) -> Track:
    rng = np.random.default_rng(seed)
    xy = sc.truth()
    x = xy[:, 0] + rng.normal(0.0, sc.sigma, sc.n)
    y = xy[:, 1] + rng.normal(0.0, sc.sigma, sc.n)
    y[list(outliers)] += 25 * sc.sigma
    return Track(sc.t, x, y, frame=frame0 + np.arange(sc.n))


@pytest.fixture
def track_file(tmp_path) -> Path:
    return write_track(synthetic(BASE, seed=1, frame0=100), tmp_path / "throw1.csv")


def run_fit(*args) -> int:
    return main(["fit", *map(str, args), *SPECIMEN_ARGS, *AIR_ARGS])


def test_json_has_every_field_of_the_issue(track_file, tmp_path, capsys):
    """regression (JSON fields listed in issue 3) and closed-form/independent (Cd and launch
    against the reference truth; SHA-256 by hashlib; version from the installed metadata).

    Changed in issue 11 (one coverage-factor rule): the coverage factor is the Student-t factor
    at p = erf(2/√2) = 95.45 % for the stated degrees of freedom (JCGM 100:2008 G.3, G.4),
    checked against scipy.stats.t.ppf, no longer exactly 2 (the fit's former rule for
    ν ≥ 30, which disagreed with the uncertainty budget's)."""
    out = tmp_path / "result.json"
    assert run_fit(track_file, "--json", out) == 0
    stdout = capsys.readouterr().out
    assert "drag coefficient Cd = " in stdout
    assert f"wrote {out}" in stdout
    d = json.loads(out.read_text(encoding="utf-8"))
    dc = d["drag_coefficient"]
    for key in ("value", "standard_uncertainty", "expanded_uncertainty", "coverage_factor"):
        assert isinstance(dc[key], float), key
    p = math.erf(2.0 / math.sqrt(2.0))  # GUM Table G.1: k = 2 <-> 95.45 %
    k = stats.t.ppf(0.5 * (1.0 + p), dc["degrees_of_freedom"])
    assert dc["coverage_factor"] == pytest.approx(k, rel=1e-12)
    assert dc["expanded_uncertainty"] == pytest.approx(k * dc["standard_uncertainty"])
    assert abs(dc["value"] - BASE.cd) <= 3 * dc["standard_uncertainty"]
    assert d["points"]["used"] == BASE.n
    assert d["points"]["rejected"] == []
    assert 0.8 * BASE.sigma < d["residuals"]["rms"] < 1.2 * BASE.sigma
    assert abs(d["residuals"]["lag1_autocorrelation"]) < 0.2
    re_min, re_max = d["reynolds_number"]["min"], d["reynolds_number"]["max"]
    assert 0 < re_min < re_max
    launch = d["launch"]
    vx, vy = BASE.launch[2:]
    for key, true in (("speed", math.hypot(vx, vy)),
                      ("angle", math.degrees(math.atan2(vy, vx)))):  # fmt: skip
        assert set(launch[key]) >= {"value", "standard_uncertainty"}
        assert abs(launch[key]["value"] - true) <= 3 * launch[key]["standard_uncertainty"]
    digest = hashlib.sha256(track_file.read_bytes()).hexdigest()
    assert d["inputs"]["sha256"] == {str(track_file): digest}
    assert d["software_version"] == version("fitdrag")
    assert d["success"] is True


def test_cli_equals_library_call(track_file, tmp_path):
    """closed-form/independent: the command is a thin layer: its JSON equals the library's
    FitResult.to_dict() for the same file, specimen and air (the SI values of 2.7 g, 40 mm)."""
    out = tmp_path / "result.json"
    assert run_fit(track_file, "--json", out) == 0
    d = json.loads(out.read_text(encoding="utf-8"))
    r = fit_tracks(read_track(track_file), Sphere(0.0027, 0.040), Air(1.225, 1.789e-5))
    lib = json.loads(json.dumps(r.to_dict()))
    assert d == lib


def test_multi_throw_and_rejected_frames(tmp_path):
    """closed-form/independent: two throws share Cd; frames moved by 25 σ in the second file
    are listed as "throw:frame" in points.rejected, and Cd stays within 3 u of the truth."""
    f1 = write_track(synthetic(BASE, seed=2, frame0=100), tmp_path / "a.csv")
    f2 = write_track(synthetic(SECOND, seed=3, frame0=500, outliers=(40, 90)), tmp_path / "b.csv")
    out = tmp_path / "r.json"
    assert run_fit(f1, f2, "--json", out) == 0
    d = json.loads(out.read_text(encoding="utf-8"))
    assert d["points"]["rejected"] == ["2:540", "2:590"]
    assert d["points"]["used"] == BASE.n + SECOND.n - 2
    assert [t["rejected"] for t in d["throws"]] == [[], [540, 590]]
    assert set(d["inputs"]["sha256"]) == {str(f1), str(f2)}
    dc = d["drag_coefficient"]
    assert abs(dc["value"] - BASE.cd) <= 3 * dc["standard_uncertainty"]


def test_no_robust_option_reaches_the_fit(tmp_path):
    """regression: --no-robust turns rejection off (the outlier frames stay in)."""
    f = write_track(synthetic(BASE, seed=4, outliers=(40, 90)), tmp_path / "a.csv")
    out = tmp_path / "r.json"
    assert run_fit(f, "--no-robust", "--noise", "white", "--json", out) == 0
    d = json.loads(out.read_text(encoding="utf-8"))
    assert d["fit"]["robust"] is False
    assert d["fit"]["noise_option"] == "white"
    assert d["points"]["rejected"] == []


def test_plot_writes_a_real_png(track_file, tmp_path):
    """closed-form/independent: the file starts with the PNG signature (ISO/IEC 15948:2004
    §5.2), decodes to an image of reasonable size, and is not blank."""
    import matplotlib.image as mpimg

    png = tmp_path / "fit.png"
    assert run_fit(track_file, "--plot", png) == 0
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    assert len(data) > 20_000
    img = mpimg.imread(png)
    assert img.shape[0] > 400 and img.shape[1] > 400
    assert float(np.std(img[..., :3])) > 0.02  # drawn content, not a uniform canvas


def test_nonconvergence_exit_3_and_json_still_written(tmp_path, capsys):
    """regression: a track no ballistic flight can follow (height growing as e^(40 t)) makes
    the fit fail: exit code 3, a message on stderr, and the JSON written with success false."""
    t = np.arange(100) / 400.0
    bad = write_track(Track(t, t, np.exp(40.0 * t)), tmp_path / "bad.csv")
    out = tmp_path / "r.json"
    assert run_fit(bad, "--json", out, "--plot", tmp_path / "r.png") == 3
    captured = capsys.readouterr()
    assert captured.err.startswith("fitdrag fit: the fit failed: ")
    # no Cd value is printed, only the diagnosis and the most likely cause
    assert "Cd" not in captured.out and "drag coefficient Cd" not in captured.out
    assert "no drag coefficient is reported" in captured.out
    assert "  most likely cause: " in captured.out and "y_down = true" in captured.out
    d = json.loads(out.read_text(encoding="utf-8"))
    assert d["success"] is False
    assert d["message"] and d["message"] != "fit converged"
    assert not (tmp_path / "r.png").exists()  # its title would state a Cd


def test_refuses_to_overwrite_without_force(track_file, tmp_path, capsys):
    """regression: existing outputs are kept (exit 2, exact message) unless --force is given;
    the check happens before any work, so a refused run leaves both files untouched."""
    out = tmp_path / "r.json"
    png = tmp_path / "r.png"
    out.write_text("keep me", encoding="utf-8")
    assert run_fit(track_file, "--json", out) == 2
    assert (
        capsys.readouterr().err
        == f"fitdrag fit: error: --json: {out} exists; pass --force to overwrite it.\n"
    )
    assert out.read_text(encoding="utf-8") == "keep me"
    png.write_bytes(b"old")
    assert run_fit(track_file, "--plot", png) == 2
    assert "--plot: " in capsys.readouterr().err
    assert png.read_bytes() == b"old"
    assert run_fit(track_file, "--json", out, "--plot", png, "--force") == 0
    assert json.loads(out.read_text(encoding="utf-8"))["success"] is True
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_bad_inputs_exit_2_with_clear_messages(tmp_path, capsys):
    """regression: an all-NaN track, a missing file and a zero mass end with exit code 2 and
    the library's message on one line."""
    nan = tmp_path / "nan.csv"
    nan.write_text("t,x,y\n" + "".join(f"{k / 100},nan,nan\n" for k in range(10)),
                   encoding="utf-8")  # fmt: skip
    assert run_fit(nan) == 2
    err = capsys.readouterr().err.splitlines()[-1]
    assert err == (
        f"fitdrag fit: error: {nan}: 0 usable point(s) (10 row(s) with blank or NaN cells "
        f"dropped), at least 8 are needed for a fit; use a longer stretch of the flight."
    )
    missing = tmp_path / "missing.csv"
    assert run_fit(missing) == 2
    assert capsys.readouterr().err == (
        f"fitdrag fit: error: {missing}: no such file; check the path of the track file.\n"
    )
    good = write_track(synthetic(BASE, seed=5), tmp_path / "g.csv")
    assert main(["fit", str(good), "--mass", "0", "--diameter", "0.04", *AIR_ARGS]) == 2
    assert capsys.readouterr().err == (
        "fitdrag fit: error: mass: must be a finite number > 0 kg, got 0.0; give the "
        "specimen mass in kg.\n"
    )


def test_unknown_noise_model_is_an_argument_error(track_file, capsys):
    """regression: an unknown --noise choice is refused by the argument parser (exit 2)."""
    with pytest.raises(SystemExit) as exc:
        run_fit(track_file, "--noise", "pink")
    assert exc.value.code == 2
    assert "argument --noise: invalid choice: 'pink'" in capsys.readouterr().err


def test_reynolds_dependent_model_also_writes_cd_against_re(track_file, tmp_path):
    """regression: with a Reynolds-dependent model --plot also writes OUT_cd_vs_re.png (issue
    6: a Cd-vs-Re plot with its band), and an existing one is not overwritten without --force."""
    png = tmp_path / "fit.png"
    assert run_fit(track_file, "--model", "power-law", "--plot", png) == 0
    extra = tmp_path / "fit_cd_vs_re.png"
    assert extra.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    png.unlink()
    assert run_fit(track_file, "--model", "power-law", "--plot", png) == 2  # extra exists


# ------------------------------------------------------------------------------------------
# Track files with a camera: the views of one throw, fitted in 3-D
# ------------------------------------------------------------------------------------------


def camera_track_file(path: Path, view) -> Path:
    """A track CSV as fitdrag track writes it with a camera, from a synthetic CameraView of
    tests/views_reference.py (no outline columns: two cameras need no diameters)."""
    from fitdrag.geometry.footage_view import camera_header
    from fitdrag.video.tracking import track_csv_text

    cam = view.camera
    world = cam.pixel_to_plane(view.pixels, 0.0, undistorted=False)
    n = len(view)
    meta = {"fps": view.fps, **camera_header(cam, 0, np.eye(6) * 1e-10).to_lines()}
    path.write_text(track_csv_text(meta, view.frames, view.frames / view.fps, world[:, 0],
                                   world[:, 1], view.u, view.v, np.full(n, 0.9),
                                   np.full(n, 0.3)), encoding="utf-8")  # fmt: skip
    return path


@pytest.fixture(scope="module")
def camera_files(tmp_path_factory):
    import views_reference as vr

    d = tmp_path_factory.mktemp("cams")
    rng = np.random.default_rng(4)
    th = vr.launch(2.0)
    views = [vr.observe(vr.camera_at(yaw), th, offset=1.3e-3 * i, rng=rng, sigma=0.3)
             for i, yaw in enumerate((-20.0, 20.0))]  # fmt: skip
    return [camera_track_file(d / f"{name}.csv", v) for name, v in zip("ab", views)]


VIEW_ARGS = ["--mass", "24g", "--diameter", "65mm", "--air-density", "1.2"]


def test_camera_track_files_are_fitted_in_3d(camera_files, tmp_path, capsys):
    """closed-form/independent: two cameras' track files (header with the camera, synthetic
    throw 2° out of the board plane, true Cd 0.50, second camera 1.3 ms late) are fitted as
    one throw in 3-D: |Cd − 0.50| <= U, the out-of-plane angle within 0.1° of 2°, the offset
    found within 0.1 frame when not given; the summary and the JSON report the views; the
    command gives what the library call gives."""
    from fitdrag.fit.track_views import fit_track_views

    out = tmp_path / "r.json"
    rc = main(["fit", *map(str, camera_files), *VIEW_ARGS, "--json", str(out)])
    text = capsys.readouterr().out
    assert rc == 0, text
    d = json.loads(out.read_text())
    cd = d["drag_coefficient"]
    assert abs(cd["value"] - 0.5) <= cd["expanded_uncertainty"]
    assert abs(d["out_of_plane_angle_deg"]["value"] - 2.0) < 0.1
    v2 = d["views"][1]
    assert v2["time_offset_estimated"] and abs(v2["time_offset_s"]["value"] - 1.3e-3) < 0.2e-3
    assert [i["source"] for i in d["inputs"]] == list(map(str, camera_files))
    assert d["inputs"][0]["sha256"] == hashlib.sha256(camera_files[0].read_bytes()).hexdigest()
    assert text.startswith("3-D fit converged; model: constant; views: 2")
    assert "view 1 (a.csv): residual RMS" in text and "time reference" in text
    assert "(estimated)" in text and "out of the board plane" in text
    lib = fit_track_views([read_track(p) for p in camera_files], Sphere(0.024, 0.065), Air(1.2))
    assert lib.cd == cd["value"]
    rc = main(["fit", *map(str, camera_files), *VIEW_ARGS, "--time-offset", "1.3ms"])
    text = capsys.readouterr().out
    assert rc == 0 and "time offset 1.3 ms (given)" in text


def test_camera_track_files_refusals(camera_files, track_file, capsys):
    """regression: files with and without a camera mixed, --time-offset for planar tracks or
    in the wrong number, and --plot with camera files exit 2 with messages naming the input,
    the value and the fix."""
    a, b = map(str, camera_files)
    cases = [
        ([a, str(track_file)],
         f"tracks: track {track_file} state(s) no camera while the others do; the views of one "
         f"throw each need their camera (fitdrag track --markers SIZE_M --marker-layout FILE "
         f"--lens LENS.json), and planar tracks are fitted on their own."),
        ([str(track_file), "--time-offset", "1ms"],
         "--time-offset: it applies to track files with a camera (the views of one throw); "
         "these files state none; leave it out."),
        ([a, b, "--time-offset", "1ms", "--time-offset", "estimate"],
         "--time-offset: given 2 time(s) for 1 view(s) after the first; give one per further "
         "track file, in order ('estimate' for one the fit should find), or leave it out."),
        ([a, b, "--plot", "p.png"],
         "--plot: not available for track files with a camera (the 3-D fit); leave it out and "
         "use --json."),
    ]  # fmt: skip
    for args, message in cases:
        rc = main(["fit", *args, *VIEW_ARGS])
        err = capsys.readouterr().err
        assert rc == 2 and message in err, err
