"""Forces on a specimen in flight: gravity, buoyancy, added mass, drag and lift.

The equation of motion in the vertical plane of flight (x horizontal, y up) is

    (m + C_a ρ V) dv/dt = (m − ρ V) g − ½ ρ A |u| (C_d u − C_L P u),    u = v − w,

with m the mass, V the volume, A the reference area, C_a the added-mass coefficient,
ρ the air density, g = (0, −g), w the (horizontal) wind velocity, P the rotation by +90°
(P u = (−u_y, u_x)) so that a positive lift coefficient C_L lifts a specimen moving in +x
(backspin), and C_d given by a drag model of the Reynolds number Re = ρ |u| L / μ.

Drag models are pluggable: each is a :class:`DragModel` holding a numba-compiled function
``cd(re, p, grad) -> (cd, dcd_dre)`` that also writes ∂C_d/∂p into ``grad``.  Models are
registered by name (:func:`register_drag_model`) and looked up with :func:`get_drag_model`.

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

import functools
import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numba
import numpy as np

from fitdrag._checks import number as _number
from fitdrag.air import STANDARD_GRAVITY, Air

# --------------------------------------------------------------------------- drag models


@dataclass(frozen=True)
class DragModel:
    """A drag-coefficient law C_d(Re; p) usable by the simulator and the fit.

    Parameters
    ----------
    name : str
        Registry name (``"constant"``, ...).
    parameters : tuple of str
        Names of the fitted parameters, in the order of ``p``.
    initial : tuple of float
        A starting value for each fitted parameter. [unit of the parameter; C_d laws: -]
    bounds : tuple of (float, float)
        Lower and upper bound of each fitted parameter. [unit of the parameter]
    kernel : numba dispatcher
        ``kernel(re, p, grad) -> (cd, dcd_dre)``; ``p`` holds the fitted parameters
        followed by the constants; ``grad[j]`` receives ∂C_d/∂p_j for the fitted ones.
    constants : tuple of str
        Names of fixed constants appended to ``p`` after the fitted parameters.
    re_range : (float, float)
        Reynolds-number range where the law is valid; outside it a fit is refused. [-]
    reference : str
        Published source of the law.
    description : str
        One line for tables and reports.
    constants_from_re : callable, optional
        ``f(re_values) -> constants``: how the fit sets the constants from the Reynolds
        numbers of a first-pass flight (e.g. the median Re as reference).
    """

    name: str
    parameters: tuple[str, ...]
    initial: tuple[float, ...]
    bounds: tuple[tuple[float, float], ...]
    kernel: Callable = field(repr=False)
    constants: tuple[str, ...] = ()
    re_range: tuple[float, float] = (0.0, math.inf)
    reference: str = ""
    description: str = ""
    constants_from_re: Callable | None = field(default=None, repr=False)

    def constants_for(self, re_values) -> tuple[float, ...]:
        """Constants for a flight whose Reynolds numbers are ``re_values`` (e.g. a median Re)."""
        if not self.constants:
            return ()
        if self.constants_from_re is None:
            raise ValueError(
                f"drag model {self.name!r}: it has constants {self.constants} but no rule to "
                f"set them; give DragModel(constants_from_re=...) when registering it."
            )
        return tuple(float(c) for c in self.constants_from_re(np.asarray(re_values, float)))

    def cd(self, re, p) -> np.ndarray:
        """Evaluate C_d at Reynolds numbers ``re`` with parameters ``p`` (fitted + constants)."""
        re = np.atleast_1d(np.asarray(re, dtype=float))
        p = np.asarray(p, dtype=float)
        grad = np.zeros(max(len(p), 1))
        return np.array([self.kernel(float(r), p, grad)[0] for r in re])

    @functools.cached_property
    def callback(self):
        """The kernel wrapped as a C callback of fixed signature for the integrator."""
        return _as_callback(self.kernel)

    def check_re_range(self, re_min: float, re_max: float) -> None:
        """Raise ValueError when [re_min, re_max] leaves the law's validity range."""
        lo, hi = self.re_range
        if re_min < lo or re_max > hi:
            raise ValueError(
                f"drag model {self.name!r}: the flight spans Re {re_min:.3g}–{re_max:.3g}, "
                f"outside the model's validity Re {lo:.3g}–{hi:.3g}; choose another model "
                f"(e.g. 'power-law' or 'constant') or a flight inside that range."
            )


_REGISTRY: dict[str, DragModel] = {}


def _as_callback(kernel):
    """Wrap ``kernel(re, p, grad) -> (cd, dcd_dre)`` as a numba cfunc of fixed signature.

    Passing a fixed-signature callback (rather than the kernel's own dispatcher) lets the
    compiled integrator be cached on disk once for all drag models.
    """
    from fitdrag.simulate import CD_SIGNATURE

    @numba.cfunc(CD_SIGNATURE)
    def callback(re, p, grad, dcd_dre):
        cd, d = kernel(re, p, grad)
        dcd_dre[0] = d
        return cd

    return callback


def register_drag_model(model: DragModel) -> DragModel:
    """Add ``model`` to the registry under ``model.name`` (replacing none)."""
    if model.name in _REGISTRY:
        raise ValueError(f"drag model {model.name!r} is already registered; pick another name.")
    if not (len(model.parameters) == len(model.initial) == len(model.bounds)):
        raise ValueError(
            f"drag model {model.name!r}: parameters, initial and bounds differ in length "
            f"({len(model.parameters)}, {len(model.initial)}, {len(model.bounds)}); give one "
            f"initial value and one (low, high) bound per parameter."
        )
    _REGISTRY[model.name] = model
    return model


def get_drag_model(name: str | DragModel) -> DragModel:
    """Look up a registered drag model by name (a DragModel passes through)."""
    if isinstance(name, DragModel):
        return name
    try:
        return _REGISTRY[name]
    except KeyError:
        raise ValueError(
            f"drag model: unknown name {name!r}; valid names: {', '.join(drag_model_names())}."
        ) from None


def drag_model_names() -> list[str]:
    """Names of all registered drag models."""
    return sorted(_REGISTRY)


@numba.njit(cache=True)
def _cd_constant(re, p, grad):
    grad[0] = 1.0
    return p[0], 0.0


CONSTANT = register_drag_model(
    DragModel(
        name="constant",
        parameters=("cd",),
        initial=(0.5,),
        bounds=((0.0, 50.0),),
        kernel=_cd_constant,
        reference="quadratic drag with a constant coefficient, F = ½ ρ C_d A |u|² "
        "(Munson et al., Fundamentals of Fluid Mechanics, Wiley)",
        description="constant drag coefficient",
    )
)

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
            raise ValueError(
                f"gravity: must be a finite number > 0 m/s², got {self.gravity!r}; use 9.80665 "
                f"or the local value."
            )
        w = _number("wind", self.wind, "m/s", "give the horizontal wind speed, 0 for still air.")
        if not math.isfinite(w):
            raise ValueError(
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


from fitdrag import drag_models as _drag_models  # noqa: E402,F401  registers the Reynolds-dependent models
