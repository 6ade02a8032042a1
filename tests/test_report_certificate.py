"""Tests of fitdrag.report.certificate: PDF contents (extracted with pypdf), PNG."""

from __future__ import annotations

import dataclasses
import datetime
import math

import numpy as np
import pytest

from fitdrag.report.certificate import (
    CAUTION,
    SAFETY,
    render_certificate,
    write_certificate,
)
from fitdrag.report.content import (
    CameraSettings,
    CertificateContent,
    Conditions,
    Conformity,
    Estimate,
    FitFacts,
    Issue,
    ItemTested,
    Laboratory,
    Method,
    Result,
    TestDetails,
)
from fitdrag.report.numbers import formatter_for
from fitdrag.report.plots import ThrowCurves
from fitdrag.uncertainty.decision import Specification, decide
from fitdrag.uncertainty.gum import Budget, BudgetLine

pypdf = pytest.importorskip("pypdf")

HASH_JOB = "0123456789abcdef" * 4
HASH_TRACK = "fedcba9876543210" * 4


def _content(decision_value=0.4712, rule="guarded", replaces=None):
    big_u, uc = 0.0118, 0.0059
    spec = Specification.from_tolerance(0.47, 0.03, reference="synthetic spec S-1")
    v = decide(decision_value, big_u, spec, rule, standard_uncertainty=uc)
    budget = Budget(
        value=decision_value,
        lines=(
            BudgetLine("statistical", 0.0, 0.002, "", 1.0, 0.002, 0.115, 296.0, "A", "normal",
                       description="statistical (fit)"),
            BudgetLine("mass", 0.0027, 1e-5, "kg", 171.0, 0.00171, 0.084, math.inf, "B",
                       "normal", description="specimen mass"),
        ),
        combined_standard_uncertainty=uc,
        effective_dof=250.0,
        coverage_probability=0.9545,
        coverage_factor=2.0,
        expanded_uncertainty=big_u,
    )  # fmt: skip
    return CertificateContent(
        software_version="0.1.0",
        issue=Issue("FD-2026-000042", "2026-03-05T10:11:12+01:00", replaces),
        laboratory=Laboratory(
            name="Example Flight Test Laboratory (synthetic)",
            address="1 Sample Road, Testville",
        ),
        test=TestDetails(
            customer="Fictitious Sports Goods Ltd",
            operator="A. Tester",
            approved_by="B. Reviewer",
            date=datetime.date(2026, 3, 4),
        ),
        specimen=ItemTested(
            id="SYN-BALL-001",
            description="Training ball 40 mm (synthetic)",
            shape="sphere",
            mass=Estimate(0.0027, 1e-5),
            added_mass_coefficient=Estimate(0.5, 0.0),
            diameter=Estimate(0.04, 5e-5),
        ),
        conditions=Conditions(
            temperature=Estimate(21.0, 0.3),
            pressure=Estimate(100800.0, 50.0),
            relative_humidity=Estimate(45.0, 3.0),
            air_density=Estimate(1.1892, 0.0015),
            air_viscosity=1.818e-5,
            gravity=Estimate(9.80677, 5e-4),
            air_speed_uncertainty=0.05,
        ),
        camera=CameraSettings(fps=Estimate(500.0, 0.05), scale_relative_uncertainty=0.002),
        method=Method(
            model_equation="(m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ C_d A |v| v",
            integrator="adaptive RK5(4)",
            fit_method="weighted least squares",
            uncertainty_method="GUM",
            flight_physics="Spin: no lift detected (synthetic statement).",
        ),
        result=Result(
            drag_coefficient=decision_value,
            expanded_uncertainty=big_u,
            combined_standard_uncertainty=uc,
            coverage_factor=2.0,
            coverage_probability=0.9545,
            effective_degrees_of_freedom=250.0,
        ),
        fit=FitFacts(
            throws=1,
            reynolds_number=(1.5e4, 2.6e4, 2.1e4),
            launch_speed=Estimate(8.94, 0.002),
            launch_angle=Estimate(26.5, 0.01),
            points_used=298,
            points_total=300,
            rejected=(50, 120),
            rejection_reasons={"50": "residual 30 sigma"},
            residual_rms=5e-4,
            residual_rms_x=4e-4,
            residual_rms_y=6e-4,
            noise_model="white",
            lag1_autocorrelation=0.02,
            identifiable=True,
        ),
        budget=budget,
        monte_carlo=None,
        conformity=Conformity(v, v.statement(formatter_for(big_u))),
        input_hashes={"/lab/jobs/job.toml": HASH_JOB, "/lab/jobs/throw1.csv": HASH_TRACK},
    )


def _curves():
    t = np.linspace(0.0, 0.6, 300)
    x, y = 8 * t, 1 + 4 * t - 4.9 * t**2
    r = np.random.default_rng(1).normal(0.0, 5e-4, (2, t.size))
    used = np.ones(t.size, bool)
    used[[50, 120]] = False
    return [ThrowCurves("throw1.csv", t, x + r[0], y + r[1], used, r[0], r[1], t, x, y)]


def _text(pdf_path) -> tuple[int, str]:
    reader = pypdf.PdfReader(str(pdf_path))
    return len(reader.pages), "\n".join(p.extract_text() for p in reader.pages)


@pytest.fixture(scope="module")
def rendered(tmp_path_factory):
    d = tmp_path_factory.mktemp("cert")
    pdf, png = d / "c.pdf", d / "c.png"
    n = render_certificate(_content(), pdf, png, curves=_curves(), dpi=100)
    return n, pdf, png


