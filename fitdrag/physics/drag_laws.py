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
    exponent.  n = 0 is a constant C_d; n = −1 is Stokes' linear drag [8].

Every correlation is a numba-compiled function returning C_sphere and its analytic
derivative dC_sphere/dRe, which the simulator's sensitivity equations need.

Validity.  A scaled smooth-sphere curve only makes sense below the drag crisis: near
Re ≈ 2–4·10⁵ the boundary layer of a smooth sphere turns turbulent and C_d drops several-fold
[9], at a Reynolds number that depends on surface roughness and free-stream turbulence, so
the specimen's curve is no longer a multiple of the smooth sphere's.  Each sphere-scaled model
therefore accepts flights only inside its correlation's stated range *and* below
:data:`SUBCRITICAL_RE_LIMIT` = 2·10⁵ (:meth:`~fitdrag.physics.drag_model.DragModel.check_re_range`
refuses the rest).  The power law is an empirical local description with no range of its
own.

Which Morrison form.  The correlation published in the 2013 textbook [1] (eq. 8.83) ends in
the term 0.25 (Re/10⁶) / (1 + Re/10⁶); an earlier 2010 handout by the same author [2] ends in
Re^0.80 / 461 000 instead.  ``"morrison"`` (the default) implements the 2013 textbook form;
``"morrison-2010"`` implements the handout form, which is the form the ``fluids`` library
evaluates for ``drag_sphere(Re, Method="Morrison")`` (fluids 1.3, although it cites the
2013 book).  The two differ by less than 0.004 in C_d below Re = 2·10⁵.  Which printed source
carries which last term is stated here from memory (the book was not at hand); fluids cites
the 2013 book for the Re^0.80 form, other public code credits the 0.25 form to a later
handout, so treat the attribution as unverified — the formulas themselves are checked.

References
----------
1. F. A. Morrison, *An Introduction to Fluid Mechanics*, Cambridge University Press, 2013,
   eq. (8.83).
2. F. A. Morrison, "Data Correlation for Drag Coefficient for Sphere", Department of
   Chemical Engineering, Michigan Technological University, Houghton, MI, 2010, eq. (1).
3. R. Clift and W. H. Gauvin, "The motion of particles in turbulent gas streams",
   Proc. Chemeca '70, vol. 1, 1970, pp. 14–28; also R. Clift, J. R. Grace, M. E. Weber,
   *Bubbles, Drops, and Particles*, Academic Press, 1978, Table 5.2.
4. A. Haider and O. Levenspiel, "Drag coefficient and terminal velocity of spherical and
   nonspherical particles", Powder Technology 58 (1989) 63–70, eq. (10) for a sphere.
5. A. R. Khan and J. F. Richardson, "The resistance to motion of a solid sphere in a
   fluid", Chem. Eng. Commun. 62 (1987) 135–150.
6. N.-S. Cheng, "Comparison of formulas for drag coefficient and settling velocity of
   spherical particles", Powder Technology 189 (2009) 395–398, eq. (12).
7. R. Barati, S. A. A. S. Neyshabouri, G. Ahmadi, "Development of empirical models with
   high accuracy for estimation of drag coefficient of flow around a smooth sphere: an
   evolutionary approach", Powder Technology 257 (2014) 11–19, eq. (22) and Table 1 (the
   stated validity ranges used here, Re ≤ 2·10⁵ for most correlations).
8. G. G. Stokes, "On the effect of the internal friction of fluids on the motion of
   pendulums", Trans. Cambridge Philos. Soc. 9 (1851) 8–106: C_d = 24/Re for Re ≪ 1.
9. E. Achenbach, "Experiments on the flow past spheres at very high Reynolds numbers",
   J. Fluid Mech. 54 (1972) 565–575 (the drag crisis of a smooth sphere).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numba
import numpy as np

from fitdrag.errors import InputError
from fitdrag.physics.drag_model import DragModel

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

#: Upper Reynolds number accepted by the scaled smooth-sphere models: the lower edge of the
#: smooth sphere's drag crisis [9] and the upper limit stated for most correlations [7]. [-]
SUBCRITICAL_RE_LIMIT = 2.0e5

# Reynolds numbers below this are evaluated at this value (a flight passing through zero
# air speed); the drag force ∝ Re² C_d stays finite and tends to zero there. [-]
_RE_FLOOR = 1e-12

