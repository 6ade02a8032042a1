"""Input checks shared by the library: each error names the input, the value and the fix."""

from __future__ import annotations

import math
from typing import Any

from fitdrag.errors import InputError


def number(name: str, value: Any, unit: str, fix: str) -> float:
    """``value`` as a float, or ValueError "name: expected a number in unit, got ...; fix"."""
    try:
        return float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: expected a number in {unit}, got {value!r}; {fix}") from None


def positive_number(name: str, value: Any, unit: str, fix: str) -> float:
    """``value`` as a finite float > 0, or a ValueError naming the input, value and fix."""
    v = number(name, value, unit, fix)
    if not math.isfinite(v) or v <= 0:
        raise InputError(f"{name}: must be a finite number > 0 {unit}, got {value!r}; {fix}")
    return v
