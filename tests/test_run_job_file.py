"""Tests of fitdrag.run.job_file (with fitdrag.run.job_keys): parsing, units, validation
messages with line numbers."""

from __future__ import annotations

import pytest

from fitdrag.run.job_file import load_job
from fitdrag.run.job_template import TEMPLATE


def _line(text: str, start: str) -> int:
    """1-based number of the first line of ``text`` starting with ``start``."""
    for n, ln in enumerate(text.splitlines(), start=1):
        if ln.startswith(start):
            return n
    raise AssertionError(f"no line starts with {start!r}")


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


def test_units_in_strings_are_converted(job_dir):
    """closed-form/independent: unit strings are converted with pint to SI
    (1 g = 1e-3 kg; 1 hPa = 100 Pa; T[°C] = T[K] − 273.15; 1 % = 0.01)."""
    text = _edit("mass = 0.0027 ", 'mass = "2.7 g" ')
    text = _edit("pressure = 100800 ", 'pressure = "1008 hPa" ', text)
    text = _edit("temperature = 21.0 ", 'temperature = "294.15 K" ', text)
    text = _edit("temperature_uncertainty = 0.3 ", 'temperature_uncertainty = "0.3 degC" ', text)
    text = _edit("diameter = 0.040 ", 'diameter = "40 mm" ', text)
    text = _edit("scale_relative_uncertainty = 0.002", 'scale_relative_uncertainty = "0.2 %"', text)
    job = load_job(_write(job_dir, text))
    assert job.specimen.mass.value == pytest.approx(0.0027, rel=1e-12)
    assert job.air.pressure.value == pytest.approx(100800.0, rel=1e-12)
    assert job.air.temperature.value == pytest.approx(21.0, abs=1e-9)
    assert job.air.temperature.uncertainty == pytest.approx(0.3)
    assert job.specimen.diameter.value == pytest.approx(0.040)
    assert job.camera.scale_relative_uncertainty == pytest.approx(0.002)
    # the units as written, for the certificate to show them so
    assert dict(job.specimen.shown_units) == {"mass": "g", "diameter": "mm"}
    assert dict(job.air.shown_units) == {"pressure": "hPa"}


@pytest.mark.parametrize(
    "old, new, start, message",
    [
        (
            "mass = 0.0027 ",
            'colour = "red"\nmass = 0.0027 ',
            "colour",
            r"\[specimen\] colour: unknown key; valid keys in \[specimen\] are added_mass_coeff",
        ),
        (
            "mass_uncertainty = 0.00001 ",
            "mass_uncertainty = -0.00001 ",
            "mass_uncertainty",
            r"\[specimen\] mass_uncertainty: a standard uncertainty must be >= 0, got -1e-05",
        ),
        (
            "mass = 0.0027 ",
            'mass = "2.7 m" ',
            "mass =",
            r"\[specimen\] mass: unit 'm' is not a unit of mass in '2.7 m'; give a number in kg",
        ),
        (
            "pressure = 100800 ",
            "pressure = 1013 ",
            "pressure =",
            r"\[air\] pressure: 1013 Pa is outside the plausible range \(> 30000 Pa and <= "
            r"120000 Pa\); give the absolute pressure in Pa",
        ),
        (
            "temperature = 21.0 ",
            "temperature = 294.15 ",
            "temperature =",
            r"\[air\] temperature: 294.15 °C is outside the plausible range",
        ),
        (
            "robust = true ",
            'robust = "yes" ',
            "robust",
            r"\[fit\] robust: expected true or false, got 'yes'",
        ),
        (
            'decision_rule = "guarded" ',
            'decision_rule = "strict" ',
            "decision_rule",
            r"\[specification\] decision_rule: unknown value 'strict'; use one of 'simple', "
            r"'guarded'",
        ),
        (
            'model = "constant" ',
            'model = "magic" ',
            "model",
            r"\[fit\] model: unknown drag model 'magic'; use one of",
        ),
        (
            "fps = 500 ",
            'fps = "500 m" ',
            "fps",
            r"\[camera\] fps: unit 'm' is not a unit of frequency",
        ),
        (
            'number_prefix = "FD"',
            'number_prefix = "fd-1"',
            "number_prefix",
            r"\[output\] number_prefix: number_prefix: 'fd-1' must be 1 to 8 capital letters",
        ),
        (
            "tolerance = 0.03 ",
            "tolerance = 0.03\nlower = 0.4 ",
            "tolerance",
            r"\[specification\] tolerance: give either tolerance",
        ),
        (
            "diameter_uncertainty = 0.00005 ",
            "diameter_uncertainty = 0.00005\narea = 0.001 ",
            "diameter =",
            r"\[specimen\] diameter: give either diameter \(a sphere\) or area",
        ),
    ],
)
def test_errors_name_the_key_and_line(job_dir, old, new, start, message):
    """regression: every error names the file, the line, the section and key, and a fix."""
    text = _edit(old, new)
    path = _write(job_dir, text)
    n = _line(text, start)
    with pytest.raises(ValueError, match=rf"^job\.toml, line {n}: {message}"):
        load_job(path)


