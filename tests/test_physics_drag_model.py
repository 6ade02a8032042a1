"""Tests of fitdrag.physics.drag_model: a drag law's validity range and its constants, and
its callback called by address, compiled from a closure or loaded from numba's disk cache.

Labels: regression (the messages, the range rule and the cache use are this project's own),
closed-form/independent (the callback against the kernel).
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import numba
import numpy as np
import pytest

from fitdrag.physics.drag_laws import BUILTIN_MODELS
from fitdrag.physics.drag_model import DragModel, call_law


def _exact(message: str) -> str:
    return "^" + re.escape(message) + "$"


@numba.njit(cache=False)
def _linear_re_kernel(re, p, grad):
    # C_d = a + b (Re / Re0): a test law with one constant Re0
    grad[0] = 1.0
    grad[1] = re / p[2]
    return p[0] + p[1] * re / p[2], p[1] / p[2]


def _linear_model(name, callback_function=None):
    return DragModel(
        name=name,
        parameters=("a", "b"),
        initial=(0.5, 0.0),
        bounds=((0.0, 5.0), (-1.0, 1.0)),
        kernel=_linear_re_kernel,
        constants=("re0",),
        re_range=(10.0, 1e5),
        constants_from_re=lambda re: (float(np.max(re)),),
        callback_function=callback_function,
    )


@numba.njit(cache=True)
def _linear_re_kernel_cached(re, p, grad):
    # the same test law, for the cached callback below
    grad[0] = 1.0
    grad[1] = re / p[2]
    return p[0] + p[1] * re / p[2], p[1] / p[2]


def _linear_re_callback(re, p, grad, dcd_dre):
    # a user's law with its own cached callback (DragModel.callback_function)
    cd, d = _linear_re_kernel_cached(re, p, grad)
    dcd_dre[0] = d
    return cd


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


def _builtin_cases():
    from fitdrag.physics.drag_laws import BUILTIN_MODELS

    params = {"constant": [0.47], "power-law": [0.5, -0.2, 3e4]}
    return [(m, np.array(params.get(m.name, [0.9]))) for m in BUILTIN_MODELS]


@pytest.mark.parametrize(("model", "p"), _builtin_cases(), ids=lambda v: getattr(v, "name", ""))
def test_every_builtin_callback_equals_its_kernel(model, p):
    """closed-form/independent: each built-in law's callback (compiled from its own
    top-level callback function with numba's disk cache) returns, called by address from
    compiled code, the C_d, ∂C_d/∂p and dC_d/dRe of the law's kernel called from Python,
    at Reynolds numbers across the law's range (oracle: the kernel itself, whose values
    tests/test_physics_sphere_drag.py and test_physics_drag_laws.py check against the
    published formulas) — so no law is wired to another law's callback."""
    assert model.callback_function is not None
    assert model.callback_function.__module__ == model.kernel.py_func.__module__
    for re_ in (0.5, 30.0, 2.5e3, 1.5e5):
        grad, dre, g_ref = np.zeros(3), np.zeros(1), np.zeros(3)
        got = _sum_through_address(model.callback.address, re_, p, grad, dre)
        want = sum(model.kernel(re_ * (1.0 + i), p, g_ref)[0] for i in range(5))
        assert got == pytest.approx(want, rel=1e-14)
        cd, d_re = model.kernel(5.0 * re_, p, g_ref)
        np.testing.assert_allclose(grad[: len(model.parameters)],
                                   g_ref[: len(model.parameters)], rtol=1e-14)  # fmt: skip
        assert dre[0] == pytest.approx(d_re, rel=1e-14)


def test_user_law_with_a_cached_callback_and_after_pickling():
    """closed-form/independent: a user's law with its own top-level callback function gives
    the same values through its callback as through its kernel; after pickling (as Dask and
    multiprocessing send a model) the copy rebuilds its callback, loaded from numba's disk
    cache (the first build in this process compiled or loaded it; the rebuild finds it)."""
    import pickle

    m = DragModel(name="user-cached", parameters=("a", "b"), initial=(0.5, 0.0),
                  bounds=((0.0, 5.0), (-1.0, 1.0)), kernel=_linear_re_kernel_cached,
                  constants=("re0",), callback_function=_linear_re_callback)  # fmt: skip
    p = np.array([0.4, 0.1, 2e4])
    grad, dre = np.zeros(3), np.zeros(1)
    got = _sum_through_address(m.callback.address, 1e4, p, grad, dre)
    # closed form: sum of a + b Re/Re0 over Re = 1e4 (1 + i), i = 0..4
    assert got == pytest.approx(sum(0.4 + 0.1 * 1e4 * (1 + i) / 2e4 for i in range(5)),
                                rel=1e-14)  # fmt: skip
    assert dre[0] == pytest.approx(0.1 / 2e4, rel=1e-14)
    copy = pickle.loads(pickle.dumps(m))
    assert "callback" not in copy.__dict__
    assert copy.callback.cache_hits == 1 and copy.callback.address != 0
    assert _sum_through_address(copy.callback.address, 1e4, p, grad, dre) == got


