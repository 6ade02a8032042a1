"""Page layout of the certificate: blocks of text, tables and figures placed on A4 pages.

A :class:`Layout` collects blocks (a height and a function that draws the block at a given
top position) and :meth:`Layout.paginate` places them on pages, breaking a page where a
block would run into the bottom margin or where a page break was asked for.  Positions are
in inches from the top-left corner of the page; :func:`put_text` and :func:`hline` convert
them to matplotlib figure coordinates.  Nothing here knows what a certificate says.
"""

from __future__ import annotations

import re
import textwrap
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

__all__ = ["BODY_W", "Block", "Layout", "MARGIN_B", "MARGIN_L", "MARGIN_R", "MARGIN_T",
           "PAGE_H", "PAGE_W", "hline", "put_text"]  # fmt: skip


PAGE_W, PAGE_H = 8.27, 11.69  # A4 [in]
MARGIN_L, MARGIN_R, MARGIN_T, MARGIN_B = 0.75, 0.75, 0.75, 0.85  # [in]
BODY_W = PAGE_W - MARGIN_L - MARGIN_R
_PT = 1.0 / 72.0
_CHAR_EM = 0.54  # mean glyph width of DejaVu Sans relative to the font size (for wrapping)
_LINE = 1.32


def _wrap(text: str, size: float, width_in: float, bold: bool = False) -> list[str]:
    em = _CHAR_EM * (1.12 if bold else 1.0)
    chars = max(10, int(width_in / (size * _PT * em)))
    out: list[str] = []
    # a number and its unit sign stay on one line ("95.45 %)" never wraps a lone "%)"), and
    # a comparison or plus-minus sign with the number after it ("> 99.9 %", "± 0.0070")
    text = str(text).replace(" %", "\u00a0%").replace(" °", "\u00a0°")
    text = re.sub(r"([<>≤≥±]) (?=[0-9])", "\\1\u00a0", text)
    for para in text.split("\n"):
        out.extend(textwrap.wrap(para, chars, break_long_words=True) or [""])
    return out


@dataclass
class Block:
    """A piece of the page: its height and how to draw it with its top at ``y`` [in]."""

    height: float  # [in]
    draw: Callable[[Any, float], None]  # draw(fig, top_y_in)
    page_break_before: bool = False
    unless_room: float | None = None  # no break when this much room [in] is left