def test_missing_mass_names_section_line(job_dir):
    """regression: a missing required key points at its section's header line."""
    text = _edit("mass = 0.0027                     # kg\n", "")
    path = _write(job_dir, text)
    n = _line(text, "[specimen]")
    with pytest.raises(
        ValueError,
        match=rf"^job\.toml, line {n}: \[specimen\] mass: missing; give the specimen mass in kg",
    ):
        load_job(path)
    text = _edit("mass_uncertainty = 0.00001        # kg\n", "")
    with pytest.raises(ValueError, match=r"\[specimen\] mass_uncertainty: missing; give the "
                       r"standard uncertainty of the mass in kg \(write 0"):  # fmt: skip
        load_job(_write(job_dir, text))


def test_missing_track_file(job_dir):
    """regression: a missing track file is a FileNotFoundError naming the line and folder."""
    text = _edit('track = "throw1.csv"', 'track = "nothere.csv"')
    path = _write(job_dir, text)
    n = _line(text, 'track = "nothere.csv"')
    with pytest.raises(
        FileNotFoundError,
        match=rf"^job\.toml, line {n}: \[\[throws\]\] #1 track: no such file '.*nothere\.csv'; "
        r"paths are relative to the job file's folder",
    ):
        load_job(path)
    assert load_job(path, check_files=False).throws[0].path.name == "nothere.csv"


def test_structure_errors(job_dir):
    """regression: unknown section, missing section, TOML syntax error, second throw's key."""
    text = TEMPLATE + "\n[extras]\nfoo = 1\n"
    with pytest.raises(ValueError, match=rf"^job\.toml, line {_line(text, '[extras]')}: "
                       r"\[extras\]: unknown section; valid sections are \[laboratory\]"):  # fmt: skip
        load_job(_write(job_dir, text))
    text = _edit("[camera]\n", "[kamera]\n")
    with pytest.raises(ValueError, match=r"\[kamera\]: unknown section"):
        load_job(_write(job_dir, text))
    text = TEMPLATE.replace("[laboratory]\n", "[lab_info]\n")
    with pytest.raises(ValueError, match=r"\[lab_info\]: unknown section"):
        load_job(_write(job_dir, text))
    text = _edit("mass = 0.0027 ", "mass = = 0.0027 ")
    with pytest.raises(ValueError, match=r"^job\.toml: not valid TOML: .*line \d+"):
        load_job(_write(job_dir, text))
    text = TEMPLATE + '\n[[throws]]\ntrack = "throw1.csv"\nyy_down = true\n'
    with pytest.raises(ValueError, match=rf"line {_line(text, 'yy_down')}: \[\[throws\]\] #2 "
                       r"yy_down: unknown key"):  # fmt: skip
        load_job(_write(job_dir, text))
    with pytest.raises(FileNotFoundError, match=r"no such job file; create one with"):
        load_job(job_dir / "none.toml")


# ---------------------------------------------------------------------------------------------
# footage throws
# ---------------------------------------------------------------------------------------------

_CAMERA_U = (
    "scale_relative_uncertainty = 0.002   # -, relative standard uncertainty of the track's\n"
)


@pytest.fixture
def footage_dir(job_dir):
    for name in ("clip.avi", "wall.csv", "lens.json"):
        (job_dir / name).write_text("placeholder: the job file checks only that it exists\n")
    return job_dir


def _footage_job(lines: str, text: str = TEMPLATE) -> str:
    """The template with its throw replaced by a footage throw with ``lines``."""
    return _edit('track = "throw1.csv"', 'footage = "clip.avi"\n' + lines, text)


