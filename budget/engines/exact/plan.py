"""Reach of the exact engine: which dense form, how much memory and work, and the refusal message.

Forms (design.md §4):
    ``vector``    coherent errors only, state metric: state vector, 2^n amplitudes;
    ``unitary``   coherent errors only, process metric: the d x d unitary;
    ``density``   incoherent errors, state metric: density matrix, 4^n entries;
    ``superop``   incoherent errors, process metric: the 4^n x 4^n superoperator (the Choi state
                  of the doubled 2n-qubit system, reshuffled), so its reach is half as many qubits.

A repeated block is either unrolled (cost ∝ N) or replaced by its block matrix raised to the
power N (cost independent of N, but the block matrix is D x D with D = 2^n or 4^n); the cheaper
estimate wins, and powers are only taken up to POWER_MAX_DIM. Work is counted in complex
multiply-adds; the constants were measured on the 2-core development machine (docs/benchmarks.md).
"""

from __future__ import annotations

import math

from dataclasses import dataclass

from budget.circuit.walk import Kind, gate_kind
from budget.errors.noisy import NoisyCircuit, NoisyItem, NoisyRepeat
from budget.memo import ObjectKey

STATE_VECTOR_MAX_QUBITS = 22
"""Coherent errors, state metric: 64 MiB state vector, ~60 ms per two-qubit gate (measured)."""
UNITARY_MAX_QUBITS = 12
"""Coherent errors, process metric: 256 MiB per unitary, ~0.25 s per two-qubit gate (measured)."""
DENSITY_MAX_QUBITS = 12
"""Incoherent errors, state metric: 128 MiB real Pauli-basis density matrix, ~80 ms per
two-qubit channel (measured)."""
SUPEROP_MAX_QUBITS = 6
"""Incoherent errors, process metric: 4^6 x 4^6 real superoperator, 128 MiB, ~80 ms per
two-qubit channel (measured)."""
POWER_MAX_DIM = 1024
"""Largest block matrix raised to a power for a repeated block (2^10 unitary, 4^5 superoperator);
its Schur or eigendecomposition takes seconds to tens of seconds on 2 cores."""
MEMORY_LIMIT_BYTES = 4 * 2**30
"""Estimated peak memory above which the engine refuses before allocating anything."""
WORK_LIMIT = 1e11
"""Estimated complex multiply-adds above which the engine refuses (1-5 minutes on 2 cores: the
products run at 0.3-1e9 multiply-adds per second here)."""

_OVERHEAD = 3e4  # multiply-adds' worth of Python overhead per local matrix applied (~20 µs)
_DECOMPOSITION = 40.0  # Schur / eig + inverse of a D x D matrix ≈ 40 D³ multiply-adds, measured
CHEAP_POWER_WORK = 1e9
"""A block power estimated below this many multiply-adds (well under a second) is taken in auto mode
even when unrolling a few repetitions would be cheaper: the cost then does not depend on N at all,
which keeps run times predictable across repetition counts (issue target: time at N = 10^6 at most
2x the time at N = 1)."""

FORMS = {
    # (incoherent, metric) -> (form, site dimension, qubit limit, operator?)
    (False, "state"): ("vector", 2, STATE_VECTOR_MAX_QUBITS, False),
    (False, "process"): ("unitary", 2, UNITARY_MAX_QUBITS, True),
    (True, "state"): ("density", 4, DENSITY_MAX_QUBITS, False),
    (True, "process"): ("superop", 4, SUPEROP_MAX_QUBITS, True),
}


@dataclass(frozen=True)
class Plan:
    """How the exact engine will run one circuit.

    Attributes:
        form: ``vector``, ``unitary``, ``density`` or ``superop``.
        site_dim: 2 or 4 (dimension per qubit of the register).
        max_qubits: the form's qubit limit.
        columns: 1 for a state, s^n for an operator.
        work: estimated complex multiply-adds (noisy and ideal runs).
        memory_bytes: estimated peak memory.
        powered: repeated blocks raised to a power (ObjectKey of the NoisyRepeat -> True) or unrolled.
        ideal_powered: the same choice for the ideal run (state vector or unitary).
    """

    form: str
    site_dim: int
    max_qubits: int
    columns: int
    work: float
    memory_bytes: float
    powered: dict[ObjectKey, bool]
    ideal_powered: dict[ObjectKey, bool]


def _big(x: int) -> float:
    """A (possibly astronomically large) integer as a float, inf beyond the float range: sizes
    like 4^n x 4^n overflow a float from about 256 qubits on."""
    return float(x) if x.bit_length() < 1000 else math.inf


