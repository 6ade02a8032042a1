"""Tests of ``fitdrag run``: job file -> fit -> budget -> decision -> certificate -> record.

Synthetic throws come from the independent reference integration (scipy DOP853,
tests/reference.py), not from fitdrag's simulator.
"""

from __future__ import annotations

import hashlib
import json
import os
from datetime import datetime

import numpy as np
import pytest
import reference as ref

from fitdrag.cli import main
from fitdrag.run.job_template import PLACEHOLDERS, TEMPLATE
from fitdrag.run.records import Records

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


def _edited_template() -> str:
    """The template with the laboratory's, customer's and specimen's values filled in."""
    text = TEMPLATE
    for value in PLACEHOLDERS.values():
        text = text.replace(f'"{value}"', f'"{value} (edited)"', 1)
    return text


def _job_text(**edits) -> str:
    text = _edited_template().replace("fps = 500 ", "fps = 400 ")
    # the reference scenario's air: ISA sea level (1.225 kg/m³, 1.789e-5 Pa s)
    for k, v in (("temperature = 21.0 ", "# temperature = 21.0 "),
                 ("temperature_uncertainty = 0.3 ", "# temperature_uncertainty = 0.3 "),
                 ("pressure = 100800 ", "# pressure = 100800 "),
                 ("pressure_uncertainty = 50 ", "# pressure_uncertainty = 50 "),
                 ("relative_humidity = 45 ", "# relative_humidity = 45 "),
                 ("relative_humidity_uncertainty = 3 ", "# relative_humidity_uncertainty = 3 "),
                 ("# density = 1.19 ", "density = 1.225 "),
                 ("# density_uncertainty = 0.005 ", "density_uncertainty = 0.004 "),
                 ("# viscosity = 1.81e-5 ", "viscosity = 1.789e-5 "),
                 ("# viscosity_uncertainty = 1e-7 ", "viscosity_uncertainty = 0.0 "),
                 # a launcher aligned with the board (the simulated track is in the plane)
                 ("out_of_plane_uncertainty = 0.5 ", "out_of_plane_uncertainty = 0.1 ")):  # fmt: skip
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
                     "length_scale", "camera_distance", "out_of_plane_angle", "air_speed",
                     "gravity", "lift_coefficient"]  # fmt: skip
    # the lift test ran (the independent flight has no spin) and the still-air assumption
    # is stated and propagated
    assert rep["flight_physics"]["lift"]["tested"] and not rep["flight_physics"]["lift"]["fitted"]
    assert rep["conditions"]["air_speed_uncertainty"] == 0.05
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

    rec = Records(os.environ["FITDRAG_RECORDS"]).get(number)
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
    assert f"  record           {shared} (--records)" in capsys.readouterr().out
    args = ["run", str(job), "--quiet", "--records", str(shared), "--replaces", first,
            "--reason", "customer's order number corrected"]  # fmt: skip
    assert main(args) == 0
    second = f"FD-{_year()}-000002"
    assert (f"certificate {second} issued, approved by B. Reviewer, replacing {first}"
            in capsys.readouterr().out)  # fmt: skip
    db = Records(shared)
    assert db.get(first).replaced_by == second
    assert db.get(second).reason == "customer's order number corrected"
    assert not (job.parent / "certificates" / "records.sqlite").exists()
    assert not Records(os.environ["FITDRAG_RECORDS"]).list()
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
    import fitdrag.fit.fitting as fitting

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


_SPEC = (
    "[specification]\n"
    "drag_coefficient = 0.47           # stated Cd\n"
    "tolerance = 0.03                  # +/- around the stated value (or give lower / upper)\n"
    'decision_rule = "guarded"         # "simple" or "guarded" (guard band = U)\n'
)


