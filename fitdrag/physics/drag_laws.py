"""Reynolds-dependent drag models: a scaled smooth-sphere curve and a local power law.

Two families are registered by :mod:`fitdrag.physics.registry` (look them up with
:func:`fitdrag.physics.registry.get_drag_model`):

``"sphere-scaled"``
    C_d = s · C_sphere(Re), the fitted parameter ``scale`` (s) saying how the specimen
    compares with a smooth sphere at the same Reynolds numbers.  The default curve is
    Morrison's 2013 correlation [1]; another published curve is chosen by name,
    ``"sphere-scaled:<correlation>"``, e.g. ``"sphere-scaled:clift-gauvin"``
    (:func:`sphere_correlation_names` lists them; :func:`sphere_scaled_model` returns the
    model for a correlation name).
``"power-law"``
    C_d = C_ref (Re / Re_ref)^n, fitted parameters ``cd_ref`` and ``exponent``; the constant
    ``re_ref`` is set from the flight's median Reynolds number, so that ``cd_ref`` is the
    drag coefficient in the middle of the flight and is nearly uncorrelated with the
    exponent.  n = 0 is a constant C_d; n = −1 is Stokes' linear drag [3].

The smooth-sphere correlations themselves (one public function each, with formula, range,
source and the numba kernels the simulator uses) are in :mod:`fitdrag.physics.sphere_drag`;
their names are re-exported here.

Validity.  A scaled smooth-sphere curve only makes sense below the drag crisis: near
Re ≈ 2–4·10⁵ the boundary layer of a smooth sphere turns turbulent and C_d drops several-fold
[2], at a Reynolds number that depends on surface roughness and free-stream turbulence, so
the specimen's curve is no longer a multiple of the smooth sphere's.  Each sphere-scaled model
therefore accepts flights only inside its correlation's stated range *and* below
:data:`SUBCRITICAL_RE_LIMIT` = 2·10⁵ (:meth:`~fitdrag.physics.drag_model.DragModel.check_re_range`
refuses the rest).  The power law is an empirical local description with no range of its
own.

References
----------
1. F. A. Morrison, *An Introduction to Fluid Mechanics*, Cambridge University Press, 2013,
   eq. (8.83) (the default curve; the others are listed in
   :mod:`fitdrag.physics.sphere_drag`).
2. E. Achenbach, "Experiments on the flow past spheres at very high Reynolds numbers",
   J. Fluid Mech. 54 (1972) 565–575 (the drag crisis of a smooth sphere).
3. G. G. Stokes, "On the effect of the internal friction of fluids on the motion of
   pendulums", Trans. Cambridge Philos. Soc. 9 (1851) 8–106: C_d = 24/Re for Re ≪ 1.
"""

from __future__ import annotations

import dataclasses
import math

import numba
import numpy as np

from fitdrag.errors import InputError
from fitdrag.physics.drag_model import DragModel
from fitdrag.physics.sphere_drag import (
    _RE_FLOOR,
    DEFAULT_CORRELATION,
    SPHERE_CORRELATIONS,
    SUBCRITICAL_RE_LIMIT,
    SphereCorrelation,
    get_correlation,
    sphere_correlation_names,
    sphere_drag_coefficient,
)

__all__ = [
    "BUILTIN_MODELS",
    "CONSTANT",
    "DEFAULT_CORRELATION",
    "POWER_LAW",
    "SPHERE_CORRELATIONS",
    "SPHERE_SCALED",
    "SUBCRITICAL_RE_LIMIT",
    "SphereCorrelation",
    "power_law_reference_re",
    "sphere_correlation_names",
    "sphere_drag_coefficient",
    "sphere_scaled_model",
]

# --------------------------------------------------------------------------- constant


@numba.njit(cache=True)
def _cd_constant(re, p, grad):
    grad[0] = 1.0
    return p[0], 0.0


def _cd_constant_callback(re, p, grad, dcd_dre):
    # compiled as the law's C callback with numba's disk cache (DragModel.callback_function)
    cd, d = _cd_constant(re, p, grad)
    dcd_dre[0] = d
    return cd


