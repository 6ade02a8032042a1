"""The drag-law type: a law C_d(Re; p) as a numba kernel, and its fixed-signature callback.

A :class:`DragModel` holds a numba-compiled function ``cd(re, p, grad) -> (cd, dcd_dre)``
that also writes ∂C_d/∂p into ``grad``.  The simulator receives it as a C callback of one
fixed signature (:data:`CD_SIGNATURE`), so that the compiled integrator is cached once for
every law.  The laws themselves are in :mod:`fitdrag.physics.drag_laws`; the registry by
name in :mod:`fitdrag.physics.registry`.

The callback is compiled on first use in a process.  A law that gives
``callback_function`` (a plain top-level function of :data:`CD_SIGNATURE` calling its kernel;
every built-in law does) has it compiled with numba's disk cache, so that a later process
loads it instead of compiling it again (about 0.1 s); without one, the callback is a closure
over the kernel, compiled in every process: numba cannot cache a closure over a compiled
function (the key it hashes holds the function's per-process identity, so each process
would miss the cache and write a new copy).

References
----------
1. B. R. Munson et al., *Fundamentals of Fluid Mechanics*, Wiley: drag force
   F_D = ½ ρ C_d A |u|² with C_d a function of the Reynolds number.
"""

from __future__ import annotations

import functools
import inspect
import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from types import FunctionType

import numba
import numpy as np
from numba import types
from numba.extending import intrinsic

from fitdrag.errors import InputError

__all__ = ["CD_SIGNATURE", "DragModel", "call_law"]

#: Signature of a drag law as passed to the integrator: (re, p, grad, dcd_dre_out) -> cd.
CD_SIGNATURE = types.float64(
    types.float64, types.float64[::1], types.float64[::1], types.float64[::1]
)


@dataclass(frozen=True)
class DragModel:
    """A drag-coefficient law C_d(Re; p) usable by the simulator and the fit.

    Parameters
    ----------
    name : str
        Registry name (``"constant"``, ...).
    parameters : tuple of str
        Names of the fitted parameters, in the order of ``p``.
    initial : tuple of float
        A starting value for each fitted parameter. [unit of the parameter; C_d laws: -]
    bounds : tuple of (float, float)
        Lower and upper bound of each fitted parameter. [unit of the parameter]
    kernel : numba dispatcher
        ``kernel(re, p, grad) -> (cd, dcd_dre)``; ``p`` holds the fitted parameters
        followed by the constants; ``grad[j]`` receives ∂C_d/∂p_j for the fitted ones.
    constants : tuple of str
        Names of fixed constants appended to ``p`` after the fitted parameters.
    re_range : (float, float)
        Reynolds-number range where the law is valid; outside it a fit is refused. [-]
    reference : str
        Published source of the law.
    description : str
        One line for tables and reports.
    constants_from_re : callable, optional
        ``f(re_values) -> constants``: how the fit sets the constants from the Reynolds
        numbers of a first-pass flight (e.g. the median Re as reference).
    callback_function : function, optional
        ``f(re, p, grad, dcd_dre) -> cd``: a plain (undecorated) function defined at the
        top of a module, with no closure, that calls ``kernel`` and writes its dC_d/dRe into
        ``dcd_dre[0]``.  When given, the C callback is compiled from it with numba's disk
        cache (next to that module), so a fresh process loads it rather than compiling it.
        Without it the callback is compiled in each process.  It must compute the same law
        as ``kernel`` (the integrator calls the callback, the results' Cd at the median Re
        calls the kernel); nothing checks a user's pair, so change them together (the
        built-in laws' pairs are checked in tests/test_physics_drag_model.py).
    """

    name: str
    parameters: tuple[str, ...]
    initial: tuple[float, ...]
    bounds: tuple[tuple[float, float], ...]
    kernel: Callable = field(repr=False)
    constants: tuple[str, ...] = ()
    re_range: tuple[float, float] = (0.0, math.inf)
    reference: str = ""
    description: str = ""
    constants_from_re: Callable | None = field(default=None, repr=False)
    callback_function: Callable | None = field(default=None, repr=False)

    def __post_init__(self) -> None:
        f = self.callback_function
        if f is None:
            return
        nested = isinstance(f, FunctionType) and "<locals>" in f.__qualname__
        if not isinstance(f, FunctionType) or f.__closure__ is not None or nested:
            raise InputError(
                f"drag model {self.name!r}: callback_function must be a plain function defined "
                f"at the top of a module (not decorated, not nested, no closure) so that "
                f"numba can cache its compiled callback on disk; got {f!r}. Define "
                f"'def callback(re, p, grad, dcd_dre)' next to the kernel, or leave "
                f"callback_function out."
            )

    def constants_for(self, re_values) -> tuple[float, ...]:
        """Constants for a flight whose Reynolds numbers are ``re_values`` (e.g. a median Re)."""
        if not self.constants:
            return ()
        if self.constants_from_re is None:
            raise InputError(
                f"drag model {self.name!r}: it has constants {self.constants} but no rule to "
                f"set them; give DragModel(constants_from_re=...) when registering it."
            )
        return tuple(float(c) for c in self.constants_from_re(np.asarray(re_values, float)))

    def cd(self, re, p) -> np.ndarray:
        """Evaluate C_d at Reynolds numbers ``re`` with parameters ``p`` (fitted + constants)."""
        re = np.atleast_1d(np.asarray(re, dtype=float))
        p = np.asarray(p, dtype=float)
        grad = np.zeros(max(len(p), 1))
        return np.array([self.kernel(float(r), p, grad)[0] for r in re])

    def __getstate__(self):
        # the compiled callback is rebuilt on first use after unpickling (a cfunc does not
        # pickle)
        state = dict(self.__dict__)
        state.pop("callback", None)
        return state

    @functools.cached_property
    def callback(self):
        """The kernel wrapped as a C callback of fixed signature for the integrator, built on
        first use in a process: from ``callback_function`` through numba's disk cache (loaded,
        or compiled once and saved) when the law has one, else compiled from a closure.  A
        ``callback_function`` defined outside a source file (an interactive session, ``exec``)
        has nowhere for numba to keep its cache: it is compiled in every process instead."""
        f = self.callback_function
        if f is not None:
            source = inspect.getsourcefile(f)
            cacheable = source is not None and os.path.isfile(source)
            return numba.cfunc(CD_SIGNATURE, cache=cacheable)(f)
        return _as_callback(self.kernel)

    def check_re_range(self, re_min: float, re_max: float) -> None:
        """Raise ValueError when [re_min, re_max] leaves the law's validity range."""
        lo, hi = self.re_range
        if re_min < lo or re_max > hi:
            raise InputError(
                f"drag model {self.name!r}: the flight spans Re {re_min:.3g}–{re_max:.3g}, "
                f"outside the model's validity Re {lo:.3g}–{hi:.3g}; choose another model "
                f"(e.g. 'power-law' or 'constant') or a flight inside that range."
            )


