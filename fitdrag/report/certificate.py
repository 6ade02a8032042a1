"""The fit certificate: a PDF of one to three A4 pages and a PNG of page 1, from a report.

The certificate is drawn with matplotlib (already a dependency, so no further PDF library is
needed; ``PdfPages`` writes one page per figure, and the same figure saved as PNG gives the
page-1 image).  TrueType fonts are embedded (``pdf.fonttype = 42``) so that the text can be
extracted and searched.

It renders a *report*: the JSON-ready dictionary written beside the certificate (built by
``fitdrag run``), plus the plain arrays of the plots (:class:`fitdrag.report.plots.ThrowCurves`).
Nothing is computed here except the rounding of numbers for print.

Contents follow ISO/IEC 17025:2017 clause 7.8 (7.8.2.1 a–p, 7.8.3, 7.8.6): title, unique
number and page x of y on every page, laboratory, customer, specimen identification and
description, dates of test and issue, method, conditions, results with expanded uncertainty,
coverage factor and coverage probability, the uncertainty budget, the conformity statement
with its decision rule, plots, SHA-256 of every input file, the statement that the results
relate only to the item tested, signature lines, and the caution that this is a measurement
report, not an accredited calibration unless issued under the laboratory's own accreditation.

Rounding: U to two significant digits and the value to the same decimal place
(JCGM 100:2008, 7.2.6); other uncertainties to two significant digits.

References
----------
1. ISO/IEC 17025:2017, *General requirements for the competence of testing and calibration
   laboratories*, clause 7.8 (reporting of results).
2. JCGM 100:2008 (GUM), 7.2.2–7.2.6 (reporting the expanded uncertainty; rounding).
"""

from __future__ import annotations

import math
import os
import textwrap
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from decimal import ROUND_HALF_UP, Decimal
from pathlib import Path
from typing import Any

# ---------------------------------------------------------------------------------------------
# numbers for print
# ---------------------------------------------------------------------------------------------


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


# ---------------------------------------------------------------------------------------------
# page layout
# ---------------------------------------------------------------------------------------------

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
    for para in str(text).split("\n"):
        out.extend(textwrap.wrap(para, chars, break_long_words=True) or [""])
    return out


@dataclass
class _Block:
    height: float  # [in]
    draw: Callable[[Any, float], None]  # draw(fig, top_y_in)
    page_break_before: bool = False


