"""The commented job-file template that ``fitdrag new-job`` writes.

:data:`TEMPLATE` is a complete, valid job file for an invented, synthetic scenario, with a
comment on every key (its unit, what it means, the alternatives); :func:`write_template`
writes it.  The keys are read by :func:`fitdrag.run.job_file.load_job`.
"""

from __future__ import annotations

from pathlib import Path

from fitdrag._files import write_text_atomic
from fitdrag.errors import InputError, InputFileNotFoundError

__all__ = ["PLACEHOLDERS", "TEMPLATE", "placeholders_left", "write_template"]

TEMPLATE = """\
# fitdrag job file: one measurement, from specimen to certificate.
# Run it with:  fitdrag run THIS_FILE.toml
#
# The values below describe an invented, synthetic scenario (laboratory, customer and
# specimen are fictitious); replace every one of them with your own.
#
# Numbers are SI in the unit named in each comment (temperature in degrees Celsius,
# humidity in percent).  You may also write a string with a unit: mass = "2.7 g",
# pressure = "1008 hPa", diameter = "40 mm".  Every *_uncertainty is a STANDARD
# uncertainty (one standard deviation) in the same unit as its value; write 0 for an
# input you take as exact.  Paths are relative to this file's folder.

[laboratory]
name = "Example Flight Test Laboratory (synthetic)"
address = "1 Sample Road, Testville"
# accreditation = "accreditation body, number and scope, if this test is covered"

[test]
customer = "Fictitious Sports Goods Ltd"
customer_address = "99 Imaginary Lane, Nowhere"
order = "PO-0000"                 # customer's order or request reference
operator = "A. Tester"
approved_by = "B. Reviewer"
date = 2026-01-15                 # date of the test
notes = "Three throws by hand in still air, indoor hall."
# check_standard = "REF-40-A"     # id of the set-up's check standard: `fitdrag run` warns
#                                 # when its latest result on record is out of control

[specimen]
id = "SYN-BALL-001"
description = "Training ball, 40 mm, smooth plastic shell (synthetic example)"
mass = 0.0027                     # kg
mass_uncertainty = 0.00001        # kg
diameter = 0.040                  # m  (for a sphere; otherwise give area and volume)
diameter_uncertainty = 0.00005    # m
# area = 0.00126                  # m^2, frontal area (non-spherical specimens)
# area_uncertainty = 0.00001      # m^2
# volume = 3.35e-5                # m^3
# volume_uncertainty = 3e-7       # m^3
# added_mass_coefficient = 0.5    # -, 0.5 for a sphere
# added_mass_coefficient_uncertainty = 0.0

[air]
temperature = 21.0                # degrees C
temperature_uncertainty = 0.3     # K
pressure = 100800                 # Pa (absolute)
pressure_uncertainty = 50         # Pa
relative_humidity = 45            # %
relative_humidity_uncertainty = 3 # %
# or, instead of the three above:
# density = 1.19                  # kg/m^3
# density_uncertainty = 0.005     # kg/m^3
# viscosity = 1.81e-5             # Pa s (with density only; else from the temperature)
# viscosity_uncertainty = 1e-7    # Pa s
# Required: the fit takes the air as still (or as the [fit] wind).  Standard uncertainty
# of the air's speed along the flight, e.g. from an anemometer near the flight path; a
# 0.1 m/s draft moves Cd of a ball at 9 m/s by about 2 %.  0 = exactly still (a warning).
air_speed_uncertainty = 0.05      # m/s

[site]
# local acceleration of free fall; either gravity (+ gravity_uncertainty) or
# latitude [deg] and height [m] above sea level.  Without [site], standard gravity is
# used with an uncertainty covering the whole Earth.
latitude = 47.0                   # degrees
height = 400                      # m

[camera]
fps = 500                         # Hz, camera frame rate
fps_uncertainty = 0.05            # Hz
scale_relative_uncertainty = 0.002   # -, relative standard uncertainty of the track's
                                     #    length scale (calibration target); required
                                     #    with track CSVs.  Footage throws bring their
                                     #    own from their calibration; given here, this
                                     #    value is used for them instead.
# roll_uncertainty = 0.05         # deg, standard uncertainty of the horizontal (camera
                                  #    level); footage throws bring their own from the
                                  #    marker calibration; given here, it is used instead
# Required with track CSVs (a planar measurement): how the camera saw the flight.  A flight
# out of the image plane biases Cd through perspective (about -30 % at 1 degree for a light
# ball 3 m away); the budget propagates both through the perspective model.
distance = 3.0                    # m, camera to the flight plane (the calibration plane)
distance_uncertainty = 0.05       # m
out_of_plane_uncertainty = 0.5    # deg, standard uncertainty of the flight's angle to
                                  #    the image plane (its estimate is 0)

# One [[throws]] table per throw; all throws share the drag coefficient.
[[throws]]
track = "throw1.csv"              # a track CSV: columns t [s], x, y [m] (world, y up)
# label = "throw 1"
# units = "m"                     # m, mm, cm or px (px needs scale = metres per pixel)
# y_down = false                  # true if the file's y axis points down (image rows)
# t_col = "t"
# x_col = "x"
# y_col = "y"

# [[throws]]
# track = "throw2.csv"

# A throw may be footage instead: it is tracked and calibrated as 'fitdrag track' does,
# at the frame rate of [camera].  Give exactly one of markers, scale or reference.
# [[throws]]
# footage = "throw3.avi"          # video file, or folder of numbered frames
# markers = 0.050                 # m, side of the ArUco markers' black square ("50 mm")
# marker_dictionary = "DICT_4X4_50"
# marker_layout = "wall.csv"      # id,x_m,y_m of each marker's lower-left corner [m]
# marker_frame = 0                # frame to find the markers in (default: start)
# scale = 0.00125                 # m/px, instead of markers: size of one pixel
# origin = "12,790"               # px (x right, y down): image point of the world origin
# rotation = 0.0                  # degrees, counter-clockwise on screen: true horizontal
# reference = "102.5,640,1180,655.5,1.000"   # instead: two image points [px], distance [m]
# scale_uncertainty = 0.001       # -, relative standard uncertainty of the known length
# lens = "lens.json"              # lens model from 'fitdrag calibrate-lens'
# start = 0                       # first frame to track
# stop = 400                      # frame to stop before (default: the end)

[specification]
drag_coefficient = 0.47           # stated Cd
tolerance = 0.03                  # +/- around the stated value (or give lower / upper)
decision_rule = "guarded"         # "simple" or "guarded" (guard band = U)
reference = "customer specification (synthetic example)"

[fit]
model = "constant"                # drag model
robust = true                     # reject gross outliers
noise = "auto"                    # "auto", "white" or "ar1"
lift = "auto"                     # "auto": test whether the data need a lift coefficient
                                  #    (spin); true / false to fit with / without one

[uncertainty]
monte_carlo = 0                   # trials of the Monte Carlo check (0 = off; e.g. 10000)
seed = 1

[output]
directory = "certificates"        # where the certificate, PNG and JSON go
number_prefix = "FD"              # certificate numbers look like FD-2026-000001
# records = "records.sqlite"      # another records database than the laboratory's
"""


