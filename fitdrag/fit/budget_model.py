"""The drag coefficient's measurement model for the uncertainty budget: Cd as a function of
the input quantities (specimen, air, camera, gravity, and the flight's physics: air movement,
an undetected lift, the choice of drag law), evaluated by re-fitting a finished fit
(:func:`fitdrag.fit.refit.refit`).  Handed to :func:`fitdrag.uncertainty.gum.budget_from_model`
and :func:`fitdrag.uncertainty.monte_carlo.monte_carlo`, which know nothing of drag.

Air movement.  The fit assumes still air (or a stated wind).  A constant air velocity w ê
along the flight moves the specimen through the air at v − w ê; in the frame moving with the
air the equation of motion is the same (gravity and buoyancy do not depend on the frame), so
a fit with that wind equals a still-air fit of the track seen from the moving frame,
x' = x − w ê (t − t₀) (a Galilean change of frame).  ``air_speed`` re-fits such tracks, ê the
direction of the fitted flight from its first to its last point.
"""

from __future__ import annotations

import math
import re

from fitdrag.errors import ConvergenceError, InputError
from fitdrag.fit.refit import refit
from fitdrag.geometry.planar import PlanarGeometry, flight_plane_track
from fitdrag.physics.air import Air
from fitdrag.physics.specimen import Body, Sphere
from fitdrag.tracks.track import Track

#: Input names understood by :class:`DragRefitModel` and their units.
DRAG_INPUTS = {
    "mass": "kg",
    "diameter": "m",
    "area": "m²",
    "volume": "m³",
    "added_mass_coefficient": "",
    "temperature": "°C",
    "pressure": "Pa",
    "relative_humidity": "%",
    "air_density": "kg/m³",
    "frame_rate": "Hz",
    "length_scale": "",
    "roll": "°",
    "gravity": "m/s²",
    "camera_distance": "m",
    "out_of_plane_angle": "°",
    "air_viscosity": "Pa s",
    "air_speed": "m/s",
    "lift_coefficient": "",
    "drag_law": "",
}

#: Per-throw out-of-plane angles: ``out_of_plane_angle_<k>`` for throw k (1-based). [°]
_ANGLE_RE = re.compile(r"^out_of_plane_angle(?:_([1-9][0-9]*))?$")


def angle_input_name(throw: int | None) -> str:
    """Budget name of the out-of-plane angle of throw ``throw`` (1-based; None: all)."""
    return "out_of_plane_angle" if throw is None else f"out_of_plane_angle_{throw}"


def air_from_inputs(v, viscosity=None) -> Air | None:
    """The air of a budget's input values: ``air_density`` [kg/m³] (with ``air_viscosity``
    or ``viscosity`` [Pa s] when given), or ``temperature`` [°C], ``pressure`` [Pa] and
    ``relative_humidity`` [%] through the CIPM-2007 density; None when neither is given."""
    if "air_density" in v:
        mu = v.get("air_viscosity", viscosity)
        kw = {} if mu is None else {"viscosity": mu}
        return Air(v["air_density"], **kw)
    if "temperature" in v:
        return Air.from_conditions(v["temperature"], v["pressure"], v["relative_humidity"])
    return None