def test_footage_throw_keys_parse(footage_dir):
    """closed-form/independent: a footage throw's calibration keys arrive as
    track_footage's keyword arguments, in SI (50 mm = 0.05 m; 0.1 % = 0.001; pint), with
    paths relative to the job file; without a track CSV [camera] scale_relative_uncertainty
    may be left out (the calibration brings its own)."""
    text = _footage_job(
        'markers = "50 mm"\nmarker_dictionary = "4x4_50"\nmarker_layout = "wall.csv"\n'
        'marker_frame = 3\nscale_uncertainty = "0.1 %"\nstart = 2\n'
        'stop = 60\nlabel = "throw A"\n'
        '\n[[throws]]\nfootage = "clip.avi"\nscale = 0.00125\norigin = "12,790"\n'
        'rotation = "0.5 deg"\nscale_uncertainty = 0.002\n'
        '\n[[throws]]\nfootage = "clip.avi"\nreference = [1, 2, 3, 4, 0.5]\n'
        "scale_uncertainty = 0\n"
        '\n[[throws]]\nfootage = "clip.avi"\nreference = "102.5,640,1180,655.5,1.000"\n'
        "origin = [0, 10]\nscale_uncertainty = 0.001\n",
        _edit(_CAMERA_U, ""),
    )
    job = load_job(_write(footage_dir, text))
    a, b, c, d = job.throws
    assert [t.kind for t in job.throws] == ["footage"] * 4
    assert a.path == (footage_dir / "clip.avi").resolve() and a.label == "throw A"
    assert a.line == _line(text, 'footage = "clip.avi"')
    assert a.options == {
        "markers": pytest.approx(0.05, rel=1e-12),
        "marker_dictionary": "DICT_4X4_50",
        "marker_layout": (footage_dir / "wall.csv").resolve(),
        "marker_frame": 3,
        "scale_uncertainty": pytest.approx(0.001, rel=1e-12),
        "start": 2,
        "stop": 60,
    }
    assert b.options == {"scale": 0.00125, "origin": (12.0, 790.0),
                         "rotation": pytest.approx(0.5), "scale_uncertainty": 0.002}  # fmt: skip
    assert c.options == {"reference": (1.0, 2.0, 3.0, 4.0, 0.5), "scale_uncertainty": 0.0}
    assert d.options == {"reference": (102.5, 640.0, 1180.0, 655.5, 1.0),
                         "origin": (0.0, 10.0), "scale_uncertainty": 0.001}  # fmt: skip
    assert job.camera.scale_relative_uncertainty is None
    # the track_footage signature takes every option a footage throw may carry
    import inspect

    from fitdrag.run.job_keys import FOOTAGE_OPTIONS
    from fitdrag.video.tracking import track_footage

    params = inspect.signature(track_footage).parameters
    assert set(FOOTAGE_OPTIONS) <= set(params)


@pytest.mark.parametrize(
    "lines, start, message",
    [
        (
            "start = 2\n",
            'footage = "clip.avi"',
            r"\[\[throws\]\] #1 footage: no calibration; give exactly one of scale = M_PER_PX "
            r'\(with origin = "X,Y" in px\), reference = "X1,Y1,X2,Y2,METRES" or markers = '
            r"SIDE_M \(the ArUco markers' side in m\)\.",
        ),
        (
            "scale = 0.001\nmarkers = 0.05\n",
            "markers",
            r"\[\[throws\]\] #1 markers: scale is given too; give exactly one of scale, "
            r"reference or markers\.",
        ),
        (
            'markers = 0.05\norigin = "1,2"\n',
            "origin",
            r"\[\[throws\]\] #1 origin: applies to scale and reference only; with markers the "
            r"markers set the origin",
        ),
        (
            "scale = 0.001\nmarker_frame = 4\n",
            "marker_frame",
            r"\[\[throws\]\] #1 marker_frame: applies to markers only; remove it or calibrate "
            r"with markers = SIDE_M\.",
        ),
        (
            "markers = 0.05\ncolour = 1\n",
            "colour",
            r"\[\[throws\]\] #1 colour: unknown key; valid keys in \[\[throws\]\] #1 are comment, "
            r"delimiter, footage, frame_col, label, lens, marker_dictionary",
        ),
        (
            "markers = 0.05\nfps = 1000\n",
            "fps = 1000",
            r"\[\[throws\]\] #1 fps: unknown key; every throw's frame rate is \[camera\] fps",
        ),
        (
            "markers = 0.05\ny_down = true\n",
            "y_down",
            r"\[\[throws\]\] #1 y_down: is a track CSV option; footage throws do not take it\.",
        ),
        (
            'markers = "50 kg"\n',
            "markers",
            r"\[\[throws\]\] #1 markers: unit 'kg' is not a unit of length in '50 kg'",
        ),
        (
            'reference = "1,2,3,0.5"\n',
            "reference",
            r"\[\[throws\]\] #1 reference: expected X1,Y1,X2,Y2,METRES \(two image points in "
            r"px, y down, and their distance apart in m\), got '1,2,3,0.5'",
        ),
        (
            'markers = 0.05\nmarker_dictionary = "DICT_9X9_1"\n',
            "marker_dictionary",
            r"\[\[throws\]\] #1 marker_dictionary: unknown ArUco dictionary 'DICT_9X9_1'; use "
            r"one of .*DICT_4X4_50",
        ),
        (
            "markers = 0.05\nstart = 50\nstop = 50\n",
            "stop",
            r"\[\[throws\]\] #1 stop: 50 is not after start 50; stop is the first frame not "
            r"read",
        ),
        (
            "scale = 0.001\nscale_uncertainty = 0.9\n",
            "scale_uncertainty",
            r"\[\[throws\]\] #1 scale_uncertainty: 0.9 is implausibly large \(limit 0.5\)",
        ),
    ],
)
def test_footage_throw_errors_name_the_key_and_line(footage_dir, lines, start, message):
    """regression: a footage throw without a calibration, with two, with options of another
    calibration or of track CSVs, or with an unknown or bad key fails naming the line."""
    text = _footage_job(lines)
    n = _line(text, start)
    with pytest.raises(ValueError, match=rf"^job\.toml, line {n}: {message}"):
        load_job(_write(footage_dir, text))