def _as_callback(kernel):
    """Wrap ``kernel(re, p, grad) -> (cd, dcd_dre)`` as a numba cfunc of fixed signature.

    Passing a fixed-signature callback (rather than the kernel's own dispatcher) lets the
    compiled integrator be cached on disk once for all drag models.  This closure is compiled
    in every process (not cached: see the module notes); laws with a ``callback_function``
    do not use it.
    """

    @numba.cfunc(CD_SIGNATURE)
    def callback(re, p, grad, dcd_dre):
        cd, d = kernel(re, p, grad)
        dcd_dre[0] = d
        return cd

    return callback


_VEC = types.float64[::1]


@intrinsic
def call_law(typingctx, address, re, p, grad, dcd_dre):
    """Call a drag law's callback (:attr:`DragModel.callback`) from compiled code by its
    address: ``call_law(model.callback.address, re, p, grad, dcd_dre) -> cd``.

    The integrators take the address as a plain integer rather than the callback object, so
    that a call from Python does not type the callback every time (about 9 µs a call for a
    first-class function argument) and the compiled integrator, free of run-time addresses,
    stays in numba's disk cache.  The call follows numba's C convention for a callback of
    :data:`CD_SIGNATURE` (arrays passed as their descriptor structures by value), as numba's
    own calls of first-class functions do.  The address is that of a callback alive in this
    process: take it at the call, never store it.
    """
    sig = types.float64(types.int64, types.float64, _VEC, _VEC, _VEC)

    def codegen(context, builder, signature, args):
        from llvmlite import ir

        arg_types = [context.get_value_type(t) for t in signature.args[1:]]
        fnty = ir.FunctionType(context.get_value_type(types.float64), arg_types)
        fptr = builder.inttoptr(args[0], fnty.as_pointer())
        return builder.call(fptr, args[1:])

    return sig, codegen
