"""Drag models by name: the built-in laws and any a user registers.

One public function over pluggable laws: :func:`get_drag_model` looks a law up by name and
an unknown name is an error listing the valid ones; :func:`register_drag_model` adds one.
The built-in laws (constant, the scaled smooth-sphere correlations, the power law) come
from :mod:`fitdrag.physics.drag_laws`.
"""

from __future__ import annotations

from fitdrag.errors import InputError
from fitdrag.physics import drag_laws
from fitdrag.physics.drag_model import DragModel

__all__ = ["drag_model_names", "get_drag_model", "register_drag_model"]

_REGISTRY: dict[str, DragModel] = {}


def register_drag_model(model: DragModel) -> DragModel:
    """Add ``model`` to the registry under ``model.name`` (replacing none)."""
    if model.name in _REGISTRY:
        raise InputError(f"drag model {model.name!r} is already registered; pick another name.")
    if not (len(model.parameters) == len(model.initial) == len(model.bounds)):
        raise InputError(
            f"drag model {model.name!r}: parameters, initial and bounds differ in length "
            f"({len(model.parameters)}, {len(model.initial)}, {len(model.bounds)}); give one "
            f"initial value and one (low, high) bound per parameter."
        )
    _REGISTRY[model.name] = model
    return model


def get_drag_model(name: str | DragModel) -> DragModel:
    """Look up a registered drag model by name (a DragModel passes through)."""
    if isinstance(name, DragModel):
        return name
    try:
        return _REGISTRY[name]
    except KeyError:
        raise InputError(
            f"drag model: unknown name {name!r}; valid names: {', '.join(drag_model_names())}."
        ) from None


def drag_model_names() -> list[str]:
    """Names of all registered drag models."""
    return sorted(_REGISTRY)


for _model in drag_laws.BUILTIN_MODELS:
    register_drag_model(_model)
del _model
