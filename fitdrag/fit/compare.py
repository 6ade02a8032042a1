"""Model choice: which drag model (and whether a lift force) do the data support?

:func:`compare_models` fits a set of candidate models to the same throws and tabulates, for
each, the parameters with their standard uncertainties, the residual RMS, the reduced
chi-square, the log-likelihood, AIC and BIC, and for nested pairs an F-test; then it states
a recommendation in plain words.

So that the candidates are compared on equal terms:

1. the *most general* candidate (most shared parameters; the power law with lift when it
   is among them) is fitted first with the caller's robust and noise options; the frames
   it rejects are removed from every candidate, and its noise model (white or AR(1)) is
   used by all;
2. every candidate is then fitted to the same kept points without further rejection;
3. the log-likelihood is the Gaussian likelihood of each candidate's residuals with the
   noise level of each (throw, axis) profiled out and, for AR(1) noise, the
   Prais–Winsten transform's Jacobian included [3]; AIC = −2 ln L + 2k [1] and
   BIC = −2 ln L + k ln N [2], with k all fitted parameters (launch states, shared
   parameters, noise levels and AR(1) coefficients) and N the number of residuals;
4. nested pairs — constant ⊂ power law (exponent 0) and no lift ⊂ lift — get the
   extra-sum-of-squares F-test [4] on residuals weighted and whitened with the noise
   model of the fuller fit: F = ((RSS_r − RSS_f)/Δp) / (RSS_f/(N − p_f));
5. the recommendation starts from the simplest candidate and moves to a more complex one
   only if the F-test rejects the simpler one at level ``alpha`` (nested), or if the more
   complex one's AIC is lower by more than ``aic_margin`` (not nested; a difference above
   4 means "considerably less support" for the other [5]).

The reduced chi-square of every candidate is computed with the noise level of the most
general fit (or the track's own sigmas), so that a model that misses the data shows
χ²_ν > 1 instead of the ≈ 1 a fit with self-estimated noise always shows.

References
----------
1. H. Akaike, "A new look at the statistical model identification", IEEE Trans. Autom.
   Control 19 (1974) 716–723.
2. G. Schwarz, "Estimating the dimension of a model", Ann. Stat. 6 (1978) 461–464.
3. S. J. Prais and C. B. Winsten, "Trend estimators and serial correlation", Cowles
   Commission Discussion Paper 383 (1954); the exact AR(1) likelihood as in
   J. D. Hamilton, *Time Series Analysis*, Princeton University Press 1994, eq. (5.2.9).
4. G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989, §5.3 (the
   extra-sum-of-squares F-test for nested nonlinear models).
5. K. P. Burnham and D. R. Anderson, *Model Selection and Multimodel Inference*, 2nd ed.,
   Springer 2002, §2.6 (interpretation of AIC differences).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np
from scipy import stats

from fitdrag.errors import InputError
from fitdrag.fit.noise import frame_gaps, prais_winsten
from fitdrag.physics.air import STANDARD_GRAVITY, Air
from fitdrag.physics.registry import get_drag_model
from fitdrag.tracks.track import Track

__all__ = [
    "DEFAULT_CANDIDATES",
    "CandidateResult",
    "ModelComparison",
    "NestedTest",
    "compare_models",
    "drag_coefficient_at",
]

#: Drag models compared by default.
DEFAULT_CANDIDATES = ("constant", "sphere-scaled", "power-law")


# ----------------------------------------------------------------------------- helpers


def drag_coefficient_at(result, re) -> tuple[np.ndarray, np.ndarray]:
    """Drag coefficient of a fit at stated Reynolds numbers, with its standard uncertainty.

    The uncertainty propagates the covariance of the fitted drag parameters through the
    drag law to first order (JCGM 100:2008, eq. 13).

    Parameters
    ----------
    result : FitResult
        A fit from :func:`fitdrag.fit.fitting.fit_tracks`.
    re : float or array_like
        Reynolds numbers. [-]

    Returns
    -------
    (ndarray, ndarray)
        C_d [-] and its standard uncertainty [-] at each Reynolds number.
    """
    return result.cd_at(re)


def _label(model: str, lift: bool) -> str:
    return f"{model} + lift" if lift else model


def _kept_tracks(fit, tracks: Sequence[Track]) -> list[Track]:
    """The tracks without the frames the reference fit rejected (frame numbers kept)."""
    out = []
    for tr, th in zip(tracks, fit.throws):
        u = th.used
        if u.all():
            out.append(tr)
            continue
        out.append(
            Track(
                tr.t[u], tr.x[u], tr.y[u],
                None if tr.sigma is None else tr.sigma[u],
                tr.labels[u], dict(tr.meta),
            )
        )  # fmt: skip
    return out


def _whiten(e: np.ndarray, gaps: np.ndarray, phi: float) -> tuple[np.ndarray, float]:
    """Prais–Winsten transform of a unit-scale series and ln |det| of the transform [3]."""
    if phi == 0.0 or e.size < 2:
        return e, 0.0
    pd = phi**gaps
    return prais_winsten(e, gaps, phi), -0.5 * float(np.sum(np.log(1.0 - pd * pd)))


def _groups(fit, tracks: Sequence[Track]):
    """Whitened residual series per (throw, axis): list of (w, logdet, sum ln sigma_i)."""
    phi = (fit.noise["ar1_coefficient_x"], fit.noise["ar1_coefficient_y"])
    out = []
    for tr, th in zip(tracks, fit.throws):
        u = th.used
        gaps = frame_gaps(th.t, np.flatnonzero(u))
        sig = np.ones(int(u.sum())) if tr.sigma is None else tr.sigma[u]
        for axis, r in ((0, th.residual_x[u]), (1, th.residual_y[u])):
            w, logdet = _whiten(r / sig, gaps, phi[axis])
            out.append((w, logdet, float(np.sum(np.log(sig)))))
    return out


def _log_likelihood(fit, tracks) -> float:
    """Gaussian log-likelihood with each group's noise level profiled out [3]."""
    ll = 0.0
    for w, logdet, slog in _groups(fit, tracks):
        n = w.size
        c2 = max(float(np.dot(w, w)) / n, 1e-300)
        ll += -0.5 * n * (math.log(2.0 * math.pi * c2) + 1.0) + logdet - slog
    return ll