# --------------------------------------------------------------------------- constant


@numba.njit(cache=True)
def _cd_constant(re, p, grad):
    grad[0] = 1.0
    return p[0], 0.0


CONSTANT = DragModel(
    name="constant",
    parameters=("cd",),
    initial=(0.5,),
    bounds=((0.0, 50.0),),
    kernel=_cd_constant,
    reference="quadratic drag with a constant coefficient, F = ½ ρ C_d A |u|² "
    "(Munson et al., Fundamentals of Fluid Mechanics, Wiley)",
    description="constant drag coefficient",
)

# --------------------------------------------------------------------------- correlations
# Each returns (C_sphere(Re), dC_sphere/dRe) for Re > 0.


@numba.njit(cache=True)
def _morrison_2013(re):
    # [1] eq. 8.83: 24/Re + 2.6 a/(1 + a^1.52) + 0.411 b^-7.94/(1 + b^-8) + 0.25 c/(1 + c),
    # a = Re/5, b = Re/263000, c = Re/1e6.  The third term is evaluated as
    # 0.411 b^0.06/(1 + b^8) (numerator and denominator times b^8) to avoid overflow.
    a = re / 5.0
    a152 = a**1.52
    t2 = 2.6 * a / (1.0 + a152)
    d2 = 2.6 * (1.0 - 0.52 * a152) / (1.0 + a152) ** 2 / 5.0
    b = re / 263000.0
    b8 = b**8
    t3 = 0.411 * b**0.06 / (1.0 + b8)
    d3 = 0.411 * b**-0.94 * (0.06 - 7.94 * b8) / (1.0 + b8) ** 2 / 263000.0
    c = re / 1.0e6
    t4 = 0.25 * c / (1.0 + c)
    d4 = 0.25 / (1.0 + c) ** 2 / 1.0e6
    return 24.0 / re + t2 + t3 + t4, -24.0 / (re * re) + d2 + d3 + d4


@numba.njit(cache=True)
def _morrison_2010(re):
    # [2] eq. 1: as the 2013 form but with the last term Re^0.80 / 461000.
    cd, dcd = _morrison_2013(re)
    c = re / 1.0e6
    cd += re**0.8 / 461000.0 - 0.25 * c / (1.0 + c)
    dcd += 0.8 * re**-0.2 / 461000.0 - 0.25 / (1.0 + c) ** 2 / 1.0e6
    return cd, dcd


@numba.njit(cache=True)
def _clift_gauvin(re):
    # [3]: 24/Re (1 + 0.152 Re^0.677) + 0.417/(1 + 5070 Re^-0.94)
    x = re**0.94
    cd = 24.0 / re + 24.0 * 0.152 * re**-0.323 + 0.417 * x / (x + 5070.0)
    dcd = (
        -24.0 / (re * re)
        - 24.0 * 0.152 * 0.323 * re**-1.323
        + 0.417 * 5070.0 * 0.94 * re**-0.06 / (x + 5070.0) ** 2
    )
    return cd, dcd


@numba.njit(cache=True)
def _haider_levenspiel(re):
    # [4] eq. 10 (sphere): 24/Re (1 + 0.1806 Re^0.6459) + 0.4251/(1 + 6880.95/Re)
    cd = 24.0 / re + 24.0 * 0.1806 * re**-0.3541 + 0.4251 * re / (re + 6880.95)
    dcd = (
        -24.0 / (re * re)
        - 24.0 * 0.1806 * 0.3541 * re**-1.3541
        + 0.4251 * 6880.95 / (re + 6880.95) ** 2
    )
    return cd, dcd


@numba.njit(cache=True)
def _khan_richardson(re):
    # [5]: (2.49 Re^-0.328 + 0.34 Re^0.067)^3.18.  Below Re ≈ 0.01 it tends to
    # 18.2 Re^-1.043 instead of Stokes' 24/Re, hence the lower limit 0.01 set below.
    g = 2.49 * re**-0.328 + 0.34 * re**0.067
    dg = -2.49 * 0.328 * re**-1.328 + 0.34 * 0.067 * re**-0.933
    return g**3.18, 3.18 * g**2.18 * dg


