"""Tests of fitdrag.report.content: the certificate's content and its JSON form."""

from __future__ import annotations

import dataclasses
import datetime
import json
import math

from fitdrag.report.content import (
    CameraSettings,
    CertificateContent,
    Conditions,
    Estimate,
    FitFacts,
    Issue,
    ItemTested,
    Laboratory,
    Method,
    Result,
    TestDetails,
)
from fitdrag.uncertainty.gum import Budget, BudgetLine

#: The top-level keys of the result JSON, in their order (the file format).
KEYS = ["success", "software_version", "certificate", "job", "laboratory", "test", "specimen",
        "conditions", "camera", "footage", "method", "flight_physics", "result",
        "uncertainty_budget",
        "monte_carlo", "conformity", "fit", "inputs", "outputs"]  # fmt: skip


def _content() -> CertificateContent:
    line = BudgetLine("mass", 0.0027, 1e-5, "kg", 171.0, 0.00171, 1.0, math.inf, "B", "normal")
    budget = Budget(0.47, (line,), 0.00171, math.inf, 0.9545, 2.0, 0.00342)
    return CertificateContent(
        software_version="0.1.0",
        laboratory=Laboratory(
            "Lab (synthetic)", address="1 Sample Road", key_order=("address", "name")
        ),  # fmt: skip
        test=TestDetails(
            "Customer (fictitious)",
            "A. Tester",
            datetime.date(2026, 3, 4),
            order="PO-1",
            key_order=("date", "order", "customer", "operator"),
        ),  # fmt: skip
        specimen=ItemTested(
            "S-1",
            "ball (synthetic)",
            "sphere",
            Estimate(0.0027, 1e-5),
            Estimate(0.5, 0.0),
            diameter=Estimate(0.04, 5e-5),
        ),  # fmt: skip
        conditions=Conditions(
            Estimate(1.19, 0.001), 1.8e-5, Estimate(9.81, 5e-4), air_density_source="stated"
        ),  # fmt: skip
        camera=CameraSettings(Estimate(500.0, 0.05), 0.002, "stated"),
        method=Method("equation", "RK5(4)", "least squares", "GUM"),
        result=Result(0.47, 0.00171, 2.0, 0.9545, 0.00342),
        fit=FitFacts(throws=1),
        budget=budget,
        input_hashes={"/jobs/job.toml": "ab" * 32},
        job_path="/jobs/job.toml",
    )


def test_json_keys_order_and_issue():
    """regression: the JSON has the file format's keys in order; before issue the certificate
    and outputs are empty, after dataclasses.replace they hold number, date, replaced
    certificate and pages; the content is valid JSON (no NaN, infinity as "inf")."""
    c = _content()
    d = c.to_dict()
    assert list(d) == KEYS
    assert d["certificate"] == {} and d["outputs"] == {}
    assert d["job"] == {"path": "/jobs/job.toml", "sha256": "ab" * 32}
    assert d["result"]["effective_degrees_of_freedom"] == "inf"
    assert d["result"]["reported"] == {"drag_coefficient": "0.4700", "expanded_uncertainty":
                                       "0.0034"}  # fmt: skip
    issued = dataclasses.replace(
        c, issue=Issue("FD-2026-000001", "2026-03-05T10:00:00+00:00", None, pages=3),
        outputs={"certificate_pdf": "/out/FD-2026-000001.pdf"},
    )  # fmt: skip
    d2 = issued.to_dict()
    assert d2["certificate"] == {"number": "FD-2026-000001",
                                 "issued_at": "2026-03-05T10:00:00+00:00", "replaces": None,
                                 "pages": 3}  # fmt: skip
    assert list(d2["certificate"]) == ["number", "issued_at", "replaces", "pages"]
    assert c.to_dict() == d  # the content before issue is unchanged
    json.dumps(d2, allow_nan=False)


def test_sections_keep_the_job_files_key_order():
    """regression: laboratory and test keep the order in which the job file gave their keys
    (given keys only; dates as ISO 8601 text); the specimen and conditions have a fixed
    order."""
    d = _content().to_dict()
    assert list(d["laboratory"].items()) == [("address", "1 Sample Road"),
                                             ("name", "Lab (synthetic)")]  # fmt: skip
    assert list(d["test"].items()) == [("date", "2026-03-04"), ("order", "PO-1"),
                                       ("customer", "Customer (fictitious)"),
                                       ("operator", "A. Tester")]  # fmt: skip
    assert list(d["specimen"]) == ["id", "description", "shape", "mass", "diameter",
                                   "added_mass_coefficient"]  # fmt: skip
    assert list(d["conditions"]) == ["air_density", "air_viscosity", "gravity", "wind",
                                     "air_speed_uncertainty"]  # fmt: skip
    assert d["conditions"]["air_density"] == {"value": 1.19, "standard_uncertainty": 0.001,
                                              "source": "stated"}  # fmt: skip
