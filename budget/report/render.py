"""All files of a report folder, computed in memory: pictures, Markdown, then the HTML page."""

from __future__ import annotations

from budget.report.calib_sections import band_svg
from budget.report.content import ReportData
from budget.report.detector_views import heat_rows
from budget.report.html import render_html
from budget.report.markdown import render_markdown
from budget.report.plots import depth_svg, detector_heat_svg, heatmap_svg, shares_svg


def figures(data: ReportData) -> dict[str, str]:
    """Figure name -> SVG text (depth curves only when they were computed)."""
    out = {}
    if data.curve is not None:
        out["depth-curves"] = depth_svg(data.curve)
    if data.result.families and data.result.shows_shares:
        out["family-shares"] = shares_svg(data.result.families, data.result.actual_infidelity,
                                          title=data.result.verdict.words)
    out["error-map"] = heatmap_svg(data.emap)
    if data.extras is not None and data.extras.band is not None:
        out["uncertainty-band"] = band_svg(data.extras.band)
    if data.result.detectors:
        out["detector-map"] = detector_heat_svg(*heat_rows(data.result))
    return out


def report_files(data: ReportData) -> dict[str, str]:
    """File name -> content: every ``<figure>.svg``, ``report.md`` and ``report.html`` (last)."""
    figs = figures(data)
    files = {f"{name}.svg": svg for name, svg in figs.items()}
    files["report.md"] = render_markdown(data, figs)
    files["report.html"] = render_html(data, figs)
    return files