CONSTANT = DragModel(
    name="constant",
    parameters=("cd",),
    initial=(0.5,),
    bounds=((0.0, 50.0),),
    kernel=_cd_constant,
    callback_function=_cd_constant_callback,
    reference="quadratic drag with a constant coefficient, F = ½ ρ C_d A |u|² "
    "(Munson et al., Fundamentals of Fluid Mechanics, Wiley)",
    description="constant drag coefficient",
)

# --------------------------------------------------------------------------- scaled sphere


def _sphere_models() -> dict[str, DragModel]:
    """The scaled smooth-sphere laws by registry name; ``"sphere-scaled"`` is the default."""
    models = {}
    for c in SPHERE_CORRELATIONS.values():
        model = DragModel(
            name=f"sphere-scaled:{c.name}",
            parameters=("scale",),
            initial=(1.0,),
            bounds=((0.0, 50.0),),
            kernel=c.kernel,
            callback_function=c.callback_function,
            re_range=c.model_range,
            reference=f"C_d = s · C_sphere(Re), C_sphere after {c.reference}.",
            description=f"smooth-sphere drag curve ({c.name}) times a fitted scale",
        )
        if c.name == DEFAULT_CORRELATION:
            models["sphere-scaled"] = dataclasses.replace(model, name="sphere-scaled")
        models[model.name] = model
    return models


_SPHERE_MODELS = _sphere_models()
SPHERE_SCALED = _SPHERE_MODELS["sphere-scaled"]


def sphere_scaled_model(correlation: str = DEFAULT_CORRELATION) -> DragModel:
    """The registered scaled smooth-sphere drag model for a correlation name.

    Parameters
    ----------
    correlation : str
        Correlation name (see :func:`sphere_correlation_names`).

    Returns
    -------
    DragModel
        The model registered as ``"sphere-scaled:<correlation>"``.
    """
    return _SPHERE_MODELS[f"sphere-scaled:{get_correlation(correlation).name}"]


# --------------------------------------------------------------------------- power law


@numba.njit(cache=True)
def _power_law(re, p, grad):
    # C_d = cd_ref (Re/re_ref)^n; p = (cd_ref, n, re_ref)
    r = max(re, _RE_FLOOR)
    lx = math.log(r / p[2])
    f = math.exp(p[1] * lx)
    cd = p[0] * f
    grad[0] = f
    grad[1] = cd * lx
    return cd, p[1] * cd / r


def _power_law_callback(re, p, grad, dcd_dre):
    # compiled as the law's C callback with numba's disk cache (DragModel.callback_function)
    cd, d = _power_law(re, p, grad)
    dcd_dre[0] = d
    return cd


def power_law_reference_re(re_values) -> tuple[float]:
    """The power law's reference Reynolds number: the median Re of the flight.

    Parameters
    ----------
    re_values : array_like
        Reynolds numbers along the flight. [-]

    Returns
    -------
    tuple of float
        ``(re_ref,)``. [-]
    """
    r = np.asarray(re_values, dtype=float).ravel()
    r = r[np.isfinite(r)]
    med = float(np.median(r)) if r.size else math.nan
    if not (med > 0):
        raise InputError(
            f"re_values: the power-law drag model needs a flight with a positive median "
            f"Reynolds number, got {med!r}; check the track and the air viscosity."
        )
    return (med,)


POWER_LAW = DragModel(
    name="power-law",
    parameters=("cd_ref", "exponent"),
    initial=(0.5, 0.0),
    bounds=((0.0, 50.0), (-3.0, 3.0)),
    kernel=_power_law,
    callback_function=_power_law_callback,
    constants=("re_ref",),
    reference=(
        "Empirical local power law C_d = C_ref (Re/Re_ref)^n; n = -1 is Stokes drag "
        "(Stokes 1851), n = 0 a constant C_d."
    ),
    description="power law in the Reynolds number about the flight's median Re",
    constants_from_re=power_law_reference_re,
)

#: Every built-in law, in the order the registry lists them first.
BUILTIN_MODELS = (CONSTANT, *_SPHERE_MODELS.values(), POWER_LAW)
