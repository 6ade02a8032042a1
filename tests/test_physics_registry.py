"""Tests of fitdrag.physics.registry: drag models looked up and registered by name.

Oracle for the registered law's use: the quadratic drag force F = ½ ρ C_d A |u|² (Munson et
al., Fundamentals of Fluid Mechanics, drag definition) written out here; for a registered law
in a fit, a track from the independent scipy DOP853 integration of tests/reference.py.
"""

from __future__ import annotations

import dataclasses
import importlib
import pickle
import re
import sys
from pathlib import Path

import numpy as np
import pytest
import reference as ref
from test_physics_drag_model import _linear_model, _linear_re_kernel  # the same test law

from fitdrag.physics import registry
from fitdrag.physics.air import Air
from fitdrag.physics.drag_model import DragModel
from fitdrag.physics.forces import Conditions, acceleration, drag_factor
from fitdrag.physics.registry import drag_model_names, get_drag_model, register_drag_model
from fitdrag.physics.specimen import Sphere


def _exact(message: str) -> str:
    return "^" + re.escape(message) + "$"


def test_constant_model():
    """regression: the constant model returns C_d = p[0], dC_d/dRe = 0, ∂C_d/∂p0 = 1."""
    m = get_drag_model("constant")
    assert m.parameters == ("cd",)
    assert m.constants == ()
    grad = np.zeros(1)
    cd, dcd = m.kernel(1234.0, np.array([0.47]), grad)
    assert (cd, dcd, grad[0]) == (0.47, 0.0, 1.0)
    np.testing.assert_array_equal(m.cd([1.0, 1e5], [0.3]), [0.3, 0.3])
    assert m.constants_for([1.0, 2.0]) == ()
    assert get_drag_model(m) is m


def test_unknown_model_lists_valid_names():
    """regression: an unknown name is an error listing the valid ones (design note)."""
    names = ", ".join(drag_model_names())
    with pytest.raises(ValueError, match=_exact(f"drag model: unknown name 'stokes?'; valid "
                                                f"names: {names}.")):  # fmt: skip
        get_drag_model("stokes?")
    assert "constant" in drag_model_names()
    assert drag_model_names() == sorted(drag_model_names())


def test_register_and_use_a_new_model(monkeypatch):
    """regression: a model registered by name is found, evaluated, sets its constants and is
    used by acceleration() (pluggable drag term, issue 2 item 4)."""
    monkeypatch.setattr(registry, "_REGISTRY", dict(registry._REGISTRY))
    m = register_drag_model(_linear_model("test-linear-re"))
    assert get_drag_model("test-linear-re") is m
    assert "test-linear-re" in drag_model_names()
    np.testing.assert_allclose(m.cd([0.0, 1000.0], [0.4, 0.1, 1000.0]), [0.4, 0.5], rtol=1e-15)
    assert m.constants_for([10.0, 30.0, 20.0]) == (30.0,)
    s = Sphere(0.0027, 0.04)
    air = Air(1.2, 1.8e-5)
    vx, vy = 5.0, 0.0
    re_ = 1.2 * 5.0 * 0.04 / 1.8e-5
    ax, _ = acceleration(vx, vy, s, Conditions(air), (0.4, 0.1, 1e4), model="test-linear-re")
    cd = 0.4 + 0.1 * re_ / 1e4
    assert float(ax) == pytest.approx(-drag_factor(s, 1.2) * cd * 25.0, rel=1e-14)
    with pytest.raises(ValueError, match=_exact("drag model 'test-linear-re' is already "
                                                "registered; pick another name.")):  # fmt: skip
        register_drag_model(_linear_model("test-linear-re"))


def test_register_rejects_mismatched_lengths(monkeypatch):
    """regression: parameters, initial values and bounds must match in length."""
    monkeypatch.setattr(registry, "_REGISTRY", dict(registry._REGISTRY))
    bad = DragModel(name="test-bad", parameters=("a", "b"), initial=(0.5,),
                    bounds=((0, 1), (0, 1)), kernel=_linear_re_kernel)  # fmt: skip
    with pytest.raises(ValueError, match=_exact(
        "drag model 'test-bad': parameters, initial and bounds differ in length (2, 1, 2); give "
        "one initial value and one (low, high) bound per parameter."
    )):  # fmt: skip
        register_drag_model(bad)
    assert "test-bad" not in drag_model_names()


def _developers_recipe(tmp_path, monkeypatch):
    """The DEVELOPERS.md "Adding a drag model" code block, written to a module and imported
    (it registers "log-linear" in a copy of the registry)."""
    text = (Path(__file__).resolve().parents[1] / "DEVELOPERS.md").read_text(encoding="utf-8")
    code = text.split("## Adding a drag model", 1)[1].split("```python\n", 1)[1]
    (tmp_path / "recipe_drag_law.py").write_text(code.split("```", 1)[0], encoding="utf-8")
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.setattr(registry, "_REGISTRY", dict(registry._REGISTRY))
    importlib.invalidate_caches()
    return importlib.import_module("recipe_drag_law")


def test_developers_recipe_law_in_a_fit_and_after_pickling(tmp_path, monkeypatch):
    """closed-form/independent: the drag law of DEVELOPERS.md's recipe, C_d = a + b ln(Re/Re_ref),
    registered by name, fits a track of constant C_d = 0.47 integrated independently
    (tests/reference.py: scipy DOP853, Timmerman & van der Weele 1999 eq. 1) to a = 0.47 and
    b = 0 within 4 standard uncertainties; the model pickled and unpickled (as Dask workers and
    multiprocessing receive it) rebuilds its callback and fits bit for bit the same; without
    its callback_function (the closure path) the fit is the same to 1e-12."""
    from fitdrag import Air, Sphere, Track, fit_tracks

    try:
        _developers_recipe(tmp_path, monkeypatch)
        sc = ref.Scenario()  # Cd 0.47, 400 samples at 400 Hz, Re about 2e4
        xy = sc.truth() + np.random.default_rng(11).normal(0.0, sc.sigma, (sc.n, 2))
        track = Track(sc.t, xy[:, 0], xy[:, 1])
        args = (track, Sphere(sc.mass, sc.diameter), Air(ref.RHO, ref.MU))
        r = fit_tracks(*args, model="log-linear")
        assert r.success and r.model == "log-linear"
        u = np.sqrt(np.diag(r.covariance))
        ia, ib = r.parameter_names.index("a"), r.parameter_names.index("b")
        assert abs(r.values[ia] - 0.47) <= 4.0 * u[ia]
        assert abs(r.values[ib]) <= 4.0 * u[ib]
        model = get_drag_model("log-linear")
        copy = pickle.loads(pickle.dumps(model))
        assert "callback" not in copy.__dict__
        np.testing.assert_array_equal(fit_tracks(*args, model=copy).values, r.values)
        closure = dataclasses.replace(model, name="log-linear-closure", callback_function=None)
        np.testing.assert_allclose(fit_tracks(*args, model=closure).values, r.values,
                                   rtol=1e-12)  # fmt: skip
    finally:
        sys.modules.pop("recipe_drag_law", None)