def _weighted_rss(fit, tracks, scales) -> float:
    """Σ (w / c_g)² with given per-group scales c_g (whitened, sigma-weighted residuals)."""
    return float(sum(np.dot(w, w) / c**2 for (w, _, _), c in zip(_groups(fit, tracks), scales)))


def _group_scales(fit, tracks, known_sigma: bool) -> list[float]:
    if known_sigma:
        return [1.0] * (2 * len(tracks))
    return [
        max(math.sqrt(float(np.dot(w, w)) / w.size), 1e-300) for w, _, _ in _groups(fit, tracks)
    ]


# ----------------------------------------------------------------------------- results


@dataclass(frozen=True, eq=False)
class CandidateResult:
    """One candidate model in a comparison.

    Attributes
    ----------
    label : str
        ``"<drag model>"`` or ``"<drag model> + lift"``.
    model : str
        Drag model name.
    lift : bool
        Whether a lift coefficient was fitted.
    applicable : bool
        False when the model was not fitted (e.g. a flight outside its Reynolds range).
    note : str
        Why it was not applicable, or the fit's message when it failed.
    fit : FitResult or None
        The fit on the common points.
    n_shared : int
        Number of shared (drag and lift) parameters.
    n_parameters : int
        All fitted parameters counted by AIC/BIC (launch states, shared, noise).
    n_residuals : int
        Number of residuals N (two per kept point).
    log_likelihood, aic, bic : float
        Gaussian log-likelihood and the information criteria [1, 2].
    delta_aic, delta_bic : float
        Differences from the lowest AIC and BIC among the candidates.
    reduced_chi_square : float
        χ² / (N − p) with the noise level of the most general fit. [-]
    residual_rms : float
        RMS of the residuals over both axes. [m]
    """

    label: str
    model: str
    lift: bool
    applicable: bool
    note: str = ""
    fit: object = field(default=None, repr=False)
    n_shared: int = 0
    n_parameters: int = 0
    n_residuals: int = 0
    log_likelihood: float = math.nan
    aic: float = math.nan
    bic: float = math.nan
    delta_aic: float = math.nan
    delta_bic: float = math.nan
    reduced_chi_square: float = math.nan
    residual_rms: float = math.nan

    @property
    def ok(self) -> bool:
        return self.applicable and self.fit is not None and bool(self.fit.success)

    def parameters(self) -> dict[str, tuple[float, float]]:
        """Shared parameters (drag, then lift) as name -> (value, standard uncertainty)."""
        if self.fit is None:
            return {}
        return {n: self.fit.parameter(n) for n in self.fit.shared_names}

    def to_dict(self) -> dict:
        d = {
            "label": self.label,
            "model": self.model,
            "lift": self.lift,
            "applicable": self.applicable,
            "success": self.ok,
            "note": self.note,
        }
        if self.fit is None:
            return d
        fit = self.fit
        dm = get_drag_model(fit.model)
        d["parameters"] = {
            n: {"value": _f(v), "standard_uncertainty": _f(u)}
            for n, (v, u) in self.parameters().items()
        }
        for n, c in zip(dm.constants, fit.constants):
            d["parameters"][n] = {"value": c, "standard_uncertainty": 0.0, "fixed": True}
        d["drag_coefficient"] = {
            "value": _f(fit.cd),
            "standard_uncertainty": _f(fit.u_cd),
            "at_reynolds_number": _f(fit.diagnostics["reynolds_median"]),
        }
        d.update(
            {
                "residual_rms": _f(self.residual_rms),
                "reduced_chi_square": _f(self.reduced_chi_square),
                "log_likelihood": _f(self.log_likelihood),
                "aic": _f(self.aic),
                "bic": _f(self.bic),
                "delta_aic": _f(self.delta_aic),
                "delta_bic": _f(self.delta_bic),
                "n_parameters": self.n_parameters,
                "n_residuals": self.n_residuals,
            }
        )
        return d