@numba.njit(cache=True)
def _cheng(re):
    # [6] eq. 12: 24/Re (1 + 0.27 Re)^0.43 + 0.47 (1 - exp(-0.04 Re^0.38))
    s = 1.0 + 0.27 * re
    e = math.exp(-0.04 * re**0.38)
    cd = 24.0 / re * s**0.43 + 0.47 * (1.0 - e)
    dcd = (
        -24.0 / (re * re) * s**0.43
        + 24.0 / re * 0.43 * 0.27 * s**-0.57
        + 0.47 * e * 0.04 * 0.38 * re**-0.62
    )
    return cd, dcd


@numba.njit(cache=True)
def _tanh_term(a, k, re):
    # a tanh(k/Re) and its derivative −a k/Re² (1 − tanh²)
    th = math.tanh(k / re)
    return a * th, -a * k / (re * re) * (1.0 - th * th)


@numba.njit(cache=True)
def _barati(re):
    # [7] eq. 22 (Re ≤ 2e5)
    cd = 0.4744
    dcd = 0.0
    v, d = _tanh_term(5.4856e9, 4.3774e-9, re)
    cd += v
    dcd += d
    v, d = _tanh_term(0.0709, 700.6574, re)
    cd += v
    dcd += d
    v, d = _tanh_term(0.3894, 74.1539, re)
    cd += v
    dcd += d
    v, d = _tanh_term(-0.1198, 7429.0843, re)
    cd += v
    dcd += d
    th = math.tanh(9.9851 / (re + 2.3384))
    cd += 1.7174 * th
    dcd += -1.7174 * 9.9851 / (re + 2.3384) ** 2 * (1.0 - th * th)
    return cd, dcd


# ------------------------------------------------------- scaled-sphere kernels (one each)
# kernel(re, p, grad) -> (cd, dcd_dre) with p = (scale,), grad[0] = ∂cd/∂scale.


