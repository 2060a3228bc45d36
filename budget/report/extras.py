"""What the report's measured-data sections show: data provenance, the uncertainty band on the
depth curve, free compensation before/after, and the calibration schedule (docs/report.md).

:func:`gather_extras` computes them (pure: no rich, no files, no pictures); a part that cannot be
computed for the circuit becomes a note, never a failure of the whole report.
:mod:`budget.report.calib_sections` turns the result into the report's blocks.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import tomlkit

from budget.analysis.compensate import compensate
from budget.analysis.depth import depth_curve
from budget.analysis.plan import plan
from budget.analysis.uncertainty import draw, varied_values, with_values
from budget.errors.attach import attach
from budget.errors.model import ErrorModel, key_path
from budget.errors.uncertain import central_values
from budget.problems import InputError

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