class _Costs:
    """Work estimates with a per-repeat choice between unrolling and a matrix power."""

    def __init__(self, n: int, s: int, repeats: str) -> None:
        self.n, self.s, self.mode = n, s, repeats
        self.powered: dict[ObjectKey, bool] = {}
        self.uses_power = False

    def items(self, items: tuple[NoisyItem, ...], columns: int) -> float:
        size = _big(self.s**self.n * columns)
        total = 0.0
        for it in items:
            if gate_kind(it, "exact engine plan") is Kind.LAYER:
                for nop in it.sites:  # each operation and each context error of the layer: one site
                    total += size * self.s ** len(nop.qubits) + _OVERHEAD
                if self.s == 4:
                    total += sum(size * 4 + _OVERHEAD for r in it.idle if not r.is_trivial)
            else:
                total += self.repeat(it, columns)
        return total

    def repeat(self, rep: NoisyRepeat, columns: int) -> float:
        unroll = rep.count * self.items(rep.body, columns)
        dim = self.s**self.n
        if dim > POWER_MAX_DIM or self.mode == "unroll":
            self.powered.setdefault(ObjectKey(rep), False)
            return unroll
        power = self.items(rep.body, dim) + _DECOMPOSITION * dim**3 + dim * dim * columns
        use = power < unroll or (self.mode == "auto" and power <= CHEAP_POWER_WORK) or self.mode == "power"
        self.powered[ObjectKey(rep)] = self.powered.get(ObjectKey(rep), False) or use
        self.uses_power |= use
        return min(unroll, power)


REPEAT_MODES = ("auto", "power", "unroll", "cheapest")


def make_plan(circuit: NoisyCircuit, metric: str, repeats: str = "auto") -> Plan:
    """Form, estimated work and memory for ``circuit`` and ``metric`` (nothing is allocated).

    ``repeats``: ``"auto"`` takes the cheaper of unrolling and the block power for each repeated
    block, and the block power whenever it is cheap in absolute terms (CHEAP_POWER_WORK); ``"power"`` takes the power whenever the block matrix is at most POWER_MAX_DIM wide;
    ``"unroll"`` never takes it (tests and benchmarks compare the two); ``"cheapest"`` takes the
    cheaper estimate only (the exact engine's family-split runs, budget/engines/exact/split.py).
    """
    if repeats not in REPEAT_MODES:
        raise ValueError(f"repeats = {repeats!r}: expected one of {', '.join(REPEAT_MODES)}")
    n = circuit.num_qubits
    form, s, limit, operator = FORMS[(circuit.has_incoherent, metric)]
    columns = s**n if operator else 1
    costs = _Costs(n, s, repeats)
    ideal = _Costs(n, 2, repeats)
    work = costs.items(circuit.body, columns) + ideal.items(circuit.body, 2**n if operator else 1)
    register = 2 * 16.0 * _big(s**n * columns)  # the tensor and its output buffer
    ideal_bytes = 2 * 16.0 * _big(2**n * (2**n if operator else 1))
    blocks = 8 * 16.0 * _big((s**n) ** 2) if costs.uses_power else 0.0  # block register, eig, inverse
    final = 16.0 * _big(s**n * columns) if form == "superop" else 0.0  # reordered copy for F_pro
    memory = register + ideal_bytes + blocks + final
    return Plan(form, s, limit, columns, work, memory, costs.powered, ideal.powered)


def _size(num_bytes: float) -> str:
    if math.isinf(num_bytes):
        return "more than 10^300 bytes"
    for unit, scale in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20)):
        if num_bytes >= scale:
            return f"{num_bytes / scale:.3g} {unit}"
    return f"{num_bytes / 2**10:.3g} KiB"


_WHAT = {
    "vector": "state vector",
    "unitary": "unitary",
    "density": "density matrix",
    "superop": "superoperator",
}


def refusal(circuit: NoisyCircuit, metric: str, plan: Plan) -> str | None:
    """None when the plan fits the limits, else a short reason: what would be held, its size and
    the limit (the limits are explained in docs/methods.md, "Engine reach"; which engine fits
    instead is said by :mod:`budget.engines.door`)."""
    n = circuit.num_qubits
    if n > plan.max_qubits:
        return f"{_WHAT[plan.form]}, limit {plan.max_qubits} qubits"
    if plan.memory_bytes > MEMORY_LIMIT_BYTES:
        return f"{_WHAT[plan.form]} needs about {_size(plan.memory_bytes)} (limit {_size(MEMORY_LIMIT_BYTES)})"
    if plan.work > WORK_LIMIT:
        return f"about {plan.work:.2g} multiply-adds (limit {WORK_LIMIT:.0e}; blocks over {POWER_MAX_DIM} wide are unrolled)"
    return None