def test_decision_sets_the_exit_code(job, capsys):
    """closed-form/independent: the exit code of ``fitdrag run`` follows the certificate's
    decision under guarded acceptance (ILAC-G8:09/2019 with guard band w = U): 0 PASS,
    5 conditional pass (inside the limits, within U of one), 6 conditional fail (outside by
    less than U), 4 FAIL.  The limits are placed around the measured Cd and U of a first run
    (the same data give the same Cd and U), so each decision follows from the rule alone."""
    assert main(["run", str(job), "--quiet"]) == 0
    capsys.readouterr()
    outdir = job.parent / "certificates"
    rep = json.loads((outdir / f"FD-{_year()}-000001.json").read_text())
    cd, big_u = rep["result"]["drag_coefficient"], rep["result"]["expanded_uncertainty"]
    assert rep["conformity"]["decision"] == "pass"
    tol = 0.1  # the upper limit stays far away: only the lower limit matters
    cases = [
        (cd - big_u / 2 + tol, "conditional pass", 5),  # lower = Cd - U/2
        (cd + big_u / 2 + tol, "conditional fail", 6),  # lower = Cd + U/2
        (cd + 2 * big_u + tol, "fail", 4),  # lower = Cd + 2U
    ]
    for n, (stated, decision, code) in enumerate(cases, start=2):
        spec = (f"[specification]\ndrag_coefficient = {stated!r}\ntolerance = {tol!r}\n"
                'decision_rule = "guarded"\n')  # fmt: skip
        job.write_text(_job_text(**{_SPEC: spec}))
        assert main(["run", str(job), "--quiet"]) == code, decision
        number = f"FD-{_year()}-{n:06d}"
        assert f"decision: {decision.upper()}" in capsys.readouterr().out
        rep = json.loads((outdir / f"{number}.json").read_text())
        assert rep["conformity"]["decision"] == decision
        assert Records(os.environ["FITDRAG_RECORDS"]).get(number).decision == decision


def test_no_specification_exits_0(job, capsys):
    """regression: a job without [specification] issues a certificate without a decision and
    exits 0."""
    text = _job_text(**{_SPEC: ""})
    text = text.replace('reference = "customer specification (synthetic example)"\n', "", 1)
    job.write_text(text)
    assert main(["run", str(job), "--quiet"]) == 0
    assert "no [specification]: no conformity decision" in capsys.readouterr().out


def test_negative_monte_carlo_is_refused_before_any_work(job, capsys):
    """regression: --monte-carlo below 0 exits 2 with one line naming the option; nothing
    is written."""
    assert main(["run", str(job), "--quiet", "--monte-carlo", "-5"]) == 2
    err = capsys.readouterr().err
    assert err == "fitdrag run: error: --monte-carlo: must be >= 0 trials, got -5.\n"
    assert not (job.parent / "certificates").exists()


def test_new_job_command(tmp_path, capsys):
    """regression: new-job writes the template once; refuses to overwrite."""
    p = tmp_path / "j.toml"
    assert main(["new-job", str(p)]) == 0
    assert p.read_text() == TEMPLATE
    assert main(["new-job", str(p)]) == 2
    assert "already exists" in capsys.readouterr().err


def test_unedited_template_is_refused(tmp_path, capsys):
    """regression: the template as written (its invented laboratory, customer and specimen)
    is refused before any work, naming the values left; so is a draft of it."""
    _track_csv(tmp_path / "throw1.csv")
    p = tmp_path / "j.toml"
    assert main(["new-job", str(p)]) == 0
    capsys.readouterr()
    for extra in ([], ["--draft"]):
        assert main(["run", str(p), "--quiet", *extra]) == 2
        err = capsys.readouterr().err
        assert err.startswith(
            "fitdrag run: error: j.toml: still holds the template's invented value(s) "
            '[laboratory] name = "Example Flight Test Laboratory (synthetic)"; [laboratory] '
            'address = "1 Sample Road, Testville"; [test] customer = "Fictitious Sports Goods Ltd"'
        ), err
        assert '[specimen] id = "SYN-BALL-001"; replace them with your' in err
    assert not (tmp_path / "certificates").exists()
    for (sec, key), value in PLACEHOLDERS.items():
        assert f'{key} = "{value}"' in TEMPLATE, (sec, key)