def test_footage_files_and_track_throw_options(footage_dir):
    """regression: a footage throw's missing lens or layout file is a FileNotFoundError
    naming its line; a footage option on a track CSV throw is refused; track throws still
    need [camera] scale_relative_uncertainty."""
    text = _footage_job('markers = 0.05\nmarker_layout = "wall.csv"\nlens = "nolens.json"\n')
    with pytest.raises(FileNotFoundError, match=rf"^job\.toml, line {_line(text, 'lens')}: "
                       r"\[\[throws\]\] #1 lens: no such file '.*nolens\.json'; paths are "
                       r"relative to the job file's folder"):  # fmt: skip
        load_job(_write(footage_dir, text))
    assert load_job(_write(footage_dir, text), check_files=False).throws[0].kind == "footage"
    text = _edit('track = "throw1.csv"', 'track = "throw1.csv"\nmarkers = 0.05')
    with pytest.raises(ValueError, match=rf"^job\.toml, line {_line(text, 'markers')}: "
                       r"\[\[throws\]\] #1 markers: is a footage option; track CSV throws do "
                       r"not take it"):  # fmt: skip
        load_job(_write(footage_dir, text))
    text = _edit(_CAMERA_U, "", TEMPLATE + '\n[[throws]]\nfootage = "clip.avi"\nscale = 1e-3\n')
    with pytest.raises(ValueError, match=r"\[camera\] scale_relative_uncertainty: missing"):
        load_job(_write(footage_dir, text))


def test_track_csv_needs_the_camera_distance_and_out_of_plane_uncertainty(job_dir):
    """regression: a track CSV throw without [camera] distance or out_of_plane_uncertainty
    is refused, saying why (perspective bias of a flight out of the image plane) and what to
    add; given, they are parsed in SI (pint: 300 cm = 3 m) into the job and the budget gets
    camera_distance and one out-of-plane angle per track throw; footage throws need neither."""
    text = _edit("distance = 3.0 ", "# distance = 3.0 ")
    text = _edit("distance_uncertainty = 0.05 ", "# distance_uncertainty = 0.05 ", text)
    with pytest.raises(ValueError) as err:
        load_job(_write(job_dir, text))
    assert str(err.value) == (
        f"job.toml, line {_line(text, '[camera]')}: [camera] distance: missing; a track file "
        "is a planar measurement, and a flight out of the image plane biases Cd through "
        "perspective (about -30 % at 1° for a light ball 3 m from the camera) without the fit "
        "noticing; give the camera's distance to the flight plane with its standard "
        "uncertainty (distance = 3.0, distance_uncertainty = 0.05, in m) and the standard "
        "uncertainty of the flight's angle to the image plane (out_of_plane_uncertainty = "
        "0.5, in degrees); the uncertainty budget then carries both."
    )
    text = _edit("out_of_plane_uncertainty = 0.5 ", "# out_of_plane_uncertainty = 0.5 ")
    with pytest.raises(ValueError, match=r"\[camera\] out_of_plane_uncertainty: missing; a "
                       r"track file is a planar measurement"):  # fmt: skip
        load_job(_write(job_dir, text))
    text = _edit("distance_uncertainty = 0.05 ", "# distance_uncertainty = 0.05 ")
    with pytest.raises(ValueError, match=rf"line {_line(text, '[camera]')}: \[camera\] "
                       r"distance_uncertainty: missing; give the standard uncertainty of "
                       r"distance in m"):  # fmt: skip
        load_job(_write(job_dir, text))
    text = _edit("distance = 3.0 ", 'distance = "300 cm" ')
    text = _edit("out_of_plane_uncertainty = 0.5 ", 'out_of_plane_uncertainty = "0.25 deg" ',
                 text)  # fmt: skip
    text += '\n[[throws]]\ntrack = "throw1.csv"\n'
    job = load_job(_write(job_dir, text))
    assert job.camera.distance.value == pytest.approx(3.0)
    # the bare 0.05 beside "300 cm" is in cm (the unit of its value): 0.0005 m
    assert job.camera.distance.uncertainty == pytest.approx(0.0005, rel=1e-12)
    assert job.camera.out_of_plane_uncertainty == pytest.approx(0.25)
    q = {x.name: x for x in job.input_quantities()}
    assert q["camera_distance"].standard_uncertainty == pytest.approx(0.0005, rel=1e-12)
    assert [q[f"out_of_plane_angle_{k}"].standard_uncertainty for k in (1, 2)] == [
        pytest.approx(0.25), pytest.approx(0.25)]  # fmt: skip
    assert q["out_of_plane_angle_1"].value == 0.0 and "out_of_plane_angle" not in q
    text = _edit("distance = 3.0 ", "distance = -3.0 ")
    with pytest.raises(ValueError, match=rf"line {_line(text, 'distance = ')}: \[camera\] "
                       r"distance: -3 m is outside the plausible range"):  # fmt: skip
        load_job(_write(job_dir, text))


