"""The certificate's font, and the characters it cannot draw.

The certificate is drawn with matplotlib's default sans-serif font (DejaVu Sans, shipped with
matplotlib).  A character outside its character map is drawn as an empty box; a certificate
must not show text that differs from the text stored, so such text is refused before any work
(:func:`font_gaps`) rather than drawn wrongly.
"""

from __future__ import annotations

import functools
import unicodedata
from collections.abc import Mapping

__all__ = ["certificate_font", "font_gaps"]


@functools.cache
def certificate_font() -> tuple[str, frozenset[int]]:
    """The certificate font's family name and the code points it can draw."""
    from matplotlib import font_manager
    from matplotlib.ft2font import FT2Font

    path = font_manager.findfont(font_manager.FontProperties(family=["sans-serif"]))
    font = FT2Font(path)
    return font.family_name, frozenset(font.get_charmap())


def font_gaps(texts: Mapping[str, str]) -> dict[str, list[str]]:
    """For each named text, the characters the certificate's font cannot draw, as
    ``'株' (U+682A CJK UNIFIED IDEOGRAPH-682A)``; names without gaps are left out.  Line
    breaks and tabs are layout, not glyphs."""
    _, codes = certificate_font()
    out: dict[str, list[str]] = {}
    for name, text in texts.items():
        seen: list[str] = []
        for ch in dict.fromkeys(text or ""):
            if ch in "\n\t" or ord(ch) in codes:
                continue
            seen.append(f"{ch!r} (U+{ord(ch):04X} {unicodedata.name(ch, 'unnamed')})")
        if seen:
            out[name] = seen
    return out
