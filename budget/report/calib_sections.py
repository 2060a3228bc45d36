"""Report sections for measured data and decisions: data provenance, uncertainty band on the
depth curve, free compensation before/after, and the calibration schedule (docs/report.md).

:func:`gather_extras` computes (pure: no rich, no files); :func:`blocks` turns the result into the
report's plain blocks; :func:`band_svg` draws the band. A part that cannot be computed for the
circuit becomes a note, never a failure of the whole report.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import tomlkit

from budget.analysis.compensate import compensate, engine_value, first_order_value
from budget.analysis.depth import depth_curve
from budget.analysis.plan import plan
from budget.analysis.uncertainty import draw, varied_values, with_values
from budget.errors.attach import attach
from budget.errors.context_layers import knob_text
from budget.errors.model import ErrorModel, key_path
from budget.errors.uncertain import central_values
from budget.problems import InputError
from budget.report.content import minutes, num
from budget.report.sections import Block, Figure, Heading, Para, Table

BAND_SAMPLES = 12
BAND_POINTS = 8


@dataclass(frozen=True)
class Band:
    """Accumulated infidelity against repetitions over drawn models: 5 %, median, 95 %."""

    repetitions: tuple[int, ...]
    central: tuple[float, ...]
    q05: tuple[float, ...]
    median: tuple[float, ...]
    q95: tuple[float, ...]
    samples: int
    target: float | None


@dataclass(frozen=True)
class Extras:
    """What the four sections show; None where a part was not computed (see ``notes``)."""

    provenance: tuple[tuple[str, str, str], ...] = ()
    uncommented: int = 0
    band: Band | None = None
    compensation: Any = None
    schedule: Any = None
    hours: float = 24.0
    notes: tuple[str, ...] = field(default=())


def provenance_rows(path: str | Path) -> tuple[tuple[tuple[str, str, str], ...], int]:
    """(key path, value, comment) for every value or table of a TOML model that carries a comment
    (an imported model says where each value came from), and the number of values without one."""
    rows: list[tuple[str, str, str]] = []
    bare = 0

    def walk(table: Any, path: tuple[str, ...]) -> None:
        nonlocal bare
        for key, item in table.items():
            here = path + (key,)
            comment = getattr(getattr(item, "trivia", None), "comment", "").lstrip("#").strip()
            if isinstance(item, tomlkit.items.Table) and not isinstance(item, tomlkit.items.InlineTable):
                if comment:
                    rows.append((key_path(here), "(table)", comment))
                walk(item, here)
            elif comment:
                rows.append((key_path(here), item.as_string().strip(), comment))
            else:
                bare += 1

    doc = tomlkit.parse(Path(path).read_text(encoding="utf-8"))
    for section in ("qubits", "gates"):
        if section in doc:
            walk(doc[section], (section,))
    return tuple(rows), bare


def gather_extras(structured: Any, errors: Any, model: Any, *, target: float, cycles: int, metric: str, engine: str,
                  max_cycles: int, hours: float, band_samples: int = BAND_SAMPLES) -> Extras:
    """Run the four analyses; each failure of fit (too large, no repeated block) becomes a note."""
    notes: list[str] = []
    prov, bare = ((), 0)
    if isinstance(errors, (str, Path)):
        prov, bare = provenance_rows(errors)
    band = None
    if any(s.random for s in model.uncertain):
        try:
            band = _band(structured, errors, model, max_cycles, metric, engine, target, band_samples)
        except InputError as exc:
            notes.append(f"uncertainty band left out: {exc}")
    comp = sched = None
    try:
        comp = compensate(structured, model, cycles=cycles, metric=metric, engine=engine)
    except InputError as exc:
        notes.append(f"free compensation left out: {exc}")
    try:
        sched = plan(structured, model, target=target, hours=hours, cycles=cycles, metric=metric)
    except InputError as exc:
        notes.append(f"calibration schedule left out: {exc}")
    return Extras(prov, bare, band, comp, sched, hours, tuple(notes))


def _band(structured, errors, model, max_cycles, metric, engine, target, samples) -> Band:
    """Depth curves (8 points) of ``samples`` drawn models (seeded: sample k uses rng([1, k]))."""
    raw = errors if isinstance(errors, dict) else tomllib.loads(Path(errors).read_text(encoding="utf-8"))
    plain, _ = central_values(raw, model.source)
    varied = tuple(v for v in varied_values(model, plain) if v.spread.random)
    paths = tuple(v.path for v in varied)

    def curve(m):
        return depth_curve(attach(structured, m), max_cycles=max_cycles, points=BAND_POINTS, metric=metric, engine=engine)

    central = curve(model)
    curves = np.array([curve(ErrorModel.from_dict(with_values(plain, paths, draw(varied, 1, k)[0]),
                                                  source=model.source)).structured for k in range(samples)])
    q05, med, q95 = (tuple(float(x) for x in row) for row in np.quantile(curves, [0.05, 0.5, 0.95], axis=0))
    return Band(central.repetitions, central.structured, q05, med, q95, samples, target)


def band_svg(band: Band) -> str:
    """The actual curve of the central model with the 5-95 % band of the drawn models."""
    import matplotlib.pyplot as plt  # slow import: only reports with an uncertainty band draw it

    from budget.report.plots import _STYLE, _svg, COLOURS, GRID, INK  # loads matplotlib too

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
                         tuple((k.qubit, k.where, f"{k.angle_rad:+.6f}") for k in c.corrections), (False, False, True)))
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