@numba.njit(cache=True)
def _scaled_morrison_2013(re, p, grad):
    c, dc = _morrison_2013(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


@numba.njit(cache=True)
def _scaled_morrison_2010(re, p, grad):
    c, dc = _morrison_2010(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


@numba.njit(cache=True)
def _scaled_clift_gauvin(re, p, grad):
    c, dc = _clift_gauvin(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


@numba.njit(cache=True)
def _scaled_haider_levenspiel(re, p, grad):
    c, dc = _haider_levenspiel(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


@numba.njit(cache=True)
def _scaled_khan_richardson(re, p, grad):
    c, dc = _khan_richardson(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


@numba.njit(cache=True)
def _scaled_cheng(re, p, grad):
    c, dc = _cheng(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


@numba.njit(cache=True)
def _scaled_barati(re, p, grad):
    c, dc = _barati(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


@dataclass(frozen=True)
class SphereCorrelation:
    """A published smooth-sphere drag curve C_sphere(Re).

    Parameters
    ----------
    name : str
        Our name for it (``"morrison"``, ``"clift-gauvin"``, ...).
    fluids_method : str
        The ``Method`` name of ``fluids.drag.drag_sphere`` that evaluates the same formula.
    stated_range : (float, float)
        Reynolds-number range of the correlation: the upper limits as tabulated in [7] and
        in the ``fluids`` library; lower limit 0 (all tend to Stokes' 24/Re [8]) except
        Khan–Richardson, limited here to Re ≥ 0.01 where it departs from 24/Re. [-]
    reference : str
        Published source and equation.
    function : numba dispatcher
        ``function(re) -> (C_sphere, dC_sphere/dRe)`` for re > 0.
    kernel : numba dispatcher
        The scaled drag-model kernel ``kernel(re, p, grad)``, p = (scale,).
    """

    name: str
    fluids_method: str
    stated_range: tuple[float, float]
    reference: str
    function: Callable = field(repr=False)
    kernel: Callable = field(repr=False)

    @property
    def model_range(self) -> tuple[float, float]:
        """Range accepted by the scaled model: the stated range, capped below the drag crisis."""
        lo, hi = self.stated_range
        return (lo, min(hi, SUBCRITICAL_RE_LIMIT))


_CORRELATIONS = (
    SphereCorrelation(
        "morrison", "Morrison", (0.0, 1.0e6),
        "F. A. Morrison, An Introduction to Fluid Mechanics, Cambridge University Press, "
        "2013, eq. (8.83)",
        _morrison_2013, _scaled_morrison_2013,
    ),
    SphereCorrelation(
        "morrison-2010", "Morrison", (0.0, 1.0e6),
        "F. A. Morrison, 'Data Correlation for Drag Coefficient for Sphere', Michigan "
        "Technological University, 2010, eq. (1)",
        _morrison_2010, _scaled_morrison_2010,
    ),
    SphereCorrelation(
        "clift-gauvin", "Clift_Gauvin", (0.0, 2.0e5),
        "R. Clift and W. H. Gauvin, Proc. Chemeca '70, 1 (1970) 14-28",
        _clift_gauvin, _scaled_clift_gauvin,
    ),
    SphereCorrelation(
        "haider-levenspiel", "Haider_Levenspiel", (0.0, 2.0e5),
        "A. Haider and O. Levenspiel, Powder Technology 58 (1989) 63-70, eq. (10)",
        _haider_levenspiel, _scaled_haider_levenspiel,
    ),
    SphereCorrelation(
        "khan-richardson", "Khan_Richardson", (0.01, 2.0e5),
        "A. R. Khan and J. F. Richardson, Chem. Eng. Commun. 62 (1987) 135-150",
        _khan_richardson, _scaled_khan_richardson,
    ),
    SphereCorrelation(
        "cheng", "Cheng", (0.0, 2.0e5),
        "N.-S. Cheng, Powder Technology 189 (2009) 395-398, eq. (12)",
        _cheng, _scaled_cheng,
    ),
    SphereCorrelation(
        "barati", "Barati", (0.0, 2.0e5),
        "R. Barati, S. A. A. S. Neyshabouri, G. Ahmadi, Powder Technology 257 (2014) 11-19, "
        "eq. (22)",
        _barati, _scaled_barati,
    ),
)  # fmt: skip

#: Published smooth-sphere correlations by name (read-only).
SPHERE_CORRELATIONS: Mapping[str, SphereCorrelation] = MappingProxyType(
    {c.name: c for c in _CORRELATIONS}
)

DEFAULT_CORRELATION = "morrison"


def sphere_correlation_names() -> list[str]:
    """Names of the available smooth-sphere correlations (default first)."""
    return [c.name for c in _CORRELATIONS]


def _correlation(name: str) -> SphereCorrelation:
    try:
        return SPHERE_CORRELATIONS[name]
    except (KeyError, TypeError):
        raise InputError(
            f"correlation: unknown sphere drag correlation {name!r}; valid names: "
            f"{', '.join(sphere_correlation_names())}."
        ) from None


def sphere_drag_coefficient(re, correlation: str = DEFAULT_CORRELATION, *,
                            derivative: bool = False):  # fmt: skip
    """Drag coefficient of a smooth sphere from a published correlation [1–7].

    Parameters
    ----------
    re : float or array_like
        Reynolds number ρ |u| d / μ, > 0. [-]
    correlation : str
        Correlation name (see :func:`sphere_correlation_names`); default Morrison 2013 [1].
    derivative : bool
        Also return dC_d/dRe.

    Returns
    -------
    ndarray, or (ndarray, ndarray) with ``derivative``
        C_d [-] (and dC_d/dRe [-]), with the shape of ``re``.
    """
    c = _correlation(correlation)
    r = np.asarray(re, dtype=float)
    if not np.all(np.isfinite(r)) or np.any(r <= 0):
        bad = float(r[~(np.isfinite(r) & (r > 0))].ravel()[0])
        raise InputError(
            f"re: Reynolds numbers must be finite and > 0, got {bad!r}; pass ρ|u|d/μ of the "
            f"specimen."
        )
    out = np.array([c.function(float(v)) for v in r.ravel()]).reshape(r.shape + (2,))
    if derivative:
        return out[..., 0], out[..., 1]
    return out[..., 0]


def _sphere_models() -> dict[str, DragModel]:
    """The scaled smooth-sphere laws by registry name; ``"sphere-scaled"`` is the default."""
    models = {}
    for c in _CORRELATIONS:
        model = DragModel(
            name=f"sphere-scaled:{c.name}",
            parameters=("scale",),
            initial=(1.0,),
            bounds=((0.0, 50.0),),
            kernel=c.kernel,
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
    return _SPHERE_MODELS[f"sphere-scaled:{_correlation(correlation).name}"]


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