# ---------------------------------------------------------------------------------------------
# footage throws
# ---------------------------------------------------------------------------------------------

CLIP_FPS = 200.0  # capture rate [frames/s]
CLIP_PX_PER_M = 200.0  # 5 mm per pixel in the plane of flight
CLIP_ORIGIN_PX = (40.0, 250.0)  # image point of world (0, 0)
CLIP_MARKER_Y = -0.15  # world y of the markers' lower-left corners [m]
CLIP_LAUNCH = (0.1, 0.3, 3.0, 2.5)  # x0, y0 [m], vx0, vy0 [m/s]


@pytest.fixture(scope="module")
def clip(tmp_path_factory):
    """80 frames (400x300 px) of the 40 mm, 2.7 g training ball (true Cd 0.47) flying
    along the independent DOP853 integration (tests/reference.py; ISA air), seen by a
    camera square to the plane of flight, with two ArUco markers of 0.2 m side; the
    container says 30 frames/s (a playback rate), the job says 200."""
    from scipy.integrate import solve_ivp

    from fitdrag.video.footage_files import write_video
    from fitdrag.video.synthetic import MarkerPlacement, render_flight

    sc = ref.Scenario(cd=TRUE_CD)
    sol = solve_ivp(
        lambda _t, s: ref.rhs(s, sc.body, ref.RHO, TRUE_CD), (0.0, 0.5), CLIP_LAUNCH,
        method="DOP853", rtol=1e-12, atol=1e-12, dense_output=True,
    )  # fmt: skip

    def world(t):
        s = sol.sol(np.asarray(t, dtype=float))
        return s[0], s[1]

    h = np.array([[CLIP_PX_PER_M, 0, CLIP_ORIGIN_PX[0]], [0, -CLIP_PX_PER_M, CLIP_ORIGIN_PX[1]],
                  [0, 0, 1.0]])  # fmt: skip
    markers = [MarkerPlacement(0, 0.0, CLIP_MARKER_Y, 0.2),
               MarkerPlacement(1, 1.4, CLIP_MARKER_Y, 0.2)]  # fmt: skip
    flight = render_flight(world, 80, CLIP_FPS, shape=(300, 400), radius_px=4.0, homography=h,
                           trajectory_in_world=True, markers=markers, seed=5)  # fmt: skip
    path = tmp_path_factory.mktemp("clip") / "clip.avi"
    return write_video(flight.frames, path, 30.0)


def _footage_job(folder, clip, **edits):
    """Copy the clip into ``folder`` and write a job whose one throw is that footage, with
    markers of 0.2 m side, in standard gravity, with no [camera] scale uncertainty."""
    import shutil

    shutil.copy(clip, folder / "clip.avi")
    base = {
        "fps = 400 ": f"fps = {CLIP_FPS:g} ",
        "latitude = 47.0 ": "gravity = 9.80665\ngravity_uncertainty = 0.00005\n# latitude = 47.0 ",
        "height = 400 ": "# height = 400 ",
        "scale_relative_uncertainty = 0.002 ": "# scale_relative_uncertainty = 0.002 ",
        'track = "throw1.csv"': 'footage = "clip.avi"\nmarkers = "200 mm"\n'
        "scale_uncertainty = 0.0005",
        # the clip's flight is simulated in still air; a quiet room's anemometer reading
        "air_speed_uncertainty = 0.05 ": "air_speed_uncertainty = 0.01 ",
    }
    base.update(edits)
    p = folder / "job.toml"
    p.write_text(_job_text(**base))
    return p


