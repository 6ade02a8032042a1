"""Tests of fitdrag.run.lot_file: a lot file becomes one checked job per specimen; every bad
entry is an error naming the file, the line, the specimen and the key."""

from __future__ import annotations

import re

import pytest

from fitdrag.run.lot_file import load_lot
from fitdrag.run.lot_scene import LotScene, write_lot


@pytest.fixture(scope="module")
def lot_dir(tmp_path_factory):
    d = tmp_path_factory.mktemp("lotfile")
    write_lot(d, LotScene(specimens=3, throws=2, frames=60))
    return d


def _write(lot_dir, text):
    p = lot_dir / "bad.toml"
    p.write_text(text, encoding="utf-8")
    return p


def _text(lot_dir):
    return (lot_dir / "training_ball_lot.toml").read_text(encoding="utf-8")


def test_each_specimen_gets_the_base_job_with_its_own_keys(lot_dir):
    """regression: the specimens' jobs carry the base job's air, camera and specification,
    their own id, mass and diameter, and their throws resolved against the lot file's
    folder."""
    lot = load_lot(lot_dir / "training_ball_lot.toml")
    assert [s.id for s in lot.specimens] == ["TB-01", "TB-02", "TB-03"]
    job = lot.specimens[1].job
    assert job.specimen.id == "TB-02"
    assert job.specimen.mass.value == 0.0027 and job.specimen.diameter.value == 0.040
    assert job.air.temperature.value == 21.0 and job.camera.fps.value == 500.0
    assert lot.specification.lower == 0.42 and lot.decision_rule == "guarded"
    assert [th.path for th in job.throws] == [
        lot_dir / "training_ball_lot_tb02_throw1.csv",
        lot_dir / "training_ball_lot_tb02_throw2.csv",
    ]
    assert job.specimen.description.startswith("Training ball, 40 mm")
    assert (lot.coverage, lot.confidence, lot.spread_method) == (0.95, 0.95, "paule-mandel")


def test_override_applies_to_one_specimen(lot_dir):
    """regression: an [air] key given in a specimen's table replaces the base job's for that
    specimen only."""
    text = _text(lot_dir).replace('id = "TB-02"', 'id = "TB-02"\nair = { temperature = 23.5 }')
    lot = load_lot(_write(lot_dir, text))
    assert lot.specimens[1].job.air.temperature.value == 23.5
    assert lot.specimens[0].job.air.temperature.value == 21.0
    assert lot.specimens[1].job.air.pressure.value == 100800.0


def _line(text, needle):
    return next(i for i, ln in enumerate(text.splitlines(), 1) if needle in ln)


@pytest.mark.parametrize(
    "edit,message",
    [
        (lambda t: t.replace('id = "TB-02"', 'id = "TB-02"\ncolour = "red"'),
         "bad.toml, line {colour}: [[specimens]] #2 (id 'TB-02') colour: unknown key; valid "
         "keys are id, large_uncertainty_confirmed, description, mass, mass_uncertainty, "
         "diameter, diameter_uncertainty, area, area_uncertainty, volume, volume_uncertainty, length, added_mass_coefficient, "
         "added_mass_coefficient_uncertainty, throws and the tables air, site, camera, fit."),
        (lambda t: t.replace('id = "TB-03"', 'id = "TB-02"'),
         "bad.toml, line {TB-02#2}: [[specimens]] #3 (id 'TB-02') id: already used by "
         "[[specimens]] #2; give every specimen its own id."),
        (lambda t: t.replace('id = "TB-02"', 'id = "TB-02"\nair = { temperature = 95 }'),
         "bad.toml, line {air}: [[specimens]] #2 (id 'TB-02') air.temperature: 95 °C is outside "
         "the plausible range (>= -40 °C and <= 60 °C); give the air temperature in °C (e.g. "
         '21.0) or "294.2 K".'),
        (lambda t: t.replace("mass = 0.0027\nmass_uncertainty = 5e-06\ndiameter = 0.04\n"
                             "diameter_uncertainty = 2e-05\nthrows = [\"training_ball_lot_tb03",
                             "mass = -1\nmass_uncertainty = 5e-06\ndiameter = 0.04\n"
                             "diameter_uncertainty = 2e-05\nthrows = [\"training_ball_lot_tb03"),
         "bad.toml, line {mass = -1}: [[specimens]] #3 (id 'TB-03') mass: -1 kg is outside the "
         "plausible range (> 0 kg and <= 100 kg); give the specimen mass in kg (e.g. 0.0027) "
         'or "2.7 g".'),
        (lambda t: t.replace('job = "training_ball_lot_base.toml"', 'job = "nope.toml"'),
         "bad.toml, line {job =}: [lot] job: no such file '{dir}/nope.toml'; paths are "
         "relative to the lot file's folder '{dir}'."),
        (lambda t: t.replace("spread_method = \"paule-mandel\"", "spread_method = \"median\""),
         "bad.toml, line {spread_method}: [lot] spread_method: unknown value 'median'; use one "
         "of 'paule-mandel', 'dersimonian-laird'."),
        (lambda t: t.replace("coverage = 0.95", "coverage = 95"),
         "bad.toml, line {coverage}: [lot] coverage: expected a fraction between 0 and 1, got "
         "95; e.g. coverage = 0.95."),
    ],
)  # fmt: skip
def test_bad_entries_name_the_specimen(lot_dir, edit, message):
    """regression: the exact message for each bad entry."""
    text = edit(_text(lot_dir))
    p = _write(lot_dir, text)

    def fill(m):
        key = m.group(1)
        if key == "dir":
            return str(lot_dir.resolve())
        if key == "TB-02#2":
            return str([i for i, ln in enumerate(text.splitlines(), 1)
                        if ln == 'id = "TB-02"'][1])  # fmt: skip
        return str(_line(text, key))

    expected = re.sub(r"\{([^}]+)\}", fill, message)
    with pytest.raises(ValueError) as e:
        load_lot(p)
    assert str(e.value) == expected


def test_missing_throws_and_missing_throw_file(lot_dir):
    """regression: a specimen without throws, and a throw file that does not exist."""
    text = re.sub(r'(id = "TB-03"[\s\S]*?)throws = \[.*\]', r"\1", _text(lot_dir))
    with pytest.raises(ValueError) as e:
        load_lot(_write(lot_dir, text))
    n = _line(text, 'id = "TB-03"') - 1
    assert str(e.value) == (
        f"bad.toml, line {n}: [[specimens]] #3 (id 'TB-03') throws: missing or empty; give a "
        f'list of track or footage files, e.g. throws = ["TB-03_throw1.csv", '
        f'"TB-03_throw2.csv"].'
    )
    text = _text(lot_dir).replace("training_ball_lot_tb01_throw2.csv", "nothere.csv")
    with pytest.raises(FileNotFoundError) as e:
        load_lot(_write(lot_dir, text))
    assert str(e.value) == (
        f"bad.toml, line {_line(text, 'nothere.csv')}: [[specimens]] #1 (id 'TB-01') throws #2 "
        f"track: no such file '{lot_dir.resolve()}/nothere.csv'; paths are relative to the lot "
        f"file's folder '{lot_dir.resolve()}'."
    )


def test_one_specimen_is_not_a_lot(lot_dir):
    """regression: a lot needs two specimens for its spread."""
    text = _text(lot_dir)
    text = text[: text.index("[[specimens]]", text.index('id = "TB-01"'))]
    with pytest.raises(ValueError) as e:
        load_lot(_write(lot_dir, text))
    assert str(e.value) == (
        "bad.toml: a lot needs at least 2 specimens for its statistics, got 1; add "
        "[[specimens]] tables."
    )
