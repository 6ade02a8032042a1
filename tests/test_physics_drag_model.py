"""Tests of fitdrag.physics.drag_model: a drag law's validity range and its constants, and
its callback called by address.

Labels: regression (the messages and the range rule are this project's own),
closed-form/independent (the callback against the kernel).
"""

from __future__ import annotations

import re

import numba
import numpy as np
import pytest

from fitdrag.physics.drag_model import DragModel, call_law


def _exact(message: str) -> str:
    return "^" + re.escape(message) + "$"


@numba.njit(cache=False)
def _linear_re_kernel(re, p, grad):
    # C_d = a + b (Re / Re0): a test law with one constant Re0
    grad[0] = 1.0
    grad[1] = re / p[2]
    return p[0] + p[1] * re / p[2], p[1] / p[2]


def _linear_model(name):
    return DragModel(
        name=name,
        parameters=("a", "b"),
        initial=(0.5, 0.0),
        bounds=((0.0, 5.0), (-1.0, 1.0)),
        kernel=_linear_re_kernel,
        constants=("re0",),
        re_range=(10.0, 1e5),
        constants_from_re=lambda re: (float(np.max(re)),),
    )


def test_re_range_and_constants_errors():
    """regression: leaving a model's Re range, or asking constants of a model with no rule."""
    m = _linear_model("unregistered")
    m.check_re_range(10.0, 1e5)  # inside: no error
    with pytest.raises(ValueError, match=_exact(
        "drag model 'unregistered': the flight spans Re 5–2e+04, outside the model's validity "
        "Re 10–1e+05; choose another model (e.g. 'power-law' or 'constant') or a flight inside "
        "that range."
    )):  # fmt: skip
        m.check_re_range(5.0, 2e4)
    no_rule = DragModel(name="no-rule", parameters=("a",), initial=(0.5,), bounds=((0, 1),),
                        kernel=_linear_re_kernel, constants=("re0",))  # fmt: skip
    with pytest.raises(ValueError, match=_exact(
        "drag model 'no-rule': it has constants ('re0',) but no rule to set them; give "
        "DragModel(constants_from_re=...) when registering it."
    )):  # fmt: skip
        no_rule.constants_for([1.0])


@numba.njit
def _sum_through_address(address, re, p, grad, dre):
    s = 0.0
    for i in range(5):
        s += call_law(address, re * (1.0 + i), p, grad, dre)
    return s


def test_call_law_by_address_equals_the_kernel():
    """closed-form/independent: a law called from compiled code through its callback's
    address (as the integrators call it) returns the kernel's own C_d, ∂C_d/∂p and dC_d/dRe
    (the kernel called from Python) for a law of the test and a built-in one; the callback
    is rebuilt after pickling (a compiled callback is not picklable)."""
    import pickle

    from fitdrag.physics.registry import get_drag_model

    for model, p in ((_linear_model("linear-address"), np.array([0.4, 0.1, 2e4])),
                     (get_drag_model("power-law"), np.array([0.5, -0.2, 3e4]))):  # fmt: skip
        grad, dre = np.zeros(3), np.zeros(1)
        got = _sum_through_address(model.callback.address, 1e4, p, grad, dre)
        g_ref = np.zeros(3)
        want = sum(model.kernel(1e4 * (1.0 + i), p, g_ref)[0] for i in range(5))
        assert got == pytest.approx(want, rel=1e-14)
        # the last call's derivatives (Re = 5e4)
        cd, d_re = model.kernel(5e4, p, g_ref)
        np.testing.assert_allclose(grad[:2], g_ref[:2], rtol=1e-14)
        assert dre[0] == pytest.approx(d_re, rel=1e-14)
    copy = pickle.loads(pickle.dumps(model))  # the built-in law (the test's has a lambda)
    assert "callback" not in copy.__dict__ and copy.callback.address != 0