@dataclass(frozen=True)
class NestedTest:
    """Extra-sum-of-squares F-test of a simpler model nested in a fuller one [4].

    Attributes
    ----------
    simpler, fuller : str
        Candidate labels.
    f_statistic : float
    df1, df2 : int
        Numerator (extra parameters) and denominator (N − p_fuller) degrees of freedom.
    p_value : float
        Probability of an F at least this large if the simpler model were true.
    """

    simpler: str
    fuller: str
    f_statistic: float
    df1: int
    df2: int
    p_value: float

    def to_dict(self) -> dict:
        return {
            "simpler": self.simpler,
            "fuller": self.fuller,
            "f_statistic": _f(self.f_statistic),
            "df1": self.df1,
            "df2": self.df2,
            "p_value": _f(self.p_value),
        }


@dataclass(frozen=True, eq=False)
class ModelComparison:
    """Outcome of :func:`compare_models`.

    Attributes
    ----------
    candidates : tuple of CandidateResult
        In order of complexity (fewest shared parameters first).
    tests : tuple of NestedTest
    recommended : str or None
        Label of the recommended candidate.
    recommendation : str
        Plain-words statement of what the data support.
    reynolds_range : (float, float)
        Reynolds numbers spanned by the flights (from the most general fit). [-]
    reference : str
        Label of the most general candidate, which set the kept points and noise model.
    noise_model : str
        ``"white"`` or ``"ar1"``, used by every candidate.
    rejected : list
        Frames rejected by the reference fit (``"throw:frame"`` with several throws).
    alpha, aic_margin : float
        Decision settings.
    """

    candidates: tuple[CandidateResult, ...]
    tests: tuple[NestedTest, ...]
    recommended: str | None
    recommendation: str
    reynolds_range: tuple[float, float]
    reference: str
    noise_model: str
    rejected: list
    alpha: float
    aic_margin: float

    def candidate(self, label: str) -> CandidateResult:
        for c in self.candidates:
            if c.label == label:
                return c
        raise InputError(
            f"label: no candidate {label!r}; candidates: "
            f"{', '.join(c.label for c in self.candidates)}."
        )

    def test(self, simpler: str, fuller: str) -> NestedTest | None:
        for t in self.tests:
            if t.simpler == simpler and t.fuller == fuller:
                return t
        return None

    def table(self) -> str:
        """The comparison as a fixed-width text table."""
        pars = {
            c.label: ", ".join(f"{n} {_pm(v, u)}" for n, (v, u) in c.parameters().items())
            for c in self.candidates
            if c.ok
        }
        wl = max([len("model")] + [len(c.label) for c in self.candidates]) + 1
        wp = max([len("parameters ± u")] + [len(v) for v in pars.values()])
        head = (
            f" {'model':<{wl}} {'parameters ± u':<{wp}} {'RMS/mm':>7} {'chi2_nu':>8} "
            f"{'AIC':>10} {'dAIC':>7} {'BIC':>10} {'dBIC':>7}"
        )
        lines = [head, "-" * len(head)]
        for c in self.candidates:
            mark = "*" if c.label == self.recommended else " "
            if not c.ok:
                lines.append(f"{mark}{c.label:<{wl}} not fitted: {c.note}")
                continue
            lines.append(
                f"{mark}{c.label:<{wl}} {pars[c.label]:<{wp}} {1e3 * c.residual_rms:>7.3g} "
                f"{c.reduced_chi_square:>8.3f} {c.aic:>10.1f} {c.delta_aic:>7.1f} "
                f"{c.bic:>10.1f} {c.delta_bic:>7.1f}"
            )
        lines.append("(* recommended)")
        if self.tests:
            lines.append("")
            lines.append("nested F-tests (simpler model vs fuller model):")
            for t in self.tests:
                lines.append(
                    f"  {t.simpler} vs {t.fuller}: F({t.df1}, {t.df2}) = "
                    f"{t.f_statistic:.3g}, p = {t.p_value:.3g}"
                )
        return "\n".join(lines)

    def to_dict(self) -> dict:
        return {
            "recommended": self.recommended,
            "recommendation": self.recommendation,
            "candidates": [c.to_dict() for c in self.candidates],
            "nested_tests": [t.to_dict() for t in self.tests],
            "reynolds_number": {"min": self.reynolds_range[0], "max": self.reynolds_range[1]},
            "reference_fit": self.reference,
            "noise_model": self.noise_model,
            "points": {"rejected": list(self.rejected)},
            "criteria": {
                "alpha": self.alpha,
                "aic_margin": self.aic_margin,
                "rule": "start from the simplest candidate; move to a more complex one if "
                "the nested F-test rejects the simpler at level alpha, or (not nested) if "
                "its AIC is lower by more than aic_margin",
            },
        }


