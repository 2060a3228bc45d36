"""Report sections for measured data and decisions: data provenance, uncertainty band on the
depth curve, free compensation before/after, and the calibration schedule (docs/report.md).

:func:`blocks` turns what :func:`budget.report.extras.gather_extras` computed into the report's
plain blocks; :func:`band_svg` draws the band.
"""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np

from budget.analysis.compensate import engine_value, first_order_value
from budget.errors.context_terms import knob_text
from budget.report.blocks import Block, Figure, Heading, Para, Table
from budget.report.content import fixed, minutes, num
from budget.report.extras import Band, Extras
from budget.report.plots import _STYLE, _svg, COLOURS, GRID, INK


def band_svg(band: Band) -> str:
    """The actual curve of the central model with the 5-95 % band of the drawn models."""
    with plt.rc_context(_STYLE):
        fig, ax = plt.subplots(figsize=(7.2, 4.0))
        n = np.array(band.repetitions, float)
        low = max(min([x for x in band.q05 + band.central if x > 0], default=1e-12), 1e-16)
        ax.fill_between(n, np.maximum(band.q05, low), np.maximum(band.q95, low), color=COLOURS["structured"],
                        alpha=0.25, lw=0, label=f"5–95 % of {band.samples} drawn models")
        ax.plot(n, np.maximum(band.central, low), "-", color=COLOURS["structured"], lw=2.2, label="central values")
        if band.target is not None:
            ax.axhline(band.target, color=COLOURS["target"], lw=1.0)
        ax.set_xscale("log" if n[-1] > 1 else "linear")
        ax.set_yscale("log")
        ax.set_xlabel("repetitions of the cycle, N")
        ax.set_ylabel("actual infidelity")
        ax.grid(True, which="major", color=GRID, lw=0.6)
        ax.legend(frameon=False, loc="upper left", labelcolor=INK)
        return _svg(fig, "uncertainty-band")


def blocks(extras: Extras | None, figures: dict[str, str]) -> list[Block]:
    """The four sections, in reading order."""
    if extras is None:
        return []
    out: list[Block] = [Heading("Where the model's numbers came from", "provenance")]
    if extras.provenance:
        out.append(Para("Each value of the error-model file that carries a note (an imported model notes the file, "
                        "row and conversion of every value):"))
        out.append(Table(("key", "value", "source or note"), extras.provenance))
        if extras.uncommented:
            out.append(Para(f"{extras.uncommented} value(s) carry no note.", "note"))
    else:
        out.append(Para("The model file carries no notes on its values. `budget model import` writes one beside "
                        "every value it imports.", "note"))
    out += _band_blocks(extras, figures)
    out += _compensation_blocks(extras)
    out += _schedule_blocks(extras)
    for n in extras.notes:
        out.append(Para(n, "note"))
    return out


def _band_blocks(extras: Extras, figures: dict[str, str]) -> list[Block]:
    out: list[Block] = [Heading("How sure: the depth curve under the model's uncertainties", "uncertainty")]
    b = extras.band
    if b is None:
        return out + [Para("The model gives no uncertainties ({ value, sigma } or { low, high }), so there is no band; "
                           "`budget sweep` gives the full distribution when it does.", "note")]
    if "uncertainty-band" in figures:
        out.append(Figure("uncertainty-band", figures["uncertainty-band"],
                          f"Accumulated infidelity against repetitions: central model and 5–95 % of {b.samples} drawn models."))
    pick = sorted(set(np.linspace(0, len(b.repetitions) - 1, min(8, len(b.repetitions))).round().astype(int)))
    out.append(Table(("repetitions N", "central", "5 %", "median", "95 %"),
                     tuple((f"{b.repetitions[i]:,}", num(b.central[i]), num(b.q05[i]), num(b.median[i]), num(b.q95[i]))
                           for i in pick), (True, True, True, True, True)))
    return out


def _compensation_blocks(extras: Extras) -> list[Block]:
    out: list[Block] = [Heading("Free compensation: virtual-Z corrections", "compensation")]
    c = extras.compensation
    if c is None:
        return out
    out.append(Para(f"Frame changes (rz, no device time) at the end of each repeated block and of the circuit, chosen "
                    f"on the leading-order quadratic form and verified with the {c.engine} engine."))
    out.append(Table(("", "infidelity", "first-order prediction"),
                     (("before", engine_value(c.before, num), first_order_value(c.before_first_order, num)),
                      ("after", engine_value(c.after, num), first_order_value(c.after_first_order, num))),
                     (False, True, True)))
    if c.corrections:
        out.append(Table(("qubit", "where", "angle (rad)"),
                         tuple((k.qubit, k.where, fixed(k.angle_rad, 6, sign=True)) for k in c.corrections), (False, False, True)))
    else:
        out.append(Para("No virtual-Z correction lowers the leading-order infidelity."))
    return out


def _schedule_blocks(extras: Extras) -> list[Block]:
    out: list[Block] = [Heading(f"Calibration schedule for the next {extras.hours:g} hours", "schedule")]
    s = extras.schedule
    if s is None:
        return out
    rows = []
    for k in s.knobs:
        cal = k.action == "calibrate"
        rows.append((f"{k.family}.{k.knob}", k.action, knob_text(k.sigma_rad, k.knob, num) if cal else "—",
                     f"{k.every_hours:.3g} h" if cal else "—", str(max(r.depth for r in k.sites)) if cal else "—",
                     str(sum(r.shots_total for r in k.sites)) if cal else "—", minutes(k.device_s) if cal else "—"))
    out.append(Para(f"The cheapest schedule (a mixed-integer programme, docs/methods.md) that keeps the prediction at or "
                    f"below {num(s.target)} at the worst time: predicted {num(s.predicted)}, device time "
                    f"{minutes(s.device_s)} over {s.hours:g} h."))
    out.append(Table(("knob", "action", "σ (rad)", "every", "depth", "shots per round", "device time"), tuple(rows),
                     (False, False, True, True, True, True, True)))
    if s.baseline_device_s is not None:
        out.append(Para(f"Calibrating everything at the tightest tolerance (σ = {num(s.baseline_sigma_rad)} rad) would take "
                        f"{minutes(s.baseline_device_s)}."))
    return out
