"""Tests of fitdrag.report.lot_report: the lot report's PDF text and plot."""

from __future__ import annotations

import pytest

from fitdrag.report.lot_report import CAUTION, lot_page_one_note, plot_lot, render_lot_report

pypdf = pytest.importorskip("pypdf")


def _data():
    sp = [
        {"id": f"S-{i}", "drag_coefficient": cd, "expanded_uncertainty": 0.006,
         "coverage_factor": 2.0, "independent_standard_uncertainty": 0.0029,
         "decision": "pass", "throws": ["a", "b"]}
        for i, cd in enumerate([0.462, 0.471, 0.480], start=1)
    ]  # fmt: skip
    return {
        "lot": {"id": "L-1", "description": "synthetic lot", "laboratory": "Synthetic Lab",
                "customer": "Nobody Ltd"},
        "specimens": sp,
        "failures": [],
        "specification": {"lower": 0.42, "upper": 0.52},
        "summary": {
            "n": 3, "mean": 0.471, "standard_uncertainty_of_mean": 0.0061,
            "standard_uncertainty_of_mean_independent": 0.006,
            "standard_uncertainty_of_mean_shared": 0.0006, "shared_inputs": {"gravity": 1e-5},
            "coverage_factor": 2.0, "expanded_uncertainty_of_mean": 0.0122,
            "standard_deviation": 0.0085, "standard_deviation_uncertainty": 0.004,
            "standard_deviation_interval_95": [0.003, 0.05], "spread_method": "paule-mandel",
            "tolerance_interval": [0.40, 0.54], "tolerance_interval_coverage": 0.95,
            "tolerance_interval_confidence": 0.95, "tolerance_factor": 9.789,
            "tolerance_interval_sides": 2, "fraction_outside_specification": 0.0003,
            "decision": "fail", "decision_rule": "guarded", "guard_band": 0.0012,
        },
        "methods": {"tolerance_interval": "ISO 16269-6:2014 method text",
                    "spread": "Paule–Mandel method text"},
        "statement": "Lot L-1: the lot statement.",
        "issue": {"number": "LOT-2026-000007", "issued_at": "2026-07-21T10:00:00+00:00"},
    }  # fmt: skip


def test_pdf_states_the_lot(tmp_path):
    """regression: the PDF names the report number, the lot, every specimen, the statement,
    the tolerance interval, the methods and the caution; the PNG is page 1."""
    pdf, png = tmp_path / "r.pdf", tmp_path / "r.png"
    n = render_lot_report(_data(), pdf, png)
    text = " ".join(p.extract_text() for p in pypdf.PdfReader(str(pdf)).pages)
    text = " ".join(text.split())
    assert n == len(pypdf.PdfReader(str(pdf)).pages)
    for s in (
        "LOT-2026-000007",
        "L-1",
        "S-1",
        "S-3",
        "Lot L-1: the lot statement.",
        "k = 9.789",
        "ISO 16269-6:2014 method text",
        "FAIL",
        "0.471 ± 0.012",
    ):
        assert s in text, s
    assert " ".join(CAUTION.split()[:8]) in text
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_page_one_carries_the_record_hash_and_says_it_is_one_page_of_the_whole(tmp_path):
    """regression: page 1 (the page that goes alone as the PNG) prints the record hash of the
    lot report's record and says it is page 1 of the report's pages, valid only as a whole;
    the other pages do not repeat it."""
    data = _data()
    data["issue"]["record_hash"] = "ab" * 32
    pdf = tmp_path / "r.pdf"
    n = render_lot_report(data, pdf)
    pages = [" ".join(p.extract_text().split()) for p in pypdf.PdfReader(str(pdf)).pages]
    assert len(pages) == n >= 2
    assert "Record hash (SHA-256): " + "ab" * 32 in pages[0]
    assert " ".join(lot_page_one_note(n).split()) in pages[0]
    assert all("valid only as the whole" not in p for p in pages[1:])


def test_plot_shows_values_limits_and_interval():
    """regression: error bars at each specimen's Cd with its U; the specification limits as
    lines; the tolerance interval as a band."""
    fig = plot_lot(_data())
    ax = fig.axes[0]
    cont = ax.containers[0]
    assert list(cont.lines[0].get_ydata()) == [0.462, 0.471, 0.480]
    hl = sorted(float(ln.get_ydata()[0]) for ln in ax.lines if ln.get_linestyle() == "--")
    assert hl == [0.42, 0.52]
    (band,) = ax.patches
    lo, hi = band.get_y(), band.get_y() + band.get_height()
    assert lo == pytest.approx(0.40) and hi == pytest.approx(0.54)
