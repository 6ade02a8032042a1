"""The lot report: a PDF (and a PNG of page 1) from the lot's JSON-ready result.

It draws what :meth:`fitdrag.run.lot.LotMeasurement.to_dict` holds (with the issue's number
and date added): the laboratory and customer, the lot statement, a table of the specimens
(Cd, U, k, the part of the uncertainty of their own, each specimen's decision), a plot of
each specimen's Cd with its U against the specification limits and the lot's tolerance
interval, the lot's statistics, and the method and source of each statistic.  Nothing is
computed here but the rounding for print (:mod:`fitdrag.report.numbers`).

References
----------
1. ISO/IEC 17025:2017, clause 7.8 (reporting of results; 7.8.6 statements of conformity).
2. JCGM 100:2008 (GUM), 7.2.6 (rounding of the expanded uncertainty).
"""

from __future__ import annotations

import os
from collections.abc import Mapping

from fitdrag.report.layout import (
    MARGIN_B,
    MARGIN_L,
    MARGIN_R,
    MARGIN_T,
    PAGE_H,
    PAGE_W,
    Layout,
    hline,
    put_text,
)
from fitdrag.report.numbers import format_sig, format_with_uncertainty, formatter_for

__all__ = ["TITLE", "build_lot_layout", "plot_lot", "render_lot_report"]

TITLE = "Lot report: aerodynamic drag coefficient of a sample of specimens"

CAUTION = (
    "Caution: this lot report is produced with the fitdrag software. It is not an accredited "
    "result unless the laboratory named above issues it under its own accreditation and "
    "procedures; it must be reviewed and signed before it is relied on. A statement about a "
    "lot rests on the specimens measured being a random sample of it. Launching specimens can "
    "injure: local codes and the laboratory's procedures take precedence."
)


def plot_lot(data: Mapping, ax=None):
    """Each specimen's Cd with its U, the specification limits and the tolerance interval.

    Parameters
    ----------
    data : mapping
        The lot's result (:meth:`fitdrag.run.lot.LotMeasurement.to_dict`).
    ax : matplotlib Axes, optional
        Where to draw (default: a new figure).

    Returns
    -------
    Figure
    """
    if ax is None:
        from matplotlib.figure import Figure

        fig = Figure(figsize=(7.0, 3.2))
        ax = fig.add_subplot(1, 1, 1)
    else:
        fig = ax.figure
    sp = data["specimens"]
    x = list(range(1, len(sp) + 1))
    y = [s["drag_coefficient"] for s in sp]
    u = [s["expanded_uncertainty"] for s in sp]
    ax.errorbar(x, y, yerr=u, fmt="o", ms=3.5, capsize=2.5, lw=0.9, color="0.15",
                label="specimen Cd ± U")  # fmt: skip
    summ = data.get("summary") or {}
    ti = summ.get("tolerance_interval")
    if ti:
        lo = ti[0] if ti[0] is not None else min(y) - 3 * max(u)
        hi = ti[1] if ti[1] is not None else max(y) + 3 * max(u)
        ax.axhspan(lo, hi, color="tab:blue", alpha=0.12,
                   label=f"tolerance interval ({100 * summ['tolerance_interval_coverage']:g} %"
                   f" / {100 * summ['tolerance_interval_confidence']:g} %)")  # fmt: skip
        ax.axhline(summ["mean"], color="tab:blue", lw=0.8, ls="-", label="lot mean")
    spec = data.get("specification") or {}
    first = True
    for key in ("lower", "upper"):
        if spec.get(key) is not None:
            ax.axhline(spec[key], color="tab:red", lw=1.0, ls="--",
                       label="specification limits" if first else None)  # fmt: skip
            first = False
    ax.set_xticks(x)
    ax.set_xticklabels([s["id"] for s in sp], rotation=60, fontsize=6.5, ha="right")
    ax.set_ylabel("drag coefficient Cd", fontsize=8)
    ax.tick_params(axis="y", labelsize=7)
    ax.grid(True, axis="y", lw=0.3, alpha=0.6)
    ax.legend(fontsize=6.5, loc="best", framealpha=0.85)
    return fig


def _pct(x) -> str:
    return "—" if x is None else f"{format_sig(100 * x, 2)} %"


def lot_page_one_note(total_pages: int) -> str:
    """The line on page 1 that travels with it when it goes alone (as the PNG)."""
    return (
        f"Page 1 of {total_pages}: valid only as the whole lot report of {total_pages} pages "
        f"(statistics, methods, caution); the results relate only to the specimens measured."
    )


