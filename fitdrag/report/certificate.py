"""The fit certificate: a PDF of one to three A4 pages and a PNG of page 1, from its content.

The certificate is drawn with matplotlib (already a dependency, so no further PDF library is
needed; ``PdfPages`` writes one page per figure, and the same figure saved as PNG gives the
page-1 image).  TrueType fonts are embedded (``pdf.fonttype = 42``) so that the text can be
extracted and searched.

It renders a :class:`fitdrag.report.content.CertificateContent` (built once by ``fitdrag
run``), plus the plain arrays of the plots (:class:`fitdrag.report.plots.ThrowCurves`).
Nothing is computed here except the rounding of numbers for print
(:mod:`fitdrag.report.numbers`); the page layout is :mod:`fitdrag.report.layout`.

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
from pathlib import Path

from fitdrag._files import temporary_path
from fitdrag.errors import InputError
from fitdrag.report.content import CertificateContent, Estimate, noise_words
from fitdrag.report.layout import (
    BODY_W,
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
from fitdrag.report.numbers import (
    format_probability,
    format_sig,
    format_with_uncertainty,
    formatter_for,
)

__all__ = [
    "CAUTION",
    "RELATES_ONLY",
    "SAFETY",
    "TITLE",
    "build_layout",
    "render_certificate",
    "write_certificate",
]

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


def _pm(e: Estimate | None, unit="", digits=2) -> str:
    """``value unit (standard uncertainty u unit)``, rounded together (GUM 7.2.6)."""
    if e is None or e.value is None:
        return "—"
    if e.standard_uncertainty is None:
        return f"{format_sig(e.value, 6)}{(' ' + unit) if unit else ''}"
    v, us = format_with_uncertainty(e.value, e.standard_uncertainty, digits)
    return f"{v} {unit} (standard uncertainty {us} {unit})".replace("  ", " ").replace(" )", ")")


def _pm_shown(e: Estimate | None, si_unit: str, shown: str | None, symbol: str) -> str:
    """:func:`_pm` in the unit the job gave (``shown``, e.g. "g" for a mass in kg), converted
    with pint; in SI (``symbol``) when the job gave none."""
    if e is None or e.value is None or not shown:
        return _pm(e, symbol)
    from fitdrag.units import unit_registry

    try:
        factor = float(unit_registry().Quantity(1.0, si_unit).to(shown).magnitude)
    except Exception:  # noqa: BLE001 - a unit pint cannot convert back: show SI
        return _pm(e, symbol)
    u = None if e.standard_uncertainty is None else e.standard_uncertainty * factor
    return _pm(Estimate(e.value * factor, u), shown)


def _estimate_pair(value: float, u: float) -> tuple[str, str]:
    """A budget line's estimate and standard uncertainty, rounded together (GUM 7.2.6)."""
    if u and math.isfinite(u) and u > 0:
        return format_with_uncertainty(value, u, 2)
    return format_sig(value, 6), "0"


def _date(s) -> str:
    return str(s)[:10] if s else "—"


def _sourced(text: str, source: str) -> str:
    return text + (f"; {source}" if source else "")


def page_one_note(total_pages: int) -> str:
    """The line on page 1 that travels with it when it goes alone (as the PNG)."""
    return (
        f"Page 1 of {total_pages}: valid only as the whole certificate of {total_pages} pages "
        f"(method, uncertainty budget, signatures); the results relate only to the item tested."
    )