def test_pdf_holds_number_result_decision_and_hashes(rendered):
    """regression: ISO/IEC 17025:2017 7.8 items are in the PDF's extracted text."""
    n, pdf, _png = rendered
    pages, text = _text(pdf)
    assert n == pages and 1 <= pages <= 3
    flat = " ".join(text.split())
    assert "FD-2026-000042" in flat
    for i in range(1, pages + 1):
        assert f"Page {i} of {pages}" in flat
    assert "Cd = 0.471 ± 0.012" in flat
    assert "k = 2.00" in flat
    assert "Decision: PASS" in flat
    assert "guarded acceptance with guard band w = U" in flat
    assert HASH_JOB in flat and HASH_TRACK in flat
    assert "Fictitious Sports Goods Ltd" in flat and "SYN-BALL-001" in flat
    assert "Date of test 2026-03-04" in flat and "Date of issue 2026-03-05" in flat
    assert "The results relate only to the item tested" in flat
    assert " ".join(CAUTION.split()) in flat
    assert " ".join(SAFETY.split()) in flat  # projectiles, lamps, deference to procedures
    assert "Tested by: A. Tester" in flat and "Approved by: B. Reviewer" in flat
    assert "Rejected frames (2): 50, 120" in flat
    assert "Uncertainty budget" in flat and "specimen mass" in flat
    # the flight's physics and the stated air movement (issue: the certificate states them)
    assert "Spin, drag law Spin: no lift detected (synthetic statement)." in flat
    assert ("Air movement still air assumed; air speed along the flight: standard uncertainty "
            "0.050 m/s (stated), propagated by re-fits with that wind along the flight") in flat  # fmt: skip


def test_conditional_decision_and_replacement(tmp_path):
    """regression: a conditional fail and a replacement note appear as such."""
    pdf = tmp_path / "c.pdf"
    render_certificate(_content(0.505, replaces="FD-2026-000007"), pdf, curves=_curves())
    flat = " ".join(_text(pdf)[1].split())
    assert "Decision: CONDITIONAL FAIL" in flat
    assert "replaces certificate FD-2026-000007, which is withdrawn" in flat


def test_png_is_page_one(rendered):
    """regression: the PNG is an A4 page image with real content (not blank)."""
    import matplotlib.image as mpimg

    _n, _pdf, png = rendered
    img = mpimg.imread(png)
    h, w = img.shape[:2]
    assert (w, h) == (827, 1169)
    grey = img[..., :3].mean(axis=2)
    assert (grey < 0.5).mean() > 0.01  # text covers at least 1 % of the page
    assert grey.std() > 0.05
    assert png.stat().st_size > 20_000


def test_write_certificate_is_atomic_and_refuses_overwrite(tmp_path):
    """regression: a failed render leaves no file (final or temporary); no silent overwrite."""
    pdf, png = tmp_path / "c.pdf", tmp_path / "c.png"
    bad = dataclasses.replace(_content(), result=None)
    with pytest.raises(AttributeError):
        write_certificate(bad, pdf, png)
    assert list(tmp_path.iterdir()) == []
    assert write_certificate(_content(), pdf, png, curves=_curves()) >= 1
    with pytest.raises(ValueError, match=r"c\.pdf: already exists; choose another name"):
        write_certificate(_content(), pdf, png)
    write_certificate(_content(), pdf, png, force=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["c.pdf", "c.png"]


def test_customer_document_wording(tmp_path):
    """closed-form/independent: the mass the job gave in g is shown in g (pint: 0.0240 kg =
    24.0 g; u 2e-5 kg = 0.020 g, the value rounded to the same decimal place, GUM 7.2.6); the
    budget's mass line is rounded with its uncertainty (0.002700 ± 0.000010, not 2.7e-03 beside
    1e-05); the noise model is in words; page 1 says it is one of N; a probability of
    conformity above 0.999 reads "> 99.9 %"."""
    content = _content()
    content = dataclasses.replace(
        content,
        specimen=dataclasses.replace(content.specimen, mass=Estimate(0.024, 2e-5),
                                     shown_units={"mass": "g"}),
        fit=dataclasses.replace(content.fit, noise_model="ar1"),
        conditions=dataclasses.replace(content.conditions, shown_units={"pressure": "hPa"}),
    )  # fmt: skip
    pdf = tmp_path / "c.pdf"
    n = render_certificate(content, pdf, curves=_curves())
    flat = " ".join(_text(pdf)[1].replace("\xa0", " ").split())
    assert "Mass 24.000 g (standard uncertainty 0.020 g)" in flat
    assert "Air pressure 1008.00 hPa (standard uncertainty 0.50 hPa)" in flat  # 100800 ± 50 Pa
    assert "0.002700 0.000010 kg" in flat
    assert "noise model ar1" not in flat and "ar1" not in flat
    assert "position errors correlated from frame to frame" in flat
    assert f"Page 1 of {n}: valid only as the whole certificate of {n} pages" in flat
    assert content.conformity.verdict.probability_of_conformity > 0.999  # 0.4712 ± 0.0118
    assert "probability of conformity > 99.9 %" in flat
    assert "probability of conformity 100.0 %" not in flat


def test_draft_is_marked_on_every_page(tmp_path):
    """regression: a draft has no number and says DRAFT on every page."""
    content = dataclasses.replace(
        _content(), issue=Issue("DRAFT", "2026-03-05T10:11:12+01:00", draft=True)
    )
    pdf = tmp_path / "d.pdf"
    n = render_certificate(content, pdf, curves=_curves())
    reader = pypdf.PdfReader(str(pdf))
    assert len(reader.pages) == n
    for page in reader.pages:
        assert "DRAFT: not reviewed, not for release" in page.extract_text()
    flat = " ".join(_text(pdf)[1].split())
    assert "Certificate number none: DRAFT for review, not a certificate" in flat
