"""Tests of fitdrag.physics.registry: drag models looked up and registered by name.

Oracle for the registered law's use: the quadratic drag force F = ½ ρ C_d A |u|² (Munson et
al., Fundamentals of Fluid Mechanics, drag definition) written out here.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
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