def build_layout(
    content: CertificateContent, curves=None, total_pages: int | None = None
) -> Layout:
    """Lay out the certificate's content (exposed for inspection and tests); with
    ``total_pages``, page 1 says it is one of that many."""
    L = Layout()
    cert = content.issue
    lab = content.laboratory
    test = content.test
    spec = content.specimen
    res = content.result
    fit = content.fit
    cond = content.conditions
    method = content.method
    budget = content.budget
    mc = content.monte_carlo
    conf = content.conformity

    # ---- page 1 ---------------------------------------------------------------------------
    L.paragraph(lab.name, size=14, weight="bold")
    if lab.address:
        L.paragraph(lab.address, size=8.5)
    if lab.accreditation:
        L.paragraph(f"Accreditation: {lab.accreditation}", size=8)
    L.space(0.12)
    L.paragraph(TITLE, size=13, weight="bold")
    if cert and cert.draft:
        L.rows([("Certificate number", "none: DRAFT for review, not a certificate"),
                ("Drafted", _date(cert.issued_at))])  # fmt: skip
    else:
        L.rows([("Certificate number", cert.number if cert else "—"),
                ("Date of issue", _date(cert.issued_at if cert else None))])  # fmt: skip
    if cert and cert.record_hash:
        L.paragraph(f"Record hash (SHA-256): {cert.record_hash}", size=7.0)
    if total_pages:
        L.paragraph(page_one_note(total_pages), size=7.5, weight="bold")
    if cert and cert.replaces:
        L.paragraph(
            f"This certificate replaces certificate {cert.replaces}, which is withdrawn"
            + (f" (reason: {cert.reason})." if cert.reason else "."),
            size=8.5,
            weight="bold",
        )
    L.space()
    L.heading("Customer")
    rows = [("Customer", test.customer)]
    if test.customer_address:
        rows.append(("Address", test.customer_address))
    if test.order:
        rows.append(("Order reference", test.order))
    L.rows(rows)
    L.heading("Item tested")
    rows = [("Identification", spec.id), ("Description", spec.description)]
    shown = spec.shown_units or {}
    rows.append(("Mass", _pm_shown(spec.mass, "kg", shown.get("mass"), "kg")))
    if spec.diameter is not None:
        rows.append(("Diameter", _pm_shown(spec.diameter, "m", shown.get("diameter"), "m")))
    else:
        rows.append(("Frontal area", _pm_shown(spec.area, "m**2", shown.get("area"), "m²")))
        rows.append(("Volume", _pm_shown(spec.volume, "m**3", shown.get("volume"), "m³")))
    L.rows(rows)
    L.heading("Test")
    rows = [("Date of test", _date(test.date)), ("Performed by", test.operator)]
    if test.location:
        rows.append(("Location", test.location))
    n_throws = fit.throws
    rows.append(("Throws analysed", str(n_throws)))
    if test.notes:
        rows.append(("Notes", test.notes))
    L.rows(rows)

    L.heading("Result")
    cd_s, U_s = format_with_uncertainty(res.drag_coefficient, res.expanded_uncertainty)
    k = res.coverage_factor
    p = res.coverage_probability
    nu = res.effective_degrees_of_freedom
    nu_s = "∞" if nu is None or math.isinf(nu) else format_sig(float(nu), 2)
    L.boxed(
        [
            (f"Drag coefficient  Cd = {cd_s} ± {U_s}", 13.0, "bold"),
            (
                f"The expanded uncertainty U = {U_s} is the combined standard uncertainty "
                f"u_c = {format_sig(res.combined_standard_uncertainty, 2)} multiplied by the "
                f"coverage factor k = {k:.2f} (effective degrees of freedom {nu_s}); the interval "
                f"Cd ± U is expected to contain the value of the measurand with a coverage "
                f"probability of about {100 * p:.0f} % (JCGM 100:2008).",
                8.0,
                "normal",
            ),
        ]
    )
    rows = []
    drag_model = fit.drag_model or method.drag_model
    if fit.reynolds_number is not None:
        re_min, re_max, re_median = fit.reynolds_number
        rows.append(
            (
                "Reynolds number",
                f"{format_sig(re_min, 3)} to {format_sig(re_max, 3)}"
                f" (median {format_sig(re_median, 3)}); Cd reported for drag model "
                f"'{drag_model}'",
            )  # fmt: skip
        )
    if fit.launch_speed is not None and fit.launch_angle is not None:
        sv, su = format_with_uncertainty(fit.launch_speed.value,
                                         fit.launch_speed.standard_uncertainty)  # fmt: skip
        av, au = format_with_uncertainty(fit.launch_angle.value,
                                         fit.launch_angle.standard_uncertainty)  # fmt: skip
        first = " (first throw)" if n_throws > 1 else ""
        rows.append(("Launch speed", f"{sv} m/s (standard uncertainty {su} m/s){first}"))
        rows.append(("Launch angle", f"{av}° above horizontal (standard uncertainty {au}°){first}"))
    ts = fit.terminal_speed
    if ts is not None:
        tv, tu = format_with_uncertainty(ts.value, ts.standard_uncertainty)
        rows.append(("Terminal speed (derived)", f"{tv} m/s (standard uncertainty {tu} m/s)"))
    if fit.points_total is not None:
        rows.append(
            (
                "Points used",
                f"{fit.points_used} of {fit.points_total}; {len(fit.rejected)} rejected as "
                f"outliers",
            )  # fmt: skip
        )
    if fit.residual_rms is not None:
        rows.append(
            (
                "Residual RMS",
                f"{format_sig(1e3 * fit.residual_rms, 2)} mm "
                f"(x {format_sig(1e3 * fit.residual_rms_x, 2)} mm, "
                f"y {format_sig(1e3 * fit.residual_rms_y, 2)} mm); "
                f"{noise_words(fit.noise_model)}; lag-1 autocorrelation "
                f"{format_sig(fit.lag1_autocorrelation, 2)}",
            )  # fmt: skip
        )
    L.rows(rows, size=8.2)
    if not fit.identifiable:
        L.paragraph(f"Warning: {fit.identifiability_message or 'drag not identifiable'}",
                    size=8.5, weight="bold")  # fmt: skip

    L.heading("Statement of conformity")
    if conf is not None:
        v = conf.verdict
        L.paragraph(conf.statement, size=8.2)
        L.paragraph(
            f"Decision: {str(v.decision).upper()} (decision rule: {v.rule} "
            f"acceptance; probability of conformity "
            f"{format_probability(v.probability_of_conformity)})",
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
        ("Model of the flight", method.model_equation),
        ("Drag model", method.drag_model_text or drag_model or "—"),
        ("Integration", method.integrator),
        ("Fit", method.fit_method),
        ("Uncertainty", method.uncertainty_method),
        ("Software", f"fitdrag {content.software_version}"),
    ]
    if method.flight_physics:
        rows.insert(2, ("Spin, drag law", method.flight_physics))
    if method.geometry:
        rows.insert(4, ("Geometry", method.geometry))
    L.rows(rows, size=8.0)
    L.heading("Conditions")
    rows = []
    for est, label, unit in (
        (cond.temperature, "Air temperature", "°C"),
        (cond.pressure, "Air pressure", "Pa"),
        (cond.relative_humidity, "Relative humidity", "%"),
    ):
        if est is not None and label == "Air pressure":
            shown = (cond.shown_units or {}).get("pressure")
            rows.append((label, _pm_shown(est, "Pa", shown, "Pa")))
        elif est is not None:
            rows.append((label, _pm(est, unit)))
    rows.append(("Air density", _sourced(_pm(cond.air_density, "kg/m³"),
                                         cond.air_density_source)))  # fmt: skip
    rows.append(("Air viscosity", _sourced(f"{format_sig(cond.air_viscosity, 4)} Pa s",
                                           cond.air_viscosity_source)))  # fmt: skip
    rows.append(("Gravity", _sourced(_pm(cond.gravity, "m/s²"), cond.gravity_source)))
    if cond.air_speed_uncertainty is not None:
        still = ("still air" if not cond.wind
                 else f"wind {format_sig(cond.wind, 3)} m/s along +x")  # fmt: skip
        u_air = cond.air_speed_uncertainty
        how = ("propagated by re-fits with that wind along the flight" if u_air > 0
               else "taken as exact: no budget line")  # fmt: skip
        rows.append(("Air movement", f"{still} assumed; air speed along the flight: standard "
                     f"uncertainty {format_sig(u_air, 2)} m/s (stated), {how}"))  # fmt: skip
    cam = content.camera
    if cam.fps is not None:
        rows.append(("Frame rate", _pm(cam.fps, "Hz")))
    if cam.scale_relative_uncertainty is not None:
        rows.append(
            (
                "Length scale",
                f"relative standard uncertainty "
                f"{format_sig(100 * cam.scale_relative_uncertainty, 2)} %",
            )  # fmt: skip
        )
    if cam.distance is not None:
        rows.append(("Camera distance", _pm(cam.distance, "m") + " (to the calibration plane)"))
    if cam.out_of_plane_uncertainty_deg is not None:
        rows.append(
            (
                "Flight out of the image plane",
                f"0° with standard uncertainty {format_sig(cam.out_of_plane_uncertainty_deg, 2)}°"
                f" (stated; propagated through the perspective model)",
            )  # fmt: skip
        )
    L.rows(rows, size=8.0)

    L.heading("Uncertainty budget (JCGM 100:2008)")
    header = ["Input quantity", "Estimate", "Std. unc.", "Unit", "Sensitivity", "Contribution",
              "Share", "DoF"]  # fmt: skip
    rows = []
    for ln in budget.lines:
        rows.append([
            ln.description or ln.name,
            *_estimate_pair(ln.value, ln.standard_uncertainty),
            ln.unit,
            format_sig(ln.sensitivity, 3),
            format_sig(abs(ln.contribution), 2),
            f"{100 * ln.share:.1f} %",
            "∞" if math.isinf(ln.dof) else format_sig(ln.dof, 3),
        ])  # fmt: skip
    rows.append(["§Combined standard uncertainty u_c", "", "", "", "",
                 format_sig(budget.combined_standard_uncertainty, 2), "100 %", nu_s])  # fmt: skip
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
    if mc is not None:
        L.heading("Monte Carlo check (JCGM 101:2008)")
        run, check = mc.result, mc.comparison
        lo, hi = run.interval
        glo, ghi = check.gum_interval
        fmt = formatter_for(budget.combined_standard_uncertainty)
        pc = 100 * run.coverage_probability
        verdict_txt = {
            "agree": "The two intervals agree within the numerical tolerance, which validates "
            "the GUM result (JCGM 101:2008, 8.2).",
            "differ": "The two intervals differ by more than the numerical tolerance; the "
            "Monte Carlo interval is the more reliable one.",
            "inconclusive": "The difference is within the Monte Carlo method's own numerical "
            "noise at this number of trials; the comparison is inconclusive (more trials are "
            "needed to validate the GUM result at this tolerance).",
        }[check.status]
        L.rows(
            [
                ("Trials", f"{run.trials} successful re-fits ({run.failures} failed)"
                 + ("; adaptive stopping" if run.adaptive else "")),
                ("Standard uncertainty", f"{format_sig(run.standard_uncertainty, 2)}"),
                (f"{pc:.0f} % interval", f"Monte Carlo [{fmt(lo)}, {fmt(hi)}] (probabilistically "
                 f"symmetric); GUM [{fmt(glo)}, {fmt(ghi)}]"),
                ("Comparison", f"the ends of the two intervals differ by "
                 f"{format_sig(check.d_low, 2)} (lower) and {format_sig(check.d_high, 2)} "
                 f"(upper); tolerance {format_sig(check.tolerance, 1)}. {verdict_txt}"),
            ],
            size=8.0,
        )  # fmt: skip

    # ---- page 3 (the plots follow on the same page when they fit there) --------------------
    L.page_break(unless_room=5.6)
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
    rej = fit.rejected
    if rej:
        shown = ", ".join(f"{r}" for r in rej[:40]) + (" …" if len(rej) > 40 else "")
        first = fit.rejection_reasons.get(str(rej[0]), "")
        L.paragraph(
            f"Rejected frames ({len(rej)}): {shown}." + (f" Reason (first): {first}." if first
                                                         else ""), size=7.5)  # fmt: skip
    L.heading("Input files (SHA-256)")
    for path, digest in content.input_hashes.items():
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
            (
                ("Tested by", test.operator),
                (
                    "Approved by",
                    (cert.approved_by if cert and cert.approved_by else test.approved_by) or "",
                ),
            )  # fmt: skip
        ):
            x0 = MARGIN_L + i * half
            fig.add_artist(hline(fig, x0, x0 + half - 0.4, y + 0.35, lw=0.6))
            put_text(fig, x0, y + 0.4, f"{role}: {name}", size=8.0)
            put_text(fig, x0, y + 0.55, "Signature and date", size=7.0, style="italic")

    L.add(0.8, signatures)
    L.paragraph("End of certificate.", size=7.5, style="italic")
    return L


