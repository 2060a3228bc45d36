"""Pictures for the report: matplotlib (Agg backend), returned as inline SVG text.

Every function returns a string that starts with ``<svg`` and needs no network or font files to
view: text stays text (``svg.fonttype = none``), so the browser draws it with its own sans-serif
font. Colours: one fixed palette for the three curves, used the same way everywhere.
"""

from __future__ import annotations

import io
import math
import re
import textwrap
from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
from matplotlib.colors import LinearSegmentedColormap  # noqa: E402

from budget.analysis.depth import CURVE_WORDS, DepthCurve  # noqa: E402
from budget.analysis.ratios import at_rounding_level  # noqa: E402
from budget.problems import InputError  # noqa: E402
from budget.analysis.heatmap import ErrorMap  # noqa: E402
from budget.analysis.result import FamilyShare  # noqa: E402

INK = "#22303c"
GRID = "#d9dee3"
COLOURS = {"structured": "#b5472f", "naive": "#3d6f8e", "twirled": "#6b8f3a", "target": "#8a6d9e"}
WORDS = CURVE_WORDS
_HEAT = LinearSegmentedColormap.from_list("fen_heat", ["#f7f4ee", "#f0c987", "#d9753b", "#8e2a1f"])

_STYLE = {
    "svg.fonttype": "none",
    "svg.hashsalt": "budget-report",
    "font.family": "sans-serif",
    "font.size": 10,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "xtick.color": INK,
    "ytick.color": INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
}


def _svg(fig, name: str) -> str:
    buf = io.StringIO()
    fig.savefig(buf, format="svg", bbox_inches="tight", metadata={"Date": None, "Creator": None})
    plt.close(fig)
    text = buf.getvalue()
    text = text[text.index("<svg") :]
    # ids must be unique on a page holding several figures
    ids = set(re.findall(r'id="([^"]+)"', text))
    for old in sorted(ids, key=len, reverse=True):
        text = re.sub(rf'(["#(]){re.escape(old)}(["\)])', rf"\g<1>{name}-{old}\g<2>", text)
    return re.sub(r"<svg ", f'<svg role="img" aria-label="{name}" ', text, count=1)


PLOT_FORMATS = {".svg": "svg", ".png": "png", ".pdf": "pdf"}
"""File extension -> picture format of ``--plot``."""


def plot_format(path: str) -> str:
    """The picture format for an output path, from its extension (``-``: SVG on standard output).

    Raises:
        InputError: an extension other than .svg, .png or .pdf.
    """
    if str(path) == "-":
        return "svg"
    suffix = Path(path).suffix.lower()
    if suffix not in PLOT_FORMATS:
        raise InputError(f"--plot {path}: the picture format comes from the extension; use "
                         f"{', '.join(PLOT_FORMATS)} (got {suffix or 'none'})")
    return PLOT_FORMATS[suffix]


def depth_picture(curve: DepthCurve, fmt: str) -> bytes:
    """The depth curves as an SVG, PNG (150 dpi) or PDF file's bytes."""
    if fmt == "svg":
        return depth_svg(curve).encode("utf-8")
    with plt.rc_context(_STYLE):
        fig = _depth_figure(curve)
        buf = io.BytesIO()
        fig.savefig(buf, format=fmt, bbox_inches="tight", dpi=150,
                    metadata={"Creator": None} if fmt == "pdf" else None)
        plt.close(fig)
        return buf.getvalue()


def depth_svg(curve: DepthCurve) -> str:
    """Infidelity against repetitions, log-log, three curves, crossover and target marked."""
    with plt.rc_context(_STYLE):
        return _svg(_depth_figure(curve), "depth-curves")


def _depth_figure(curve: DepthCurve):
    """The depth-curve figure (called inside the style context)."""
    fig, ax = plt.subplots(figsize=(7.2, 4.2))
    n = np.array(curve.repetitions, dtype=float)
    floor = _positive_floor(curve)
    for key in ("naive", "twirled", "structured"):
        y = np.array([np.nan if v is None else max(v, floor) for v in getattr(curve, key)])
        style = "-" if key == "structured" else "--" if key == "naive" else ":"
        ax.plot(n, y, style, color=COLOURS[key], lw=2.2 if key == "structured" else 1.8, label=WORDS[key])
        marks = ((curve.range_ends.get(key), "range ends,"), (curve.switches.get(key), "exact engine from"))
        for at, words in marks:  # where a curve stops or changes engine; say so on the plot
            if at is not None:
                ax.axvline(at, color=COLOURS[key], lw=1.0, ls=(0, (2, 2)))
                ax.text(at, 0.97, f" {WORDS[key]}: {words} N = {at:,}", transform=ax.get_xaxis_transform(),
                        color=COLOURS[key], fontsize=8, va="top", rotation=90)
    ax.set_xscale("log" if n[-1] > 1 else "linear")
    ax.set_yscale("log")
    if curve.crossover_repetitions is not None:
        x = curve.crossover_repetitions
        ax.axvline(x, color=INK, lw=0.8, alpha=0.5)
        ax.text(x, 0.03, f" crossover N = {x:,}", transform=ax.get_xaxis_transform(), color=INK, fontsize=9)
    if curve.target is not None:
        ax.axhline(curve.target, color=COLOURS["target"], lw=1.0)
        ax.text(0.99, curve.target, f"target {curve.target:g}", transform=ax.get_yaxis_transform(),
                color=COLOURS["target"], fontsize=9, ha="right", va="bottom")
    ax.set_xlabel("repetitions of the cycle, N")
    ax.set_ylabel(_metric_label(curve.metric))
    ax.grid(True, which="major", color=GRID, lw=0.6)
    ax.legend(frameon=False, loc="upper left")
    return fig


