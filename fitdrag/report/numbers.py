"""Numbers for print: rounding a value and its uncertainty together (JCGM 100:2008, 7.2.6).

``format_with_uncertainty`` rounds U to two significant digits and the value to the same
decimal place; ``format_sig`` prints other numbers to a few significant digits;
``formatter_for`` gives a function printing numbers at the decimal place of an uncertainty.
Rounding is half up, on the decimal representation (not on the binary float).

References
----------
1. JCGM 100:2008 (GUM), 7.2.2–7.2.6 (reporting the expanded uncertainty; rounding).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from decimal import ROUND_HALF_UP, Decimal

__all__ = ["format_probability", "format_sig", "format_with_uncertainty", "formatter_for"]


def _decimals_for(u: float, digits: int) -> int:
    """Decimal places that show ``u`` with ``digits`` significant digits after rounding."""
    e = math.floor(math.log10(abs(u)))
    dec = digits - 1 - e
    r = float(Decimal(repr(abs(u))).quantize(Decimal(1).scaleb(-dec), rounding=ROUND_HALF_UP))
    if r >= 10.0 ** (e + 1):  # rounding carried into a new digit, e.g. 0.0996 -> 0.100
        dec -= 1
    return dec


def _fixed(x: float, dec: int) -> str:
    q = Decimal(repr(float(x))).quantize(Decimal(1).scaleb(-dec), rounding=ROUND_HALF_UP)
    s = f"{q:f}"
    if dec <= 0 and "." in s:
        s = s.split(".")[0]
    if s.startswith("-") and float(q) == 0.0:
        s = s[1:]
    return s


def format_with_uncertainty(value: float, uncertainty: float, digits: int = 2) -> tuple[str, str]:
    """Round an uncertainty to ``digits`` significant digits and the value to the same
    decimal place (GUM 7.2.6), e.g. (0.4700475, 0.011843) -> ("0.470", "0.012").

    A zero or non-finite uncertainty leaves the value at six significant digits.
    """
    v, u = float(value), float(uncertainty)
    if not math.isfinite(v):
        return ("—", format_sig(u, digits) if math.isfinite(u) else "—")
    if not (math.isfinite(u) and u > 0):
        return (format_sig(v, 6), "—" if not math.isfinite(u) else "0")
    dec = _decimals_for(u, digits)
    return _fixed(v, dec), _fixed(u, dec)


def format_sig(x: float | None, digits: int = 3) -> str:
    """``x`` to ``digits`` significant digits, plain notation between 1e-4 and 1e6."""
    if x is None:
        return "—"
    x = float(x)
    if not math.isfinite(x):
        return "∞" if x > 0 else ("−∞" if x < 0 else "—")
    if x == 0:
        return "0"
    e = math.floor(math.log10(abs(x)))
    if -4 <= e < 6:
        dec = max(0, digits - 1 - e)
        q = Decimal(repr(x)).quantize(Decimal(1).scaleb(-(digits - 1 - e)), ROUND_HALF_UP)
        return _fixed(float(q), dec)
    return f"{x:.{digits - 1}e}"


def formatter_for(uncertainty: float, digits: int = 2) -> Callable[[float], str]:
    """A function printing numbers at the decimal place of ``uncertainty`` rounded to
    ``digits`` significant digits (for statements quoting value, U and limits together)."""
    u = float(uncertainty)
    if not (math.isfinite(u) and u > 0):
        return lambda x: format_sig(x, 6)
    dec = _decimals_for(u, digits)
    return lambda x: _fixed(x, dec)


def format_probability(p: float) -> str:
    """A probability as a percentage to 0.1 %, never rounded to a certainty: "> 99.9 %" above
    0.999, "< 0.1 %" below 0.001 (a computed probability of 1 or 0 under a normal model is a
    rounding, not a fact)."""
    p = float(p)
    if p > 0.999:
        return "> 99.9 %"
    if p < 0.001:
        return "< 0.1 %"
    return f"{100 * p:.1f} %"