class DragRefitModel:
    """Cd as a function of the inputs, by re-solving a finished fit (a picklable callable).

    ``model(values) -> Cd`` rebuilds the specimen, the air, the gravity and the tracks from
    ``values`` (missing names take their nominal values) and re-solves the fit from its
    optimum (same rejected frames and noise model): by default with the fit's Jacobian held
    fixed (``fixed_jacobian``), else with :func:`fitdrag.fit.refit.refit`.

    * ``mass`` [kg], ``diameter`` [m] (sphere) or ``area`` [m²] and ``volume`` [m³] (body),
      ``added_mass_coefficient`` [-]: the specimen;
    * ``temperature`` [°C], ``pressure`` [Pa], ``relative_humidity`` [%]: the air through the
      CIPM-2007 density and Sutherland viscosity; or ``air_density`` [kg/m³] directly;
    * ``frame_rate`` [Hz]: the camera's true frame rate; sample times were computed with the
      nominal one, so they scale as t · f_nominal / f;
    * ``length_scale`` [-]: a factor (nominal 1) on every position and position uncertainty;
    * ``roll`` [°]: an error in the camera's (or calibration's) horizontal, nominal 0: every
      track is turned by this angle about its first sample;
    * ``gravity`` [m/s²];
    * ``camera_distance`` [m] and ``out_of_plane_angle`` [°] (nominal 0): the perspective of
      a planar track (:mod:`fitdrag.geometry.planar`): the track, seen by a camera at this
      distance from the calibration plane, is mapped to the flight's own plane turned by the
      angle about the vertical through its first sample before the re-fit.
      ``out_of_plane_angle`` turns every track; ``out_of_plane_angle_<k>`` only throw k
      (1-based), so that independent throws carry independent angles.  At zero angle the
      distance has no effect (see :func:`distance_sensitivity`);
    * ``air_viscosity`` [Pa s]: with ``air_density``, the air's viscosity (Reynolds number);
    * ``air_speed`` [m/s] (nominal 0): air moving at this speed along each flight (from its
      first to its last fitted point) besides any stated wind, by the change of frame of the
      module notes;
    * ``lift_coefficient`` [-] (nominal 0): a lift coefficient held fixed in a fit without
      lift (an undetected spin);
    * ``drag_law`` [-] (nominal 0): an additive correction to Cd for the choice of the drag
      law (its uncertainty is the spread of the published correlations,
      :mod:`fitdrag.fit.drag_law_choice`); it needs no re-fit.

    Parameters
    ----------
    result : FitResult
        The converged fit at the nominal inputs.
    tracks : sequence of Track
        The tracks that fit used.
    nominal : mapping
        Nominal value of every input name used (see :data:`DRAG_INPUTS`).
    length : float, optional
        Reynolds reference length of a body (kept fixed). [m]
    viscosity : float, optional
        Air viscosity to use with ``air_density`` (kept fixed). [Pa s]
    fixed_jacobian : bool
        Re-solve each trial by chord steps with the original fit's Jacobian and flights
        integrated without sensitivities (:class:`fitdrag.fit.refit.RefitSession`, one
        prepared problem per process), falling back to a full re-fit when that does not
        settle; False re-fits in full every time (:meth:`full`).
    """

    def __init__(self, result, tracks, nominal, *, length=None, viscosity=None,
                 fixed_jacobian=True):  # fmt: skip
        tracks = list(tracks)
        unknown = sorted(k for k in nominal if k not in DRAG_INPUTS and not _ANGLE_RE.match(k))
        if unknown:
            raise InputError(
                f"nominal: unknown input name(s) {unknown}; use names from "
                f"{', '.join(DRAG_INPUTS)}."
            )
        if "diameter" in nominal and ("area" in nominal or "volume" in nominal):
            raise InputError("nominal: give diameter (sphere) or area and volume (body), not both.")
        angles = [k for k in nominal if _ANGLE_RE.match(k)]
        if angles and "camera_distance" not in nominal:
            raise InputError(
                f"nominal: {angles[0]} needs camera_distance (the camera's distance to the "
                f"calibration plane [m]); add it."
            )
        for k in angles:
            m = _ANGLE_RE.match(k)
            if m.group(1) is not None and int(m.group(1)) > len(tracks):
                raise InputError(
                    f"nominal: {k} names throw {m.group(1)}, but there are {len(tracks)} "
                    f"tracks; number the throws from 1."
                )
        if "lift_coefficient" in nominal and result.lift:
            raise InputError(
                "nominal: lift_coefficient is an input only of a fit without lift (this fit "
                "fits the lift coefficient); leave it out."
            )
        if "air_viscosity" in nominal and "air_density" not in nominal:
            raise InputError(
                "nominal: air_viscosity needs air_density (with temperature, pressure and "
                "humidity the viscosity follows the temperature); add air_density."
            )
        self.result = result
        self.tracks = tracks
        self.nominal = dict(nominal)
        self.length = length
        self.viscosity = viscosity
        self.directions = [_flight_direction(th) for th in result.throws]
        self.fixed_jacobian = bool(fixed_jacobian)

    def specimen(self, v):
        if not any(k in v for k in ("mass", "diameter", "area", "volume",
                                    "added_mass_coefficient")):  # fmt: skip
            return None  # the fit's own specimen
        ca = v.get("added_mass_coefficient", self.result.specimen.added_mass_coefficient)
        if "diameter" in v:
            return Sphere(v["mass"], v["diameter"], added_mass_coefficient=ca)
        return Body(v["mass"], v["area"], v["volume"], length=self.length,
                    added_mass_coefficient=ca)  # fmt: skip

    def air(self, v):
        return air_from_inputs(v, self.viscosity)

    def transformed_tracks(self, v):
        """The tracks as a trial's inputs see them (None when unchanged): see the class notes."""
        arrays = self.transformed_arrays(v)
        if arrays is None:
            return None
        return [Track(t, x, y, sig, tr.frame, dict(tr.meta))
                for tr, (t, x, y, sig) in zip(self.tracks, arrays)]  # fmt: skip

    def transformed_arrays(self, v):
        """Per track (t [s], x [m], y [m], sigma [m] or None) as the inputs ``v`` see them;
        None when no input changes the tracks."""
        f0 = self.nominal.get("frame_rate")
        time_factor = 1.0 if f0 is None else f0 / v.get("frame_rate", f0)
        s = v.get("length_scale", 1.0)
        roll = math.radians(v.get("roll", 0.0))
        angles = self.angles(v)
        wind = v.get("air_speed", 0.0)
        if time_factor == 1.0 and s == 1.0 and roll == 0.0 and not any(angles) and not wind:
            return None
        c, sn = math.cos(roll), math.sin(roll)
        out = []
        for tr, angle, (ex, ey) in zip(self.tracks, angles, self.directions):
            sig = None if tr.sigma is None else tr.sigma * s
            dx, dy = tr.x - tr.x[0], tr.y - tr.y[0]
            x = (tr.x[0] + c * dx - sn * dy) * s
            y = (tr.y[0] + sn * dx + c * dy) * s
            if angle:
                geometry = PlanarGeometry(v["camera_distance"], angle)
                x, y, sig = flight_plane_track(x, y, geometry, sigma=sig)
            t = tr.t * time_factor
            if wind:
                # the track seen from the frame moving with the air (module notes)
                x = x - wind * ex * (t - t[0])
                y = y - wind * ey * (t - t[0])
            out.append((t, x, y, sig))
        return out

    def angles(self, v) -> list[float]:
        """Out-of-plane angle of each track [°]: ``out_of_plane_angle`` plus its own
        ``out_of_plane_angle_<k>``."""
        common = v.get("out_of_plane_angle", 0.0)
        return [common + v.get(angle_input_name(k + 1), 0.0) for k in range(len(self.tracks))]

    def __call__(self, values) -> float:
        v = dict(self.nominal)
        v.update(values)
        if self.fixed_jacobian:
            r = self._fast(v)
            if r is not None:
                return float(r.cd) + v.get("drag_law", 0.0)
        r = refit(
            self.result,
            tracks=self.transformed_tracks(v),
            specimen=self.specimen(v),
            air=self.air(v),
            gravity=v.get("gravity"),
            lift_coefficient=v.get("lift_coefficient"),
        )
        if not r.success:
            raise ConvergenceError("the re-fit did not converge")
        return float(r.cd) + v.get("drag_law", 0.0)

    def full(self, values) -> float:
        """Cd of ``values`` by a full re-fit (Gauss–Newton with the exact Jacobian at every
        step), never the fixed-Jacobian re-solve: the reference that checks it."""
        saved = self.fixed_jacobian
        self.fixed_jacobian = False
        try:
            return self(values)
        finally:
            self.fixed_jacobian = saved

    def _fast(self, v):
        """The fixed-Jacobian re-solve of :class:`fitdrag.fit.refit.RefitSession` (built on
        first use, once per process); None when it does not settle."""
        from fitdrag.fit.refit import RefitSession

        session = self.__dict__.get("_session")
        if session is None:
            session = self.__dict__["_session"] = RefitSession(self.result)
        arrays = self.transformed_arrays(v)
        return session.solve(
            times=None if arrays is None else [a[0] for a in arrays],
            positions=None if arrays is None else [(a[1], a[2]) for a in arrays],
            specimen=self.specimen(v),
            air=self.air(v),
            gravity=v.get("gravity"),
            lift_coefficient=v.get("lift_coefficient"),
        )

    def __getstate__(self):
        state = dict(self.__dict__)
        state.pop("_session", None)  # rebuilt in each process on first use
        return state