#: The template's invented identity values, by (section, key): a job that still holds one
#: of them is not certified (``fitdrag run`` refuses it, naming them).
PLACEHOLDERS = {
    ("laboratory", "name"): "Example Flight Test Laboratory (synthetic)",
    ("laboratory", "address"): "1 Sample Road, Testville",
    ("test", "customer"): "Fictitious Sports Goods Ltd",
    ("test", "customer_address"): "99 Imaginary Lane, Nowhere",
    ("test", "order"): "PO-0000",
    ("specimen", "id"): "SYN-BALL-001",
}


def placeholders_left(job) -> list[str]:
    """``[section] key = "value"`` for each of :data:`PLACEHOLDERS` that ``job`` still holds."""
    sections = {"laboratory": job.laboratory, "test": job.test, "specimen": job.specimen}
    left = []
    for (sec, key), value in PLACEHOLDERS.items():
        if getattr(sections[sec], key, None) == value:
            left.append(f'[{sec}] {key} = "{value}"')
    return left


def write_template(path: str | Path, *, force: bool = False) -> Path:
    """Write :data:`TEMPLATE` to ``path`` (no overwrite unless ``force``)."""
    path = Path(path)
    if path.exists() and not force:
        raise InputError(f"{path}: already exists; choose another name or pass --force.")
    if not path.parent.is_dir():
        raise InputFileNotFoundError(f"{path.parent}: no such folder; create it first.")
    write_text_atomic(path, TEMPLATE, force=True)  # an existing file was refused above
    return path
