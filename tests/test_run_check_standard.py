"""Tests of fitdrag.run.check_standard: a specimen's results from the records database as a
control chart, and the warning of ``fitdrag run``."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from types import SimpleNamespace

import pytest

from fitdrag.run.check_standard import chart_from_records, check_standard_warning, write_chart
from fitdrag.run.records import Records

VALUES = [0.4712, 0.4695, 0.4701, 0.4688, 0.4720, 0.4703, 0.4690, 0.4709, 0.4698, 0.4705]


def _db(tmp_path, values, *, shuffled=False):
    path = tmp_path / "records.sqlite"
    db = Records(path)
    start = datetime(2026, 6, 1, 9, 0, tzinfo=UTC)
    order = list(range(len(values)))
    if shuffled:  # issue out of date order: the chart sorts by date of issue
        order = order[::-1]
    for i in order:
        db.issue(result={}, input_hashes={}, issued_at=start + timedelta(days=i),
                 summary={"specimen_id": "REF-40-A", "drag_coefficient": values[i]})  # fmt: skip
    return path, db


def test_points_in_date_order_and_replacements(tmp_path):
    """regression: points are ordered by date of issue; a replaced certificate's value is
    left out and its replacement's kept."""
    path, db = _db(tmp_path, VALUES, shuffled=True)
    sc = chart_from_records(path, "REF-40-A")
    assert list(sc.chart.values) == VALUES
    first = sc.numbers[0]
    db.issue(result={}, input_hashes={}, replaces=first, reason="corrected result",
             issued_at=datetime(2026, 7, 1, tzinfo=UTC),
             summary={"specimen_id": "REF-40-A", "drag_coefficient": 0.4700})  # fmt: skip
    sc = chart_from_records(path, "REF-40-A")
    assert list(sc.chart.values) == VALUES[1:] + [0.4700]
    assert sc.chart.limits.baseline == 10


def test_warning_only_when_the_latest_is_out_of_control(tmp_path):
    """closed-form/independent: limits from the 10 results above (centre 0.47021, sigma =
    mean moving range / 1.128 = 0.00115); a latest result of 0.4800 is beyond 3 sigma and
    warns, naming the standard, the certificate and the test; 0.4705 does not warn."""
    job = SimpleNamespace(test=SimpleNamespace(check_standard="REF-40-A"))
    path, db = _db(tmp_path, VALUES)
    db.issue(result={}, input_hashes={}, issued_at=datetime(2026, 6, 20, tzinfo=UTC),
             summary={"specimen_id": "REF-40-A", "drag_coefficient": 0.4705})  # fmt: skip
    assert check_standard_warning(job, path) is None
    rec = db.issue(result={}, input_hashes={}, issued_at=datetime(2026, 6, 21, tzinfo=UTC),
                   summary={"specimen_id": "REF-40-A", "drag_coefficient": 0.4800})  # fmt: skip
    msg = check_standard_warning(job, path)
    assert msg.startswith(
        f"check standard 'REF-40-A' is out of control at its latest result {rec.number} "
        f"(Cd = 0.48; test 1: beyond 3 sigma"
    )
    assert check_standard_warning(SimpleNamespace(test=SimpleNamespace(check_standard=None)),
                                  path) is None  # fmt: skip


def test_write_chart_refuses_to_overwrite(tmp_path):
    """regression: the PNG is written once; again only with force."""
    path, _ = _db(tmp_path, VALUES)
    sc = chart_from_records(path, "REF-40-A")
    png = write_chart(sc, tmp_path / "c.png")
    assert png.read_bytes()[:4] == b"\x89PNG"
    with pytest.raises(ValueError) as e:
        write_chart(sc, png)
    assert str(e.value) == f"{png}: already exists; choose another name or pass --force."
    write_chart(sc, png, force=True)
