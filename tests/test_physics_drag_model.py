"""Tests of fitdrag.physics.drag_model: a drag law's validity range and its constants.

regression only: the messages and the range rule are this project's own.
"""

from __future__ import annotations

import re

import numba
import numpy as np
import pytest

from fitdrag.physics.drag_model import DragModel


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
