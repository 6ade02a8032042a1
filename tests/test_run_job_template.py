"""Tests of fitdrag.run.job_template: the template written by ``fitdrag new-job``."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from fitdrag.run.job_file import load_job
from fitdrag.run.job_template import write_template


@pytest.fixture
def job_dir(tmp_path):
    (tmp_path / "throw1.csv").write_text("t,x,y\n" + "".join(f"{i},{i},{i}\n" for i in range(9)))
    return tmp_path


def test_template_loads(job_dir):
    """regression: the template is a valid job; values arrive in SI with their uncertainties."""
    job = load_job(write_template(job_dir / "job.toml"))
    assert job.laboratory.name.endswith("(synthetic)")
    assert job.specimen.mass.value == 0.0027 and job.specimen.mass.uncertainty == 1e-5
    assert job.shape == "sphere"
    assert job.air.pressure.value == 100800 and job.air.temperature.unit == "°C"
    assert job.camera.fps.value == 500
    assert job.throws[0].path == (job_dir / "throw1.csv").resolve()
    assert job.specification.lower == pytest.approx(0.44)
    assert job.decision_rule == "guarded"
    assert job.output_directory == (job_dir / "certificates").resolve()
    assert job.output.records is None  # the laboratory's database (FITDRAG_RECORDS here)
    assert job.records_path == Path(os.environ["FITDRAG_RECORDS"])
    assert str(job.test.date) == "2026-01-15"
    names = [q.name for q in job.input_quantities()]
    assert names == ["mass", "diameter", "temperature", "pressure", "relative_humidity",
                     "frame_rate", "length_scale", "camera_distance", "out_of_plane_angle",
                     "air_speed", "gravity"]  # fmt: skip
    assert job.air.air_speed_uncertainty == 0.05 and job.fit.lift_test
    # WGS84 normal gravity at 47° N, 400 m is about 9.807 m/s² (Moritz, Geodetic Reference
    # System 1980, J. Geodesy 74 (2000); free-air gradient 3.086e-6 s⁻²; from memory)
    assert job.gravity() == pytest.approx(9.8068, abs=5e-4)
    with pytest.raises(ValueError, match=r"already exists; choose another name or pass --force"):
        write_template(job_dir / "job.toml")
