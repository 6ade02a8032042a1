"""Tests of fitdrag.report.fonts: the characters the certificate's font cannot draw.

Labels: closed-form/independent (the font file's own character map, read with fontTools'
independent reader where available; Unicode names from unicodedata), regression.
"""

from __future__ import annotations

import pytest

from fitdrag.report.fonts import certificate_font, font_gaps


def test_certificate_font_is_dejavu_sans_and_its_map_is_the_files():
    """closed-form/independent: the family is matplotlib's default DejaVu Sans; its character
    map agrees with fontTools' reading of the same file (where fontTools is installed)."""
    name, codes = certificate_font()
    assert name == "DejaVu Sans"
    assert ord("é") in codes and ord("Ω") in codes and ord("±") in codes
    fonttools = pytest.importorskip("fontTools.ttLib")
    from matplotlib import font_manager

    path = font_manager.findfont(font_manager.FontProperties(family=["sans-serif"]))
    cmap = fonttools.TTFont(path).getBestCmap()
    assert set(cmap) == set(codes)


def test_font_gaps_names_the_missing_characters():
    """regression: CJK characters are named with their code point and Unicode name; Latin
    text with accents, line breaks and tabs have no gaps."""
    gaps = font_gaps({"[test] customer": "株式会社 Ltd", "[test] notes": "Grüße\n\tok"})
    assert gaps == {
        "[test] customer": [
            "'株' (U+682A CJK UNIFIED IDEOGRAPH-682A)",
            "'式' (U+5F0F CJK UNIFIED IDEOGRAPH-5F0F)",
            "'会' (U+4F1A CJK UNIFIED IDEOGRAPH-4F1A)",
            "'社' (U+793E CJK UNIFIED IDEOGRAPH-793E)",
        ]
    }