def shares_svg(families: tuple[FamilyShare, ...], total: float, *, title: str = "") -> str:
    """Horizontal bars: each family's share of the actual infidelity (signed); ``title``: the
    verdict of :mod:`budget.analysis.verdict`, wrapped above the bars."""
    with plt.rc_context(_STYLE):
        rows = list(families)[:12]
        fig, ax = plt.subplots(figsize=(7.2, 0.45 * max(len(rows), 2) + 0.9))
        names = [f.name for f in rows][::-1]
        vals = np.array([f.share for f in rows][::-1])
        colours = [COLOURS["structured"] if v >= 0 else COLOURS["twirled"] for v in vals]
        ax.set_axisbelow(True)
        ax.barh(names, vals, color=colours, height=0.6)
        for y, v in enumerate(vals):
            pct = f"{100 * v / total:.0f} %" if not at_rounding_level(total) and total > 0 else ""
            ax.annotate(f"{v:.2e}  {pct}", (v, y), xytext=(4 if v >= 0 else -4, 0), textcoords="offset points",
                        va="center", ha="left" if v >= 0 else "right", fontsize=9, color=INK)
        ax.axvline(0, color=INK, lw=0.8)
        ax.set_xlabel("share of the actual infidelity (negative: cancels other errors)")
        ax.margins(x=0.25)
        ax.grid(True, axis="x", color=GRID, lw=0.6)
        if title:
            ax.set_title(textwrap.fill(title, 90, break_on_hyphens=False), loc="left", fontsize=9, color=INK)
        return _svg(fig, "family-shares")


def heatmap_svg(emap: ErrorMap) -> str:
    """Layer-by-qubit map of the first-order local infidelity, as a percentage of its total."""
    with plt.rc_context(_STYLE):
        n_q, n_l = emap.values.shape
        fig, ax = plt.subplots(figsize=(min(max(4.0, 0.32 * n_l + 2.0), 11.0), 0.38 * n_q + 1.4))
        total = emap.total
        data = 100 * emap.values / total if total > 0 and not at_rounding_level(total) else emap.values
        ax.set_yticks(range(n_q), emap.qubits)
        step = max(1, math.ceil(n_l / 30))
        ax.set_xticks(range(0, n_l, step), [emap.columns[i] for i in range(0, n_l, step)],
                      rotation=60, ha="right", fontsize=8)
        ax.set_xlabel("layer as written (×N: runs N times)")
        return _heat(fig, ax, data, "% of the local error total", "error-map")


def detector_heat_svg(rounds: list[int], grid: list[list[float | None]]) -> str:
    """Rounds (rows) by detector within the round (columns): firing probability per detector."""
    with plt.rc_context(_STYLE):
        data = np.array([[np.nan if p is None else p for p in row] for row in grid], dtype=float)
        n_r, n_d = data.shape
        fig, ax = plt.subplots(figsize=(min(max(4.0, 0.3 * n_d + 2.5), 11.0), min(0.3 * n_r + 1.6, 9.0)))
        step = max(1, math.ceil(n_r / 25))
        ax.set_yticks(range(0, n_r, step), [str(rounds[i]) for i in range(0, n_r, step)])
        ax.set_ylabel("round")
        ax.set_xlabel("detector within the round")
        return _heat(fig, ax, data, "probability that the detector fires", "detector-map")


def _heat(fig, ax, data: np.ndarray, label: str, name: str) -> str:
    """The heat map of ``data`` on ``ax`` (ticks already set): frameless, with a labelled colour bar."""
    im = ax.imshow(data, aspect="auto", cmap=_HEAT, interpolation="nearest", vmin=0)
    for s in ax.spines.values():
        s.set_visible(False)
    fig.colorbar(im, ax=ax, pad=0.02).set_label(label)
    return _svg(fig, name)


def _positive_floor(curve: DepthCurve) -> float:
    vals = [v for key in ("naive", "structured", "twirled") for v in getattr(curve, key) if v is not None and v > 0]
    return min(vals) / 10 if vals else 1e-12


def _metric_label(metric: str) -> str:
    return {"process": "process infidelity 1 − F_pro", "state": "state infidelity, input |0…0⟩",
            "detectors": "P(some detector fires)", "record": "record infidelity"}.get(metric, metric)
