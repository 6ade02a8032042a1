"""The image-space least-squares problem of a 3-D flight seen by one or more cameras.

Residuals are in each camera's pixels: for every observation, the observed blob centroid
minus the centre of the sphere's image outline (:func:`fitdrag.geometry.views.outline_centre`)
at the observation's own time, and, where used, the observed apparent diameter minus the
outline's width across the motion (:func:`fitdrag.geometry.views.outline_width`).  The time
of an observation is that of its frame plus the view's time offset plus the rolling-shutter
delay of the row where it was seen::

    t = frame / fps + offset + (v_observed / rows) readout_time

(the observed row, not the predicted one: the difference is the pixel noise times
readout / rows, below a microsecond).  One 3-D integration
(:class:`fitdrag.physics.flight3d.FlightModel3D`) serves all cameras at once (their times
merged and sorted, ties allowed).

Jacobian by the chain rule: d(pixel)/d(world point) (closed form) times the simulator's
forward sensitivities d(position)/d(θ); for an estimated time offset,
d(pixel)/d(offset) = d(pixel)/d(point) · velocity.  Each channel's residuals and Jacobian rows
are filled by one compiled loop (numba, on first use; the same products as the formulas).

A view's diameter channel holds only the frames where the diameter was measured (NaN in
:class:`~fitdrag.geometry.views.CameraView` = not observed); its AR(1) prewhitening runs
over those frames' gaps.

Parameter layout: the drag law's parameters (then C_L when fitted), the launch state
(x0, y0, z0, vx0, vy0, vz0) at the reference time ``t_ref``, then one time offset per view
whose offset is estimated, then one diameter measure per view whose measure is fitted, then
one diameter scale per view whose scale is fitted.

The apparent diameter a tracker reports depends on how it measures: a circle fitted to the
blob of a sphere seen off the optical axis (an ellipse, elongated towards the principal
point) lands between the ellipse's width across the motion and its equal-area diameter, the
nearer the latter the shorter the blur.  The diameter channel's prediction is therefore
``s (w + lam (d_area - w))`` (:func:`fitdrag.geometry.views.outline_width`,
:func:`fitdrag.geometry.views.outline_area_diameter`) with ``lam`` given per view or fitted;
``d pred / d lam = s (d_area - w)``.  A tracker that fits the outline the camera gives a
sphere (``outline_kind = "depth"``) reports the depth diameter, predicted as ``s`` times
:func:`fitdrag.geometry.views.outline_depth_diameter`, with no ``lam``.  The scale ``s`` (given, 1 by default, or fitted) takes a
tracker's constant diameter bias and the specimen's diameter uncertainty off the depth: the
flight's depth then follows from the diameter's relative change along the flight (which
measures v_z / Z) and from gravity, which sets the flight's size in metres.  Residual layout: per view its noise channels (u, v, then the
diameter when used), each divided by its noise standard deviation and, under AR(1) noise,
Prais–Winsten transformed over the frame gaps (:mod:`fitdrag.fit.noise`).
"""

from __future__ import annotations

import copy
import functools

import numba
import numpy as np

from fitdrag.fit.noise import prais_winsten, reml_ar1
from fitdrag.fit.problem import FAIL_RESIDUAL, FIT_RTOL
from fitdrag.geometry.views import (
    outline_area_diameter,
    outline_centre,
    outline_depth_diameter,
    outline_width,
)
from fitdrag.physics.flight3d import LAUNCH_NAMES_3D, FlightModel3D, _sample_times

#: Names of the noise channels of a view.
CHANNEL_NAMES = ("u", "v", "diameter")


class Channel:
    """One noise channel: a view's u, v or diameter series (mutable fit state inside)."""

    def __init__(self, view_index: int, kind: int, observed, stated, gaps, index=None):
        self.view_index = view_index
        self.kind = kind  # 0 = u, 1 = v, 2 = diameter
        self.index = index  # observations of the view in this channel (None: all)
        self.observed = np.asarray(observed, float)
        self.stated = None if stated is None else np.asarray(stated, float)
        self.relative = np.ones_like(self.observed) if stated is None else self.stated.copy()
        self.level = 1.0  # noise standard deviation = relative * level [px]
        self.phi = 0.0
        self.gaps = gaps
        self.rows = slice(0, 0)

    @property
    def name(self) -> str:
        return CHANNEL_NAMES[self.kind]

    @property
    def sigma(self) -> np.ndarray:
        return self.relative * self.level


