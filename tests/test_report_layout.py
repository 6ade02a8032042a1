"""Tests of fitdrag.report.layout: placing blocks on A4 pages.

Labels: closed-form/independent (page arithmetic: A4 is 297 mm = 11.69 in high, ISO 216),
regression.
"""

from __future__ import annotations

from fitdrag.report.layout import MARGIN_B, MARGIN_T, PAGE_H, Layout


def _blocks(layout, *heights):
    for h in heights:
        layout.add(h, lambda fig, y: None)


def test_blocks_flow_onto_a_new_page_at_the_bottom_margin():
    """closed-form/independent: the body of an A4 page (11.69 in, ISO 216) between the top
    (0.75 in + 0.3 in) and bottom (0.85 in) margins holds 9.79 in: three 3 in blocks fit,
    a fourth goes to page 2."""
    assert abs(PAGE_H - 297 / 25.4) < 0.005
    room = PAGE_H - MARGIN_B - (MARGIN_T + 0.3)
    assert abs(room - 9.79) < 1e-9
    lay = Layout()
    _blocks(lay, 3.0, 3.0, 3.0, 3.0)
    assert [len(p) for p in lay.paginate()] == [3, 1]


def test_page_break_unless_room():
    """regression: a plain page break always starts a new page (after content); with
    ``unless_room`` only when less than that room is left."""
    lay = Layout()
    _blocks(lay, 2.0)
    lay.page_break()
    _blocks(lay, 2.0)
    assert [len(p) for p in lay.paginate()] == [1, 1]
    lay = Layout()
    _blocks(lay, 2.0)
    lay.page_break(unless_room=5.0)  # 7.79 in left: stay on the page
    _blocks(lay, 5.0)
    assert [len(p) for p in lay.paginate()] == [2]
    lay = Layout()
    _blocks(lay, 6.0)
    lay.page_break(unless_room=5.0)  # 3.79 in left: new page
    _blocks(lay, 1.0)
    assert [len(p) for p in lay.paginate()] == [1, 1]


def test_wrapping_keeps_signs_with_their_numbers():
    """regression: wrapped at every possible width, no line ends in a comparison or
    plus-minus sign or starts with a lone unit sign: "> 99.9 %" and "± 0.0070" stay whole
    (common practice in typesetting, no source)."""
    from fitdrag.report.layout import _wrap

    text = ("Decision: PASS (decision rule: guarded acceptance; probability of conformity "
            "> 99.9 %) with Cd = 0.4897 ± 0.0070 at 27.45° elevation")  # fmt: skip
    for width in [x / 10 for x in range(15, 80)]:
        lines = _wrap(text, 10.0, width)
        assert " ".join(lines).replace("\u00a0", " ") == text
        for ln in lines:
            assert not ln.rstrip().endswith((">", "±")) and not ln.startswith(("%", "°"))