def build_lot_layout(data: Mapping, total_pages: int | None = None) -> Layout:
    """Lay out the lot report (exposed for tests); with ``total_pages``, page 1 says it is
    one of that many."""
    L = Layout()
    lot = data["lot"]
    summ = data["summary"]
    issue = data.get("issue") or {}
    L.paragraph(lot["laboratory"], size=14, weight="bold")
    L.space(0.1)
    L.paragraph(TITLE, size=12.5, weight="bold")
    L.rows([
        ("Report number", issue.get("number", "—")),
        ("Date of issue", str(issue.get("issued_at", "—"))[:10]),
        ("Customer", lot.get("customer") or "—"),
        ("Lot", lot["id"]),
        ("Description", lot.get("description") or "—"),
        ("Specimens measured", str(summ["n"])),
    ])  # fmt: skip
    if issue.get("record_hash"):
        L.paragraph(f"Record hash (SHA-256): {issue['record_hash']}", size=7.0)
    if total_pages:
        L.paragraph(lot_page_one_note(total_pages), size=7.5, weight="bold")
    L.heading("Lot statement")
    fmt = formatter_for(summ["expanded_uncertainty_of_mean"])
    mean_s, um_s = format_with_uncertainty(summ["mean"], summ["expanded_uncertainty_of_mean"])
    L.boxed([
        (f"Lot mean Cd = {mean_s} ± {um_s} (k = {summ['coverage_factor']:.0f})", 12.0, "bold"),
        (data.get("statement", ""), 8.0, "normal"),
    ])  # fmt: skip
    L.heading("Specimens")
    rows = []
    for s in data["specimens"]:
        cd, U = format_with_uncertainty(s["drag_coefficient"], s["expanded_uncertainty"])
        rows.append((s["id"], cd, U, f"{s['coverage_factor']:.2f}",
                     format_sig(s["independent_standard_uncertainty"], 2),
                     str(len(s["throws"])), "", s.get("decision") or "—"))  # fmt: skip
    L.table(("specimen", "Cd", "U", "k", "u own", "throws", "", "decision"), rows,
            (1.4, 0.85, 0.75, 0.5, 0.8, 0.6, 0.25, 1.3),
            ("l", "r", "r", "r", "r", "r", "l", "l"))  # fmt: skip

    def draw(fig, rect):
        x, y, w, h = rect  # room below the axes for the rotated specimen labels
        ax = fig.add_axes((x + 0.07 * w, y + 0.22 * h, 0.92 * w, 0.76 * h))
        plot_lot(data, ax)

    L.figure(3.2, draw)
    L.page_break(unless_room=2.2)  # the statistics stay together with their heading
    L.heading("Lot statistics")
    ti = summ["tolerance_interval"]
    ti_s = ("−∞" if ti[0] is None else fmt(ti[0])) + ", " + ("+∞" if ti[1] is None else fmt(ti[1]))
    shared = summ.get("shared_inputs") or {}
    L.rows([
        ("Lot mean", f"{mean_s} (standard uncertainty {format_sig(summ['standard_uncertainty_of_mean'], 2)}: "
         f"own parts {format_sig(summ['standard_uncertainty_of_mean_independent'], 2)}, shared "
         f"inputs {format_sig(summ['standard_uncertainty_of_mean_shared'], 2)})"),
        ("Shared inputs", ", ".join(f"{k} {format_sig(abs(v), 2)}" for k, v in shared.items())
         or "none"),
        ("Spread between specimens", f"standard deviation {format_sig(summ['standard_deviation'], 2)}"
         f" (standard uncertainty {format_sig(summ['standard_deviation_uncertainty'], 2)}; 95 % "
         f"interval {format_sig(summ['standard_deviation_interval_95'][0], 2)} to "
         f"{format_sig(summ['standard_deviation_interval_95'][1], 2)})"),
        ("Tolerance interval", f"[{ti_s}], k = {summ['tolerance_factor']:.3f}, "
         f"{100 * summ['tolerance_interval_coverage']:g} % of the lot at "
         f"{100 * summ['tolerance_interval_confidence']:g} % confidence"),
        ("Fraction outside spec.", _pct(summ.get("fraction_outside_specification"))),
        ("Lot decision", (summ.get("decision") or "none (no specification)").upper()),
    ], label_w=1.9)  # fmt: skip
    L.heading("Methods and sources")
    L.rows([(k.replace("_", " ").capitalize(), v) for k, v in data.get("methods", {}).items()
            if v], size=7.5, label_w=1.6)  # fmt: skip
    if data.get("failures"):
        L.heading("Specimens not measured")
        L.rows([(f["id"], f"{f['task']}: {f['message']}") for f in data["failures"]])
    L.space(0.1)
    L.paragraph(CAUTION, size=7.2, style="italic")
    L.paragraph("End of lot report.", size=7.5, style="italic")
    return L


def render_lot_report(data: Mapping, pdf_path: str | os.PathLike,
                      png_path: str | os.PathLike | None = None, *, dpi: int = 150) -> int:  # fmt: skip
    """Draw the lot report to ``pdf_path`` (and page 1 to ``png_path``); returns pages."""
    import matplotlib

    matplotlib.use("Agg", force=False)
    from matplotlib.backends.backend_pdf import PdfPages
    from matplotlib.figure import Figure

    n = len(build_lot_layout(data).paginate())
    for _ in range(5):  # the note on page 1 may push the last page over
        pages = build_lot_layout(data, total_pages=n).paginate()
        if len(pages) == n:
            break
        n = len(pages)
    else:
        raise RuntimeError(f"lot report: the page count did not settle ({n} pages last)")
    number = (data.get("issue") or {}).get("number", "")
    lab = data["lot"]["laboratory"]
    meta = {"Title": f"{TITLE} {number}", "Author": lab,
            "Subject": f"Lot {data['lot']['id']}", "Creator": "fitdrag"}  # fmt: skip
    with matplotlib.rc_context({"pdf.fonttype": 42}):
        with PdfPages(pdf_path, metadata=meta) as pdf:
            for i, page in enumerate(pages):
                fig = Figure(figsize=(PAGE_W, PAGE_H))
                put_text(fig, MARGIN_L, MARGIN_T - 0.35, lab, size=7.5, style="italic")
                put_text(fig, PAGE_W - MARGIN_R, MARGIN_T - 0.35, f"Lot report {number}",
                         size=7.5, ha="right")  # fmt: skip
                fig.add_artist(hline(fig, MARGIN_L, PAGE_W - MARGIN_R, MARGIN_T - 0.15, lw=0.4))
                for block, y in page:
                    block.draw(fig, y)
                put_text(fig, PAGE_W - MARGIN_R, PAGE_H - MARGIN_B + 0.27,
                         f"Page {i + 1} of {n}", size=7.5, ha="right")  # fmt: skip
                pdf.savefig(fig)
                if i == 0 and png_path is not None:
                    fig.savefig(png_path, format="png", dpi=dpi, facecolor="white")
    return n