def test_footage_throw_end_to_end(clip, tmp_path, capsys):
    """closed-form/independent: a job whose throw is footage (markers) runs end to end; Cd of
    the independent DOP853 flight (true 0.47) is recovered within U; the footage's SHA-256
    (hashlib) is in the JSON, the record and the certificate; the length scale's relative
    uncertainty in the budget is the marker calibration's; the track equals the one
    `fitdrag track` writes with the same calibration."""
    from fitdrag.run.job_file import load_job
    from fitdrag.run.pipeline import read_throws
    from fitdrag.tracks.csv_file import read_track

    job = _footage_job(tmp_path, clip)
    assert main(["run", str(job), "--quiet"]) == 0
    number = f"FD-{_year()}-000001"
    assert f"certificate {number} issued" in capsys.readouterr().out
    outdir = tmp_path / "certificates"
    rep = json.loads((outdir / f"{number}.json").read_text())
    res = rep["result"]
    assert abs(res["drag_coefficient"] - TRUE_CD) < res["expanded_uncertainty"]
    assert abs(res["drag_coefficient"] / TRUE_CD - 1) < 0.01  # the issue's end-to-end target
    job_hash = hashlib.sha256(job.read_bytes()).hexdigest()
    clip_hash = hashlib.sha256((tmp_path / "clip.avi").read_bytes()).hexdigest()
    assert rep["inputs"]["sha256"] == {str(job.resolve()): job_hash,
                                       str((tmp_path / "clip.avi").resolve()): clip_hash}  # fmt: skip
    assert (
        Records(os.environ["FITDRAG_RECORDS"]).get(number).input_hashes == rep["inputs"]["sha256"]
    )
    (foot,) = rep["footage"]
    assert foot["sha256"] == clip_hash and foot["calibration_method"] == "markers"
    assert foot["marker_ids"] == "0 1" and foot["fps"] == CLIP_FPS
    u_cal = foot["scale_relative_uncertainty"]
    assert 0 < u_cal < 0.01
    assert rep["camera"]["scale_relative_uncertainty"] == u_cal
    assert rep["camera"]["scale_relative_uncertainty_source"] == "footage calibration"
    line = {ln["name"]: ln for ln in rep["uncertainty_budget"]["lines"]}["length_scale"]
    assert line["standard_uncertainty"] == pytest.approx(u_cal, rel=1e-12)
    flat = " ".join(
        " ".join(p.extract_text() for p in pypdf.PdfReader(str(outdir / f"{number}.pdf")).pages)
        .split()
    )  # fmt: skip
    assert clip_hash in flat and job_hash in flat

    csv = tmp_path / "clip_track.csv"
    assert main(["track", str(tmp_path / "clip.avi"), "--fps", "200", "--markers", "0.2",
                 "--scale-uncertainty", "0.0005", "-o", str(csv), "--no-progress"]) == 0  # fmt: skip
    by_cli = read_track(csv)
    (by_run,), _ = read_throws(load_job(job))
    np.testing.assert_array_equal(by_run.t, by_cli.t)
    np.testing.assert_array_equal(by_run.x, by_cli.x)
    np.testing.assert_array_equal(by_run.y, by_cli.y)
    assert by_run.meta["scale_relative_uncertainty"] == by_cli.meta["scale_relative_uncertainty"]


def test_footage_scale_uncertainty_stated_in_the_job_wins(clip, tmp_path):
    """regression: [camera] scale_relative_uncertainty, when stated, is used for footage
    throws instead of their calibration's value."""
    from fitdrag.run.job_file import load_job
    from fitdrag.run.pipeline import length_scale_uncertainty, read_throws

    job = load_job(_footage_job(
        tmp_path, clip,
        **{"scale_relative_uncertainty = 0.002 ": "scale_relative_uncertainty = 0.004 "},
    ))  # fmt: skip
    tracks, hashes = read_throws(job)
    assert str((tmp_path / "clip.avi").resolve()) in hashes
    u, source = length_scale_uncertainty(job, tracks)
    assert u == 0.004 and "stated in the job file" in source
    assert tracks[0].meta["scale_relative_uncertainty"] != 0.004