def render_certificate(
    content: CertificateContent,
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
    content : CertificateContent
        What the certificate says (built by ``fitdrag run``: see
        :func:`fitdrag.run.pipeline.measure`).
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

    n = len(build_layout(content, curves).paginate())
    for _ in range(5):  # the note on page 1 may push the last page over
        pages = build_layout(content, curves, total_pages=n).paginate()
        if len(pages) == n:
            break
        n = len(pages)
    else:
        raise RuntimeError(f"certificate: the page count did not settle ({n} pages last)")
    cert = content.issue
    number = cert.number if cert else ""
    lab = content.laboratory.name
    issued = cert.issued_at if cert else None
    meta = {
        "Title": f"{TITLE} {number}",
        "Author": lab,
        "Subject": f"Drag coefficient of {content.specimen.id}",
        "Creator": f"fitdrag {content.software_version}",
    }
    if issued:
        try:
            meta["CreationDate"] = datetime.fromisoformat(str(issued))
        except ValueError:
            pass
    draft = cert is not None and cert.draft
    running = "DRAFT: not reviewed, not for release" if draft else f"Certificate {number}"
    running_weight = "bold" if draft else "normal"
    with matplotlib.rc_context({"pdf.fonttype": 42}):
        with PdfPages(pdf_path, metadata=meta) as pdf:
            for i, page in enumerate(pages):
                fig = Figure(figsize=(PAGE_W, PAGE_H))
                put_text(fig, MARGIN_L, MARGIN_T - 0.35, lab, size=7.5, style="italic")
                put_text(fig, PAGE_W - MARGIN_R, MARGIN_T - 0.35, running,
                         size=7.5, ha="right", weight=running_weight)  # fmt: skip
                fig.add_artist(hline(fig, MARGIN_L, PAGE_W - MARGIN_R, MARGIN_T - 0.15, lw=0.4))
                for block, y in page:
                    block.draw(fig, y)
                fig.add_artist(
                    hline(fig, MARGIN_L, PAGE_W - MARGIN_R, PAGE_H - MARGIN_B + 0.2, lw=0.4)
                )
                put_text(fig, MARGIN_L, PAGE_H - MARGIN_B + 0.27, running, size=7.5,
                         weight=running_weight)  # fmt: skip
                put_text(fig, PAGE_W - MARGIN_R, PAGE_H - MARGIN_B + 0.27, f"Page {i + 1} of {n}",
                         size=7.5, ha="right")  # fmt: skip
                if cert is not None and cert.draft:
                    _draft_mark(fig)
                pdf.savefig(fig)
                if i == 0 and png_path is not None:
                    fig.savefig(png_path, format="png", dpi=dpi, facecolor="white")
    return n


def _draft_mark(fig) -> None:
    """A large diagonal "DRAFT" across the page (the running header and footer say it too)."""
    fig.text(0.5, 0.5, "DRAFT", fontsize=110, color=(0.85, 0.1, 0.1), alpha=0.22,
             rotation=52, ha="center", va="center", weight="bold")  # fmt: skip


def write_certificate(
    content: CertificateContent,
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
    finals = [Path(pdf_path)] + ([Path(png_path)] if png_path is not None else [])
    for f in finals:
        if f.exists() and not force:
            raise InputError(f"{f}: already exists; choose another name or pass --force.")
    tmps = [temporary_path(f) for f in finals]
    try:
        n = render_certificate(
            content, tmps[0], tmps[1] if len(tmps) > 1 else None, curves=curves, dpi=dpi
        )
        for t, f in zip(tmps, finals):
            os.replace(t, f)
    finally:
        for t in tmps:
            Path(t).unlink(missing_ok=True)
    return n