def _f(v):
    v = float(v)
    return v if math.isfinite(v) else None


def _pm(v: float, u: float) -> str:
    if not math.isfinite(u) or u <= 0:
        return f"{v:.4g}"
    digits = max(0, 1 - int(math.floor(math.log10(u))))
    return f"{v:.{digits}f} ± {u:.{digits}f}"


def _nests(fuller: CandidateResult, simpler: CandidateResult) -> bool:
    """True when ``simpler`` is ``fuller`` with one part switched off (exponent 0 or C_L 0)."""
    if fuller.n_shared <= simpler.n_shared or (simpler.lift and not fuller.lift):
        return False
    same_drag = fuller.model == simpler.model
    drag_nested = same_drag or (simpler.model == "constant" and fuller.model == "power-law")
    one_step = (same_drag and fuller.lift != simpler.lift) or (
        not same_drag and fuller.lift == simpler.lift
    )
    return drag_nested and one_step


def _nests_key(fuller, simpler, n_shared) -> bool:
    a = CandidateResult("", fuller[0], fuller[1], True, n_shared=n_shared[fuller])
    b = CandidateResult("", simpler[0], simpler[1], True, n_shared=n_shared[simpler])
    return _nests(a, b)


def _seed(fits: dict, target, n_shared) -> dict | None:
    """Starting values for ``target`` from an earlier candidate's fit on the same points.

    A fuller model starts where the simpler one it nests ended (exponent 0, C_L 0), so that
    it can only improve on it; others start at the same launch states and the same C_d at
    the median Reynolds number.  This guards against a fuller fit stopping in a poorer
    local optimum, which would make nested comparisons meaningless.
    """
    done = [k for k, f in fits.items() if f.success]
    if not done:
        return None
    nested = [k for k in done if _nests_key(target, k, n_shared)]
    if nested:
        src = max(nested, key=lambda k: n_shared[k])
    else:
        src = min(done, key=lambda k: fits[k].diagnostics["residual_rms"])
    fit = fits[src]
    init = {
        n: float(v)
        for n, v in zip(fit.parameter_names, fit.values)
        if n.rsplit("_", 1)[0] in ("x0", "y0", "vx0", "vy0") and n[-1].isdigit()
    }
    m, lf = target
    cd = float(fit.cd)
    if m == src[0]:
        for n in get_drag_model(m).parameters:
            init[n] = fit.parameter(n)[0]
    elif m == "constant":
        init["cd"] = cd
    elif m == "power-law":
        init["cd_ref"] = cd
        init["exponent"] = 0.0
    elif m.startswith("sphere-scaled"):
        dm = get_drag_model(m)
        c_sphere = dm.cd([fit.diagnostics["reynolds_median"]], [1.0])[0]
        init["scale"] = cd / c_sphere if c_sphere > 0 else 1.0
    if lf:
        init["lift_coefficient"] = fit.parameter("lift_coefficient")[0] if src[1] else 0.0
    return init


