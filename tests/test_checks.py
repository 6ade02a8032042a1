"""Shared input checks (fitdrag._checks) — regression tests of the exact messages."""

from __future__ import annotations

import math
import re

import pytest

from fitdrag._checks import number, positive_number


def test_number_and_positive_number():
    """regression: values pass through as floats; bad ones name the input, value and fix."""
    assert number("wind", "2.5", "m/s", "fix it.") == 2.5
    assert positive_number("mass", 3, "kg", "fix it.") == 3.0
    with pytest.raises(
        ValueError, match=re.escape("wind: expected a number in m/s, got 'calm'; fix it.")
    ):
        number("wind", "calm", "m/s", "fix it.")
    for bad in (0.0, -1.0, math.nan, math.inf):
        with pytest.raises(ValueError, match=r"^mass: must be a finite number > 0 kg, got "):
            positive_number("mass", bad, "kg", "fix it.")