def _views_job(views: str, camera: str = "") -> str:
    """The template with its track throw replaced by a throw seen by cameras (``views``)."""
    text = _edit('track = "throw1.csv"', 'label = "throw A"\n' + views)
    return _edit("[camera]\n", "[camera]\n" + camera, text) if camera else text


_VIEW = (
    '[[throws.views]]\nfootage = "clip.avi"\nlens = "lens.json"\nmarkers = "50 mm"\n'
    'marker_layout = "wall.csv"\nscale_uncertainty = 0.001\n'
)


def test_views_throw_parses_each_camera(footage_dir):
    """closed-form/independent: a [[throws]] with two [[throws.views]] becomes one throw of
    kind "views" with a ViewSource per camera, in SI (pint: 1.2 ms = 1.2e-3 s, 50 mm =
    0.05 m); the first view's offset is 0 by definition, a second view without time_offset
    is estimated (None), one with it carries its uncertainty; a footage throw with a lens,
    markers and layout is its own single view with [camera] readout_time."""
    text = _views_job(
        _VIEW
        + 'readout_time = "1.2 ms"\nreadout_time_uncertainty = "0.05 ms"\n'
        + _VIEW
        + 'label = "side"\ntime_offset = "0.4 ms"\ntime_offset_uncertainty = "0.01 ms"\n'
        + "\n[[throws]]\n"
        + _VIEW
        + _VIEW,
        camera='readout_time = "2 ms"\nreadout_time_uncertainty = "0.1 ms"\n',
    )
    job = load_job(_write(footage_dir, text))
    a, b = job.throws
    assert a.kind == b.kind == "views" and job.measured_in_3d
    assert a.label == "throw A" and len(a.views) == 2 and len(b.views) == 2
    v1, v2 = a.views
    assert v1.footage == (footage_dir / "clip.avi").resolve()
    assert v1.markers == pytest.approx(0.05) and v1.lens.name == "lens.json"
    assert v1.readout_time.value == pytest.approx(1.2e-3)
    assert v1.readout_time.uncertainty == pytest.approx(5e-5)
    assert v1.time_offset is None and v2.label == "side"
    assert v2.readout_time is None  # the pipeline falls back to [camera]
    assert v2.time_offset.value == pytest.approx(4e-4)
    assert v2.time_offset.uncertainty == pytest.approx(1e-5)
    assert job.camera.readout_time.value == pytest.approx(2e-3)
    assert v1.tracking_options == {"markers": pytest.approx(0.05), "lens": v1.lens,
                                   "marker_layout": v1.marker_layout,
                                   "scale_uncertainty": 0.001}  # fmt: skip
    single = _footage_job('markers = 0.05\nmarker_layout = "wall.csv"\nlens = "lens.json"\n'
                          "scale_uncertainty = 0.001\n")  # fmt: skip
    job = load_job(_write(footage_dir, single))
    (th,) = job.throws
    assert th.kind == "footage" and th.measured_in_3d
    (src,) = th.view_sources(job.camera)
    assert src.footage == th.path and src.readout_time is None


