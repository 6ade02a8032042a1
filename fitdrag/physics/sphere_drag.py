"""Published drag curves of a smooth sphere, C_sphere(Re): one public function each.

Each correlation is a public function ``f(re) -> C_d`` (a float for a number, an array for an
array) with its formula, its range of validity and its source, and a numba-compiled kernel
returning C_d and its analytic derivative dC_d/dRe, which the simulator's sensitivity
equations need.  :data:`SPHERE_CORRELATIONS` lists them by name (:class:`SphereCorrelation`),
:func:`sphere_drag_coefficient` evaluates one by name, and :func:`correlations_for_flight`
says which are valid over a flight's Reynolds numbers (and why the others are not) — the
spread among those is the uncertainty of choosing one (the budget's drag-law line).

Names follow the true source of each formula.  Two forms go by the name Clift–Gauvin:

* ``"clift-gauvin"`` — 24/Re (1 + 0.15 Re^0.687) + 0.42/(1 + 4.25·10⁴ Re^−1.16), the form
  of Clift and Gauvin (1970) as printed in Clift, Grace and Weber (1978) [3, 4], valid up to
  Re ≈ 3·10⁵;
* ``"clift-gauvin-barati"`` — 24/Re (1 + 0.152 Re^0.677) + 0.417/(1 + 5070 Re^−0.94): the
  coefficients under Clift and Gauvin's name in the comparison of correlations of Barati
  et al. (2014) [7] (the form the ``fluids`` library evaluates as ``"Clift_Gauvin"``, citing
  that comparison).  They are not those of [4]; their origin was not traced further, so the
  variant is named after the listing that carries it.  The two differ by up to 5.5 % of C_d
  at Re 10³–10⁵ (most near Re = 4.6·10⁴).

Which Morrison form: the correlation published in the 2013 textbook [1] (eq. 8.83) ends in
the term 0.25 (Re/10⁶)/(1 + Re/10⁶); the 2010 handout by the same author [2] ends in
Re^0.80/461 000 (a scan of the handout shows that term).  ``"morrison"`` (the default)
implements the 2013 form, ``"morrison-2010"`` the handout's; they differ by less than 0.004
in C_d below Re = 2·10⁵.  That the textbook carries the 0.25 term is from memory (the book
was not at hand).

Validity.  A smooth sphere's C_d drops several-fold in the drag crisis near Re ≈ 2–4·10⁵ [9]
at a Reynolds number that depends on roughness and free-stream turbulence; most correlations
are stated up to Re = 2·10⁵ [7], and :data:`SUBCRITICAL_RE_LIMIT` caps every one there.

References
----------
1. F. A. Morrison, *An Introduction to Fluid Mechanics*, Cambridge University Press, 2013,
   eq. (8.83).
2. F. A. Morrison, "Data Correlation for Drag Coefficient for Sphere", Department of
   Chemical Engineering, Michigan Technological University, Houghton, MI, 2010, eq. (1).
3. R. Clift and W. H. Gauvin, "The motion of particles in turbulent gas streams",
   Proc. Chemeca '70, vol. 1, 1970, pp. 14–28.
4. R. Clift, J. R. Grace, M. E. Weber, *Bubbles, Drops, and Particles*, Academic Press,
   1978, ch. 5: the Clift–Gauvin equation with 0.15 Re^0.687 and 0.42/(1 + 4.25·10⁴ Re^−1.16),
   Re < 3·10⁵ (the equation number, (5-58), is from memory).
5. A. Haider and O. Levenspiel, "Drag coefficient and terminal velocity of spherical and
   nonspherical particles", Powder Technology 58 (1989) 63–70, eq. (10) for a sphere.
6. A. R. Khan and J. F. Richardson, "The resistance to motion of a solid sphere in a
   fluid", Chem. Eng. Commun. 62 (1987) 135–150; N.-S. Cheng, "Comparison of formulas for
   drag coefficient and settling velocity of spherical particles", Powder Technology 189
   (2009) 395–398, eq. (12).
7. R. Barati, S. A. A. S. Neyshabouri, G. Ahmadi, "Development of empirical models with
   high accuracy for estimation of drag coefficient of flow around a smooth sphere: an
   evolutionary approach", Powder Technology 257 (2014) 11–19: eq. (22) (their own model)
   and their table of earlier correlations with stated ranges (Re ≤ 2·10⁵ for most).
8. G. G. Stokes, "On the effect of the internal friction of fluids on the motion of
   pendulums", Trans. Cambridge Philos. Soc. 9 (1851) 8–106: C_d = 24/Re for Re ≪ 1.
9. E. Achenbach, "Experiments on the flow past spheres at very high Reynolds numbers",
   J. Fluid Mech. 54 (1972) 565–575 (the drag crisis of a smooth sphere).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numba
import numpy as np

from fitdrag.errors import InputError

__all__ = [
    "DEFAULT_CORRELATION",
    "SPHERE_CORRELATIONS",
    "SUBCRITICAL_RE_LIMIT",
    "SphereCorrelation",
    "barati",
    "cheng",
    "clift_gauvin",
    "clift_gauvin_barati",
    "correlations_for_flight",
    "get_correlation",
    "haider_levenspiel",
    "khan_richardson",
    "morrison_2010",
    "morrison_2013",
    "sphere_correlation_names",
    "sphere_drag_coefficient",
]

#: Upper Reynolds number accepted by the scaled smooth-sphere models: the lower edge of the
#: smooth sphere's drag crisis [9] and the upper limit stated for most correlations [7]. [-]
SUBCRITICAL_RE_LIMIT = 2.0e5

# Reynolds numbers below this are evaluated at this value (a flight passing through zero
# air speed); the drag force ∝ Re² C_d stays finite and tends to zero there. [-]
_RE_FLOOR = 1e-12

# --------------------------------------------------------------------------- kernels
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
    # [4]: 24/Re (1 + 0.15 Re^0.687) + 0.42/(1 + 4.25e4 Re^-1.16); the last term written as
    # 0.42 x/(x + 4.25e4), x = Re^1.16
    x = re**1.16
    cd = 24.0 / re + 24.0 * 0.15 * re**-0.313 + 0.42 * x / (x + 4.25e4)
    dcd = (
        -24.0 / (re * re)
        - 24.0 * 0.15 * 0.313 * re**-1.313
        + 0.42 * 4.25e4 * 1.16 * re**0.16 / (x + 4.25e4) ** 2
    )
    return cd, dcd


@numba.njit(cache=True)
def _clift_gauvin_barati(re):
    # [7]'s listing: 24/Re (1 + 0.152 Re^0.677) + 0.417/(1 + 5070 Re^-0.94)
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
    # [5] eq. 10 (sphere): 24/Re (1 + 0.1806 Re^0.6459) + 0.4251/(1 + 6880.95/Re)
    cd = 24.0 / re + 24.0 * 0.1806 * re**-0.3541 + 0.4251 * re / (re + 6880.95)
    dcd = (
        -24.0 / (re * re)
        - 24.0 * 0.1806 * 0.3541 * re**-1.3541
        + 0.4251 * 6880.95 / (re + 6880.95) ** 2
    )
    return cd, dcd


@numba.njit(cache=True)
def _khan_richardson(re):
    # [6]: (2.49 Re^-0.328 + 0.34 Re^0.067)^3.18.  Below Re ≈ 0.01 it tends to
    # 18.2 Re^-1.043 instead of Stokes' 24/Re, hence the lower limit 0.01 set below.
    g = 2.49 * re**-0.328 + 0.34 * re**0.067
    dg = -2.49 * 0.328 * re**-1.328 + 0.34 * 0.067 * re**-0.933
    return g**3.18, 3.18 * g**2.18 * dg


@numba.njit(cache=True)
def _cheng(re):
    # [6] Cheng eq. 12: 24/Re (1 + 0.27 Re)^0.43 + 0.47 (1 - exp(-0.04 Re^0.38))
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
# kernel(re, p, grad) -> (cd, dcd_dre) with p = (scale,), grad[0] = ∂cd/∂scale; each
# followed by its plain callback function (re, p, grad, dcd_dre) -> cd, which
# fitdrag.physics.drag_model.DragModel compiles as the law's C callback with numba's disk
# cache (top-level functions in this file, so that an edit here invalidates both).


@numba.njit(cache=True)
def _scaled_morrison_2013(re, p, grad):
    c, dc = _morrison_2013(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_morrison_2013_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_morrison_2013(re, p, grad)
    dcd_dre[0] = d
    return cd


@numba.njit(cache=True)
def _scaled_morrison_2010(re, p, grad):
    c, dc = _morrison_2010(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_morrison_2010_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_morrison_2010(re, p, grad)
    dcd_dre[0] = d
    return cd


@numba.njit(cache=True)
def _scaled_clift_gauvin(re, p, grad):
    c, dc = _clift_gauvin(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_clift_gauvin_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_clift_gauvin(re, p, grad)
    dcd_dre[0] = d
    return cd


@numba.njit(cache=True)
def _scaled_clift_gauvin_barati(re, p, grad):
    c, dc = _clift_gauvin_barati(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_clift_gauvin_barati_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_clift_gauvin_barati(re, p, grad)
    dcd_dre[0] = d
    return cd


@numba.njit(cache=True)
def _scaled_haider_levenspiel(re, p, grad):
    c, dc = _haider_levenspiel(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_haider_levenspiel_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_haider_levenspiel(re, p, grad)
    dcd_dre[0] = d
    return cd


@numba.njit(cache=True)
def _scaled_khan_richardson(re, p, grad):
    c, dc = _khan_richardson(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_khan_richardson_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_khan_richardson(re, p, grad)
    dcd_dre[0] = d
    return cd


@numba.njit(cache=True)
def _scaled_cheng(re, p, grad):
    c, dc = _cheng(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_cheng_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_cheng(re, p, grad)
    dcd_dre[0] = d
    return cd


@numba.njit(cache=True)
def _scaled_barati(re, p, grad):
    c, dc = _barati(max(re, _RE_FLOOR))
    grad[0] = c
    return p[0] * c, p[0] * dc


def _scaled_barati_callback(re, p, grad, dcd_dre):
    cd, d = _scaled_barati(re, p, grad)
    dcd_dre[0] = d
    return cd


# --------------------------------------------------------------------------- public faces


def _checked_re(re) -> np.ndarray:
    r = np.asarray(re, dtype=float)
    if not np.all(np.isfinite(r)) or np.any(r <= 0):
        bad = float(r[~(np.isfinite(r) & (r > 0))].ravel()[0])
        raise InputError(
            f"re: Reynolds numbers must be finite and > 0, got {bad!r}; pass ρ|u|d/μ of the "
            f"specimen."
        )
    return r


def _evaluate(kernel, re, derivative: bool = False):
    """C_d (and dC_d/dRe) of a kernel at ``re``: a float for a number, else an array."""
    r = _checked_re(re)
    out = np.array([kernel(float(v)) for v in r.ravel()]).reshape(r.shape + (2,))
    cd, dcd = out[..., 0], out[..., 1]
    if r.ndim == 0:
        cd, dcd = float(cd), float(dcd)
    return (cd, dcd) if derivative else cd


def morrison_2013(re):
    """Smooth-sphere drag coefficient of Morrison's textbook correlation [1] (the default).

    C_d = 24/Re + 2.6 (Re/5) / (1 + (Re/5)^1.52)
          + 0.411 (Re/263 000)^−7.94 / (1 + (Re/263 000)^−8) + 0.25 (Re/10⁶) / (1 + Re/10⁶)

    Valid 0 < Re ≤ 10⁶ as stated (fitdrag's scaled models stop at 2·10⁵, below the drag
    crisis).  Source: Morrison, *An Introduction to Fluid Mechanics*, CUP 2013, eq. (8.83).

    Parameters
    ----------
    re : float or array_like
        Reynolds number ρ |u| d / μ, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(morrison_2013(1e4), 4)
    0.3926
    """
    return _evaluate(_morrison_2013, re)


def morrison_2010(re):
    """Smooth-sphere drag coefficient of Morrison's 2010 handout [2].

    C_d = 24/Re + 2.6 (Re/5) / (1 + (Re/5)^1.52)
          + 0.411 (Re/263 000)^−7.94 / (1 + (Re/263 000)^−8) + Re^0.80 / 461 000

    Valid 0 < Re ≤ 10⁶ as stated.  Source: Morrison, "Data Correlation for Drag Coefficient
    for Sphere", Michigan Technological University, 2010, eq. (1).

    Parameters
    ----------
    re : float or array_like
        Reynolds number, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(morrison_2010(1e4), 4)
    0.3936
    """
    return _evaluate(_morrison_2010, re)


def clift_gauvin(re):
    """Smooth-sphere drag coefficient of Clift and Gauvin (1970) as printed in Clift, Grace
    and Weber (1978) [3, 4].

    C_d = 24/Re (1 + 0.15 Re^0.687) + 0.42 / (1 + 4.25·10⁴ Re^−1.16)

    Valid Re < 3·10⁵ as stated in [4] (fitdrag's scaled models stop at 2·10⁵).

    Parameters
    ----------
    re : float or array_like
        Reynolds number, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(clift_gauvin(1e4), 4)
    0.4167
    """
    return _evaluate(_clift_gauvin, re)


def clift_gauvin_barati(re):
    """The Clift–Gauvin form with the coefficients listed by Barati et al. (2014) [7].

    C_d = 24/Re (1 + 0.152 Re^0.677) + 0.417 / (1 + 5070 Re^−0.94)

    Valid Re ≤ 2·10⁵ as listed there.  These coefficients differ from those printed in
    Clift, Grace and Weber (1978) (:func:`clift_gauvin`); the ``fluids`` library evaluates
    this listing as ``drag_sphere(Re, Method="Clift_Gauvin")``.

    Parameters
    ----------
    re : float or array_like
        Reynolds number, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(clift_gauvin_barati(1e4), 4)
    0.4103
    """
    return _evaluate(_clift_gauvin_barati, re)


def haider_levenspiel(re):
    """Smooth-sphere drag coefficient of Haider and Levenspiel (1989) [5].

    C_d = 24/Re (1 + 0.1806 Re^0.6459) + 0.4251 / (1 + 6880.95/Re)

    Valid Re ≤ 2·10⁵ (as listed in [7]).  Source: Powder Technology 58 (1989) 63–70,
    eq. (10), the sphericity-1 case of their general formula.

    Parameters
    ----------
    re : float or array_like
        Reynolds number, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(haider_levenspiel(1e4), 4)
    0.4204
    """
    return _evaluate(_haider_levenspiel, re)


def khan_richardson(re):
    """Smooth-sphere drag coefficient of Khan and Richardson (1987) [6].

    C_d = (2.49 Re^−0.328 + 0.34 Re^0.067)^3.18

    Valid 0.01 ≤ Re ≤ 2·10⁵ here: the upper limit as listed in [7]; below Re ≈ 0.01 the
    formula tends to 18.2 Re^−1.043 rather than Stokes' 24/Re [8], so it is not used there.
    Source: Chem. Eng. Commun. 62 (1987) 135–150.

    Parameters
    ----------
    re : float or array_like
        Reynolds number, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(khan_richardson(1e4), 4)
    0.4033
    """
    return _evaluate(_khan_richardson, re)


def cheng(re):
    """Smooth-sphere drag coefficient of Cheng (2009) [6].

    C_d = 24/Re (1 + 0.27 Re)^0.43 + 0.47 (1 − exp(−0.04 Re^0.38))

    Valid Re ≤ 2·10⁵ (as listed in [7]).  Source: Powder Technology 189 (2009) 395–398,
    eq. (12).

    Parameters
    ----------
    re : float or array_like
        Reynolds number, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(cheng(1e4), 4)
    0.4168
    """
    return _evaluate(_cheng, re)


def barati(re):
    """Smooth-sphere drag coefficient of Barati et al. (2014) [7], their eq. (22).

    C_d = 5.4856·10⁹ tanh(4.3774·10⁻⁹/Re) + 0.0709 tanh(700.6574/Re)
          + 0.3894 tanh(74.1539/Re) − 0.1198 tanh(7429.0843/Re)
          + 1.7174 tanh(9.9851/(Re + 2.3384)) + 0.4744

    Valid Re ≤ 2·10⁵ as stated.  Source: Powder Technology 257 (2014) 11–19, eq. (22).

    Parameters
    ----------
    re : float or array_like
        Reynolds number, > 0. [-]

    Returns
    -------
    float or ndarray
        C_d. [-]

    Examples
    --------
    >>> round(barati(1e4), 4)
    0.4108
    """
    return _evaluate(_barati, re)


# --------------------------------------------------------------------------- the table


@dataclass(frozen=True)
class SphereCorrelation:
    """A published smooth-sphere drag curve C_sphere(Re).

    Parameters
    ----------
    name : str
        Our name for it, after its source (``"morrison"``, ``"clift-gauvin"``, ...).
    stated_range : (float, float)
        Reynolds-number range of the correlation as its source (or the listing of [7])
        states it; lower limit 0 (all tend to Stokes' 24/Re [8]) except Khan–Richardson,
        limited here to Re ≥ 0.01 where it departs from 24/Re. [-]
    reference : str
        Published source and equation.
    formula : str
        The formula, in words and symbols.
    public : callable
        The public function ``f(re) -> C_d``.
    function : numba dispatcher
        ``function(re) -> (C_sphere, dC_sphere/dRe)`` for re > 0.
    kernel : numba dispatcher
        The scaled drag-model kernel ``kernel(re, p, grad)``, p = (scale,).
    callback_function : function
        The plain function ``(re, p, grad, dcd_dre) -> cd`` calling ``kernel``, compiled as
        the scaled model's C callback (see
        :attr:`fitdrag.physics.drag_model.DragModel.callback_function`).
    fluids_method : str or None
        The ``Method`` name of ``fluids.drag.drag_sphere`` that evaluates the same formula
        (None when that library has none).
    """

    name: str
    stated_range: tuple[float, float]
    reference: str
    formula: str
    public: Callable = field(repr=False)
    function: Callable = field(repr=False)
    kernel: Callable = field(repr=False)
    callback_function: Callable = field(repr=False)
    fluids_method: str | None = None

    @property
    def model_range(self) -> tuple[float, float]:
        """Range accepted by the scaled model: the stated range, capped below the drag crisis."""
        lo, hi = self.stated_range
        return (lo, min(hi, SUBCRITICAL_RE_LIMIT))


_CORRELATIONS = (
    SphereCorrelation(
        "morrison", (0.0, 1.0e6),
        "F. A. Morrison, An Introduction to Fluid Mechanics, Cambridge University Press, "
        "2013, eq. (8.83)",
        "24/Re + 2.6 (Re/5)/(1 + (Re/5)^1.52) + 0.411 (Re/263000)^-7.94/(1 + "
        "(Re/263000)^-8) + 0.25 (Re/1e6)/(1 + Re/1e6)",
        morrison_2013, _morrison_2013, _scaled_morrison_2013, _scaled_morrison_2013_callback, None,
    ),
    SphereCorrelation(
        "morrison-2010", (0.0, 1.0e6),
        "F. A. Morrison, 'Data Correlation for Drag Coefficient for Sphere', Michigan "
        "Technological University, 2010, eq. (1)",
        "24/Re + 2.6 (Re/5)/(1 + (Re/5)^1.52) + 0.411 (Re/263000)^-7.94/(1 + "
        "(Re/263000)^-8) + Re^0.80/461000",
        morrison_2010, _morrison_2010, _scaled_morrison_2010, _scaled_morrison_2010_callback, "Morrison",
    ),
    SphereCorrelation(
        "clift-gauvin", (0.0, 3.0e5),
        "R. Clift and W. H. Gauvin, Proc. Chemeca '70, 1 (1970) 14-28, as printed in "
        "R. Clift, J. R. Grace, M. E. Weber, Bubbles, Drops, and Particles, Academic Press "
        "1978, ch. 5",
        "24/Re (1 + 0.15 Re^0.687) + 0.42/(1 + 4.25e4 Re^-1.16)",
        clift_gauvin, _clift_gauvin, _scaled_clift_gauvin, _scaled_clift_gauvin_callback, None,
    ),
    SphereCorrelation(
        "clift-gauvin-barati", (0.0, 2.0e5),
        "the Clift-Gauvin form with the coefficients listed by R. Barati et al., Powder "
        "Technology 257 (2014) 11-19 (not those of Clift, Grace and Weber 1978)",
        "24/Re (1 + 0.152 Re^0.677) + 0.417/(1 + 5070 Re^-0.94)",
        clift_gauvin_barati, _clift_gauvin_barati, _scaled_clift_gauvin_barati, _scaled_clift_gauvin_barati_callback, "Clift_Gauvin",
    ),
    SphereCorrelation(
        "haider-levenspiel", (0.0, 2.0e5),
        "A. Haider and O. Levenspiel, Powder Technology 58 (1989) 63-70, eq. (10)",
        "24/Re (1 + 0.1806 Re^0.6459) + 0.4251/(1 + 6880.95/Re)",
        haider_levenspiel, _haider_levenspiel, _scaled_haider_levenspiel, _scaled_haider_levenspiel_callback, "Haider_Levenspiel",
    ),
    SphereCorrelation(
        "khan-richardson", (0.01, 2.0e5),
        "A. R. Khan and J. F. Richardson, Chem. Eng. Commun. 62 (1987) 135-150",
        "(2.49 Re^-0.328 + 0.34 Re^0.067)^3.18",
        khan_richardson, _khan_richardson, _scaled_khan_richardson, _scaled_khan_richardson_callback, "Khan_Richardson",
    ),
    SphereCorrelation(
        "cheng", (0.0, 2.0e5),
        "N.-S. Cheng, Powder Technology 189 (2009) 395-398, eq. (12)",
        "24/Re (1 + 0.27 Re)^0.43 + 0.47 (1 - exp(-0.04 Re^0.38))",
        cheng, _cheng, _scaled_cheng, _scaled_cheng_callback, "Cheng",
    ),
    SphereCorrelation(
        "barati", (0.0, 2.0e5),
        "R. Barati, S. A. A. S. Neyshabouri, G. Ahmadi, Powder Technology 257 (2014) 11-19, "
        "eq. (22)",
        "sum of five tanh terms in Re plus 0.4744 (their eq. 22)",
        barati, _barati, _scaled_barati, _scaled_barati_callback, "Barati",
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


def get_correlation(name: str) -> SphereCorrelation:
    """The correlation of that name; an unknown name is an error listing the valid ones."""
    try:
        return SPHERE_CORRELATIONS[name]
    except (KeyError, TypeError):
        raise InputError(
            f"correlation: unknown sphere drag correlation {name!r}; valid names: "
            f"{', '.join(sphere_correlation_names())}."
        ) from None


def sphere_drag_coefficient(re, correlation: str = DEFAULT_CORRELATION, *,
                            derivative: bool = False):  # fmt: skip
    """Drag coefficient of a smooth sphere from a published correlation [1–7], by name.

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
    c = get_correlation(correlation)
    cd, dcd = _evaluate(c.function, re, derivative=True)
    cd, dcd = np.asarray(cd), np.asarray(dcd)
    return (cd, dcd) if derivative else cd


def correlations_for_flight(re_min: float, re_max: float
                            ) -> tuple[list[str], dict[str, str]]:  # fmt: skip
    """Which correlations hold over a flight's Reynolds numbers, and why the others do not.

    A correlation is used when the flight's range [re_min, re_max] lies inside its stated
    range capped below the drag crisis (:attr:`SphereCorrelation.model_range`).

    Parameters
    ----------
    re_min, re_max : float
        Smallest and largest Reynolds number of the flight. [-]

    Returns
    -------
    (list of str, dict of str to str)
        The names of the valid correlations (default first), and for each other one the
        reason it is left out.
    """
    if not (math.isfinite(re_min) and math.isfinite(re_max) and 0 < re_min <= re_max):
        raise InputError(
            f"re_min, re_max: expected 0 < re_min <= re_max, got {re_min!r}, {re_max!r}; "
            f"pass the flight's smallest and largest Reynolds number."
        )
    valid, excluded = [], {}
    for c in _CORRELATIONS:
        lo, hi = c.model_range
        if lo <= re_min and re_max <= hi:
            valid.append(c.name)
        else:
            excluded[c.name] = (
                f"the flight's Re {re_min:.3g}–{re_max:.3g} leaves its range of validity "
                f"Re {lo:.3g}–{hi:.3g}"
            )
    return valid, excluded
