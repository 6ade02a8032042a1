"""The fit's least-squares problem: the layout of the throws' parameters, weighted and
prewhitened residuals and their exact Jacobian from the simulator's sensitivities.

Parameter layout: the shared parameters first (the drag law's, then the lift coefficient
when fitted), then per throw its launch state (x0, y0, vx0, vy0).  Residual layout: per
throw, the kept x residuals, then the kept y residuals, each divided by its noise standard
deviation and, under AR(1) noise, Prais–Winsten transformed (:mod:`fitdrag.fit.noise`).
"""

from __future__ import annotations

import numpy as np

from fitdrag.errors import InputError
from fitdrag.fit._track_fill import NO_JAC, NO_SENS, compiled_fill
from fitdrag.fit.noise import frame_gaps, reml_ar1
from fitdrag.physics.simulate import FlightModel
from fitdrag.tracks.track import Track

#: Integrator tolerance inside fits: positions to ~1e-8 m, far below any tracking noise.
FIT_RTOL = 1e-9
#: Residual given to every sample of a throw whose flight could not be simulated.
FAIL_RESIDUAL = 1e6


def as_tracks(tracks) -> list[Track]:
    """One Track or a sequence of them as a non-empty list, each checked to be a Track."""
    if isinstance(tracks, Track):
        return [tracks]
    tracks = list(tracks)
    if not tracks:
        raise InputError("tracks: no track given; pass one Track or a list of Tracks.")
    for i, tr in enumerate(tracks):
        if not isinstance(tr, Track):
            raise InputError(
                f"tracks[{i}]: expected a fitdrag.Track, got {type(tr).__name__}; build one "
                f"with fitdrag.Track(t, x, y) or fitdrag.read_track(path)."
            )
    return tracks