class ImageProblem:
    """Residuals and Jacobian of the image-space fit (cached for a repeated θ).

    Parameters
    ----------
    views : list of CameraView
    specimen : Sphere or Body
        The specimen; its ``length`` is the sphere's diameter for the outline. [m]
    conditions : Conditions
        Air, gravity, buoyancy (wind 0: the wind vector is ``wind``).
    model : DragModel
    constants : tuple of float
        The drag law's fixed constants.
    lift : bool
        Fit a constant lift coefficient about ``spin_axis``.
    wind : ndarray, shape (3,)
        Constant wind velocity. [m/s]
    spin_axis : ndarray, shape (3,)
        Spin axis direction. [-]
    use_outline : list of bool
        Per view: whether its diameters enter the fit.
    offsets : list of float or None
        Per view: the known time offset [s], or None when it is a fitted parameter.
    t_ref : float
        Time of the launch state, at or before every observation. [s]
    diameter_measures : list of float or None, optional
        Per view, what its apparent diameters measure: ``lam`` in
        ``d = s (w + lam (d_area - w))`` between the outline's width across the motion ``w``
        (``lam = 0``, the default) and its equal-area diameter ``d_area`` (``lam = 1``); None
        = a fitted parameter (``diameter_measure_<view number>``). [1]
    diameter_scales : list of float or None, optional
        Per view, the scale ``s`` of its diameters (default 1: the tracker's diameters
        against the specimen's true size); None = a fitted parameter
        (``diameter_scale_<view number>``). [1]
    """

    def __init__(self, views, specimen, conditions, model, constants, lift, wind, spin_axis,
                 use_outline, offsets, t_ref, diameter_measures=None,
                 diameter_scales=None):  # fmt: skip
        self.views = list(views)
        self.specimen = specimen
        self.conditions = conditions
        self.model = model
        self.constants = tuple(constants)
        self.lift = bool(lift)
        self.wind = np.asarray(wind, float)
        self.spin_axis = np.asarray(spin_axis, float)
        self.radius = 0.5 * float(specimen.length)
        self.t_ref = float(t_ref)
        self.n_shared = len(model.parameters) + (1 if lift else 0)
        self.known_offsets = list(offsets)
        self.offset_index: list[int | None] = []
        j = self.n_shared + 6
        for off in self.known_offsets:
            self.offset_index.append(j if off is None else None)
            j += off is None
        self.use_outline = [bool(u) and v.diameter is not None for u, v in zip(use_outline, views)]
        measures = [0.0] * len(self.views) if diameter_measures is None else diameter_measures
        # a depth diameter (a tracker that fits the sphere's camera outline) has no measure
        self.depth_kind = [v.outline_kind == "depth" for v in self.views]
        measures = [0.0 if dk else m for m, dk in zip(measures, self.depth_kind)]
        self.known_measures = [None if m is None else float(m) for m in measures]
        self.measure_index: list[int | None] = []
        for used, m in zip(self.use_outline, self.known_measures):
            self.measure_index.append(j if (used and m is None) else None)
            j += used and m is None
        scales = [1.0] * len(self.views) if diameter_scales is None else diameter_scales
        self.known_scales = [None if m is None else float(m) for m in scales]
        self.scale_index: list[int | None] = []
        for used, m in zip(self.use_outline, self.known_scales):
            self.scale_index.append(j if (used and m is None) else None)
            j += used and m is None
        self.n_params = j
        self.directions = [v.motion_directions() for v in self.views]
        self.stretch = [v.row_stretch() for v in self.views]
        self.channels: list[Channel] = []
        for i, v in enumerate(self.views):
            gaps = np.diff(v.frames).astype(int)
            self.channels.append(Channel(i, 0, v.u, v.sigma, gaps))
            self.channels.append(Channel(i, 1, v.v, v.sigma, gaps))
            if self.use_outline[i]:  # frames without a measured diameter (NaN) left out
                k = np.flatnonzero(np.isfinite(v.diameter))
                ds = None if v.diameter_sigma is None else v.diameter_sigma[k]
                self.channels.append(
                    Channel(i, 2, v.diameter[k], ds, np.diff(v.frames[k]).astype(int), k)
                )
        row = 0
        for ch in self.channels:
            ch.rows = slice(row, row + ch.observed.size)
            row += ch.observed.size
        self.n_resid = row
        self.names: list[str] = []
        self.bounds: list[tuple[float, float]] = []
        self._cache_theta = None
        self._cache = None
        self._geo_theta = None
        self._geo = None
        self._layout_key = None
        self._layout = None
        self._row_parts = None
        self._flight: FlightModel3D | None = None
        self.n_evaluations = 0

    # -- layout ------------------------------------------------------------------------------
    def offsets(self, theta) -> list[float]:
        """Time offset of every view [s] at ``theta``."""
        return [
            float(theta[j]) if j is not None else float(k)
            for j, k in zip(self.offset_index, self.known_offsets)
        ]

    def measures(self, theta) -> list[float]:
        """Per view the diameter measure ``lam`` at ``theta`` (0 where not used). [1]"""
        return [
            float(theta[j]) if j is not None else (0.0 if m is None else m)
            for j, m in zip(self.measure_index, self.known_measures)
        ]

    def scales(self, theta) -> list[float]:
        """Per view the diameter scale ``s`` at ``theta`` (1 where not used). [1]"""
        return [
            float(theta[j]) if j is not None else (1.0 if m is None else m)
            for j, m in zip(self.scale_index, self.known_scales)
        ]

    def diameter(self, i: int, pos, theta, jacobians: bool = False):
        """Predicted diameter of view ``i`` at sphere centres ``pos`` [px]; with
        ``jacobians`` also d/d(point) (n, 3) [px/m], d/d lam and d/d s (n,) [px]."""
        v = self.views[i]
        lam = self.measures(theta)[i]
        scale = self.scales(theta)[i]
        if self.depth_kind[i]:
            w, dw = outline_depth_diameter(v.camera, pos, self.radius, jacobians=jacobians)
            if not jacobians:
                return scale * w
            return scale * w, scale * dw, np.zeros_like(w), w
        w, dw = outline_width(v.camera, pos, self.radius, self.directions[i],
                              jacobians=jacobians)  # fmt: skip
        d_lam = np.zeros_like(w)
        if lam != 0.0 or self.measure_index[i] is not None:
            da, dda = outline_area_diameter(v.camera, pos, self.radius,
                                            row_stretch=self.stretch[i],
                                            jacobians=jacobians)  # fmt: skip
            d_lam = da - w
            w = w + lam * d_lam
            if jacobians:
                dw = dw + lam * (dda - dw)
        if not jacobians:
            return scale * w
        return scale * w, scale * dw, scale * d_lam, w

    def sim_theta(self, theta) -> np.ndarray:
        ns = self.n_shared
        return np.concatenate((theta[ns : ns + 6], theta[:ns]))

    def observation_times(self, theta) -> list[np.ndarray]:
        """Per view, the time each observation was seen (frame, offset, row delay). [s]"""
        # Camera.row_time's arithmetic, t + (v / rows) readout with t = frame time + offset,
        # its offset-free parts computed once
        if self._row_parts is None:
            self._row_parts = [
                (v.frame_times, (np.asarray(v.v, float) / v.camera.rows) * v.camera.readout_time)
                for v in self.views
            ]
        return [ft + off + dv for (ft, dv), off in zip(self._row_parts, self.offsets(theta))]

    def flight_model(self, times) -> FlightModel3D:
        """The problem's flight at sorted ``times`` [s] (at or after ``t_ref``)."""
        t = np.asarray(times, dtype=float)
        if self._flight is None or not (t.ndim == 1 and t.size and t[0] >= self.t_ref):
            return FlightModel3D(
                times, self.specimen, self.conditions, self.model, self.constants, self.lift,
                wind=self.wind, spin_axis=self.spin_axis, t0=self.t_ref, rtol=FIT_RTOL,
                atol=FIT_RTOL,
            )  # fmt: skip
        fm = copy.copy(self._flight)  # the same flight (its inputs checked once)
        fm.t = _sample_times(t)  # at other times, checked
        return fm

    def _time_layout(self, theta):
        """(times per view, all times sorted, inverse of the sort) at θ's time offsets, or
        None when a time is not finite or before ``t_ref``; kept while the offsets stay."""
        key = tuple(self.offsets(theta))
        if self._layout_key == key:
            return self._layout
        times = self.observation_times(theta)
        allt = np.concatenate(times)
        layout = None
        if np.all(np.isfinite(allt)) and allt.min() >= self.t_ref:
            order = np.argsort(allt, kind="stable")
            inv = np.empty_like(order)
            inv[order] = np.arange(order.size)
            if np.array_equal(order, inv):  # already in time order (one camera): no gather
                inv = None
            layout = (times, np.ascontiguousarray(allt[order]), inv)
        self._layout_key, self._layout = key, layout
        return layout

    def simulate(self, theta, sens=True):
        """Per view (positions, velocities, d position/d θ_sim), and ok."""
        layout = self._time_layout(theta)
        if layout is None:
            return None, False
        times, t_sorted, inv = layout
        if self._flight is None:
            self._flight = self.flight_model(t_sorted)
        else:  # the same flight at other times (sorted and checked above)
            self._flight.t = t_sorted
        status, pos, vel, jac, _ = self._flight.run(self.sim_theta(theta), sens)
        if status != 0 or not np.all(np.isfinite(pos)):
            return None, False
        if inv is not None:
            pos, vel = pos[inv], vel[inv]
            jac = jac[inv, :3, :] if sens else None
        else:
            jac = jac[:, :3, :] if sens else None
        out = []
        start = 0
        for t in times:
            sl = slice(start, start + t.size)
            out.append((pos[sl], vel[sl], None if jac is None else jac[sl]))
            start += t.size
        return out, True

    def flight_at(self, theta):
        """Per view (positions, velocities, sensitivities or None) and ok: the last
        evaluation's flight when ``theta`` is its θ, else a new integration without
        sensitivities."""
        theta = np.asarray(theta, float)
        if self._geo_theta is not None and np.array_equal(theta, self._geo_theta):
            if self._geo[0] is not None:
                return self._geo[0], True
        return self.simulate(theta, False)

    def predict(self, theta):
        """Per view the predicted (u, v, diameter or None) [px], and ok (from the last
        evaluation's flight and projections when ``theta`` is its θ)."""
        theta = np.asarray(theta, float)
        if self._geo_theta is not None and np.array_equal(theta, self._geo_theta):
            sims, per_view = self._geo
            if per_view is not None:
                out = []
                for i, (v, (entry, _vel, _sj, _x)) in enumerate(zip(self.views, per_view)):
                    if 2 in entry:
                        d = entry[2][0]
                    else:
                        d = None if v.diameter is None else self.diameter(i, sims[i][0], theta)
                    out.append((entry[0][0], entry[1][0], d))
                return out, True
        sims, ok = self.simulate(theta, False)
        if not ok:
            return None, False
        out = []
        for i, (v, (pos, _vel, _j)) in enumerate(zip(self.views, sims)):
            pix, _, _ = outline_centre(v.camera, pos, self.radius)
            d = None if v.diameter is None else self.diameter(i, pos, theta)
            ok = ok and bool(np.all(np.isfinite(pix)))
            out.append((pix[:, 0], pix[:, 1], d))
        return out, ok

    def raw_residuals(self, theta) -> list[np.ndarray] | None:
        """Observed minus predicted for every channel (unweighted) [px]; None on failure."""
        pred, ok = self.predict(theta)
        if not ok:
            return None
        out = []
        for ch in self.channels:
            p = pred[ch.view_index][ch.kind]
            out.append(ch.observed - (p if ch.index is None else p[ch.index]))
        return out

    def residuals(self, theta):
        """(whitened residuals, ok) at ``theta`` without the Jacobian: the flight integrated
        without sensitivities and projected without derivatives (the re-solves of a fixed
        Jacobian)."""
        raw = self.raw_residuals(theta)
        if raw is None:
            return None, False
        res = np.empty(self.n_resid)
        for ch, r in zip(self.channels, raw):
            w = r * (1.0 / ch.sigma)
            res[ch.rows] = prais_winsten(w, ch.gaps, ch.phi) if ch.phi != 0.0 else w
        return res, bool(np.all(np.isfinite(res)))

    # -- evaluation --------------------------------------------------------------------------
    def evaluate(self, theta):
        """(residuals, Jacobian, simulation, ok) at ``theta``; cached for a repeated θ (and
        the flight and its projections kept across a change of the noise state)."""
        theta = np.asarray(theta, float)
        if self._cache_theta is not None and np.array_equal(theta, self._cache_theta):
            return self._cache
        res = np.full(self.n_resid, FAIL_RESIDUAL)
        jac = np.zeros((self.n_resid, self.n_params))
        sims, per_view = self._geometry(theta)
        ok = per_view is not None
        if ok:
            self._fill(per_view, res, jac)
        self._cache_theta = theta.copy()
        self._cache = (res, jac, sims, ok)
        return self._cache

    def _geometry(self, theta):
        """(simulation, per view its predictions and their derivatives) at ``theta`` with
        sensitivities, or (None, None) on failure; cached for a repeated θ (the noise state
        does not enter). Counts as one evaluation."""
        if self._geo_theta is not None and np.array_equal(theta, self._geo_theta):
            return self._geo
        self.n_evaluations += 1
        sims, ok = self.simulate(theta, True)
        per_view = self._project(sims, theta) if ok else None
        self._geo_theta = theta.copy()
        self._geo = (sims if per_view is not None else None, per_view)
        return self._geo

    def _project(self, sims, theta):
        """Per view ({channel kind: (prediction, d prediction/d point)}, velocities, d position
        / d θ_sim, diameter parameter columns), or None where a value is not finite."""
        per_view = []
        for i, (v, (pos, vel, sj)) in enumerate(zip(self.views, sims)):
            pix, dpix, _ = outline_centre(v.camera, pos, self.radius, jacobians=True)
            if not np.all(np.isfinite(pix)) or not np.all(np.isfinite(dpix)):
                return None
            entry = {0: (pix[:, 0], dpix[:, 0, :]), 1: (pix[:, 1], dpix[:, 1, :])}
            extra = ()
            if self.use_outline[i]:
                d, dd, d_lam, d_scale = self.diameter(i, pos, theta, jacobians=True)
                if not (np.all(np.isfinite(d)) and np.all(np.isfinite(dd))):
                    return None
                if not (np.all(np.isfinite(d_lam)) and np.all(np.isfinite(d_scale))):
                    return None
                extra = ((self.measure_index[i], d_lam), (self.scale_index[i], d_scale))
                entry[2] = (d, dd)
            per_view.append((entry, vel, sj, extra))
        return per_view

    def _fill(self, per_view, res, jac) -> None:
        ns = self.n_shared
        kernel = _compiled_fill()
        for ch in self.channels:
            entry, vel, sj, extra = per_view[ch.view_index]
            pred, dpoint = entry[ch.kind]
            inv_s = 1.0 / ch.sigma
            index = _ALL if ch.index is None else ch.index
            col = self.offset_index[ch.view_index]
            j = jac[ch.rows]  # filled in place (zeros outside the columns set here)
            r = res[ch.rows]
            kernel(ch.observed, pred, dpoint, sj, vel, inv_s, index, ns,
                   -1 if col is None else col, r, j)  # fmt: skip
            if ch.kind == 2:
                for c, values in extra:
                    if c is not None:
                        j[:, c] = (values if ch.index is None else values[ch.index]) * -inv_s
            if ch.phi != 0.0:
                res[ch.rows] = prais_winsten(r, ch.gaps, ch.phi)
                jac[ch.rows] = prais_winsten(j, ch.gaps, ch.phi)

    def forget(self) -> None:
        """Drop the cached evaluation and flight (the next evaluation integrates afresh)."""
        self._cache_theta = None
        self._geo_theta = None

    # -- noise state -------------------------------------------------------------------------
    def set_noise(self, levels=None, phis=None) -> None:
        """Set each channel's noise level [px] (relative to its stated sigma) and AR(1) φ."""
        if levels is not None:
            for ch, lv in zip(self.channels, levels):
                ch.level = float(lv)
        if phis is not None:
            for ch, f in zip(self.channels, phis):
                ch.phi = float(f)
        self._cache_theta = None

    def blocks(self) -> list[tuple[slice, int, np.ndarray]]:
        """Per channel: (rows of the residual vector, channel index, frame gaps)."""
        return [(ch.rows, c, ch.gaps) for c, ch in enumerate(self.channels)]

    def reml_ar1(self, theta) -> tuple[float, ...]:
        """AR(1) coefficient of every channel by restricted maximum likelihood at ``theta``
        (:func:`fitdrag.fit.noise.reml_ar1`); the current ones when the flight fails."""
        saved = [ch.phi for ch in self.channels]
        self.set_noise(phis=[0.0] * len(self.channels))
        r0, j0, _sims, ok = self.evaluate(theta)
        self.set_noise(phis=saved)
        if not ok:
            return tuple(saved)
        return reml_ar1(r0, j0, self.blocks(), saved)

    def parameter_names(self) -> list[str]:
        names = list(self.model.parameters) + (["lift_coefficient"] if self.lift else [])
        names += list(LAUNCH_NAMES_3D)
        names += [f"time_offset_{i + 1}" for i, j in enumerate(self.offset_index) if j is not None]
        names += [
            f"diameter_measure_{i + 1}" for i, j in enumerate(self.measure_index) if j is not None
        ]
        names += [
            f"diameter_scale_{i + 1}" for i, j in enumerate(self.scale_index) if j is not None
        ]
        return names