def _lift_options(lift) -> tuple[bool, ...]:
    if isinstance(lift, str):
        if lift == "both":
            return (False, True)
        raise InputError(f"lift: expected True, False or 'both', got {lift!r}.")
    return (bool(lift),)


# ----------------------------------------------------------------------------- front door


def compare_models(
    tracks: Track | Sequence[Track],
    specimen,
    air: Air,
    *,
    models: Sequence[str] = DEFAULT_CANDIDATES,
    lift: bool | str = False,
    gravity: float = STANDARD_GRAVITY,
    wind: float = 0.0,
    buoyancy: bool = True,
    robust: bool = True,
    noise: str = "auto",
    alpha: float = 0.01,
    aic_margin: float = 4.0,
) -> ModelComparison:
    """Fit candidate drag models (with or without lift) to the same throws and compare them.

    Parameters
    ----------
    tracks : Track or sequence of Track
        The throws (one specimen, one air).
    specimen : Sphere or Body
        The specimen.
    air : Air
        Air density [kg/m³] and viscosity [Pa s].
    models : sequence of str
        Drag model names to compare (default constant, sphere-scaled, power-law).
    lift : bool or "both"
        Fit without lift (False), with lift (True), or each model both ways ("both").
    gravity : float
        Acceleration of free fall. [m/s²]
    wind : float
        Known constant horizontal wind along +x. [m/s]
    buoyancy : bool
        Include buoyancy.
    robust : bool
        Robust fitting and outlier rejection in the reference fit.
    noise : {"auto", "white", "ar1"}
        Noise model option of the reference fit (its choice is then used by all).
    alpha : float
        Level of the nested F-tests (default 0.01).
    aic_margin : float
        AIC difference needed to prefer a more complex, not nested candidate (default 4).

    Returns
    -------
    ModelComparison
    """
    from fitdrag.fit.fitting import fit_tracks

    if isinstance(tracks, Track):
        tracks = [tracks]
    tracks = list(tracks)
    models = [get_drag_model(m).name for m in models]
    if not models:
        raise InputError("models: no candidate model given; e.g. models=('constant', 'power-law').")
    if len(set(models)) != len(models):
        raise InputError(f"models: names repeat in {models!r}; give each candidate once.")
    if not (0.0 < alpha < 1.0):
        raise InputError(f"alpha: must be between 0 and 1, got {alpha!r}; 0.01 is usual.")
    if not (math.isfinite(aic_margin) and aic_margin >= 0):
        raise InputError(f"aic_margin: must be a finite number >= 0, got {aic_margin!r}.")
    lifts = _lift_options(lift)
    specs = [(m, lf) for lf in lifts for m in models]
    n_shared = {(m, lf): len(get_drag_model(m).parameters) + (1 if lf else 0) for m, lf in specs}
    # order of complexity: fewer shared parameters first; ties in the order given
    specs.sort(key=lambda s: n_shared[s])
    common = dict(gravity=gravity, wind=wind, buoyancy=buoyancy)

    # 1. reference: the most general candidate (prefer the power law), robust as asked
    ref_order = sorted(
        specs, key=lambda s: (-n_shared[s], 0 if s[0] == "power-law" else 1, -int(s[1]))
    )
    reference = None
    for m, lf in ref_order + [("constant", max(lifts))]:
        fit = fit_tracks(tracks, specimen, air, model=m, lift=lf, robust=robust, noise=noise,
                         **common)  # fmt: skip
        if fit.success:
            reference = (m, lf, fit)
            break
    if reference is None:  # nothing converged: compare on all points; candidates will fail
        reference = (m, lf, fit)
    ref_fit = reference[2]
    kept = _kept_tracks(ref_fit, tracks) if ref_fit.success else tracks
    noise_model = ref_fit.noise["model"] if ref_fit.success else "white"
    re_range = (ref_fit.diagnostics["reynolds_min"], ref_fit.diagnostics["reynolds_max"])
    multi = len(tracks) > 1
    rejected = [
        f"{i + 1}:{lab}" if multi else lab
        for i, th in enumerate(ref_fit.throws)
        for lab in th.rejected
    ]
    known_sigma = all(tr.sigma is not None for tr in kept)

    # 2. every candidate on the kept points, same noise model, no further rejection
    fits = {}
    notes = {}
    for m, lf in specs:
        try:
            get_drag_model(m).check_re_range(*re_range)
        except ValueError as exc:
            notes[(m, lf)] = str(exc)
            continue
        fits[(m, lf)] = fit_tracks(
            kept, specimen, air, model=m, lift=lf, robust=False, noise=noise_model,
            initial=_seed(fits, (m, lf), n_shared), **common,
        )  # fmt: skip

    # noise scales of the most general fitted candidate, for chi-square and F-tests
    ref_key = (reference[0], reference[1])
    if ref_key not in fits:
        ref_key = max(fits, key=lambda s: n_shared[s]) if fits else None
    ref_scales = _group_scales(fits[ref_key], kept, known_sigma) if ref_key else None

    # 3. likelihood, AIC, BIC, reduced chi-square
    n_groups = 2 * len(kept)
    n_noise = n_groups + (2 if noise_model == "ar1" else 0)
    rows = []
    for m, lf in specs:
        label = _label(m, lf)
        if (m, lf) not in fits:
            rows.append(
                CandidateResult(label, m, lf, False, notes[(m, lf)], None, n_shared[(m, lf)])
            )
            continue
        fit = fits[(m, lf)]
        n_res = 2 * sum(int(th.used.sum()) for th in fit.throws)
        if not fit.success:
            rows.append(CandidateResult(label, m, lf, True, fit.message, fit, n_shared[(m, lf)],
                                        n_residuals=n_res))  # fmt: skip
            continue
        k = len(fit.values) + n_noise
        ll = _log_likelihood(fit, kept)
        chi2 = _weighted_rss(fit, kept, ref_scales)
        rows.append(
            CandidateResult(
                label, m, lf, True, "", fit, n_shared[(m, lf)], k, n_res, ll,
                -2.0 * ll + 2.0 * k, -2.0 * ll + k * math.log(n_res), math.nan, math.nan,
                chi2 / max(n_res - len(fit.values), 1), fit.diagnostics["residual_rms"],
            )
        )  # fmt: skip
    good = [c for c in rows if c.ok]
    if good:
        a0 = min(c.aic for c in good)
        b0 = min(c.bic for c in good)
        rows = [replace(c, delta_aic=c.aic - a0, delta_bic=c.bic - b0) if c.ok else c for c in rows]
        good = [c for c in rows if c.ok]

    # 4. nested F-tests
    tests = []
    for full in good:
        for simp in good:
            if not _nests(full, simp):
                continue
            scales = _group_scales(full.fit, kept, known_sigma)
            rss_f = _weighted_rss(full.fit, kept, scales)
            rss_s = _weighted_rss(simp.fit, kept, scales)
            df1 = full.n_shared - simp.n_shared
            df2 = full.n_residuals - len(full.fit.values)
            fstat = max((rss_s - rss_f) / df1, 0.0) / (rss_f / df2)
            tests.append(
                NestedTest(
                    simp.label, full.label, fstat, df1, df2, float(stats.f.sf(fstat, df1, df2))
                )
            )

    # 5. recommendation
    recommended = None
    if good:
        current = good[0]
        for cand in good[1:]:
            t = next(
                (x for x in tests if x.simpler == current.label and x.fuller == cand.label), None
            )
            if t is not None:
                if t.p_value < alpha:
                    current = cand
            elif cand.aic < current.aic - aic_margin:
                current = cand
        recommended = current.label
    text = _recommendation(rows, tests, recommended, re_range, alpha, aic_margin)
    return ModelComparison(
        candidates=tuple(rows),
        tests=tuple(tests),
        recommended=recommended,
        recommendation=text,
        reynolds_range=(float(re_range[0]), float(re_range[1])),
        reference=_label(*ref_key) if ref_key else _label(reference[0], reference[1]),
        noise_model=noise_model,
        rejected=rejected,
        alpha=alpha,
        aic_margin=aic_margin,
    )