def _closure_callback():
    kernel = _linear_re_kernel

    def callback(re, p, grad, dcd_dre):
        cd, d = kernel(re, p, grad)
        dcd_dre[0] = d
        return cd

    return callback


def test_callback_function_must_be_a_plain_top_level_function():
    """regression: a closure, a nested function or an already compiled function is refused
    with the fix (numba cannot cache a closure over a compiled kernel)."""
    bad = _closure_callback()
    with pytest.raises(ValueError, match=_exact(
        f"drag model 'bad': callback_function must be a plain function defined at the top of "
        f"a module (not decorated, not nested, no closure) so that numba can cache its "
        f"compiled callback on disk; got {bad!r}. Define 'def callback(re, p, grad, dcd_dre)' "
        f"next to the kernel, or leave callback_function out."
    )):  # fmt: skip
        _linear_model("bad", callback_function=bad)
    with pytest.raises(ValueError, match="got CPUDispatcher"):
        _linear_model("bad", callback_function=_linear_re_kernel)
    assert _linear_model("fine", callback_function=_linear_re_callback).callback_function is (
        _linear_re_callback
    )


BUILTIN_CONSTANT = next(m for m in BUILTIN_MODELS if m.name == "constant")


def test_callback_function_defined_outside_a_file_is_compiled_without_the_cache():
    """regression: a callback function defined by ``exec`` (as in an interactive session) has
    no source file for numba's cache; it is compiled without the cache instead of failing,
    and gives the kernel's values (closed form: C_d = a)."""
    source = (
        "from fitdrag.physics.drag_laws import _cd_constant as cd_constant\n"
        "def callback(re, p, grad, dcd_dre):\n"
        "    cd, d = cd_constant(re, p, grad)\n"
        "    dcd_dre[0] = d\n"
        "    return cd\n"
    )
    ns: dict = {}
    exec(source, ns)
    m = DragModel(name="typed-in", parameters=("cd",), initial=(0.5,), bounds=((0.0, 5.0),),
                  kernel=BUILTIN_CONSTANT.kernel, callback_function=ns["callback"])  # fmt: skip
    grad, dre = np.zeros(1), np.zeros(1)
    got = _sum_through_address(m.callback.address, 1e4, np.array([0.47]), grad, dre)
    assert got == pytest.approx(5 * 0.47, rel=1e-15)
    assert m.callback.cache_hits == 0


# A fresh interpreter: every built-in law's callback (and a user's law with its own callback
# function, from this module) and one integration with sensitivities per law; it reports the
# callbacks' cache hits and every function numba's compiler ran a pass on (numba.core.event,
# "numba:run_pass": broadcast for each compiler pass, never for a load from the disk cache).
_FRESH_PROCESS = """
import json, sys
sys.path.insert(0, sys.argv[1])
from reference import NUMBA_PASSES
exec(NUMBA_PASSES)
import numpy as np
from fitdrag.physics.air import Air
from fitdrag.physics.drag_laws import BUILTIN_MODELS
from fitdrag.physics.forces import Conditions
from fitdrag.physics.simulate import Launch, simulate
from fitdrag.physics.specimen import Sphere
from test_physics_drag_model import _linear_model, _linear_re_callback

hits = {}
t = np.linspace(0.0, 0.5, 40)
for m in (*BUILTIN_MODELS, _linear_model("user-cached", _linear_re_callback)):
    p = {"constant": (0.47,), "power-law": (0.5, -0.1, 2e4), "user-cached": (0.4, 0.0, 2e4)}
    simulate(t, Launch(0.0, 1.0, 7.0, 4.0), Sphere(0.0027, 0.04), Conditions(Air(1.2, 1.8e-5)),
             model=m, drag_params=p.get(m.name, (0.9,)), sensitivities=True)
    hits[m.name] = m.callback.cache_hits
print(json.dumps({"hits": hits, "compiled": sorted(compiled)}))
"""


def test_fresh_process_loads_every_callback_from_the_disk_cache():
    """regression: in a fresh process after the cache is warm, every built-in law's callback
    (and a user's law with a callback_function) is loaded from numba's disk cache, and an
    integration with sensitivities per law compiles nothing.  The first process may compile
    (a cold cache) and saves; the second must not (numba's documented cache=True behaviour;
    CFunc.cache_hits counts loads from the cache)."""
    tests_dir = str(Path(__file__).resolve().parent)
    env = {k: v for k, v in os.environ.items() if not k.startswith("NUMBA_")}
    for _ in range(2):
        out = subprocess.run([sys.executable, "-c", _FRESH_PROCESS, tests_dir],
                             capture_output=True, text=True, check=True, env=env,
                             timeout=600).stdout  # fmt: skip
    second = json.loads(out.splitlines()[-1])
    assert second["compiled"] == []
    assert set(second["hits"]) >= {"constant", "power-law", "sphere-scaled", "user-cached"}
    assert all(h == 1 for h in second["hits"].values()), second["hits"]
