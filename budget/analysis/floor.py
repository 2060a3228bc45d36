"""When the incoherent floor alone exceeds the target: which incoherent numbers would meet it.

The floor is the infidelity with every coherent knob at zero. It comes from the gates'
depolarizing parts (error per gate r, Magesan, Gambetta, Emerson, PRL 106, 180504 (2011)) and
from T1/T2 relaxation during gates and idle slots. Three remedies are computed, each as one
factor g found by Brent's method (scipy.optimize.brentq) on the most accurate engine that fits
(exact where it fits), with the coherent knobs at zero:

- every source scaled: each r_f → g·r_f and every T1, T2 → T1/g, T2/g (the relaxation of a
  stretch t with γ = 1 - e^{-t/T1} becomes 1 - (1 - γ)^g, the dephasing factor c becomes c^g);
- gate errors alone (T1, T2 as today), when relaxation alone stays below the target;
- coherence times alone (gate errors as today), when the gate errors alone stay below it.

These are the least improvements that meet E with perfect calibration (no room is left for
coherent errors); to leave a coherent budget B, aim the floor at E - B instead. Without an
engine that fits, the first-order floor's linearity in the rates gives g = E/s.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Any

from scipy.optimize import brentq

from budget.engines.door import choose_engine
from budget.analysis.sensitivity import quadratic_form
from budget.errors.knobs import knob_grouping
from budget.errors.retune import with_knob_values
from budget.errors.noisy import NoisyCircuit, NoisyLayer, map_items
from budget.memo import ObjectKey
from budget.problems import TooLargeError


@dataclass(frozen=True)
class FamilyNeed:
    """One gate family: its part of the floor, its error per gate today and what would meet E."""

    family: str
    floor_part: float
    avg_infidelity: float | None
    needed_all: float | None
    needed_alone: float | None


@dataclass(frozen=True)
class FloorRemedy:
    """What the incoherent numbers would have to be for the floor to meet the target.

    Attributes:
        target, floor: E and s.
        depolarizing, relaxation: the floor with only the gates' depolarizing part, and with only
            relaxation (to first order they add up to s).
        scale_all: g, the factor on every incoherent rate that brings the floor to E.
        gates_alone: g_D, the factor on every error per gate with T1, T2 as today (None: the
            relaxation alone already exceeds E).
        coherence_alone: g_R, the factor on 1/T1 and 1/T2 with the gate errors as today (None: the
            gate errors alone already exceed E).
        families: per gate family, largest part of the floor first.
        t1_us, t2_us: today's default T1, T2 (None when the model has none).
        engine: the engine whose floor the factors were solved on (``"first order"``: E/s).
    """

    target: float
    floor: float
    depolarizing: float
    relaxation: float
    scale_all: float
    gates_alone: float | None
    coherence_alone: float | None
    families: tuple[FamilyNeed, ...]
    t1_us: float | None
    t2_us: float | None
    engine: str = "first order"

    def message(self) -> str:
        """One plain paragraph: what would meet the target."""
        parts = [f"to meet {self.target:g} with perfect calibration the incoherent error must shrink "
                 f"{1 / self.scale_all:.3g}x overall"]
        gates = [f"{f.family} {f.avg_infidelity:.3g} → {f.needed_all:.3g}" for f in self.families
                 if f.avg_infidelity and f.needed_all is not None]
        if gates:
            parts.append("error per gate " + ", ".join(gates[:4]))
        if self.relaxation > 0 and self.t1_us is not None:
            t2 = f", T2 {self.t2_us:g} → {self.t2_us / self.scale_all:.3g} µs" if self.t2_us is not None else ""
            parts.append(f"T1 {self.t1_us:g} → {self.t1_us / self.scale_all:.3g} µs{t2} (every qubit {1 / self.scale_all:.3g}x)")
        text = "; ".join(parts)
        if self.gates_alone is not None and self.depolarizing > 0:
            text += f"; or, with T1/T2 as today, every error per gate {1 / self.gates_alone:.3g}x smaller"
        elif self.depolarizing > 0:
            text += f"; gate errors alone cannot do it (relaxation gives {self.relaxation:.3g})"
        if self.coherence_alone is not None and self.relaxation > 0:
            text += f"; or, with gate errors as today, T1 and T2 {1 / self.coherence_alone:.3g}x longer"
        elif self.relaxation > 0:
            text += f"; longer T1/T2 alone cannot do it (gate errors give {self.depolarizing:.3g})"
        return text

    def as_json(self) -> dict:
        out = dataclasses.asdict(self)
        out["message"] = self.message()
        return out


def without_relaxation(circuit: NoisyCircuit) -> NoisyCircuit:
    """The same circuit with every T1/T2 relaxation removed (gates and idle)."""
    ops: dict[ObjectKey, Any] = {}

    def layer(it: NoisyLayer) -> NoisyLayer:
        return it.map_sites(lambda n: ops.setdefault(ObjectKey(n), dataclasses.replace(n, relaxation=())), idle=())

    def probe(it):
        return dataclasses.replace(it, idle=())

    return dataclasses.replace(circuit, body=map_items(circuit.body, layer, probe, memo={}))


def scaled_incoherent(circuit: NoisyCircuit, gates: float, relaxation: float) -> NoisyCircuit:
    """``circuit`` with the gates' depolarizing and Pauli rates times ``gates`` and every T1, T2
    (gates and idle) divided by ``relaxation`` (γ → 1 - (1-γ)^g, dephasing factor c → c^g)."""
    memo: dict[ObjectKey, Any] = {}

    def relax(rs):
        return tuple(dataclasses.replace(r, gamma=1 - (1 - r.gamma) ** relaxation,
                                         dephasing_factor=r.dephasing_factor**relaxation) for r in rs)

    def op(n):
        return dataclasses.replace(n, depolarizing=n.depolarizing * gates, relaxation=relax(n.relaxation),
                                   pauli_rates={k: v * gates for k, v in n.pauli_rates.items()})

    def layer(it: NoisyLayer) -> NoisyLayer:
        return it.map_sites(lambda n: memo.setdefault(ObjectKey(n), op(n)), idle=relax(it.idle))

    def probe(it):
        return dataclasses.replace(it, idle=relax(it.idle))

    return dataclasses.replace(circuit, body=map_items(circuit.body, layer, probe, memo={}))


def accurate_floor(qf: Any, noisy: NoisyCircuit, metric: str, target: float, *, engine: str = "auto") -> tuple[Any, str | None]:
    """``qf`` with its floor from the most accurate engine that fits (every coherent knob at zero),
    when the leading-order floor s = Σ incoherent errors reaches the target E, and a note saying
    so; else (or when no engine fits) ``qf`` unchanged and None.

    The leading-order floor adds the incoherent errors of every operation; the exact value
    1 - Π(1 - e_k) is smaller by about s²/2, so near the target the two disagree on whether any
    calibration can meet it (a 4-qubit layered circuit: s = 0.0541, exact 0.0528, target 0.054).
    The floor's parts per family are scaled by the same factor.
    """
    if qf.floor < target or qf.floor <= 0:
        return qf, None
    _, knobs = knob_grouping(noisy)
    bare = with_knob_values(noisy, {key: 0.0 for key in knobs})
    try:
        runner = choose_engine(bare, metric, engine, brief=True)
    except TooLargeError:
        return qf, None
    value = float(runner.run(bare, metric).infidelity)
    if not 0 < value < math.inf:
        return qf, None
    scale = value / qf.floor
    sources = {k: v * scale for k, v in qf.floor_sources.items()}
    if value < target:
        note = (f"the leading-order incoherent floor {qf.floor:.4g} reaches the target {target:g}, but the {runner.name} "
                f"engine's floor (every coherent knob at zero) is {value:.4g}: the tolerances use {value:.4g}")
    else:
        note = (f"incoherent floor from the {runner.name} engine (every coherent knob at zero): {value:.4g} "
                f"(leading order {qf.floor:.4g})")
    return dataclasses.replace(qf, floor=value, floor_sources=sources), note


def floor_remedy(report: Any, model: Any, noisy: NoisyCircuit, metric: str, *, engine: str = "auto") -> FloorRemedy | None:
    """The remedy for ``report`` (a ToleranceReport whose floor is at or above its target)."""
    s, target = report.incoherent_floor, report.target
    if s <= 0:
        return None
    _, knobs = knob_grouping(noisy)
    bare = with_knob_values(noisy, {key: 0.0 for key in knobs})
    try:
        runner = choose_engine(bare, metric, engine, brief=True)
    except TooLargeError:
        runner = None

    def floor(gates: float, relaxation: float) -> float:
        return float(runner.run(scaled_incoherent(bare, gates, relaxation), metric).infidelity)

    def solve(fn) -> float | None:
        return brentq(lambda g: fn(g) - target, 0.0, 1.0, xtol=1e-9, rtol=1e-6) if fn(0.0) < target < fn(1.0) else None

    if runner is not None:
        s, d, r = floor(1.0, 1.0), floor(1.0, 0.0), floor(0.0, 1.0)
        g = solve(lambda x: floor(x, x))
        g_d, g_r = solve(lambda x: floor(x, 1.0)), solve(lambda x: floor(1.0, x))
        how = runner.name
    else:
        d = min(quadratic_form(without_relaxation(noisy), metric).floor, s)
        r = s - d
        g = target / s
        g_d = (target - r) / d if d > 0 and r < target else None
        g_r = (target - d) / r if r > 0 and d < target else None
        how = "first order"
    families = []
    for family, part in sorted(report.floor_sources.items(), key=lambda kv: -kv[1]):
        gp = model.gates.get(family)
        rate = gp.avg_infidelity if gp is not None and gp.avg_infidelity > 0 else None
        families.append(FamilyNeed(family, part, rate, rate * g if rate and g else None,
                                   rate * g_d if rate and g_d is not None else None))
    q = model.qubit_defaults
    return FloorRemedy(
        target=target, floor=s, depolarizing=d, relaxation=r, scale_all=g if g is not None else target / s,
        gates_alone=g_d, coherence_alone=g_r, families=tuple(families), t1_us=q.t1_us, t2_us=q.t2_us, engine=how,
    )
