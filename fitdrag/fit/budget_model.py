"""The drag coefficient's measurement model for the uncertainty budget: Cd as a function of
the input quantities (specimen, air, camera, gravity), evaluated by re-fitting a finished fit
(:func:`fitdrag.fit.refit.refit`).  Handed to :func:`fitdrag.uncertainty.gum.budget_from_model`
and :func:`fitdrag.uncertainty.monte_carlo.monte_carlo`, which know nothing of drag.
"""

from __future__ import annotations

import math

from fitdrag.errors import ConvergenceError, InputError
from fitdrag.fit.refit import refit
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
}


class DragRefitModel:
    """Cd as a function of the inputs, by re-solving a finished fit (a picklable callable).

    ``model(values) -> Cd`` rebuilds the specimen, the air, the gravity and the tracks from
    ``values`` (missing names take their nominal values) and re-solves the fit from its
    optimum with :func:`fitdrag.fit.refit.refit` (same rejected frames and noise model).

    * ``mass`` [kg], ``diameter`` [m] (sphere) or ``area`` [m²] and ``volume`` [m³] (body),
      ``added_mass_coefficient`` [-]: the specimen;
    * ``temperature`` [°C], ``pressure`` [Pa], ``relative_humidity`` [%]: the air through the
      CIPM-2007 density and Sutherland viscosity; or ``air_density`` [kg/m³] directly;
    * ``frame_rate`` [Hz]: the camera's true frame rate; sample times were computed with the
      nominal one, so they scale as t · f_nominal / f;
    * ``length_scale`` [-]: a factor (nominal 1) on every position and position uncertainty;
    * ``roll`` [°]: an error in the camera's (or calibration's) horizontal, nominal 0: every
      track is turned by this angle about its first sample;
    * ``gravity`` [m/s²].

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
    """

    def __init__(self, result, tracks, nominal, *, length=None, viscosity=None):
        unknown = sorted(set(nominal) - set(DRAG_INPUTS))
        if unknown:
            raise InputError(
                f"nominal: unknown input name(s) {unknown}; use names from "
                f"{', '.join(DRAG_INPUTS)}."
            )
        if "diameter" in nominal and ("area" in nominal or "volume" in nominal):
            raise InputError("nominal: give diameter (sphere) or area and volume (body), not both.")
        self.result = result
        self.tracks = list(tracks)
        self.nominal = dict(nominal)
        self.length = length
        self.viscosity = viscosity

    def specimen(self, v):
        ca = v.get("added_mass_coefficient", self.result.specimen.added_mass_coefficient)
        if "diameter" in v:
            return Sphere(v["mass"], v["diameter"], added_mass_coefficient=ca)
        return Body(v["mass"], v["area"], v["volume"], length=self.length,
                    added_mass_coefficient=ca)  # fmt: skip

    def air(self, v):
        if "air_density" in v:
            kw = {} if self.viscosity is None else {"viscosity": self.viscosity}
            return Air(v["air_density"], **kw)
        if "temperature" in v:
            return Air.from_conditions(v["temperature"], v["pressure"], v["relative_humidity"])
        return None

    def transformed_tracks(self, v):
        f0 = self.nominal.get("frame_rate")
        time_factor = 1.0 if f0 is None else f0 / v.get("frame_rate", f0)
        s = v.get("length_scale", 1.0)
        roll = math.radians(v.get("roll", 0.0))
        if time_factor == 1.0 and s == 1.0 and roll == 0.0:
            return None
        c, sn = math.cos(roll), math.sin(roll)
        out = []
        for tr in self.tracks:
            sig = None if tr.sigma is None else tr.sigma * s
            dx, dy = tr.x - tr.x[0], tr.y - tr.y[0]
            x = (tr.x[0] + c * dx - sn * dy) * s
            y = (tr.y[0] + sn * dx + c * dy) * s
            out.append(Track(tr.t * time_factor, x, y, sig, tr.frame, dict(tr.meta)))
        return out

    def __call__(self, values) -> float:
        v = dict(self.nominal)
        v.update(values)
        r = refit(
            self.result,
            tracks=self.transformed_tracks(v),
            specimen=self.specimen(v),
            air=self.air(v),
            gravity=v.get("gravity"),
        )
        if not r.success:
            raise ConvergenceError("the re-fit did not converge")
        return float(r.cd)