@pytest.mark.parametrize(
    "views, message",
    [
        (_VIEW.replace('lens = "lens.json"\n', ""),
         r"\[\[throws\.views\]\] #1 lens: missing; give the camera's lens file"),
        (_VIEW + "time_offset = 0.001\n",
         r"line \d+: \[\[throws\.views\]\] #1 time_offset: the first view is the time "
         r"reference \(offset 0\)"),
        (_VIEW + _VIEW + "time_offset_uncertainty = 0.001\n",
         r"\[\[throws\.views\]\] #2 time_offset_uncertainty: given without time_offset"),
        (_VIEW + _VIEW + "time_offset = 0.0004\n",
         r"\[\[throws\.views\]\] #2 time_offset_uncertainty: missing; give the standard "
         r"uncertainty of the stated time offset"),
        (_VIEW + "readout_time = 0.001\n",
         r"\[\[throws\.views\]\] #1 readout_time_uncertainty: missing; give the standard "
         r"uncertainty of the readout time"),
        (_VIEW + "fps = 500\n", r"\[\[throws\.views\]\] #1 fps: unknown key; valid keys in "
                                r"\[\[throws\.views\]\] #1 are footage, label, lens"),
        ('scale = 0.001\n' + _VIEW, r"\[\[throws\]\] #1 scale: a throw with \[\[throws\.views\]\] "
                                    r"takes only label"),
        (_VIEW + "\n[[throws]]\nfootage = \"clip.avi\"\nscale = 0.001\n",
         r"\[\[throws\]\] #2: this throw is measured in the plane, others in 3-D"),
    ],
)  # fmt: skip
def test_views_throw_bad_input(footage_dir, views, message):
    """regression: the views contract's refusals name the table (numbered over the file),
    the key and the fix."""
    text = _views_job(views)
    with pytest.raises(ValueError, match=message):
        load_job(_write(footage_dir, text))


def test_lens_without_the_board_is_refused(footage_dir):
    """regression: a lens measures in 3-D and needs the board's pose: markers and layout."""
    text = _footage_job('markers = 0.05\nlens = "lens.json"\n')
    with pytest.raises(ValueError, match=rf"^job\.toml, line {_line(text, 'lens')}: "
                       r"\[\[throws\]\] #1 lens: with a lens the throw is measured in 3-D, "
                       r"which needs the camera's pose from the marker board; give "
                       r"markers = SIDE_M and marker_layout = FILE"):  # fmt: skip
        load_job(_write(footage_dir, text))


def test_air_speed_viscosity_and_lift_keys(job_dir):
    """regression: [air] air_speed_uncertainty is required (the fix says why and how), read
    with a unit; a stated viscosity needs its standard uncertainty and both enter the budget;
    [fit] lift takes true, false or "auto" (the default: the lift test)."""
    text = _edit("air_speed_uncertainty = 0.05      # m/s\n", "")
    n = _line(text, "[air]")
    with pytest.raises(ValueError, match=rf"^job\.toml, line {n}: \[air\] "
                       r"air_speed_uncertainty: missing; give the standard uncertainty of the "
                       r"air's speed along the flight in m/s \(the fit takes the air as still"):  # fmt: skip
        load_job(_write(job_dir, text))
    text = _edit("air_speed_uncertainty = 0.05 ", 'air_speed_uncertainty = "3 cm/s" ')
    job = load_job(_write(job_dir, text))
    assert job.air.air_speed_uncertainty == pytest.approx(0.03)
    assert job.fit.lift == "auto" and job.fit.lift_test and "lift" not in job.fit_options()
    air = {
        "temperature = 21.0 ": "# temperature = 21.0 ",
        "temperature_uncertainty = 0.3 ": "# temperature_uncertainty = 0.3 ",
        "pressure = 100800 ": "# pressure = 100800 ",
        "pressure_uncertainty = 50 ": "# pressure_uncertainty = 50 ",
        "relative_humidity = 45 ": "# relative_humidity = 45 ",
        "relative_humidity_uncertainty = 3 ": "# relative_humidity_uncertainty = 3 ",
        "# density = 1.19 ": "density = 1.19 ",
        "# density_uncertainty = 0.005 ": "density_uncertainty = 0.005 ",
        "# viscosity = 1.81e-5 ": "viscosity = 1.81e-5 ",
    }
    text = TEMPLATE
    for old, new in air.items():
        text = _edit(old, new, text)
    n = _line(text, "[air]")
    with pytest.raises(ValueError, match=rf"^job\.toml, line {n}: \[air\] viscosity_uncertainty: "
                       r"missing; give the standard uncertainty of viscosity in Pa s"):  # fmt: skip
        load_job(_write(job_dir, text))
    text = _edit("# viscosity_uncertainty = 1e-7 ", "viscosity_uncertainty = 1e-7 ", text)
    text = _edit('lift = "auto" ', "lift = true ", text)
    job = load_job(_write(job_dir, text))
    assert job.air.viscosity.value == 1.81e-5 and job.air.viscosity.uncertainty == 1e-7
    assert job.make_air().viscosity == 1.81e-5
    names = [q.name for q in job.input_quantities()]
    assert "air_viscosity" in names and "air_speed" in names
    assert not job.fit.lift_test and job.fit_options()["lift"] is True
    bad = _edit('lift = "auto" ', 'lift = "maybe" ')
    n = _line(bad, "lift =")
    with pytest.raises(ValueError, match=rf'^job\.toml, line {n}: \[fit\] lift: expected true, '
                       r'false or "auto", got \'maybe\'; "auto" \(the default\) tests'):  # fmt: skip
        load_job(_write(job_dir, bad))
    lone = _edit("air_speed_uncertainty = 0.05 ", "viscosity_uncertainty = 1e-7\n"
                 "air_speed_uncertainty = 0.05 ")  # fmt: skip
    n = _line(lone, "viscosity_uncertainty")
    with pytest.raises(ValueError, match=rf"^job\.toml, line {n}: \[air\] viscosity_uncertainty: "
                       r"given without viscosity; add viscosity or remove it\.$"):  # fmt: skip
        load_job(_write(job_dir, lone))


