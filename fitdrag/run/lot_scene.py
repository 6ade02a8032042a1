"""A synthetic lot: specimens with a known spread of Cd, their simulated throws, a base job
and a lot file, written as a lab brings them to ``fitdrag lot``.

Everything here is synthetic and says so: an invented laboratory and customer, invented
40 mm training balls whose true drag coefficients are drawn from N(``cd_mean``,
``cd_spread``²), each specimen's true mass and diameter drawn from its stated value and
standard uncertainty (so the stated uncertainties are what the data carry), flights
simulated with :func:`fitdrag.physics.simulate.simulate` in the stated air and gravity, and
white position noise.  Used by ``sample_tracks/make_samples.py``, the tests and the lot
benchmark.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

__all__ = ["LotScene", "SyntheticLot", "write_footage_lot", "write_lot"]


@dataclass(frozen=True)
class LotScene:
    """What the synthetic lot is made of (SI units, temperature in °C, humidity in %).

    Attributes
    ----------
    specimens : int
        Number of specimens.
    throws : int
        Throws per specimen.
    cd_mean, cd_spread : float
        Mean and standard deviation of the specimens' true Cd. [-]
    mass, mass_uncertainty : float
        Stated mass of every specimen and its standard uncertainty. [kg]
    diameter, diameter_uncertainty : float
        Stated diameter and its standard uncertainty. [m]
    temperature, pressure, relative_humidity : float
        The air. [°C, Pa, %]
    gravity : float
        Acceleration of free fall. [m/s²]
    fps : float
        Frame rate. [Hz]
    frames : int
        Samples per throw.
    noise : float
        Standard deviation of the position noise. [m]
    speeds, angles : tuple of float
        Launch speed [m/s] and angle [deg] of throw 1, 2, ... (cycled).
    lower, upper : float
        Specification limits of Cd. [-]
    seed : int
        Seed of every random draw.
    """

    specimens: int = 4
    throws: int = 2
    cd_mean: float = 0.47
    cd_spread: float = 0.012
    mass: float = 0.0027
    mass_uncertainty: float = 0.000005
    diameter: float = 0.040
    diameter_uncertainty: float = 0.00002
    temperature: float = 21.0
    pressure: float = 100800.0
    relative_humidity: float = 45.0
    gravity: float = 9.80665
    fps: float = 500.0
    frames: int = 240
    noise: float = 0.0003
    speeds: tuple[float, ...] = (9.0, 8.0)
    angles: tuple[float, ...] = (32.0, 38.0)
    lower: float = 0.42
    upper: float = 0.52
    seed: int = 20261217


@dataclass(frozen=True)
class SyntheticLot:
    """The files written and the truth.

    Attributes
    ----------
    lot_file, base_job : Path
        The lot file and its base job.
    true_cd : dict of str to float
        Each specimen's true drag coefficient. [-]
    truth_file : Path
        The truth as JSON.
    """

    lot_file: Path
    base_job: Path
    true_cd: dict
    truth_file: Path


BASE_JOB = """\
# Base job of a synthetic lot (SYNTHETIC: invented laboratory, customer and specimens;
# simulated tracks).  Its sections apply to every specimen of the lot file.

[laboratory]
name = "Northmoor Sports Equipment Test Laboratory (fictitious, synthetic sample)"

[test]
customer = "Brightfield Training Goods Ltd (fictitious)"
operator = "J. Example"
approved_by = "R. Sample"
date = 2026-07-20
notes = "Lot sample, two throws per specimen in still air (synthetic)."

[air]
temperature = {temperature}
temperature_uncertainty = 0.3
pressure = {pressure}
pressure_uncertainty = 50
relative_humidity = {relative_humidity}
relative_humidity_uncertainty = 3
air_speed_uncertainty = 0.005

[site]
gravity = {gravity}
gravity_uncertainty = 0.0005

[camera]
fps = {fps}
fps_uncertainty = 0.005
scale_relative_uncertainty = 0.001
distance = 3.0
distance_uncertainty = 0.05
out_of_plane_uncertainty = 0.1

[specification]
lower = {lower}
upper = {upper}
decision_rule = "guarded"
reference = "product data sheet TB-40 (fictitious)"