class Layout:
    """Blocks in reading order; :meth:`paginate` places them on pages."""

    def __init__(self) -> None:
        self.blocks: list[Block] = []

    def add(self, height, draw, page_break_before=False):
        self.blocks.append(Block(height, draw, page_break_before))

    def page_break(self, unless_room: float | None = None):
        """Start a new page; with ``unless_room`` [in], only when less room than that is left
        on the current one."""
        self.blocks.append(Block(0.0, lambda fig, y: None, True, unless_room))

    def space(self, h=0.08):
        self.add(h, lambda fig, y: None)

    def heading(self, text, size=10.5):
        h = size * _PT * 1.9

        def draw(fig, y):
            put_text(fig, MARGIN_L, y + 0.02, text, size=size, weight="bold")
            yy = y + size * _PT * 1.45
            fig.add_artist(hline(fig, MARGIN_L, PAGE_W - MARGIN_R, yy, lw=0.6))

        self.add(h, draw)

    def paragraph(self, text, size=8.5, indent=0.0, style="normal", weight="normal"):
        lines = _wrap(text, size, BODY_W - indent, bold=weight == "bold")
        h = len(lines) * size * _PT * _LINE + 0.04

        def draw(fig, y):
            for i, ln in enumerate(lines):
                put_text(fig, MARGIN_L + indent, y + i * size * _PT * _LINE, ln, size=size,
                      style=style, weight=weight)  # fmt: skip

        self.add(h, draw)

    def rows(self, items: Sequence[tuple[str, str]], size=8.5, label_w=1.75):
        wrapped = [(k, _wrap(v, size, BODY_W - label_w)) for k, v in items]
        lh = size * _PT * _LINE
        h = sum(len(v) for _, v in wrapped) * lh + 0.04

        def draw(fig, y):
            yy = y
            for k, lines in wrapped:
                put_text(fig, MARGIN_L, yy, k, size=size, weight="bold")
                for ln in lines:
                    put_text(fig, MARGIN_L + label_w, yy, ln, size=size)
                    yy += lh

        self.add(h, draw)

    def table(self, header, rows, widths, aligns, size=7.4):
        lh = size * _PT * 1.45
        h = (len(rows) + 1) * lh + 0.1

        def draw(fig, y):
            xs = [MARGIN_L]
            for w in widths[:-1]:
                xs.append(xs[-1] + w)
            for cell, x, w, a in zip(header, xs, widths, aligns):
                _cell(fig, x, w, y, cell, a, size, bold=True)
            fig.add_artist(hline(fig, MARGIN_L, MARGIN_L + sum(widths), y + lh - 0.02, lw=0.5))
            for i, row in enumerate(rows):
                yy = y + (i + 1) * lh
                bold = row and str(row[0]).startswith("§")
                for cell, x, w, a in zip(row, xs, widths, aligns):
                    _cell(fig, x, w, yy, str(cell).lstrip("§"), a, size, bold=bold)
            fig.add_artist(
                hline(fig, MARGIN_L, MARGIN_L + sum(widths), y + (len(rows) + 1) * lh, lw=0.5)
            )

        self.add(h, draw)

    def boxed(self, lines: Sequence[tuple[str, float, str]], pad=0.1):
        """Framed lines of (text, size, weight)."""
        wrapped = [
            (ln, s, w)
            for text, s, w in lines
            for ln in _wrap(text, s, BODY_W - 2 * pad, bold=w == "bold")
        ]
        h = sum(s * _PT * _LINE for _, s, _ in wrapped) + 2 * pad

        def draw(fig, y):
            from matplotlib.patches import Rectangle

            fig.add_artist(
                Rectangle(
                    (MARGIN_L / PAGE_W, 1 - (y + h) / PAGE_H),
                    BODY_W / PAGE_W,
                    h / PAGE_H,
                    transform=fig.transFigure,
                    fill=False,
                    lw=0.9,
                    edgecolor="0.2",
                )
            )
            yy = y + pad
            for ln, s, w in wrapped:
                put_text(fig, MARGIN_L + pad, yy, ln, size=s, weight=w)
                yy += s * _PT * _LINE

        self.add(h + 0.06, draw)

    def figure(self, height, draw_axes):
        def draw(fig, y):
            draw_axes(fig, (MARGIN_L / PAGE_W, 1 - (y + height) / PAGE_H, BODY_W / PAGE_W,
                            height / PAGE_H))  # fmt: skip

        self.add(height + 0.1, draw)

    def paginate(self) -> list[list[tuple[Block, float]]]:
        """Pages of (block, top [in]): a new page where a block would cross the bottom
        margin or a page break was asked for (and the room it asks for is not left); empty
        pages are dropped."""
        pages: list[list[tuple[Block, float]]] = [[]]
        y = MARGIN_T + 0.3
        for b in self.blocks:
            wanted = b.page_break_before and (
                b.unless_room is None or y + b.unless_room > PAGE_H - MARGIN_B
            )
            if (wanted and pages[-1]) or (y + b.height > PAGE_H - MARGIN_B and pages[-1]):
                pages.append([])
                y = MARGIN_T + 0.3
            if b.height > 0 or not b.page_break_before:
                pages[-1].append((b, y))
                y += b.height
        return [p for p in pages if p]


def put_text(fig, x_in, y_in, s, size=8.5, weight="normal", style="normal", ha="left",
             family="sans-serif"):  # fmt: skip
    """Text ``s`` with its top at (``x_in``, ``y_in``) [in from the page's top-left corner]."""
    fig.text(x_in / PAGE_W, 1 - y_in / PAGE_H, s, ha=ha, va="top", fontsize=size,
             fontweight=weight, fontstyle=style, family=family)  # fmt: skip


def _cell(fig, x, w, y, s, align, size, bold=False):
    if align == "r":
        put_text(
            fig, x + w - 0.05, y, s, size=size, ha="right", weight="bold" if bold else "normal"
        )
    else:
        put_text(fig, x, y, s, size=size, weight="bold" if bold else "normal")


def hline(fig, x0, x1, y, lw=0.5):
    """A horizontal rule from ``x0`` to ``x1`` at ``y`` [in from the top-left corner]."""
    from matplotlib.lines import Line2D

    yy = 1 - y / PAGE_H
    return Line2D([x0 / PAGE_W, x1 / PAGE_W], [yy, yy], transform=fig.transFigure, lw=lw,
                  color="0.25")  # fmt: skip