def test_bare_uncertainty_takes_the_unit_of_its_value(job_dir):
    """closed-form/independent: "every *_uncertainty is in the same unit as its value": a
    bare number beside "24.00 g" is in grams (pint: 0.02 g = 2e-5 kg; 0.5 hPa = 50 Pa;
    0.2 mm = 2e-4 m); a value without a unit keeps SI."""
    text = _edit("mass = 0.0027 ", 'mass = "2.70 g" ')
    text = _edit("mass_uncertainty = 0.00001 ", "mass_uncertainty = 0.02 ", text)
    text = _edit("pressure = 100800 ", 'pressure = "1008 hPa" ', text)
    text = _edit("pressure_uncertainty = 50 ", "pressure_uncertainty = 0.5 ", text)
    text = _edit("diameter = 0.040 ", 'diameter = "40 mm" ', text)
    text = _edit("diameter_uncertainty = 0.00005 ", 'diameter_uncertainty = "0.2" ', text)
    job = load_job(_write(job_dir, text))
    assert job.specimen.mass.uncertainty == pytest.approx(2e-5, rel=1e-12)
    assert job.air.pressure.uncertainty == pytest.approx(50.0, rel=1e-12)
    assert job.specimen.diameter.uncertainty == pytest.approx(2e-4, rel=1e-12)
    assert job.air.temperature.uncertainty == 0.3  # no unit on the value: SI as before


def test_implausibly_large_relative_uncertainty_needs_confirmation(job_dir):
    """regression: 0.02 kg beside a mass of 24 g (an uncertainty in kg beside grams: 83 %) is
    refused, naming the line and the way to confirm it; confirmed, it is taken."""
    text = _edit("mass = 0.0027 ", "mass = 0.024 ")
    text = _edit("mass_uncertainty = 0.00001 ", "mass_uncertainty = 0.02 ", text)
    n = _line(text, "mass_uncertainty")
    with pytest.raises(ValueError) as exc:
        load_job(_write(job_dir, text))
    assert str(exc.value) == (
        f"job.toml, line {n}: [specimen] mass_uncertainty: 0.02 kg is 83 % of the mass 0.024 kg "
        f"(more than 10 %): a unit slip? A bare number is in the unit of its value; write e.g. "
        f'"0.02 g". If it is right, confirm it with large_uncertainty_confirmed = true in '
        f"[specimen]."
    )
    text = _edit("[specimen]\n", "[specimen]\nlarge_uncertainty_confirmed = true\n", text)
    text = _edit("mass_uncertainty = 0.02 ", "mass_uncertainty = 0.012 ", text)
    assert load_job(_write(job_dir, text)).specimen.mass.uncertainty == 0.012
    text = _edit("diameter_uncertainty = 0.00005 ", "diameter_uncertainty = 0.005 ")
    with pytest.raises(ValueError, match=r"\[specimen\] diameter_uncertainty: 0.005 m is 12 % "
                       r"of the diameter 0.04 m"):  # fmt: skip
        load_job(_write(job_dir, text))


