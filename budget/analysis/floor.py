"""When the incoherent floor alone exceeds the target: which incoherent numbers would meet it.

To first order the floor is linear in every incoherent rate (design.md §5): the depolarizing
part of each gate family grows with its error per gate r (Magesan, Gambetta, Emerson, PRL 106,
180504 (2011)), the relaxation part with t/T1 and t/T2 (the Pauli twirl of amplitude damping and
dephasing has rates (1 - e^{-t/T1})/4 and (1 - e^{-t/T2})/2 - (1 - e^{-t/T1})/4, Tomita & Svore,
PRA 90, 062320 (2014), linear in 1/T1 and 1/T2 for t ≪ T1, T2). So s = D + R splits into the
depolarizing part D and the relaxation part R (during gates and idle), and the target E is met by

- every source scaled by g = E/s: each r_f → g·r_f and every T1, T2 → T1/g, T2/g;
- gate errors alone, when R < E: r_f → g_D·r_f with g_D = (E - R)/D;
- coherence times alone, when D < E: T1, T2 → T1/g_R, T2/g_R with g_R = (E - D)/R.

These are the least improvements that meet E with perfect calibration (no room is left for
coherent errors); to leave a coherent budget B, aim the floor at E - B instead.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Any

from budget.analysis.sensitivity import quadratic_form
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyLayer, NoisyRepeat
from budget.problems import TooLargeError


@dataclass(frozen=True)
class FamilyNeed:
    """One gate family: its part of the floor, its error per gate today and what would meet E."""

    family: str
    floor_part: float
    depolarizing_part: float
    avg_infidelity: float | None
    needed_all: float | None
    needed_alone: float | None


@dataclass(frozen=True)
class FloorRemedy:
    """What the incoherent numbers would have to be for the floor to meet the target.

    Attributes:
        target, floor: E and s.
        depolarizing, relaxation: D and R, s = D + R.
        scale_all: g = E/s, the factor on every incoherent rate.
        gates_alone: g_D, the factor on every error per gate with T1, T2 as today (None: the
            relaxation alone already exceeds E).
        coherence_alone: g_R, the factor on 1/T1 and 1/T2 with the gate errors as today (None: the
            gate errors alone already exceed E).
        families: per gate family, largest part of the floor first.
        t1_us, t2_us: today's default T1, T2 (None when the model has none).
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
    memo: dict[int, Any] = {}

    def walk(items: tuple[NoisyItem, ...]) -> tuple[NoisyItem, ...]:
        out = []
        for it in items:
            if id(it) not in memo:
                if isinstance(it, NoisyLayer):
                    ops = tuple(memo.setdefault(id(n), dataclasses.replace(n, relaxation=())) for n in it.operations)
                    memo[id(it)] = dataclasses.replace(it, operations=ops, idle=())
                else:
                    memo[id(it)] = NoisyRepeat(walk(it.body), it.count)
            out.append(memo[id(it)])
        return tuple(out)

    return dataclasses.replace(circuit, body=walk(circuit.body))


def floor_remedy(report: Any, model: Any, noisy: NoisyCircuit, metric: str) -> FloorRemedy | None:
    """The remedy for ``report`` (a ToleranceReport whose floor is at or above its target)."""
    s, target = report.incoherent_floor, report.target
    if s <= 0:
        return None
    try:
        depol = quadratic_form(without_relaxation(noisy), metric)
    except TooLargeError:
        return None
    d = min(depol.floor, s)
    r = s - d
    g = target / s
    families = []
    for family, part in sorted(report.floor_sources.items(), key=lambda kv: -kv[1]):
        gp = model.gates.get(family)
        rate = gp.avg_infidelity if gp is not None and gp.avg_infidelity > 0 else None
        dep = depol.floor_sources.get(family, 0.0)
        g_d = (target - r) / d if d > 0 and r < target else None
        families.append(FamilyNeed(family, part, dep, rate, rate * g if rate else None,
                                   rate * g_d if rate and g_d is not None else None))
    q = model.qubit_defaults
    return FloorRemedy(
        target=target, floor=s, depolarizing=d, relaxation=r, scale_all=g,
        gates_alone=(target - r) / d if d > 0 and r < target else None,
        coherence_alone=(target - d) / r if r > 0 and d < target else None,
        families=tuple(families), t1_us=q.t1_us, t2_us=q.t2_us,
    )
