"""The bundled demonstration (fitdrag.run.demo, ``fitdrag demo``) end to end in a temp directory.

One full run is shared by the tests of this module (a module-scoped fixture); a second run
checks re-issuing, and a hand-edited job file checks the refusal.
"""

from __future__ import annotations

import json
import os
import re

import numpy as np
import pytest
import reference

from fitdrag.cli import main
from fitdrag.run.demo import TRUE_CD, job_text, run_demo
from fitdrag.run.job_file import load_job
from fitdrag.run.records import Records


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    base = tmp_path_factory.mktemp("demo_cwd")
    cwd = os.getcwd()
    os.chdir(base)  # a relative directory: the demo must write only inside it
    try:
        result = run_demo("demo", progress=False)
    finally:
        os.chdir(cwd)
    return base, result


def _pdf_text(path) -> str:
    from pypdf import PdfReader

    return "\n".join(page.extract_text() for page in PdfReader(str(path)).pages)


def test_demo_issues_a_certificate_with_a_decision(demo):
    """regression: the certificate PDF names its number, the result and the decision (PASS
    under guarded acceptance: the stated 0.50 ± 0.05 holds the true 0.49 well inside)."""
    _, r = demo
    text = _pdf_text(r.certificate_pdf)
    assert r.certificate_number in text
    assert re.match(r"^DEMO-\d{4}-000001$", r.certificate_number)
    assert "Decision: PASS" in text
    assert "guarded acceptance" in text
    assert r.decision == "pass"
    assert f"{r.drag_coefficient:.4f}" in text
    assert r.certificate_png.stat().st_size > 50_000  # a rendered page, not an empty image
    assert json.loads(r.result_json.read_text())["conformity"]["decision"] == "pass"


def test_demo_recovers_the_true_drag_coefficient_within_its_uncertainty(demo):
    """closed-form/independent: the footage was rendered from a flight with Cd = 0.49 (checked
    against scipy in the next test); the measured Cd from the footage must lie within its
    expanded uncertainty of it, and U must be a plausible size (0.1 % to 3 % of Cd)."""
    _, r = demo
    assert abs(r.drag_coefficient - TRUE_CD) <= r.expanded_uncertainty
    assert 0.001 * TRUE_CD < r.expanded_uncertainty < 0.03 * TRUE_CD


def test_demo_truth_is_the_equation_of_motion(demo):
    """closed-form/independent: the truth file's positions agree with scipy's DOP853 solution
    (tests/reference.py: Timmerman & van der Weele, Am. J. Phys. 67, 538 (1999), eq. 1 with
    buoyancy and added mass) for the stated Cd, launch, specimen, air and gravity, to 1 µm."""
    _, r = demo
    tr = json.loads(r.truth.read_text())
    assert tr["synthetic"] is True
    la = tr["launch"]
    a = np.radians(la["angle"])
    launch = (la["x0"], la["y0"], la["speed"] * np.cos(a), la["speed"] * np.sin(a))
    body = reference.Body.sphere(tr["specimen"]["mass"], tr["specimen"]["diameter"])
    ref = reference.flight(tr["t"], launch, body, tr["air_density"], tr["true_cd"],
                           gravity=tr["gravity"])  # fmt: skip
    np.testing.assert_allclose(tr["x"], ref[:, 0], atol=1e-6, rtol=0)
    np.testing.assert_allclose(tr["y"], ref[:, 1], atol=1e-6, rtol=0)


def test_demo_writes_only_inside_its_directory(demo):
    """regression: everything the demo writes is in DIR; DIR holds the documented files."""
    base, r = demo
    assert sorted(os.listdir(base)) == ["demo"]
    d = base / "demo"
    assert r.directory == d.resolve()
    for p in (r.footage, r.truth, r.track, r.preview, r.job, r.certificate_pdf, r.certificate_png,
              r.result_json, r.records):  # fmt: skip
        assert p.is_file() and d.resolve() in p.resolve().parents
    assert not [p for p in d.rglob("*") if ".tmp" in p.name or ".partial" in p.name]


def test_demo_job_file_is_a_valid_job_and_the_record_is_kept(demo):
    """regression: the job file parses with the job-file reader and the record is stored."""
    _, r = demo
    job = load_job(r.job)
    assert job.specification.lower == pytest.approx(0.45)
    assert job.specification.upper == pytest.approx(0.55)
    assert job.decision_rule == "guarded"
    recs = Records(r.records).list()
    assert [x.number for x in recs] == [r.certificate_number]
    assert recs[0].decision == "pass"
    # the certificate traces the footage itself (the job names it), not only a derived CSV
    assert any(k.endswith("demo_throw.avi") for k in recs[0].input_hashes)
    tr = json.loads(r.truth.read_text())
    assert tr["sha256"] in recs[0].input_hashes.values()
    assert tr["sha256"] in _pdf_text(r.certificate_pdf)


def test_demo_second_run_reissues_with_a_new_number(demo, capsys):
    """regression: running the demo again (through the CLI) exits 0, reuses the footage and
    issues a new number that replaces the first certificate; both stay on record."""
    base, first = demo
    code = main(["demo", str(base / "demo"), "--quiet"])
    out = capsys.readouterr().out
    assert code == 0
    second = first.certificate_number[:-6] + "000002"
    assert f"certificate {second} issued, replacing {first.certificate_number}" in out
    assert "(synthetic, reused)" in out
    recs = {x.number: x for x in Records(first.records).list()}
    assert recs[first.certificate_number].replaced_by == second
    assert recs[second].replaces == first.certificate_number


def test_demo_refuses_to_overwrite_an_edited_job_file(demo):
    """regression: a hand-edited job file is not overwritten without force; the message names
    the file and the fix."""
    base, r = demo
    r.job.write_text(r.job.read_text() + "\n# my edit\n")
    with pytest.raises(ValueError, match=r"demo_job\.toml: differs from what the demo writes "
                       r"there .*pass --force to overwrite it"):  # fmt: skip
        run_demo(base / "demo", progress=False)
    assert r.job.read_text().endswith("# my edit\n")


def test_demo_refuses_a_file_as_directory(tmp_path):
    """regression: DIR must be a directory."""
    f = tmp_path / "afile"
    f.write_text("x")
    with pytest.raises(ValueError, match=r"afile: is a file, not a directory; give a directory"):
        run_demo(f, progress=False)


def test_job_text_is_a_valid_footage_job(tmp_path):
    """regression: the job text is valid for the job reader: one footage throw calibrated by
    its markers, the demo's specification and certificate prefix."""
    (tmp_path / "footage").mkdir()
    (tmp_path / "footage" / "demo_throw.avi").write_bytes(b"not read by load_job")
    p = tmp_path / "job.toml"
    p.write_text(job_text("2026-01-02"))
    job = load_job(p)
    (th,) = job.throws
    assert th.kind == "footage" and th.path == tmp_path / "footage" / "demo_throw.avi"
    assert th.markers == pytest.approx(0.1)
    assert job.number_prefix == "DEMO"
    assert str(job.test.date) == "2026-01-02"