def test_footage_error_names_the_throw_and_writes_nothing(clip, tmp_path, capsys):
    """regression: markers of another dictionary are not found: exit 2, the message names
    the job file, the line, the throw and the job file's keys; nothing is written."""
    job = _footage_job(tmp_path, clip, **{'markers = "200 mm"': 'markers = "200 mm"\n'
                                          'marker_dictionary = "DICT_5X5_50"'})  # fmt: skip
    assert main(["run", str(job)]) == 2
    err = capsys.readouterr().err
    n = next(i for i, ln in enumerate(job.read_text().splitlines(), 1) if ln.startswith("footage"))
    assert (
        f"fitdrag run: error: job.toml, line {n}: [[throws]] #1 footage: markers: no "
        f"DICT_5X5_50 marker found in the image (400x300 px); check the dictionary "
        f"(marker_dictionary)" in err
    ), err
    assert "choose another with marker_frame)" in err
    assert sorted(x.name for x in tmp_path.iterdir()) == ["clip.avi", "job.toml"]


def _one_line(err: str) -> str:
    assert err.count("\n") == 1, err
    return err


def test_lab_database_numbers_across_folders_and_refuses_identical_reruns(tmp_path, capsys):
    """regression: two job folders issue into the one laboratory database (numbers 1 and 2,
    run says where); an unchanged job run again is refused naming the earlier certificate."""
    numbers = []
    for name in ("a", "b"):
        folder = tmp_path / name
        folder.mkdir()
        _track_csv(folder / "throw1.csv", seed=1 if name == "a" else 2)
        (folder / "job.toml").write_text(_job_text())
        assert main(["run", str(folder / "job.toml"), "--quiet"]) == 0
        out = capsys.readouterr().out
        lab = os.environ["FITDRAG_RECORDS"]
        assert f"  record           {lab} (laboratory database, from FITDRAG_RECORDS)" in out
        numbers.append(out.split("certificate ", 1)[1].split()[0])
    assert numbers == [f"FD-{_year()}-000001", f"FD-{_year()}-000002"]
    assert main(["run", str(tmp_path / "a" / "job.toml"), "--quiet"]) == 2
    err = _one_line(capsys.readouterr().err)
    assert err.startswith(
        f"fitdrag run: error: job.toml: the same job and input files (SHA-256) were certified "
        f"as {numbers[0]} on "
    )
    assert err.endswith(f"To correct that certificate, run with --replaces {numbers[0]} "
                        f'--reason "...".\n')  # fmt: skip
    assert len(Records(os.environ["FITDRAG_RECORDS"])) == 2
    assert Records(os.environ["FITDRAG_RECORDS"]).verify().ok


def test_replaces_without_reason_and_missing_approver_are_refused_first(job, capsys):
    """regression: --replaces without --reason, and a job without [test] approved_by (without
    --draft), exit 2 before any work."""
    assert main(["run", str(job), "--quiet", "--replaces", "FD-2026-000001"]) == 2
    assert capsys.readouterr().err == (
        'fitdrag run: error: --replaces FD-2026-000001: give the reason with --reason "..." '
        "(kept in the records with both certificates).\n"
    )
    job.write_text(_job_text(**{'approved_by = "B. Reviewer"': "# nobody"}))
    assert main(["run", str(job), "--quiet"]) == 2
    assert capsys.readouterr().err == (
        "fitdrag run: error: job.toml: [test] approved_by: missing; a certificate is released "
        "by a named person: name them in the job, or run with --draft and have the reviewer "
        "release the draft with 'fitdrag release DRAFT.json --approved-by NAME'.\n"
    )
    assert not (job.parent / "certificates").exists()