[output]
directory = "{output}"
number_prefix = "LOT"
"""


def write_lot(folder: str | os.PathLike, scene: LotScene = LotScene(), *,
              name: str = "training_ball_lot", output: str = "certificates") -> SyntheticLot:  # fmt: skip
    """Write a synthetic lot into ``folder``: tracks, base job, lot file and truth JSON.

    Parameters
    ----------
    folder : path-like
        Existing folder.
    scene : LotScene
        The lot.
    name : str
        Stem of the lot file (``NAME.toml``), the base job (``NAME_base.toml``) and the
        truth (``NAME_truth.json``).
    output : str
        The base job's output directory, relative to ``folder``.
    """
    from fitdrag.physics.air import Air
    from fitdrag.physics.forces import Conditions
    from fitdrag.physics.simulate import Launch, simulate
    from fitdrag.physics.specimen import Sphere
    from fitdrag.tracks.csv_file import write_track
    from fitdrag.tracks.track import Track

    folder = Path(folder)
    sc = scene
    rng = np.random.default_rng(sc.seed)
    air = Air.from_conditions(sc.temperature, sc.pressure, sc.relative_humidity)
    cond = Conditions(air=air, gravity=sc.gravity)
    t = np.arange(sc.frames) / sc.fps
    lot_id = "TB-40-L2607"
    lines = [
        "# A lot of synthetic 40 mm training balls (SYNTHETIC: invented specimens, simulated",
        "# throws; true values in the truth JSON beside this file).",
        "",
        "[lot]",
        f'id = "{lot_id}"',
        'description = "Training ball, 40 mm, smooth plastic shell, lot of July 2026 (synthetic)"',
        f'job = "{name}_base.toml"',
        "coverage = 0.95",
        "confidence = 0.95",
        'spread_method = "paule-mandel"',
    ]
    truth: dict = {"synthetic": True, "lot": lot_id, "cd_mean": sc.cd_mean,
                   "cd_spread": sc.cd_spread, "specimens": {}}  # fmt: skip
    true_cd = {}
    for i in range(sc.specimens):
        sid = f"TB-{i + 1:02d}"
        cd = float(sc.cd_mean + sc.cd_spread * rng.standard_normal())
        m = float(sc.mass + sc.mass_uncertainty * rng.standard_normal())
        d = float(sc.diameter + sc.diameter_uncertainty * rng.standard_normal())
        sphere = Sphere(m, d)
        files = []
        for j in range(sc.throws):
            v = sc.speeds[j % len(sc.speeds)]
            a = sc.angles[j % len(sc.angles)]
            launch = Launch.from_speed_angle(v, a, 0.0, 0.0)
            f = simulate(t, launch, sphere, cond, drag_params=(cd,))
            x = f.x + rng.normal(0.0, sc.noise, t.size)
            y = f.y + rng.normal(0.0, sc.noise, t.size)
            fname = f"{name}_{sid.lower().replace('-', '')}_throw{j + 1}.csv"
            meta = {"synthetic": "yes", "true_cd": cd, "true_mass": m, "true_diameter": d,
                    "true_speed": v, "true_angle": a, "noise": sc.noise}  # fmt: skip
            write_track(Track(t, x, y, meta=meta), folder / fname, force=True)
            files.append(fname)
        true_cd[sid] = cd
        truth["specimens"][sid] = {"cd": cd, "mass": m, "diameter": d, "throws": files}
        lines += [
            "",
            "[[specimens]]",
            f'id = "{sid}"',
            f"mass = {sc.mass!r}",
            f"mass_uncertainty = {sc.mass_uncertainty!r}",
            f"diameter = {sc.diameter!r}",
            f"diameter_uncertainty = {sc.diameter_uncertainty!r}",
            "throws = [" + ", ".join(f'"{f}"' for f in files) + "]",
        ]
    lot_file = folder / f"{name}.toml"
    lot_file.write_text("\n".join(lines) + "\n", encoding="utf-8")
    base = folder / f"{name}_base.toml"
    base.write_text(
        BASE_JOB.format(
            temperature=sc.temperature,
            pressure=sc.pressure,
            relative_humidity=sc.relative_humidity,
            gravity=sc.gravity,
            fps=sc.fps,
            lower=sc.lower,
            upper=sc.upper,
            output=output,
        ),  # fmt: skip
        encoding="utf-8",
    )
    truth["true_spread_of_these_specimens"] = float(np.std(list(true_cd.values()), ddof=1))
    tf = folder / f"{name}_truth.json"
    tf.write_text(json.dumps(truth, indent=1) + "\n", encoding="utf-8")
    return SyntheticLot(lot_file, base, true_cd, tf)


def write_footage_lot(folder: str | os.PathLike, base_job: str | os.PathLike,
                      footage: str | os.PathLike, *, specimens: int = 4, throws: int = 2,
                      mass: float = 0.0240, mass_uncertainty: float = 0.00002,
                      diameter: float = 0.0650, diameter_uncertainty: float = 0.00008,
                      throw_options: dict | None = None) -> Path:  # fmt: skip
    """Write a lot file whose every throw is the same footage file (for the task machinery
    and its throughput: each throw is still tracked on its own).

    Parameters
    ----------
    folder : path-like
        Where the lot file goes (``footage_lot.toml``).
    base_job, footage : path-like
        The base job and the footage (e.g. ``sample_tracks/foam_ball_clip.toml`` and its
        clip).
    specimens, throws : int
        Specimens, and throws per specimen.
    mass, mass_uncertainty : float
        Every specimen's stated mass and its standard uncertainty. [kg]
    diameter, diameter_uncertainty : float
        Stated diameter and its standard uncertainty. [m]
    throw_options : dict, optional
        ``[lot.throw_options]`` (default: markers of 0.16 m, relative uncertainty 0.001, as
        the sample clip).
    """
    folder = Path(folder)
    opts = throw_options or {"markers": 0.16, "scale_uncertainty": 0.001}
    fp = Path(footage).resolve()
    lines = [
        "# A lot whose every throw is the same synthetic clip (SYNTHETIC: for the task",
        "# machinery and its throughput; every throw is tracked on its own).",
        "[lot]",
        'id = "CLIP-LOT"',
        'description = "Foam training balls (synthetic clip, repeated)"',
        f"job = {json.dumps(str(Path(base_job).resolve()))}",
        "",
        "[lot.throw_options]",
        *(f"{k} = {v!r}" for k, v in opts.items()),
    ]
    for i in range(specimens):
        lines += [
            "",
            "[[specimens]]",
            f'id = "FB-{i + 1:02d}"',
            f"mass = {mass!r}",
            f"mass_uncertainty = {mass_uncertainty!r}",
            f"diameter = {diameter!r}",
            f"diameter_uncertainty = {diameter_uncertainty!r}",
            "throws = [" + ", ".join([json.dumps(str(fp))] * throws) + "]",
        ]
    out = folder / "footage_lot.toml"
    out.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return out
