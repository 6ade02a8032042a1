"""Tests of the ``fitdrag simulate`` command (fitdrag.commands.simulate and the shared
options of fitdrag.commands._options), run in-process through fitdrag.cli.main.

Oracle for the output: an independent scipy solve_ivp DOP853 integration (rtol = atol = 1e-12)
of the equation of motion with buoyancy and Lamb's added mass (H. Lamb, Hydrodynamics, 6th ed.,
1932, §92), written out in this file; the CSV is read back with fitdrag.tracks.read_track.
Issue 2's bar: the written track matches to ≤ 1e-6 m.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from fitdrag.cli import main
from fitdrag.physics.air import STANDARD_GRAVITY, Air, local_gravity
from fitdrag.tracks.csv_file import read_track

BASE = ["simulate", "--mass", "0.0027", "--diameter", "0.04", "--cd", "0.47", "--speed", "8",
        "--angle", "30", "--fps", "500", "--frames", "200"]  # fmt: skip


def run_cli(argv, capsys):
    """(exit code, stdout, stderr) of ``fitdrag <argv>``; argparse errors exit via SystemExit."""
    try:
        code = main(list(argv))
    except SystemExit as exc:
        code = exc.code
    out, err = capsys.readouterr()
    return code, out, err


def reference_track(t, *, mass, diameter, cd, speed, angle, rho, g=STANDARD_GRAVITY, ca=0.5,
                    buoyancy=True, wind=0.0, cl=0.0, x0=0.0, y0=0.0):  # fmt: skip
    """Independent DOP853 integration of
    (m + C_a ρV) dv/dt = (m − ρV) g⃗ − ½ρA|u|(C_d u − C_L P u), u = v − w, P u = (−u_y, u_x),
    for a sphere (A = π d²/4, V = π d³/6) launched at ``speed`` [m/s], ``angle`` [deg]."""
    area = math.pi * diameter**2 / 4
    vol = math.pi * diameter**3 / 6
    m_eff = mass + ca * rho * vol
    weight = (mass - (rho * vol if buoyancy else 0.0)) * g

    def rhs(_, s):
        ux, uy = s[2] - wind, s[3]
        q = math.hypot(ux, uy)
        c = 0.5 * rho * area * q
        return [s[2], s[3], -c * (cd * ux + cl * uy) / m_eff,
                (-weight - c * (cd * uy - cl * ux)) / m_eff]  # fmt: skip

    a = math.radians(angle)
    s0 = [x0, y0, speed * math.cos(a), speed * math.sin(a)]
    sol = solve_ivp(rhs, (t[0], t[-1]), s0, method="DOP853", t_eval=t, rtol=1e-12, atol=1e-12)
    assert sol.success
    return sol.y[0], sol.y[1]


# ----------------------------------------------------------------------------- output vs oracle


def test_track_matches_dop853_with_buoyancy_and_added_mass(tmp_path, capsys):
    """closed-form/independent: the written CSV (t from 0 at 1/fps, SI, y up) against the DOP853
    reference with buoyancy and added mass ½ (Lamb §92), ≤ 1e-6 m (issue 2, done-when)."""
    out = tmp_path / "track.csv"
    code, stdout, err = run_cli(BASE + ["--air-density", "1.2", "--air-viscosity", "1.8e-5",
                                        "-o", str(out)], capsys)  # fmt: skip
    assert (code, err) == (0, "")
    assert stdout.startswith(f"wrote 200 samples to {out} (synthetic; Cd = 0.47")
    tr = read_track(out)
    np.testing.assert_allclose(tr.t, np.arange(200) / 500.0, rtol=0, atol=1e-15)
    x, y = reference_track(tr.t, mass=0.0027, diameter=0.04, cd=0.47, speed=8.0, angle=30.0,
                           rho=1.2)  # fmt: skip
    assert max(np.abs(tr.x - x).max(), np.abs(tr.y - y).max()) <= 1e-6
    assert tr.meta["header"]["synthetic"] == "yes"
    assert float(tr.meta["header"]["true_cd"]) == 0.47


def test_light_sphere_with_wind_lift_and_offset(tmp_path, capsys):
    """closed-form/independent: a light 100 mm, 2 g sphere (buoyancy about a third of its
    weight) with wind, lift and a launch offset, against the DOP853 reference (≤ 1e-6 m)."""
    out = tmp_path / "light.csv"
    argv = ["simulate", "--mass", "2g", "--diameter", "100mm", "--cd", "0.5", "--speed", "12",
            "--angle", "55", "--fps", "240", "--frames", "300", "--air-density", "1.19",
            "--wind", "-2.5", "--lift-coefficient", "0.15", "--x0", "0.5", "--y0", "1.2",
            "-o", str(out)]  # fmt: skip
    code, _, err = run_cli(argv, capsys)
    assert (code, err) == (0, "")
    tr = read_track(out)
    x, y = reference_track(tr.t, mass=0.002, diameter=0.1, cd=0.5, speed=12.0, angle=55.0,
                           rho=1.19, wind=-2.5, cl=0.15, x0=0.5, y0=1.2)  # fmt: skip
    assert max(np.abs(tr.x - x).max(), np.abs(tr.y - y).max()) <= 1e-6
    assert (tr.x[0], tr.y[0]) == (0.5, 1.2)


def test_no_buoyancy_added_mass_coefficient_and_gravity(tmp_path, capsys):
    """closed-form/independent: --no-buoyancy, --added-mass-coefficient 0 and --gravity reach the
    physics (reference without buoyancy, C_a = 0, g = 9.79), ≤ 1e-6 m; and they matter: the
    default run differs by more than 1 mm."""
    argv = ["simulate", "--mass", "0.002", "--diameter", "0.1", "--cd", "0.5", "--speed", "10",
            "--angle", "40", "--fps", "100", "--frames", "100", "--air-density", "1.2"]  # fmt: skip
    out = tmp_path / "bare.csv"
    code, _, err = run_cli(argv + ["--no-buoyancy", "--added-mass-coefficient", "0",
                                   "--gravity", "9.79", "-o", str(out)], capsys)  # fmt: skip
    assert (code, err) == (0, "")
    tr = read_track(out)
    x, y = reference_track(tr.t, mass=0.002, diameter=0.1, cd=0.5, speed=10.0, angle=40.0,
                           rho=1.2, g=9.79, ca=0.0, buoyancy=False)  # fmt: skip
    assert max(np.abs(tr.x - x).max(), np.abs(tr.y - y).max()) <= 1e-6
    full = tmp_path / "full.csv"
    assert run_cli(argv + ["-o", str(full)], capsys)[0] == 0
    assert np.abs(read_track(full).y - tr.y).max() > 1e-3


def test_air_from_conditions_and_latitude(tmp_path, capsys):
    """closed-form/independent: with --temperature/--pressure/--humidity the density is the
    CIPM-2007 value of fitdrag.physics.air (tested in test_air against Picard et al. 2008) and with
    --latitude the WGS84 normal gravity; the track matches DOP853 with those values."""
    out = tmp_path / "room.csv"
    argv = BASE + ["--temperature", "22.5", "--pressure", "100800", "--humidity", "40",
                   "--latitude", "52", "-o", str(out)]  # fmt: skip
    code, _, err = run_cli(argv, capsys)
    assert (code, err) == (0, "")
    rho = Air.from_conditions(22.5, 100800.0, 40.0).density
    g = float(local_gravity(52.0, 0.0))
    tr = read_track(out)
    assert float(tr.meta["header"]["air_density"]) == rho
    assert float(tr.meta["header"]["gravity"]) == g
    x, y = reference_track(tr.t, mass=0.0027, diameter=0.04, cd=0.47, speed=8.0, angle=30.0,
                           rho=rho, g=g)  # fmt: skip
    assert max(np.abs(tr.x - x).max(), np.abs(tr.y - y).max()) <= 1e-6


def test_room_air_default_density(tmp_path, capsys):
    """regression (common practice, no source): with no air options the command uses room air (20 °C,
    101 325 Pa, 50 % RH), about 1.2 kg/m³."""
    out = tmp_path / "default.csv"
    assert run_cli(BASE + ["-o", str(out)], capsys)[0] == 0
    assert float(read_track(out).meta["header"]["air_density"]) == pytest.approx(1.2, abs=0.01)


def test_stdout_output(capsys):
    """closed-form/independent: without -o the track is printed as CSV t,x,y; the values match
    the DOP853 reference (≤ 1e-6 m)."""
    code, out, err = run_cli(BASE + ["--air-density", "1.2"], capsys)
    assert (code, err) == (0, "")
    lines = out.strip().splitlines()
    assert lines[0] == "t,x,y"
    data = np.array([[float(v) for v in line.split(",")] for line in lines[1:]])
    assert data.shape == (200, 3)
    x, y = reference_track(data[:, 0], mass=0.0027, diameter=0.04, cd=0.47, speed=8.0,
                           angle=30.0, rho=1.2)  # fmt: skip
    assert max(np.abs(data[:, 1] - x).max(), np.abs(data[:, 2] - y).max()) <= 1e-6


# ----------------------------------------------------------------------------- noise and seed


def test_noise_is_reproducible_with_seed(tmp_path, capsys):
    """regression: the same --seed gives the same noisy track, another seed another one; the
    noise is white Gaussian with the given standard deviation (sample std of 400 draws within
    ±15 %, about 4 standard errors, common practice)."""
    clean, a, b, c = (tmp_path / f"{n}.csv" for n in ("clean", "a", "b", "c"))
    assert run_cli(BASE + ["-o", str(clean)], capsys)[0] == 0
    noisy = BASE + ["--noise", "0.5mm"]
    assert run_cli(noisy + ["--seed", "7", "-o", str(a)], capsys)[0] == 0
    assert run_cli(noisy + ["--seed", "7", "-o", str(b)], capsys)[0] == 0
    assert run_cli(noisy + ["--seed", "8", "-o", str(c)], capsys)[0] == 0
    ta, tb, tc, t0 = (read_track(p) for p in (a, b, c, clean))
    np.testing.assert_array_equal(ta.x, tb.x)
    np.testing.assert_array_equal(ta.y, tb.y)
    assert np.abs(ta.x - tc.x).max() > 1e-5
    residual = np.concatenate((ta.x - t0.x, ta.y - t0.y))
    assert np.std(residual) == pytest.approx(5e-4, rel=0.15)
    assert abs(np.mean(residual)) < 4 * 5e-4 / math.sqrt(residual.size)
    assert ta.meta["header"]["seed"] == "7"
    assert float(ta.meta["header"]["noise"]) == 5e-4


def test_noise_without_seed_differs_between_runs(tmp_path, capsys):
    """regression: without --seed each run draws fresh noise."""
    a, b = tmp_path / "a.csv", tmp_path / "b.csv"
    assert run_cli(BASE + ["--noise", "0.001", "-o", str(a)], capsys)[0] == 0
    assert run_cli(BASE + ["--noise", "0.001", "-o", str(b)], capsys)[0] == 0
    assert np.abs(read_track(a).y - read_track(b).y).max() > 0
    assert read_track(a).meta["header"]["seed"] == "none"


# ----------------------------------------------------------------------------- units, overwrite


def test_unit_suffixes_equal_si(tmp_path, capsys):
    """closed-form/independent: 2.7g = 0.0027 kg, 40mm = 0.04 m, 28.8km/h = 8 m/s,
    0.5mm = 5e-4 m, 1.2kg/m**3 (SI definitions of the prefixes, BIPM SI Brochure, 9th ed. 2019,
    Table 7); the tracks agree to rounding."""
    si, units = tmp_path / "si.csv", tmp_path / "units.csv"
    common = ["--cd", "0.47", "--angle", "30", "--fps", "500", "--frames", "100", "--seed", "3"]
    assert run_cli(["simulate", "--mass", "0.0027", "--diameter", "0.04", "--speed", "8",
                    "--noise", "0.0005", "--air-density", "1.2", "--x0", "0.01", *common,
                    "-o", str(si)], capsys)[0] == 0  # fmt: skip
    assert run_cli(["simulate", "--mass", "2.7g", "--diameter", "40mm", "--speed", "28.8km/h",
                    "--noise", "0.5mm", "--air-density", "1.2kg/m**3", "--x0", "1cm", *common,
                    "-o", str(units)], capsys)[0] == 0  # fmt: skip
    a, b = read_track(si), read_track(units)
    np.testing.assert_allclose(b.x, a.x, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(b.y, a.y, rtol=1e-12, atol=1e-15)


@pytest.mark.parametrize("spelling", ["21", "21degC", "21 degC", "21°C", "21 celsius", "294.15K",
                                      "294.15 kelvin"])  # fmt: skip
def test_temperature_spellings_of_the_job_file_are_accepted(spelling):
    """published-value: --temperature takes the job file's spellings ("21 degC"), with or
    without a space, and kelvin (t/°C = T/K - 273.15, BIPM SI Brochure, 9th ed. 2019,
    §2.3.1): all give 21 °C."""
    from fitdrag.cli import build_parser

    args = build_parser().parse_args(BASE + ["--temperature", spelling])
    assert args.temperature == pytest.approx(21.0, abs=1e-12)


@pytest.mark.parametrize(
    ("option", "spelling", "si"),
    [("--pressure", "1008hPa", 100800.0),  # hecto = 1e2 (SI Brochure, Table 7)
     ("--pressure", "1008 hPa", 100800.0),
     ("--mass", "2.7 g", 0.0027),
     ("--mass", "1lb", 0.45359237),  # international pound (1959)
     ("--diameter", "40 mm", 0.040),
     ("--gravity", "981 cm/s**2", 9.81)],
)  # fmt: skip
def test_options_take_a_number_with_a_unit_with_or_without_a_space(option, spelling, si):
    """published-value: unit spellings with and without a space convert by the SI prefixes
    (BIPM SI Brochure, 9th ed. 2019, Table 7) and the 1959 international pound."""
    from fitdrag.cli import build_parser

    argv = _replace(BASE, option, spelling) if option in BASE else BASE + [option, spelling]
    args = build_parser().parse_args(argv)
    assert getattr(args, option[2:]) == pytest.approx(si, rel=1e-14)


def test_temperature_with_a_unit_gives_the_same_track(capsys):
    """closed-form/independent: --temperature 21degC and --temperature 21 (°C by default)
    give the identical track (the air is computed from the same 21 °C)."""
    common = BASE + ["--pressure", "100800", "--humidity", "45"]
    code, plain, _ = run_cli(common + ["--temperature", "21"], capsys)
    assert code == 0
    code, with_unit, _ = run_cli(common + ["--temperature", "21degC"], capsys)
    assert code == 0
    assert with_unit == plain


def test_refuses_to_overwrite_without_force(tmp_path, capsys):
    """regression: an existing output is never overwritten without --force (project rule)."""
    out = tmp_path / "track.csv"
    out.write_text("precious\n")
    code, stdout, err = run_cli(BASE + ["-o", str(out)], capsys)
    assert code == 2
    assert stdout == ""
    assert err == (f"fitdrag simulate: error: {out}: file exists; pass --force (force=True) to "
                   f"overwrite it.\n")  # fmt: skip
    assert out.read_text() == "precious\n"
    code, _, err = run_cli(BASE + ["-o", str(out), "--force"], capsys)
    assert (code, err) == (0, "")
    assert len(read_track(out)) == 200


def test_missing_output_directory(tmp_path, capsys):
    """regression: an output in a missing directory is a bad-input error (exit 2, one line)."""
    code, _, err = run_cli(BASE + ["-o", str(tmp_path / "nope" / "t.csv")], capsys)
    assert code == 2
    assert err.startswith("fitdrag simulate: error: ")
    assert len(err.strip().splitlines()) == 1


# ----------------------------------------------------------------------------- bad arguments


def _replace(argv, option, value):
    """argv with ``option``'s value replaced, written ``--option=value`` (argparse reads a
    separate token such as ``-40mm`` as an option, not a value)."""
    argv = list(argv)
    i = argv.index(option)
    return argv[:i] + [f"{option}={value}"] + argv[i + 2 :]


@pytest.mark.parametrize(
    ("option", "value", "message"),
    [
        ("--mass", "-0.001", "mass: must be a finite number > 0 kg, got -0.001; give the "
                             "specimen mass in kg."),
        ("--mass", "0", "mass: must be a finite number > 0 kg, got 0.0; give the specimen mass "
                        "in kg."),
        ("--diameter", "-40mm", "diameter: must be a finite number > 0 m, got -0.04; give the "
                                "sphere diameter in metres."),
        ("--fps", "0", "--fps: must be > 0 Hz, got 0.0; give the frame rate."),
        ("--fps", "-500", "--fps: must be > 0 Hz, got -500.0; give the frame rate."),
        ("--fps", "nan", "--fps: must be > 0 Hz, got nan; give the frame rate."),
        ("--frames", "1", "--frames: need at least 8 samples (the fewest a track may have), got 1."),
        ("--speed", "-3", "--speed: must be >= 0 m/s, got -3.0."),
        ("--cd", "-0.1", "--cd: must be >= 0, got -0.1."),
    ],
)  # fmt: skip
def test_bad_values_exit_2_with_one_line(option, value, message, capsys):
    """regression: a bad value exits 2 with exactly one line naming the input, the value and
    (where there is one) the fix."""
    code, out, err = run_cli(_replace(BASE, option, value), capsys)
    assert code == 2
    assert out == ""
    assert err == f"fitdrag simulate: error: {message}\n"


def test_bad_noise_exits_2(capsys):
    """regression: a negative noise level is refused with one line."""
    code, _, err = run_cli(BASE + ["--noise=-1mm"], capsys)
    assert code == 2
    assert err == "fitdrag simulate: error: --noise: must be >= 0 m, got -0.001.\n"
    # a separate token starting with '-' that is not a plain number reads as an option
    code, _, err = run_cli(BASE + ["--noise", "-1mm"], capsys)
    assert code == 2
    assert err == "fitdrag simulate: error: argument --noise: expected one argument\n"


@pytest.mark.parametrize(
    ("option", "value", "reason", "fix"),
    [("--mass", "2.7zz", "unknown unit 'zz'", "give a number in kg or a number with a unit of "
                                               "mass, e.g. 0.0027 or 2.7g"),
     ("--mass", "40mm", "unit 'mm' is not a unit of mass", "give a number in kg or a number "
                                                           "with a unit of mass, e.g. 0.0027 or "
                                                           "2.7g"),
     ("--diameter", "3furlongsperday", "unknown unit 'furlongsperday'",
      "give a number in m or a number with a unit of length, e.g. 0.040 or 40mm"),
     ("--speed", "8kg", "unit 'kg' is not a unit of speed", "give a number in m/s or a number "
                                                           "with a unit of speed, e.g. 8 or "
                                                           "28.8km/h"),
     ("--temperature", "21 furlong", "unit 'furlong' is not a unit of temperature",
      "give a number in °C or a number with a unit of temperature, e.g. 21 or 21degC")],
)  # fmt: skip
def test_unknown_or_wrong_unit_exits_2_with_one_line(option, value, reason, fix, capsys):
    """regression: an unknown unit, or one of the wrong dimension, is an argparse error: exit 2,
    one line naming the option, the text, what is wrong with it and an example of a valid
    value."""
    argv = BASE + [f"{option}={value}"] if option not in BASE else _replace(BASE, option, value)
    code, out, err = run_cli(argv, capsys)
    assert code == 2
    assert out == ""
    assert err == f"fitdrag simulate: error: argument {option}: {value!r}: {reason}; {fix}\n"


@pytest.mark.parametrize(
    ("extra", "message"),
    [(["--area", "1e-3"], "specimen: give either --diameter (a sphere) or --area and --volume, "
                          "not both."),
     (["--air-density", "1.2", "--temperature", "20"],
      "air: give either --air-density or --temperature/--pressure/--humidity, not both."),
     (["--gravity", "9.8", "--latitude", "45"],
      "gravity: give either --gravity or --latitude, not both."),
     (["--gravity", "0"], "--gravity: must be > 0 m/s², got 0.0; omit it for 9.80665.")],
)  # fmt: skip
def test_conflicting_options_exit_2(extra, message, capsys):
    """regression: conflicting or impossible shared options exit 2 with one exact line."""
    code, _, err = run_cli(BASE + extra, capsys)
    assert code == 2
    assert err == f"fitdrag simulate: error: {message}\n"


def test_few_frames_is_consistent(capsys):
    """regression: the command accepts --frames >= 2, so 5 frames must either work or be refused
    by a message about --frames (Track needs 8 points)."""
    code, _, err = run_cli(_replace(BASE, "--frames", "5"), capsys)
    assert code == 0 or err.startswith("fitdrag simulate: error: --frames:"), err


def test_missing_size_and_required_options(capsys):
    """regression: no size, or a missing required option, exits 2 with one line."""
    no_size = [a for a in BASE if a not in ("--diameter", "0.04")]
    code, _, err = run_cli(no_size, capsys)
    assert code == 2
    assert err == ("fitdrag simulate: error: specimen: no size given; pass --diameter M for a "
                   "sphere, or --area M2 and --volume M3 for another shape.\n")  # fmt: skip
    code, _, err = run_cli(["simulate", "--mass", "1"], capsys)
    assert code == 2
    assert err.startswith("fitdrag simulate: error: the following arguments are required: --cd")
    assert len(err.strip().splitlines()) == 1


def test_body_specimen_from_area_and_volume(tmp_path, capsys):
    """closed-form/independent: --area/--volume of a sphere's values give the sphere's track."""
    d = 0.04
    a, b = tmp_path / "sphere.csv", tmp_path / "body.csv"
    assert run_cli(BASE + ["--air-density", "1.2", "-o", str(a)], capsys)[0] == 0
    body = [x for x in BASE if x not in ("--diameter", "0.04")]
    assert run_cli(body + ["--area", repr(math.pi * d**2 / 4), "--volume",
                           repr(math.pi * d**3 / 6), "--air-density", "1.2", "-o", str(b)],
                   capsys)[0] == 0  # fmt: skip
    np.testing.assert_allclose(read_track(b).y, read_track(a).y, rtol=0, atol=1e-12)