def test_draft_review_release(job, capsys):
    """regression: --draft writes PDF/PNG/JSON marked DRAFT on every page and no record;
    release re-checks the inputs, measures again, takes the number and records the reviewer;
    a draft whose input changed is not released."""
    job.write_text(_job_text(**{'approved_by = "B. Reviewer"': "# nobody"}))
    assert main(["run", str(job), "--quiet", "--draft"]) == 0
    out = capsys.readouterr().out
    outdir = job.parent / "certificates"
    (draft_json,) = outdir.glob("DRAFT-job-*.json")
    draft_pdf = draft_json.with_suffix(".pdf")
    assert f"  fitdrag release {draft_json} --approved-by NAME" in out
    pages = pypdf.PdfReader(str(draft_pdf)).pages
    assert all("DRAFT" in p.extract_text() for p in pages) and len(pages) >= 2
    assert draft_json.with_suffix(".png").exists()
    assert not Records(os.environ["FITDRAG_RECORDS"]).list()
    draft = json.loads(draft_json.read_text())
    assert draft["certificate"]["draft"] is True and draft["certificate"]["number"] == "DRAFT"

    assert main(["release", str(draft_json), "--approved-by", "C. Reviewer", "--quiet"]) == 0
    out = capsys.readouterr().out
    number = f"FD-{_year()}-000001"
    assert f"draft {draft_json.name} released" in out
    assert f"certificate {number} issued, approved by C. Reviewer" in out
    rec = Records(os.environ["FITDRAG_RECORDS"]).get(number)
    assert rec.approved_by == "C. Reviewer"
    assert rec.draft_sha256 == hashlib.sha256(draft_json.read_bytes()).hexdigest()
    final = json.loads((outdir / f"{number}.json").read_text())
    assert final["result"]["reported"] == draft["result"]["reported"]
    assert final["certificate"]["record_hash"] == rec.record_hash
    flat = " ".join(p.extract_text() for p in pypdf.PdfReader(str(outdir / f"{number}.pdf")).pages)
    assert "DRAFT" not in flat and "Approved by: C. Reviewer" in flat
    assert rec.record_hash in " ".join(flat.split())

    # the same draft again: an identical re-run of a certified job is refused
    assert main(["release", str(draft_json), "--approved-by", "C. Reviewer", "--quiet"]) == 2
    assert f"were certified as {number}" in capsys.readouterr().err
    # a track edited after the draft: refused, naming the file
    track = job.parent / "throw1.csv"
    track.write_text(track.read_text() + "\n")
    assert main(["release", str(draft_json), "--approved-by", "C. Reviewer", "--quiet"]) == 2
    err = _one_line(capsys.readouterr().err)
    assert (
        f"fitdrag release: error: {draft_json}: input {track.resolve()} changed since the draft"
        in err
    )
    assert "the draft is not released: make a new draft and review it." in err
    # not a draft
    assert main(["release", str(outdir / f"{number}.json"), "--approved-by", "X"]) == 2
    assert "not a draft written by 'fitdrag run JOB --draft'" in capsys.readouterr().err


def test_track_header_conflicts_are_refused_and_its_footage_hashed(job, capsys):
    """regression: a track whose header states another frame rate than [camera] fps is refused
    naming both; with the header's rate, the footage the header names is among the input
    hashes (hashlib's SHA-256)."""
    track = job.parent / "throw1.csv"
    body = track.read_text()
    track.write_text("# fps: 500.0\n# footage: clip.avi\n" + body)
    (job.parent / "clip.avi").write_bytes(b"synthetic footage bytes")
    assert main(["run", str(job), "--quiet"]) == 2
    line = next(n for n, ln in enumerate(_job_text().splitlines(), start=1)
                if ln.startswith('track = "throw1.csv"'))  # fmt: skip
    assert capsys.readouterr().err == (
        f"fitdrag run: error: job.toml, line {line}: [[throws]] #1 track: throw1.csv's "
        "header says fps: 500.0 (the frame rate of the footage it was tracked from), but "
        "[camera] fps is 400 Hz (standard uncertainty 0.05 Hz); they must agree: correct "
        "[camera] fps, or use the track file of this footage.\n"
    )
    assert not (job.parent / "certificates").exists()
    track.write_text("# fps: 400.0\n# footage: clip.avi\n" + body)
    assert main(["run", str(job), "--quiet"]) == 0
    rep = json.loads(next((job.parent / "certificates").glob("FD-*.json")).read_text())
    clip_hash = hashlib.sha256(b"synthetic footage bytes").hexdigest()
    assert rep["inputs"]["sha256"][str((job.parent / "clip.avi").resolve())] == clip_hash