def test_footage_throw_needs_its_scale_uncertainty(footage_dir):
    """regression: a footage throw without scale_uncertainty (and no [camera]
    scale_relative_uncertainty) is refused: the marker side is never taken as exact silently."""
    text = _footage_job('markers = "50 mm"\n', _edit(_CAMERA_U, ""))
    with pytest.raises(ValueError) as exc:
        load_job(_write(footage_dir, text))
    assert str(exc.value) == (
        f"job.toml, line {_line(text, '[[throws]]')}: [[throws]] #1 scale_uncertainty: missing; "
        "give the relative standard uncertainty of the calibration's known length (the "
        "markers' side, the reference distance or the scale), e.g. scale_uncertainty = 0.001 "
        "(write 0 if you take it as exact). Or state [camera] scale_relative_uncertainty for "
        "every throw."
    )
    assert load_job(_write(footage_dir, _footage_job('markers = "50 mm"\n'))).throws


@pytest.mark.parametrize(
    "text_value, code, pos",
    [
        ('"SYN-\\u001b[2J-7"', "001B", 5),  # a terminal escape sequence (TOML escape)
        ('"ABC\u202eFED"', "202E", 4),  # a right-to-left override, written raw
        ('"A\\u2066B"', "2066", 2),  # a left-to-right isolate (TOML escape)
    ],
)
def test_text_with_control_or_direction_characters_is_refused(job_dir, text_value, code, pos):
    """regression: escape codes and bidirectional overrides in a text value (Unicode UAX #9
    formatting characters) are refused with the line, the code point and its position."""
    text = _edit('id = "SYN-BALL-001"', f"id = {text_value}")
    with pytest.raises(ValueError) as exc:
        load_job(_write(job_dir, text))
    assert str(exc.value) == (
        f"job.toml, line {_line(text, 'id = ')}: [specimen] id: holds the control or direction "
        f"character U+{code} at position {pos} (terminal escape codes and right-to-left "
        f"overrides make the text shown differ from the text stored); write the text without "
        f"it."
    )


def test_multi_line_notes_and_accents_are_text(job_dir):
    """regression: line breaks, tabs and accented letters are ordinary text."""
    text = _edit('notes = "Three throws', 'notes = """Grüße,\n\tthree throws')
    text = text.replace('indoor hall."', 'indoor hall."""', 1)
    assert load_job(_write(job_dir, text)).test.notes.startswith("Grüße,\n\tthree")


def test_specimen_denser_than_any_solid_is_refused(job_dir):
    """published-value: 24 kg in a 40 mm sphere (π d³/6 = 3.351e-5 m³) is 7.16e5 kg/m³, far
    above osmium's 22 590 kg/m³ (CRC Handbook, 97th ed., 2016): refused as a unit slip; the
    template's 2.7 g ball (81 kg/m³) is taken."""
    text = _edit("mass = 0.0027 ", "mass = 24 ")
    with pytest.raises(ValueError) as exc:
        load_job(_write(job_dir, text))
    assert str(exc.value) == (
        f"job.toml, line {_line(text, 'mass = ')}: [specimen] mass: 24 kg in a diameter of 0.04 m "
        "is 7.16e+05 kg/m³, denser than any solid (osmium, 22590 kg/m³): a unit slip? Give the "
        'mass in kg (e.g. 0.024) or with its unit ("24 g"), and the diameter likewise.'
    )
    assert load_job(_write(job_dir, TEMPLATE)).specimen.mass.value == 0.0027


def test_stated_values_need_their_uncertainty(job_dir):
    """regression: an added-mass coefficient stated without its uncertainty is refused (no
    silent exact input); left out, the sphere's 0.5 is the model's constant."""
    text = _edit("# added_mass_coefficient = 0.5 ", "added_mass_coefficient = 0.5 ")
    with pytest.raises(ValueError, match=r"\[specimen\] added_mass_coefficient_uncertainty: "
                       r"missing; give the standard uncertainty of the stated added-mass "
                       r"coefficient"):  # fmt: skip
        load_job(_write(job_dir, text))
    text = _edit("# added_mass_coefficient_uncertainty = 0.0", "added_mass_coefficient_uncertainty"
                 " = 0.02", text)  # fmt: skip
    assert load_job(_write(job_dir, text)).specimen.added_mass_coefficient.uncertainty == 0.02