_ALL = np.empty(0, dtype=np.int64)  # "every observation of the view" for the fill kernel


def _fill_rows(observed, pred, dpoint, sj, vel, inv_s, index, ns, col, r_out, j_out):
    """One channel's whitened residuals and Jacobian rows (before AR(1) prewhitening):
    ``r = (observed - pred) / sigma``; d pred / d θ_sim = d pred / d point · d point / d θ_sim
    into the drag-law columns (``:ns``) and the launch-state columns (``ns : ns + 6``), and
    d pred / d offset = d pred / d point · velocity into column ``col`` (if >= 0), each
    times ``-1 / sigma``.  ``index`` picks the view's observations of the channel (empty:
    all)."""
    n = observed.shape[0]
    n_sim = sj.shape[2]
    for i in range(n):
        m = index[i] if index.shape[0] > 0 else i
        s = -inv_s[i]
        r_out[i] = (observed[i] - pred[m]) * inv_s[i]
        d0, d1, d2 = dpoint[m, 0], dpoint[m, 1], dpoint[m, 2]
        for q in range(n_sim):
            v = d0 * sj[m, 0, q] + d1 * sj[m, 1, q] + d2 * sj[m, 2, q]
            j_out[i, ns + q if q < 6 else q - 6] = v * s
        if col >= 0:
            j_out[i, col] = (d0 * vel[m, 0] + d1 * vel[m, 1] + d2 * vel[m, 2]) * s


@functools.cache
def _compiled_fill():
    """The fill kernel compiled on first use (numba's disk cache; any array layouts)."""
    return numba.njit(cache=True)(_fill_rows)
