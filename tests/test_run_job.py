"""Tests of fitdrag.run.job: the job's objects for the fit and the budget's inputs."""

from __future__ import annotations

import math
import re

import pytest

from fitdrag.run.job_file import UNKNOWN_SITE_GRAVITY_HALF_WIDTH, load_job
from fitdrag.run.job_template import TEMPLATE, write_template


@pytest.fixture
def job_dir(tmp_path):
    (tmp_path / "throw1.csv").write_text("t,x,y\n" + "".join(f"{i},{i},{i}\n" for i in range(9)))
    return tmp_path


def _write(job_dir, text, name="job.toml"):
    p = job_dir / name
    p.write_text(text, encoding="utf-8")
    return p


def _edit(old: str, new: str, text: str = TEMPLATE) -> str:
    assert old in text, old
    return text.replace(old, new, 1)


def test_gravity_without_site_and_air_density(job_dir):
    """closed-form/independent: without [site], standard gravity 9.80665 m/s² (CGPM 1901)
    with a rectangular half-width 0.026 m/s² (u = a/√3, GUM 4.3.7); a stated density
    replaces T, p, RH in the budget."""
    text = re.sub(r"\[site\].*?(?=\[camera\])", "", TEMPLATE, flags=re.S)
    text = _edit("temperature = 21.0                # degrees C\n", "", text)
    text = _edit("temperature_uncertainty = 0.3     # K\n", "", text)
    text = _edit("pressure = 100800                 # Pa (absolute)\n", "", text)
    text = _edit("pressure_uncertainty = 50         # Pa\n", "", text)
    text = _edit("relative_humidity = 45            # %\n", "", text)
    text = _edit("relative_humidity_uncertainty = 3 # %\n", "", text)
    text = _edit("# density = 1.19 ", "density = 1.19 ", text)
    text = _edit("# density_uncertainty = 0.005 ", "density_uncertainty = 0.005 ", text)
    job = load_job(_write(job_dir, text))
    g = [q for q in job.input_quantities() if q.name == "gravity"][0]
    assert g.value == 9.80665
    assert g.standard_uncertainty == pytest.approx(UNKNOWN_SITE_GRAVITY_HALF_WIDTH / math.sqrt(3))
    assert g.distribution == "rectangular"
    names = [q.name for q in job.input_quantities()]
    assert "air_density" in names and "temperature" not in names
    assert job.make_air().density == 1.19


def test_body_specimen(job_dir):
    """regression: a non-spherical specimen by area and volume."""
    text = _edit("diameter = 0.040 ", "# diameter = 0.040 ")
    text = _edit("diameter_uncertainty = 0.00005 ", "# diameter_uncertainty = 0.00005 ", text)
    text = _edit("# area = 0.00126 ", "area = 0.00126 ", text)
    text = _edit("# area_uncertainty = 0.00001 ", "area_uncertainty = 0.00001 ", text)
    text = _edit("# volume = 3.35e-5 ", "volume = 3.35e-5 ", text)
    with pytest.raises(ValueError, match=r"\[specimen\] volume_uncertainty: missing"):
        load_job(_write(job_dir, text))
    text = _edit("# volume_uncertainty = 3e-7 ", "volume_uncertainty = 3e-7 ", text)
    job = load_job(_write(job_dir, text))
    assert job.shape == "body"
    sp = job.make_specimen()
    assert sp.area == 0.00126 and sp.volume == 3.35e-5
    assert [q.name for q in job.input_quantities()][:3] == ["mass", "area", "volume"]


def test_camera_roll_uncertainty_becomes_a_budget_input(job_dir):
    """regression: [camera] roll_uncertainty [deg] adds a 'roll' input (nominal 0) to the
    budget; a footage calibration's value can be passed instead; absent, there is none."""
    text = _edit("fps_uncertainty = 0.05", 'fps_uncertainty = 0.05\nroll_uncertainty = "0.05 deg"')
    job = load_job(_write(job_dir, text))
    roll = [q for q in job.input_quantities() if q.name == "roll"]
    assert len(roll) == 1 and roll[0].value == 0.0
    assert roll[0].standard_uncertainty == pytest.approx(0.05)
    assert [q for q in job.input_quantities(roll_uncertainty=0.2) if q.name == "roll"][
        0
    ].standard_uncertainty == pytest.approx(0.2)
    plain = load_job(write_template(job_dir / "plain.toml"))
    assert "roll" not in [q.name for q in plain.input_quantities()]