def test_text_the_certificate_font_cannot_draw_is_refused(job, capsys):
    """regression: a customer in CJK characters is refused before any work, naming the key,
    the characters and the font (the certificate would show empty boxes)."""
    job.write_text(_job_text(**{'customer = "Fictitious Sports Goods Ltd (edited)"':
                                'customer = "株式会社 Sports"'}))  # fmt: skip
    assert main(["run", str(job), "--quiet"]) == 2
    assert capsys.readouterr().err == (
        "fitdrag run: error: job.toml: [test] customer: the certificate's font DejaVu Sans "
        "cannot draw '株' (U+682A CJK UNIFIED IDEOGRAPH-682A), '式' (U+5F0F CJK UNIFIED "
        "IDEOGRAPH-5F0F), '会' (U+4F1A CJK UNIFIED IDEOGRAPH-4F1A), '社' (U+793E CJK UNIFIED "
        "IDEOGRAPH-793E); the certificate would show empty boxes instead: write the text in "
        "characters it can draw (e.g. a Latin transliteration).\n"
    )
    assert not (job.parent / "certificates").exists()


def test_leftovers_of_a_killed_run_are_removed_by_the_next(job, capsys):
    """regression: the temporary files a run killed mid-way left (a complete-looking page-1
    PNG among them) are removed by the next run in that folder; the folder then holds only
    finished certificates."""
    import subprocess
    import sys

    outdir = job.parent / "certificates"
    outdir.mkdir()
    code = ("import os, sys; from pathlib import Path; from fitdrag._files import temporary_path;"
            "d = Path(sys.argv[1]); [temporary_path(d / f'FD-2026-000009.{e}').write_bytes(b'x')"
            " for e in ('pdf', 'png', 'json')]; os.kill(os.getpid(), 9)")  # fmt: skip
    proc = subprocess.run([sys.executable, "-c", code, str(outdir)], check=False)
    assert proc.returncode == -9
    assert len(list(outdir.glob(".FD-2026-000009.*.tmp"))) == 3
    assert main(["run", str(job), "--quiet"]) == 0
    assert sorted(p.suffix for p in outdir.iterdir()) == [".json", ".pdf", ".png"]


def test_run_warns_when_the_check_standard_is_out_of_control(job, tmp_path, capsys):
    """regression: a job naming its check standard ([test] check_standard) warns on standard
    error when the standard's latest result on record lies beyond 3 sigma of the limits set
    by its first 10 results; the certificate is issued as usual."""
    from datetime import UTC, timedelta

    db_path = tmp_path / "records.sqlite"
    db = Records(db_path)
    start = datetime(2026, 6, 1, tzinfo=UTC)
    vals = [0.4712, 0.4695, 0.4701, 0.4688, 0.4720, 0.4703, 0.4690, 0.4709, 0.4698, 0.4705,
            0.4800]  # fmt: skip
    for i, v in enumerate(vals):
        db.issue(result={}, input_hashes={}, issued_at=start + timedelta(days=i), prefix="REF",
                 summary={"specimen_id": "REF-40-A", "drag_coefficient": v})  # fmt: skip
    text = job.read_text().replace("[test]\n", '[test]\ncheck_standard = "REF-40-A"\n', 1)
    job.write_text(text)
    assert main(["run", str(job), "--quiet", "--records", str(db_path)]) == 0
    err = capsys.readouterr().err
    assert (
        "fitdrag run: WARNING: check standard 'REF-40-A' is out of control at its latest "
        "result REF-2026-000011 (Cd = 0.48; test 1: beyond 3 sigma"
    ) in err
