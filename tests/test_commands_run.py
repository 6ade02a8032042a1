"""Tests of ``fitdrag run``: job file -> fit -> budget -> decision -> certificate -> record.

Synthetic throws come from the independent reference integration (scipy DOP853,
tests/reference.py), not from fitdrag's simulator.
"""

from __future__ import annotations

import hashlib
import json
from datetime import datetime

import numpy as np
import pytest
import reference as ref

from fitdrag.cli import main
from fitdrag.jobs import TEMPLATE
from fitdrag.records import Records

pypdf = pytest.importorskip("pypdf")

TRUE_CD = 0.47


def _track_csv(path, seed=0, sc=None):
    sc = sc or ref.Scenario(cd=TRUE_CD, n=300)
    xy = sc.truth() + np.random.default_rng(seed).normal(0.0, sc.sigma, (sc.n, 2))
    rows = "".join(
        f"{t!r},{x!r},{y!r}\n"
        for t, x, y in zip(sc.t.tolist(), xy[:, 0].tolist(), xy[:, 1].tolist())
    )
    path.write_text("t,x,y\n" + rows)
    return path


def _job_text(**edits) -> str:
    text = TEMPLATE.replace("fps = 500 ", "fps = 400 ")
    # the reference scenario's air: ISA sea level (1.225 kg/m³, 1.789e-5 Pa s)
    for k, v in (("temperature = 21.0 ", "# temperature = 21.0 "),
                 ("temperature_uncertainty = 0.3 ", "# temperature_uncertainty = 0.3 "),
                 ("pressure = 100800 ", "# pressure = 100800 "),
                 ("pressure_uncertainty = 50 ", "# pressure_uncertainty = 50 "),
                 ("relative_humidity = 45 ", "# relative_humidity = 45 "),
                 ("relative_humidity_uncertainty = 3 ", "# relative_humidity_uncertainty = 3 "),
                 ("# density = 1.19 ", "density = 1.225 \nviscosity = 1.789e-5 "),
                 ("# density_uncertainty = 0.005 ", "density_uncertainty = 0.004 ")):  # fmt: skip
        assert k in text
        text = text.replace(k, v, 1)
    for old, new in edits.items():
        assert old in text, old
        text = text.replace(old, new, 1)
    return text


@pytest.fixture
def job(tmp_path):
    _track_csv(tmp_path / "throw1.csv")
    p = tmp_path / "job.toml"
    p.write_text(_job_text())
    return p


def _year() -> int:
    return datetime.now().astimezone().year


def test_run_issues_certificate(job, capsys):
    """closed-form/independent: Cd from an independent DOP853 flight (true 0.47) is recovered
    within the expanded uncertainty; the certificate, PNG, JSON and record are written and
    agree with each other; SHA-256 digests match hashlib's."""
    assert main(["run", str(job), "--quiet"]) == 0
    out = capsys.readouterr().out
    number = f"FD-{_year()}-000001"
    assert f"certificate {number} issued" in out
    outdir = job.parent / "certificates"
    pdf, png, js = (outdir / f"{number}.{ext}" for ext in ("pdf", "png", "json"))
    assert pdf.exists() and png.exists() and js.exists()
    assert not [p for p in outdir.iterdir() if p.name.startswith(".")]  # no temporary files
    rep = json.loads(js.read_text())
    res = rep["result"]
    assert abs(res["drag_coefficient"] - TRUE_CD) < res["expanded_uncertainty"]
    assert res["expanded_uncertainty"] == pytest.approx(
        res["coverage_factor"] * res["combined_standard_uncertainty"]
    )
    assert res["combined_standard_uncertainty"] > res["statistical_standard_uncertainty"]
    names = [ln["name"] for ln in rep["uncertainty_budget"]["lines"]]
    assert names == ["statistical", "mass", "diameter", "air_density", "frame_rate",
                     "length_scale", "gravity"]  # fmt: skip
    assert rep["certificate"]["number"] == number
    assert rep["conformity"]["decision"] in ("pass", "conditional pass")
    job_hash = hashlib.sha256(job.read_bytes()).hexdigest()
    track_hash = hashlib.sha256((job.parent / "throw1.csv").read_bytes()).hexdigest()
    assert set(rep["inputs"]["sha256"].values()) == {job_hash, track_hash}

    reader = pypdf.PdfReader(str(pdf))
    flat = " ".join(" ".join(p.extract_text() for p in reader.pages).split())
    cd_s = res["reported"]["drag_coefficient"]
    u_s = res["reported"]["expanded_uncertainty"]
    assert f"Cd = {cd_s} ± {u_s}" in flat
    assert number in flat and job_hash in flat and track_hash in flat
    assert f"Decision: {rep['conformity']['decision'].upper()}" in flat
    assert f"k = {res['coverage_factor']:.2f}" in flat
    assert 1 <= len(reader.pages) <= 3

    rec = Records(outdir / "records.sqlite").get(number)
    assert rec.job_text == job.read_text()
    assert rec.input_hashes == rep["inputs"]["sha256"]
    assert rec.result["result"]["drag_coefficient"] == res["drag_coefficient"]
    assert rec.outputs["certificate_pdf"] == str(pdf.resolve())
    assert rec.decision == rep["conformity"]["decision"]