def _flight_direction(throw) -> tuple[float, float]:
    """Unit vector from the first to the last fitted point of a throw (+x if they coincide)."""
    dx = float(throw.fitted_x[-1] - throw.fitted_x[0])
    dy = float(throw.fitted_y[-1] - throw.fitted_y[0])
    n = math.hypot(dx, dy)
    return (dx / n, dy / n) if n > 0 else (1.0, 0.0)


def distance_sensitivity(model: DragRefitModel, u_distance: float, u_angles) -> float:
    """Sensitivity of Cd to the camera distance, where the out-of-plane angles make it one.

    At zero angle the distance has no effect (the track is the flight itself), so its
    first-order sensitivity is 0; it acts only through the product with the angle.  Its
    contribution is then the second-order cross term of JCGM 100:2008 5.1.2 (NOTE),
    ``½ (∂²f/∂θ∂Z)² u²(θ) u²(Z)``.  This returns the central difference of the re-fitted Cd
    in the distance (step ± ``u_distance``) with every angle at + its standard uncertainty,
    ``≈ ∂²f/∂θ∂Z · u(θ)``: as a sensitivity times u(Z) it gives √2 times that cross term's
    standard deviation (a cautious value).

    Parameters
    ----------
    model : DragRefitModel
        The model (with ``camera_distance`` and out-of-plane angles in its nominal values).
    u_distance : float
        Standard uncertainty of the camera distance. [m]
    u_angles : mapping
        Standard uncertainty of each out-of-plane angle input, by its name. [°]

    Returns
    -------
    float
        ∂Cd/∂Z at the angles' standard uncertainties. [1/m]
    """
    z = model.nominal["camera_distance"]
    if not u_distance > 0 or not any(u > 0 for u in u_angles.values()):
        return 0.0
    tilted = {name: model.nominal.get(name, 0.0) + u for name, u in u_angles.items()}
    up = model(dict(tilted, camera_distance=z + u_distance))
    dn = model(dict(tilted, camera_distance=z - u_distance))
    return (up - dn) / (2.0 * u_distance)
