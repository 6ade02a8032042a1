"""Forces on a specimen in flight: gravity, buoyancy, added mass, drag and lift.

The equation of motion in the vertical plane of flight (x horizontal, y up) is

    (m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ A |u| (C_d u − C_L P u),    u = v − w,

with m the mass, V the volume, A the reference area, C_a the added-mass coefficient,
ρ the air density, g = (0, −g), w the (horizontal) wind velocity, P the rotation by +90°
(P u = (−u_y, u_x)) so that a positive lift coefficient C_L lifts a specimen moving in +x
(backspin), and C_d given by a drag model of the Reynolds number Re = ρ |u| L / μ.

Drag models are pluggable: each is a :class:`fitdrag.physics.drag_model.DragModel`, registered
by name in :mod:`fitdrag.physics.registry`.

References
----------
1. G. G. Stokes (1851) and H. Lamb, *Hydrodynamics*, 6th ed., 1932, §92 (added mass ½ ρV
   of a sphere); buoyancy by Archimedes' principle.
2. P. Timmerman and J. P. van der Weele, "On the rise and fall of a ball with linear or
   quadratic drag", Am. J. Phys. 67, 538 (1999): the equation above with buoyancy and
   added mass, and its closed forms in one dimension.
3. B. R. Munson et al., *Fundamentals of Fluid Mechanics*, Wiley: drag force
   F_D = ½ ρ C_d A |u|², lift F_L = ½ ρ C_L A |u|².
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from fitdrag._checks import number as _number
from fitdrag.errors import InputError
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.registry import get_drag_model

# --------------------------------------------------------------------------- conditions


@dataclass(frozen=True)
class Conditions:
    """The surroundings of a flight.

    Parameters
    ----------
    air : Air
        Air density [kg/m³] and viscosity [Pa s].
    gravity : float
        Magnitude of the acceleration of free fall. [m/s²]
    wind : float
        Constant horizontal wind velocity, positive along +x. [m/s]
    buoyancy : bool
        Include the buoyancy of the displaced air (added mass is set by the specimen's
        ``added_mass_coefficient``).
    """

    air: Air
    gravity: float = STANDARD_GRAVITY
    wind: float = 0.0
    buoyancy: bool = True

    def __post_init__(self) -> None:
        g = _number("gravity", self.gravity, "m/s²", "use 9.80665 or the local value.")
        if not math.isfinite(g) or g <= 0:
            raise InputError(
                f"gravity: must be a finite number > 0 m/s², got {self.gravity!r}; use 9.80665 "
                f"or the local value."
            )
        w = _number("wind", self.wind, "m/s", "give the horizontal wind speed, 0 for still air.")
        if not math.isfinite(w):
            raise InputError(
                f"wind: must be a finite speed in m/s, got {self.wind!r}; give the horizontal "
                f"wind speed, 0 for still air."
            )
        object.__setattr__(self, "gravity", g)
        object.__setattr__(self, "wind", w)


def effective_mass(specimen, air_density: float) -> float:
    """Inertial mass including added mass, m + C_a ρ V [1, 2].

    Parameters
    ----------
    specimen : Sphere or Body
        The specimen (mass [kg], volume [m³], added_mass_coefficient [-]).
    air_density : float
        Air density. [kg/m³]

    Returns
    -------
    float
        Effective inertial mass. [kg]
    """
    return specimen.mass + specimen.added_mass_coefficient * air_density * specimen.volume


def net_gravity(specimen, conditions: Conditions) -> float:
    """Downward acceleration from gravity less buoyancy, g (m − ρV)/(m + C_a ρV) [1, 2].

    Parameters
    ----------
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity and the buoyancy switch.

    Returns
    -------
    float
        Net downward acceleration at zero air speed. [m/s²]
    """
    rho = conditions.air.density
    weight_less_buoyancy = specimen.mass - (rho * specimen.volume if conditions.buoyancy else 0.0)
    return conditions.gravity * weight_less_buoyancy / effective_mass(specimen, rho)


def drag_factor(specimen, air_density: float) -> float:
    """K = ρ A / (2 (m + C_a ρ V)), so that the drag deceleration is K C_d |u| u [2, 3].

    Parameters
    ----------
    specimen : Sphere or Body
        The specimen (area [m²]).
    air_density : float
        Air density. [kg/m³]

    Returns
    -------
    float
        Drag factor. [1/m]
    """
    return air_density * specimen.area / (2.0 * effective_mass(specimen, air_density))


def reynolds_number(speed, specimen, air: Air):
    """Re = ρ |u| L / μ.

    Parameters
    ----------
    speed : float or array
        Speed relative to the air. [m/s]
    specimen : Sphere or Body
        Supplies the reference length L. [m]
    air : Air
        Density [kg/m³] and dynamic viscosity [Pa s].

    Returns
    -------
    float or array
        Reynolds number. [-]
    """
    return air.density * np.asarray(speed) * specimen.length / air.viscosity


def acceleration(
    vx,
    vy,
    specimen,
    conditions: Conditions,
    drag_params,
    model="constant",
    lift_coefficient: float = 0.0,
):
    """Acceleration (a_x, a_y) of the specimen at velocity (vx, vy) [m/s] (equation above).

    A plain NumPy evaluation of the right-hand side used by the simulator, for reference
    and for tests.

    Parameters
    ----------
    vx, vy : float or array
        Velocity in the world frame. [m/s]
    specimen : Sphere or Body
        The specimen.
    conditions : Conditions
        Air, gravity, wind, buoyancy.
    drag_params : sequence of float
        Parameters of the drag model (fitted then constants).
    model : str or DragModel
        Drag model.
    lift_coefficient : float
        Lift coefficient C_L; positive lifts a specimen moving in +x. [-]

    Returns
    -------
    (ndarray, ndarray)
        Acceleration components. [m/s²]
    """
    m = get_drag_model(model)
    k = drag_factor(specimen, conditions.air.density)
    g_net = net_gravity(specimen, conditions)
    ux = np.asarray(vx, dtype=float) - conditions.wind
    uy = np.asarray(vy, dtype=float)
    q = np.hypot(ux, uy)
    cd = m.cd(reynolds_number(q, specimen, conditions.air).ravel(), drag_params).reshape(q.shape)
    ax = -k * q * (cd * ux + lift_coefficient * uy)
    ay = -g_net - k * q * (cd * uy - lift_coefficient * ux)
    return ax, ay