def _sci(v: float, digits: int = 2) -> str:
    """1.5e4 style (no '+' or leading zeros in the exponent)."""
    if not math.isfinite(v) or v == 0:
        return f"{v:g}"
    e = int(math.floor(math.log10(abs(v))))
    m = v / 10**e
    if round(abs(m), digits - 1) >= 10:
        m /= 10
        e += 1
    if -2 <= e <= 3:
        dec = digits - 1 - e
        return f"{round(v, dec):.{max(dec, 0)}f}"
    return f"{m:.{digits - 1}f}e{e}"


def _p(p: float) -> str:
    return "p < 1e-6" if p < 1e-6 else f"p = {p:.2g}"


def _re_text(re_range) -> str:
    return f"Re {_sci(re_range[0])}–{_sci(re_range[1])}"


def _recommendation(rows, tests, recommended, re_range, alpha, aic_margin) -> str:
    if recommended is None:
        notes = "; ".join(f"{c.label}: {c.note}" for c in rows if c.note)
        return f"no candidate model could be fitted ({notes})."
    best = next(c for c in rows if c.label == recommended)
    by = {c.label: c for c in rows}
    parts = []
    lift_word = " with a lift force" if best.lift else ""
    rtxt = _re_text(re_range)
    if best.model == "constant":
        parts.append(f"the data support a constant Cd{lift_word}")
        pl = by.get(_label("power-law", best.lift))
        if pl is not None and pl.ok:
            n, un = pl.fit.parameter("exponent")
            t = next((x for x in tests if x.simpler == best.label and x.fuller == pl.label), None)
            ptxt = f", F-test {_p(t.p_value)}" if t is not None else ""
            parts.append(
                f"Re-dependence not detectable over {rtxt} (power-law exponent {_pm(n, un)}{ptxt})"
            )
        else:
            parts.append(f"Re-dependence not tested over {rtxt}")
    elif best.model == "power-law":
        n, un = best.fit.parameter("exponent")
        c, uc = best.fit.parameter("cd_ref")
        parts.append(
            f"the data show a Reynolds-number dependence of Cd{lift_word}: Cd = "
            f"{_pm(c, uc)} × (Re/{_sci(best.fit.constants[0], 3)})^({_pm(n, un)}) over {rtxt}"
        )
        t = next(
            (x for x in tests if x.fuller == best.label and x.simpler.startswith("constant")), None
        )
        if t is not None:
            parts.append(f"a constant Cd is rejected (F-test {_p(t.p_value)}, level {alpha:g})")
    elif best.model.startswith("sphere-scaled"):
        s, us = best.fit.parameter("scale")
        parts.append(
            f"the data follow the smooth-sphere drag curve ({best.model}) scaled by "
            f"{_pm(s, us)}{lift_word} over {rtxt}"
        )
        const = by.get(_label("constant", best.lift))
        if const is not None and const.ok:
            parts.append(
                f"its AIC is {const.aic - best.aic:.1f} below that of a constant Cd "
                f"(margin {aic_margin:g})"
            )
    else:
        parts.append(f"the data are best described by the {best.model} drag model{lift_word}")
    # lift statement when both were tried
    if best.lift:
        cl, ucl = best.fit.parameter("lift_coefficient")
        t = next((x for x in tests if x.fuller == best.label and x.simpler == best.model), None)
        ptxt = f", F-test {_p(t.p_value)}" if t is not None else ""
        parts.append(f"lift detected: C_L = {_pm(cl, ucl)}{ptxt}")
    else:
        with_lift = by.get(_label(best.model, True))
        if with_lift is not None and with_lift.ok:
            cl, ucl = with_lift.fit.parameter("lift_coefficient")
            t = next(
                (x for x in tests if x.simpler == best.label and x.fuller == with_lift.label), None
            )
            ptxt = f", F-test {_p(t.p_value)}" if t is not None else ""
            parts.append(f"no lift detectable (C_L = {_pm(cl, ucl)}{ptxt})")
    skipped = [c for c in rows if not c.applicable]
    for c in skipped:
        parts.append(f"{c.label} not applicable: {c.note.split(';')[0]}")
    text = "; ".join(parts) + "."
    return text[0].upper() + text[1:]