def test_reissue_replaces_and_shared_records(job, tmp_path, capsys):
    """regression: a second run gets the next number; --replaces links it; --records shares
    one database."""
    shared = tmp_path / "shared.sqlite"
    assert main(["run", str(job), "--quiet", "--records", str(shared)]) == 0
    first = f"FD-{_year()}-000001"
    args = ["run", str(job), "--quiet", "--records", str(shared), "--replaces", first]
    assert main(args) == 0
    second = f"FD-{_year()}-000002"
    assert f"certificate {second} issued, replacing {first}" in capsys.readouterr().out
    db = Records(shared)
    assert db.get(first).replaced_by == second
    assert not (job.parent / "certificates" / "records.sqlite").exists()
    assert main(args) == 2  # the first certificate was already replaced
    assert "already replaced by" in capsys.readouterr().err
    assert len(db) == 2


@pytest.mark.parametrize(
    "old, new, message",
    [
        ("mass = 0.0027                     # kg\n", "", r"\[specimen\] mass: missing"),
        ("[camera]\n", '[camera]\nlens = "wide"\n', r"\[camera\] lens: unknown key"),
        (
            "diameter_uncertainty = 0.00005",
            "diameter_uncertainty = -0.00005",
            r"\[specimen\] diameter_uncertainty: a standard uncertainty must be >= 0",
        ),
        ('track = "throw1.csv"', 'track = "throw9.csv"', r"\[\[throws\]\] #1 track: no such file"),
    ],
)
def test_bad_job_file_writes_nothing(tmp_path, capsys, old, new, message):
    """regression: a bad job file fails with exit 2 and a clear message; no record, no output
    directory, no database."""
    import re

    _track_csv(tmp_path / "throw1.csv")
    p = tmp_path / "job.toml"
    p.write_text(_job_text(**{old: new}))
    assert main(["run", str(p)]) == 2
    err = capsys.readouterr().err
    assert re.search(r"^fitdrag run: error: job\.toml(, line \d+)?: " + message, err), err
    assert not (tmp_path / "certificates").exists()
    assert sorted(x.name for x in tmp_path.iterdir()) == ["job.toml", "throw1.csv"]


def test_monte_carlo_check(job, capsys):
    """closed-form/independent: for this nearly linear model the Monte Carlo standard
    deviation of 300 re-fits matches the GUM u_c within 20 % (sampling error of a standard
    deviation from 300 values ≈ 4 %), and the intervals are not found to differ."""
    assert main(["run", str(job), "--quiet", "--monte-carlo", "300", "--workers", "1",
                 "--seed", "2"]) == 0  # fmt: skip
    out = capsys.readouterr().out
    assert "Monte Carlo (300 re-fits" in out
    js = job.parent / "certificates" / f"FD-{_year()}-000001.json"
    rep = json.loads(js.read_text())
    mc = rep["monte_carlo"]
    assert mc["trials"] == 300 and mc["failures"] == 0
    uc = rep["result"]["combined_standard_uncertainty"]
    assert mc["standard_uncertainty"] == pytest.approx(uc, rel=0.2)
    assert mc["status"] in ("agree", "inconclusive")
    assert "Monte Carlo check (JCGM 101:2008)" in " ".join(
        p.extract_text() for p in pypdf.PdfReader(str(js.with_suffix(".pdf"))).pages
    )


def test_nonconvergence_exit_3_and_no_record(job, capsys, monkeypatch):
    """regression: a fit that does not converge gives exit code 3 and issues nothing."""
    import fitdrag.fitting as fitting

    real = fitting.fit_tracks

    def failing(*a, **kw):
        r = real(*a, **kw)
        import dataclasses

        return dataclasses.replace(r, success=False, message="iteration limit reached")

    monkeypatch.setattr(fitting, "fit_tracks", failing)
    assert main(["run", str(job), "--quiet"]) == 3
    assert "the fit did not converge: iteration limit reached; no certificate issued" in (
        capsys.readouterr().err
    )
    assert not (job.parent / "certificates").exists()


def test_new_job_command(tmp_path, capsys):
    """regression: new-job writes the template once; refuses to overwrite."""
    p = tmp_path / "j.toml"
    assert main(["new-job", str(p)]) == 0
    assert p.read_text() == TEMPLATE
    assert main(["new-job", str(p)]) == 2
    assert "already exists" in capsys.readouterr().err