def initial_launch(track, g: float) -> np.ndarray:
    """Quadratic fit to the first samples: a drag-free, finite-difference launch guess.

    Parameters
    ----------
    track : Track
        One throw (times [s], positions [m]).
    g : float
        Acceleration of free fall (unused by the polynomial; kept for the caller). [m/s²]

    Returns
    -------
    ndarray
        (x0, y0, vx0, vy0) at the first sample. [m], [m/s]
    """
    n = len(track)
    m = min(n, max(8, n // 5))
    tau = track.t[:m] - track.t[0]
    # least squares on the column-scaled Vandermonde matrix [tau², tau, 1] per axis: the
    # computation of numpy.polyfit (the same numbers), without its per-call checks
    lhs = np.vander(tau, 3)
    scale = np.sqrt((lhs * lhs).sum(axis=0))
    lhs = lhs / scale
    rcond = m * np.finfo(float).eps
    cx, cy = (np.linalg.lstsq(lhs, pos[:m], rcond=rcond)[0] / scale for pos in (track.x, track.y))
    return np.array([cx[2], cy[2], cx[1], cy[1]], dtype=float)


class Problem:
    """Residuals and Jacobian for the global fit, with caching of the last evaluation.

    Parameters
    ----------
    tracks : list of Track
        The throws (times [s], positions [m]).
    specimen : Sphere or Body
        The specimen (mass [kg], area [m²], volume [m³]).
    conditions : Conditions
        Air, gravity [m/s²], wind [m/s], buoyancy.
    model : DragModel
        The drag law.
    constants : tuple of float
        The drag law's fixed constants.
    lift : bool
        Whether a constant lift coefficient is fitted.
    fixed_lift : float
        The lift coefficient held fixed when it is not fitted (0: no lift; the uncertainty
        budget re-fits with a stated one). [-]
    """

    def __init__(self, tracks, specimen, conditions, model, constants, lift, fixed_lift=0.0):
        self.tracks = tracks
        self.model = model
        self.lift = lift
        self.fixed_lift = float(fixed_lift)
        self.n_shared = len(model.parameters) + (1 if lift else 0)
        self.models = [
            FlightModel(
                tr.t,
                specimen,
                conditions,
                model,
                constants,
                fit_lift=lift,
                rtol=FIT_RTOL,
                atol=FIT_RTOL,
            )  # fmt: skip
            for tr in tracks
        ]
        self.n_params = self.n_shared + 4 * len(tracks)
        #: parameter names and (lower, upper) bounds, in the layout order (set by the caller)
        self.names: list[str] = []
        self.bounds: list[tuple[float, float]] = []
        # weighting and whitening state
        self.masks = [np.ones(len(tr), bool) for tr in tracks]
        self.sigmas = [np.ones((len(tr), 2)) for tr in tracks]
        self.phi = (0.0, 0.0)
        self._cache_key = None
        self._cache = None
        # the last flights with sensitivities, kept across changes of weights, masks and
        # noise model (they depend on theta alone); the caches are keyed by theta's bytes
        self._sims_key = None
        self._sims = None
        self._refresh_layout()
        self.n_evaluations = 0

    def _refresh_layout(self):
        masks_key = tuple(m.tobytes() for m in self.masks)
        if masks_key != getattr(self, "_masks_key", None):
            self.index = []
            self.gaps = []
            for tr, mask in zip(self.tracks, self.masks):
                idx = np.flatnonzero(mask)
                self.index.append(idx)
                self.gaps.append(frame_gaps(tr.t, idx))
            self._masks_key = masks_key
        self.n_resid = 2 * sum(i.size for i in self.index)
        # per throw: the kept samples' rows, count and first launch column, and per axis the
        # kept observations and inverse sigmas, so that evaluate() does no repeated indexing
        self._pre = []
        for i, (tr, idx) in enumerate(zip(self.tracks, self.index)):
            sel = slice(None) if idx.size == len(tr) else idx
            axes = []
            for axis, obs in ((0, tr.x), (1, tr.y)):
                axes.append((np.ascontiguousarray(obs[sel]), 1.0 / self.sigmas[i][sel, axis]))
            self._pre.append((idx, idx.size, self.n_shared + 4 * i, axes))
        self._cache_key = None

    def set_state(self, masks=None, sigmas=None, phi=None):
        """Change the kept samples, the noise levels [m] or the AR(1) coefficients [-]."""
        if masks is not None:
            self.masks = [np.asarray(m, bool) for m in masks]
        if sigmas is not None:
            self.sigmas = sigmas
        if phi is not None:
            self.phi = (float(phi[0]), float(phi[1]))
        self._refresh_layout()

    def throw_theta(self, theta, i):
        """Throw ``i``'s parameters as the simulator takes them: launch state, then shared."""
        base = self.n_shared + 4 * i
        return np.concatenate((theta[base : base + 4], theta[: self.n_shared]))

    def simulate_all(self, theta, sens=True):
        """(status, positions, velocities, sensitivities) of every throw at ``theta``."""
        out = []
        for i, fm in enumerate(self.models):
            status, pos, vel, jac, _ = fm.run(self.throw_theta(theta, i), sens, self.fixed_lift)
            out.append((status, pos, vel, jac))
        return out

    def cached_flights(self, theta):
        """The flights at ``theta`` without sensitivities, reusing the last evaluation."""
        theta = np.asarray(theta, float)
        if theta.tobytes() == self._sims_key:
            return self._sims  # the last evaluation: the same flight, already computed
        return self.simulate_all(theta, False)

    def _flights(self, theta, key):
        """The flights with sensitivities at ``theta``, integrated only when ``theta`` is new
        (a change of weights, kept samples or noise model needs no new integration)."""
        if key == self._sims_key:
            return self._sims
        sims = self.simulate_all(theta, True)
        self.n_evaluations += 1
        self._sims_key = key
        self._sims = sims
        return sims

    def evaluate(self, theta):
        """(residuals, Jacobian, flights, ok) at ``theta``; cached for a repeated ``theta``.

        The rows are filled by one compiled loop per throw (:mod:`fitdrag.fit._track_fill`)
        into arrays allocated afresh: the solvers keep the accepted point's residuals and
        Jacobian while they try a step, so a recycled buffer would overwrite them.
        """
        theta = np.asarray(theta, float)
        key = theta.tobytes()
        if key == self._cache_key:
            return self._cache
        sims = self._flights(theta, key)
        res = np.empty(self.n_resid)
        jac = np.zeros((self.n_resid, self.n_params))
        fill = compiled_fill()
        row = 0
        ok = True
        phi_x, phi_y = self.phi
        for i, (idx, m, base, ((ox, ix), (oy, iy))) in enumerate(self._pre):
            status, pos, _vel, sj = sims[i]
            rows = slice(row, row + 2 * m)
            if status != 0 or not fill(ox, oy, ix, iy, pos, sj, idx, phi_x, phi_y,
                                       self.gaps[i], base, True, res[rows], jac[rows]):  # fmt: skip
                ok = False
                res[rows] = FAIL_RESIDUAL
            row += 2 * m
        self._cache_key = key
        self._cache = (res, jac, sims, ok)
        return self._cache

    def forget(self) -> None:
        """Drop the cached evaluation and flights (after changing the flight models)."""
        self._cache_key = None
        self._sims_key = None

    def set_observations(self, i: int, x, y) -> None:
        """Replace throw ``i``'s observed positions [m] (same samples; weights, kept samples
        and noise model unchanged), without rebuilding the problem."""
        idx, m, base, axes = self._pre[i]
        sel = slice(None) if m == len(self.tracks[i]) else idx
        self._pre[i] = (idx, m, base, [(np.ascontiguousarray(np.asarray(obs, float)[sel]), inv)
                                       for obs, (_old, inv) in zip((x, y), axes)])  # fmt: skip
        self._cache_key = None

    def residuals(self, theta) -> tuple[np.ndarray, bool]:
        """(weighted, whitened residuals, ok) at ``theta`` from flights integrated without
        sensitivities (nothing cached): the cheap evaluation of a re-solve with a fixed
        Jacobian."""
        theta = np.asarray(theta, float)
        res = np.empty(self.n_resid)
        fill = compiled_fill()
        row = 0
        phi_x, phi_y = self.phi
        for i, (idx, m, base, ((ox, ix), (oy, iy))) in enumerate(self._pre):
            status, pos, _vel, _j, _steps = self.models[i].run(
                self.throw_theta(theta, i), False, self.fixed_lift
            )
            if status != 0 or not fill(ox, oy, ix, iy, pos, NO_SENS, idx, phi_x, phi_y,
                                       self.gaps[i], base, False, res[row : row + 2 * m],
                                       NO_JAC):  # fmt: skip
                return res, False
            row += 2 * m
        return res, True

    def axis_blocks(self) -> list[tuple[slice, int, np.ndarray]]:
        """Per throw and axis: (rows of the residual vector, axis, frame gaps)."""
        blocks = []
        row = 0
        for i, idx in enumerate(self.index):
            m = idx.size
            for axis in (0, 1):
                blocks.append((slice(row, row + m), axis, self.gaps[i]))
                row += m
        return blocks

    def reml_ar1(self, theta) -> tuple[float, float]:
        """AR(1) coefficients (x, y) by restricted maximum likelihood at ``theta``.

        The weighted residuals and Jacobian are taken without whitening and handed to
        :func:`fitdrag.fit.noise.reml_ar1`, starting from the current coefficients (kept
        when the flight cannot be simulated).
        """
        saved = self.phi
        self.set_state(phi=(0.0, 0.0))
        r0, j0, _sims, ok = self.evaluate(theta)
        self.set_state(phi=saved)
        if not ok:
            return saved
        return reml_ar1(r0, j0, self.axis_blocks(), saved)