class _Layout:
    def __init__(self) -> None:
        self.blocks: list[_Block] = []

    def add(self, height, draw, page_break_before=False):
        self.blocks.append(_Block(height, draw, page_break_before))

    def page_break(self):
        self.blocks.append(_Block(0.0, lambda fig, y: None, True))

    def space(self, h=0.08):
        self.add(h, lambda fig, y: None)

    def heading(self, text, size=10.5):
        h = size * _PT * 1.9

        def draw(fig, y):
            _text(fig, MARGIN_L, y + 0.02, text, size=size, weight="bold")
            yy = y + size * _PT * 1.45
            fig.add_artist(_hline(fig, MARGIN_L, PAGE_W - MARGIN_R, yy, lw=0.6))

        self.add(h, draw)

    def paragraph(self, text, size=8.5, indent=0.0, style="normal", weight="normal"):
        lines = _wrap(text, size, BODY_W - indent, bold=weight == "bold")
        h = len(lines) * size * _PT * _LINE + 0.04

        def draw(fig, y):
            for i, ln in enumerate(lines):
                _text(fig, MARGIN_L + indent, y + i * size * _PT * _LINE, ln, size=size,
                      style=style, weight=weight)  # fmt: skip

        self.add(h, draw)

    def rows(self, items: Sequence[tuple[str, str]], size=8.5, label_w=1.75):
        wrapped = [(k, _wrap(v, size, BODY_W - label_w)) for k, v in items]
        lh = size * _PT * _LINE
        h = sum(len(v) for _, v in wrapped) * lh + 0.04

        def draw(fig, y):
            yy = y
            for k, lines in wrapped:
                _text(fig, MARGIN_L, yy, k, size=size, weight="bold")
                for ln in lines:
                    _text(fig, MARGIN_L + label_w, yy, ln, size=size)
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
            fig.add_artist(_hline(fig, MARGIN_L, MARGIN_L + sum(widths), y + lh - 0.02, lw=0.5))
            for i, row in enumerate(rows):
                yy = y + (i + 1) * lh
                bold = row and str(row[0]).startswith("§")
                for cell, x, w, a in zip(row, xs, widths, aligns):
                    _cell(fig, x, w, yy, str(cell).lstrip("§"), a, size, bold=bold)
            fig.add_artist(
                _hline(fig, MARGIN_L, MARGIN_L + sum(widths), y + (len(rows) + 1) * lh, lw=0.5)
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
                _text(fig, MARGIN_L + pad, yy, ln, size=s, weight=w)
                yy += s * _PT * _LINE

        self.add(h + 0.06, draw)

    def figure(self, height, draw_axes):
        def draw(fig, y):
            draw_axes(fig, (MARGIN_L / PAGE_W, 1 - (y + height) / PAGE_H, BODY_W / PAGE_W,
                            height / PAGE_H))  # fmt: skip

        self.add(height + 0.1, draw)

    def paginate(self) -> list[list[tuple[_Block, float]]]:
        pages: list[list[tuple[_Block, float]]] = [[]]
        y = MARGIN_T + 0.3
        for b in self.blocks:
            if (b.page_break_before and pages[-1]) or (
                y + b.height > PAGE_H - MARGIN_B and pages[-1]
            ):
                pages.append([])
                y = MARGIN_T + 0.3
            if b.height > 0 or not b.page_break_before:
                pages[-1].append((b, y))
                y += b.height
        return [p for p in pages if p]


def _text(fig, x_in, y_in, s, size=8.5, weight="normal", style="normal", ha="left",
          family="sans-serif"):  # fmt: skip
    fig.text(x_in / PAGE_W, 1 - y_in / PAGE_H, s, ha=ha, va="top", fontsize=size,
             fontweight=weight, fontstyle=style, family=family)  # fmt: skip


def _cell(fig, x, w, y, s, align, size, bold=False):
    if align == "r":
        _text(fig, x + w - 0.05, y, s, size=size, ha="right", weight="bold" if bold else "normal")
    else:
        _text(fig, x, y, s, size=size, weight="bold" if bold else "normal")


def _hline(fig, x0, x1, y, lw=0.5):
    from matplotlib.lines import Line2D

    yy = 1 - y / PAGE_H
    return Line2D([x0 / PAGE_W, x1 / PAGE_W], [yy, yy], transform=fig.transFigure, lw=lw,
                  color="0.25")  # fmt: skip


# ---------------------------------------------------------------------------------------------
# content
# ---------------------------------------------------------------------------------------------

TITLE = "Measurement certificate: aerodynamic drag coefficient"

RELATES_ONLY = (
    "The results relate only to the item tested, as received, under the conditions stated. "
    "This certificate shall not be reproduced except in full without the written approval of "
    "the issuing laboratory."
)

CAUTION = (
    "Caution: this certificate is a measurement report produced with the fitdrag software. "
    "It is not an accredited calibration certificate unless the laboratory named above issues "
    "it under its own accreditation and procedures. It must be reviewed and signed before it "
    "is relied on."
)

SAFETY = (
    "Safety and use: launching specimens can injure; test areas need eye protection and a "
    "guarded line of flight. Bright lamps get hot and dazzle; keep clearances. Those relying "
    "on this report should do so through the accredited procedures of the laboratory, local "
    "codes and licensed practice, which take precedence over anything stated here."
)


def _vu(d: dict | None, key: str = "value") -> tuple[float | None, float | None]:
    if not d:
        return None, None
    return d.get(key), d.get("standard_uncertainty")


def _pm(value, u, unit="", digits=2) -> str:
    if value is None:
        return "—"
    if u is None:
        return f"{format_sig(value, 6)}{(' ' + unit) if unit else ''}"
    v, us = format_with_uncertainty(value, u, digits)
    return f"{v} {unit} (standard uncertainty {us} {unit})".replace("  ", " ").replace(" )", ")")


def _date(s) -> str:
    return str(s)[:10] if s else "—"


def build_layout(report: dict, curves=None) -> _Layout:
    """Lay out the certificate's content (exposed for inspection and tests)."""
    L = _Layout()
    cert = report.get("certificate", {})
    lab = report.get("laboratory", {})
    test = report.get("test", {})
    spec = report.get("specimen", {})
    res = report["result"]
    fit = report.get("fit", {})
    cond = report.get("conditions", {})
    method = report.get("method", {})
    budget = report.get("uncertainty_budget", {})
    mc = report.get("monte_carlo")
    conf = report.get("conformity")

    # ---- page 1 ---------------------------------------------------------------------------
    L.paragraph(lab.get("name", ""), size=14, weight="bold")
    if lab.get("address"):
        L.paragraph(lab["address"], size=8.5)
    if lab.get("accreditation"):
        L.paragraph(f"Accreditation: {lab['accreditation']}", size=8)
    L.space(0.12)
    L.paragraph(TITLE, size=13, weight="bold")
    L.rows([("Certificate number", cert.get("number", "—")),
            ("Date of issue", _date(cert.get("issued_at")))])  # fmt: skip
    if cert.get("replaces"):
        L.paragraph(
            f"This certificate replaces certificate {cert['replaces']}, which is withdrawn.",
            size=8.5,
            weight="bold",
        )
    L.space()
    L.heading("Customer")
    rows = [("Customer", test.get("customer", "—"))]
    if test.get("customer_address"):
        rows.append(("Address", test["customer_address"]))
    if test.get("order"):
        rows.append(("Order reference", test["order"]))
    L.rows(rows)
    L.heading("Item tested")
    rows = [("Identification", spec.get("id", "—")), ("Description", spec.get("description", "—"))]
    m, um = _vu(spec.get("mass"))
    rows.append(("Mass", _pm(m, um, "kg")))
    if spec.get("diameter"):
        rows.append(("Diameter", _pm(*_vu(spec["diameter"]), "m")))
    else:
        rows.append(("Frontal area", _pm(*_vu(spec.get("area")), "m²")))
        rows.append(("Volume", _pm(*_vu(spec.get("volume")), "m³")))
    L.rows(rows)
    L.heading("Test")
    rows = [("Date of test", _date(test.get("date"))), ("Performed by", test.get("operator", "—"))]
    if test.get("location"):
        rows.append(("Location", test["location"]))
    n_throws = len(fit.get("throws", []))
    rows.append(("Throws analysed", str(n_throws)))
    if test.get("notes"):
        rows.append(("Notes", test["notes"]))
    L.rows(rows)

    L.heading("Result")
    cd_s, U_s = format_with_uncertainty(res["drag_coefficient"], res["expanded_uncertainty"])
    k = res["coverage_factor"]
    p = res["coverage_probability"]
    nu = res.get("effective_degrees_of_freedom")
    nu_s = (
        "∞"
        if nu in (None, "inf") or (isinstance(nu, float) and math.isinf(nu))
        else (format_sig(float(nu), 2))
    )
    L.boxed(
        [
            (f"Drag coefficient  Cd = {cd_s} ± {U_s}", 13.0, "bold"),
            (
                f"The expanded uncertainty U = {U_s} is the combined standard uncertainty "
                f"u_c = {format_sig(res['combined_standard_uncertainty'], 2)} multiplied by the "
                f"coverage factor k = {k:.2f} (effective degrees of freedom {nu_s}); the interval "
                f"Cd ± U is expected to contain the value of the measurand with a coverage "
                f"probability of about {100 * p:.0f} % (JCGM 100:2008).",
                8.0,
                "normal",
            ),
        ]
    )
    rows = []
    drag_model = fit.get("drag_model", {}).get("name", method.get("drag_model", ""))
    re = fit.get("reynolds_number", {})
    if re:
        rows.append(
            (
                "Reynolds number",
                f"{format_sig(re.get('min'), 3)} to {format_sig(re.get('max'), 3)}"
                f" (median {format_sig(re.get('median'), 3)}); Cd reported for drag model "
                f"'{drag_model}'",
            )  # fmt: skip
        )
    la = fit.get("launch", {})
    if la:
        sv, su = format_with_uncertainty(*_vu(la.get("speed")))
        av, au = format_with_uncertainty(*_vu(la.get("angle")))
        first = " (first throw)" if n_throws > 1 else ""
        rows.append(("Launch speed", f"{sv} m/s (standard uncertainty {su} m/s){first}"))
        rows.append(("Launch angle", f"{av}° above horizontal (standard uncertainty {au}°){first}"))
    ts = fit.get("terminal_speed")
    if ts and ts.get("value") is not None:
        tv, tu = format_with_uncertainty(*_vu(ts))
        rows.append(("Terminal speed (derived)", f"{tv} m/s (standard uncertainty {tu} m/s)"))
    pts = fit.get("points", {})
    if pts:
        rej = pts.get("rejected", [])
        rows.append(
            (
                "Points used",
                f"{pts.get('used')} of {pts.get('total')}; {len(rej)} rejected as outliers",
            )  # fmt: skip
        )
    resid = fit.get("residuals", {})
    if resid:
        rows.append(
            (
                "Residual RMS",
                f"{format_sig(1e3 * resid['rms'], 2)} mm (x {format_sig(1e3 * resid['rms_x'], 2)} mm, "
                f"y {format_sig(1e3 * resid['rms_y'], 2)} mm); noise model {resid.get('noise_model')}, "
                f"lag-1 autocorrelation {format_sig(resid.get('lag1_autocorrelation'), 2)}",
            )  # fmt: skip
        )
    L.rows(rows, size=8.2)
    ident = fit.get("identifiability", {})
    if ident and not ident.get("identifiable", True):
        L.paragraph(f"Warning: {ident.get('message', 'drag not identifiable')}", size=8.5,
                    weight="bold")  # fmt: skip

    L.heading("Statement of conformity")
    if conf:
        L.paragraph(conf["statement"], size=8.2)
        L.paragraph(
            f"Decision: {str(conf['decision']).upper()} (decision rule: {conf['rule']} "
            f"acceptance; probability of conformity "
            f"{100 * conf['probability_of_conformity']:.1f} %)",
            size=9.5,
            weight="bold",
        )
        L.paragraph(
            "The decision is made on the unrounded result and expanded uncertainty.",
            size=7.5,
            style="italic",
        )
    else:
        L.paragraph("No specification was stated; no statement of conformity is made.", size=8.2)

    # ---- page 2 ---------------------------------------------------------------------------
    L.page_break()
    L.heading("Method")
    rows = [
        ("Model of the flight", method.get("model_equation", "—")),
        ("Drag model", method.get("drag_model_text", drag_model or "—")),
        ("Integration", method.get("integrator", "—")),
        ("Fit", method.get("fit_method", "—")),
        ("Uncertainty", method.get("uncertainty_method", "—")),
        ("Software", f"fitdrag {report.get('software_version', '—')}"),
    ]
    L.rows(rows, size=8.0)
    L.heading("Conditions")
    rows = []
    for key, label, unit in (
        ("temperature", "Air temperature", "°C"),
        ("pressure", "Air pressure", "Pa"),
        ("relative_humidity", "Relative humidity", "%"),
    ):
        if cond.get(key):
            rows.append((label, _pm(*_vu(cond[key]), unit)))
    dens = cond.get("air_density", {})
    rows.append(("Air density", _pm(*_vu(dens), "kg/m³") + (
        f"; {dens['source']}" if dens.get("source") else "")))  # fmt: skip
    visc = cond.get("air_viscosity", {})
    rows.append(("Air viscosity", f"{format_sig(visc.get('value'), 4)} Pa s" + (
        f"; {visc['source']}" if visc.get("source") else "")))  # fmt: skip
    grav = cond.get("gravity", {})
    rows.append(("Gravity", _pm(*_vu(grav), "m/s²") + (
        f"; {grav['source']}" if grav.get("source") else "")))  # fmt: skip
    cam = report.get("camera", {})
    if cam.get("fps"):
        rows.append(("Frame rate", _pm(*_vu(cam["fps"]), "Hz")))
    if cam.get("scale_relative_uncertainty") is not None:
        rows.append(
            (
                "Length scale",
                f"relative standard uncertainty "
                f"{format_sig(100 * cam['scale_relative_uncertainty'], 2)} %",
            )  # fmt: skip
        )
    L.rows(rows, size=8.0)

    L.heading("Uncertainty budget (JCGM 100:2008)")
    header = ["Input quantity", "Estimate", "Std. unc.", "Unit", "Sensitivity", "Contribution",
              "Share", "DoF"]  # fmt: skip
    rows = []
    for ln in budget.get("lines", []):
        nu_i = ln.get("degrees_of_freedom")
        rows.append([
            ln.get("description") or ln["name"],
            f"{ln['value']:.6g}",
            format_sig(ln["standard_uncertainty"], 2),
            ln.get("unit", ""),
            format_sig(ln["sensitivity_coefficient"], 3),
            format_sig(abs(ln["contribution"]), 2),
            f"{100 * ln['share']:.1f} %",
            "∞" if nu_i == "inf" else format_sig(nu_i, 3),
        ])  # fmt: skip
    rows.append(["§Combined standard uncertainty u_c", "", "", "", "",
                 format_sig(budget.get("combined_standard_uncertainty"), 2), "100 %", nu_s])  # fmt: skip
    rows.append([f"§Expanded uncertainty U (k = {k:.2f}, p ≈ {100 * p:.2f} %)", "", "", "", "",
                 U_s, "", ""])  # fmt: skip
    L.table(header, rows, widths=[2.05, 0.8, 0.65, 0.45, 0.8, 0.85, 0.55, 0.62],
            aligns=["l", "r", "r", "l", "r", "r", "r", "r"])  # fmt: skip
    L.paragraph(
        "Sensitivity coefficients ∂Cd/∂x are obtained by re-fitting the tracks with each input "
        "moved by ± one standard uncertainty (central differences); the statistical component "
        "is the fit's own standard uncertainty (sensitivity 1). Contributions are |c|·u(x); "
        "shares are fractions of u_c²; degrees of freedom combine by the Welch–Satterthwaite "
        "formula (JCGM 100:2008, G.2b).",
        size=7.4,
        style="italic",
    )
    if mc:
        L.heading("Monte Carlo check (JCGM 101:2008)")
        lo, hi = mc["interval"]
        glo, ghi = mc.get("gum_interval", (None, None))
        fmt = formatter_for(budget.get("combined_standard_uncertainty", 0.0))
        pc = 100 * mc["coverage_probability"]
        status = mc.get("status", "agree" if mc.get("agrees") else "differ")
        verdict_txt = {
            "agree": "The two intervals agree within the numerical tolerance, which validates "
            "the GUM result (JCGM 101:2008, 8.2).",
            "differ": "The two intervals differ by more than the numerical tolerance; the "
            "Monte Carlo interval is the more reliable one.",
            "inconclusive": "The difference is within the Monte Carlo method's own numerical "
            "noise at this number of trials; the comparison is inconclusive (more trials are "
            "needed to validate the GUM result at this tolerance).",
        }[status]
        L.rows(
            [
                ("Trials", f"{mc['trials']} successful re-fits ({mc.get('failures', 0)} failed)"
                 + ("; adaptive stopping" if mc.get("adaptive") else "")),
                ("Standard uncertainty", f"{format_sig(mc['standard_uncertainty'], 2)}"),
                (f"{pc:.0f} % interval", f"Monte Carlo [{fmt(lo)}, {fmt(hi)}] (probabilistically "
                 f"symmetric); GUM [{fmt(glo)}, {fmt(ghi)}]"),
                ("Comparison", f"|d_low| = {format_sig(mc.get('d_low'), 2)}, |d_high| = "
                 f"{format_sig(mc.get('d_high'), 2)}, tolerance δ = "
                 f"{format_sig(mc.get('numerical_tolerance'), 1)}. {verdict_txt}"),
            ],
            size=8.0,
        )  # fmt: skip

    # ---- page 3 ---------------------------------------------------------------------------
    L.page_break()
    L.heading("Trajectory and residuals")
    if curves:
        from fitdrag.report.plots import plot_residuals, plot_trajectory

        def draw_plots(fig, rect):
            x, y, w, h = rect
            ax_t = fig.add_axes((x + 0.08 * w, y + 0.56 * h, 0.9 * w, 0.43 * h))
            ax_rx = fig.add_axes((x + 0.08 * w, y + 0.30 * h, 0.9 * w, 0.16 * h))
            ax_ry = fig.add_axes((x + 0.08 * w, y + 0.07 * h, 0.9 * w, 0.16 * h), sharex=ax_rx)
            plot_trajectory(curves, ax_t, fontsize=7.0)
            plot_residuals(curves, ax_rx, ax_ry, fontsize=7.0)

        L.figure(5.0, draw_plots)
    else:
        L.paragraph("(no plot data)", size=8)
    rej = fit.get("points", {}).get("rejected", [])
    if rej:
        reasons = fit.get("points", {}).get("rejection_reasons", {})
        shown = ", ".join(f"{r}" for r in rej[:40]) + (" …" if len(rej) > 40 else "")
        first = reasons.get(str(rej[0]), "")
        L.paragraph(
            f"Rejected frames ({len(rej)}): {shown}." + (f" Reason (first): {first}." if first
                                                         else ""), size=7.5)  # fmt: skip
    L.heading("Input files (SHA-256)")
    hashes = report.get("inputs", {}).get("sha256", {})
    for path, digest in hashes.items():
        L.paragraph(f"{digest}  {Path(path).name}", size=7.0)
    L.heading("Statements")
    L.paragraph(RELATES_ONLY, size=8.0)
    L.paragraph(CAUTION, size=8.0, weight="bold")
    L.paragraph(SAFETY, size=7.5)
    L.space(0.15)
    L.heading("Signatures")
    L.space(0.25)

    def signatures(fig, y):
        half = BODY_W / 2
        for i, (role, name) in enumerate(
            (("Tested by", test.get("operator", "")), ("Approved by", test.get("approved_by", "")))
        ):
            x0 = MARGIN_L + i * half
            fig.add_artist(_hline(fig, x0, x0 + half - 0.4, y + 0.35, lw=0.6))
            _text(fig, x0, y + 0.4, f"{role}: {name}", size=8.0)
            _text(fig, x0, y + 0.55, "Signature and date", size=7.0, style="italic")

    L.add(0.8, signatures)
    L.paragraph("End of certificate.", size=7.5, style="italic")
    return L


def render_certificate(
    report: dict,
    pdf_path: str | os.PathLike,
    png_path: str | os.PathLike | None = None,
    *,
    curves=None,
    dpi: int = 150,
) -> int:
    """Draw the certificate to ``pdf_path`` (and page 1 to ``png_path``); returns pages.

    Writes directly to the given paths; use :func:`write_certificate` for atomic writes.

    Parameters
    ----------
    report : dict
        The run report (see ``fitdrag run``); needs at least ``result`` with
        ``drag_coefficient``, ``expanded_uncertainty``, ``combined_standard_uncertainty``,
        ``coverage_factor`` and ``coverage_probability``.
    curves : sequence of ThrowCurves, optional
        Plot data.
    dpi : int
        Resolution of the PNG. [1/in]
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    from datetime import datetime

    from matplotlib.backends.backend_pdf import PdfPages
    from matplotlib.figure import Figure

    layout = build_layout(report, curves)
    pages = layout.paginate()
    n = len(pages)
    cert = report.get("certificate", {})
    number = cert.get("number", "")
    lab = report.get("laboratory", {}).get("name", "")
    issued = cert.get("issued_at")
    meta = {
        "Title": f"{TITLE} {number}",
        "Author": lab,
        "Subject": f"Drag coefficient of {report.get('specimen', {}).get('id', '')}",
        "Creator": f"fitdrag {report.get('software_version', '')}",
    }
    if issued:
        try:
            meta["CreationDate"] = datetime.fromisoformat(str(issued))
        except ValueError:
            pass
    with matplotlib.rc_context({"pdf.fonttype": 42}):
        with PdfPages(pdf_path, metadata=meta) as pdf:
            for i, page in enumerate(pages):
                fig = Figure(figsize=(PAGE_W, PAGE_H))
                _text(fig, MARGIN_L, MARGIN_T - 0.35, lab, size=7.5, style="italic")
                _text(fig, PAGE_W - MARGIN_R, MARGIN_T - 0.35, f"Certificate {number}", size=7.5,
                      ha="right")  # fmt: skip
                fig.add_artist(_hline(fig, MARGIN_L, PAGE_W - MARGIN_R, MARGIN_T - 0.15, lw=0.4))
                for block, y in page:
                    block.draw(fig, y)
                fig.add_artist(
                    _hline(fig, MARGIN_L, PAGE_W - MARGIN_R, PAGE_H - MARGIN_B + 0.2, lw=0.4)
                )
                _text(fig, MARGIN_L, PAGE_H - MARGIN_B + 0.27, f"Certificate {number}",
                      size=7.5)  # fmt: skip
                _text(fig, PAGE_W - MARGIN_R, PAGE_H - MARGIN_B + 0.27, f"Page {i + 1} of {n}",
                      size=7.5, ha="right")  # fmt: skip
                pdf.savefig(fig)
                if i == 0 and png_path is not None:
                    fig.savefig(png_path, format="png", dpi=dpi, facecolor="white")
    return n


def write_certificate(
    report: dict,
    pdf_path: str | os.PathLike,
    png_path: str | os.PathLike | None = None,
    *,
    curves=None,
    force: bool = False,
    dpi: int = 150,
) -> int:
    """Render the certificate atomically: temporary files, then ``os.replace``.

    Refuses to overwrite existing files unless ``force``.  Returns the number of pages.
    """
    from fitdrag.run.records import temporary_path

    finals = [Path(pdf_path)] + ([Path(png_path)] if png_path is not None else [])
    for f in finals:
        if f.exists() and not force:
            raise ValueError(f"{f}: already exists; choose another name or pass --force.")
    tmps = [temporary_path(f) for f in finals]
    try:
        n = render_certificate(
            report, tmps[0], tmps[1] if len(tmps) > 1 else None, curves=curves, dpi=dpi
        )
        for t, f in zip(tmps, finals):
            os.replace(t, f)
    finally:
        for t in tmps:
            Path(t).unlink(missing_ok=True)
    return n
