"""A circuit with its error model applied: what every engine consumes.

Each operation carries its own channel, in this order (design.md §2):
ideal gate → coherent unitary → stochastic Pauli rates (if any) → depolarizing (average infidelity r) → T1/T2 relaxation for the
operation's duration on each of its qubits. Each layer then lets every qubit relax for the part of
the layer's duration it did not spend in a gate (idle relaxation, family ``"idle"``).

Measurement items (design.md §8): a :class:`NoisyMeasure` projects its qubits in Z and flips each
recorded bit with the qubit's ``readout_error``; a :class:`NoisyReset` puts its qubits in |0> and
leaves each in |1> with the qubit's ``reset_error``; during either, every other qubit relaxes
(family ``"idle"``). A :class:`NoisyIf` holds both branches of a classically controlled block.

Conventions: matrices in gate order, first qubit most significant (cirq's convention).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Callable, ClassVar, Iterator, Union

import numpy as np

from budget.circuit.ir import IfBlock, Measure, Operation, Reset
from budget.circuit.walk import Kind, first_mid_circuit, item_kind, kind_of, layers, unrolled, unsupported_item
from budget.memo import ObjectKey

IDLE = "idle"
"""Family name of idle relaxation."""


@dataclass(frozen=True)
class Relaxation:
    """T1/T2 relaxation of one qubit for a stretch of time.

    Amplitude damping with γ = 1 - exp(-t/T1), then pure dephasing that multiplies the coherence
    by ``dephasing_factor`` = exp(-t/Tφ), 1/Tφ = 1/T2 - 1/(2 T1). Overall the coherence decays by
    sqrt(1-γ)·exp(-t/Tφ) = exp(-t/T2).

    Attributes:
        qubit: qubit index.
        duration_ns: the stretch of time.
        gamma: amplitude-damping probability in [0, 1].
        dephasing_factor: pure-dephasing coherence factor in [0, 1] (1 = none).
    """

    qubit: int
    duration_ns: float
    gamma: float
    dephasing_factor: float

    @property
    def is_trivial(self) -> bool:
        return self.gamma == 0.0 and self.dephasing_factor == 1.0

    def kraus(self) -> list[np.ndarray]:
        """Kraus operators of amplitude damping followed by pure dephasing (2x2 each)."""
        g, c = self.gamma, self.dephasing_factor
        ad = [np.array([[1, 0], [0, np.sqrt(1 - g)]], complex), np.array([[0, np.sqrt(g)], [0, 0]], complex)]
        pd = [np.sqrt((1 + c) / 2) * np.eye(2, dtype=complex), np.sqrt((1 - c) / 2) * np.diag([1.0 + 0j, -1.0])]
        return [p @ a for p in pd for a in ad]

    def pauli_twirl(self) -> tuple[float, float, float]:
        """(p_x, p_y, p_z) of the Pauli-twirled channel (Tomita & Svore, PRA 90, 062320 (2014)).

        p_x = p_y = γ/4, p_z = (1 - sqrt(1-γ)·c)/2 - γ/4 with c the dephasing factor.
        """
        g, c = self.gamma, self.dephasing_factor
        px = g / 4
        pz = (1 - np.sqrt(1 - g) * c) / 2 - g / 4
        return px, px, pz


@dataclass(frozen=True)
class NoisyOperation:
    """One operation with its error channel.

    Attributes:
        op: the ideal operation.
        family: gate family name used for shares and tolerances (the gate name by default).
        coherent: the coherent error unitary applied right after the ideal gate (gate order).
        hamiltonian: Pauli label (gate order, e.g. ``"ZI"``) -> h_P with
            coherent = exp(-i Σ h_P P), up to global phase; identity label excluded.
        knob_generators: knob name -> {Pauli label: h_P per radian of that knob}, the first-order
            generator of each coherent knob at unit strength (for sensitivity analysis).
        knob_values: knob name -> current value in radians (z_phase gives ``z_phase[0]``, ...).
        pauli_rates: Pauli label -> probability p_P of a stochastic Pauli channel
            ρ -> (1 - Σ p_P) ρ + Σ p_P P ρ P applied after the coherent part (empty for models read
            from a file; the twirled variant of a circuit moves coherent errors here).
        depolarizing: λ of ρ -> (1-λ) ρ + λ I/d on the operation's qubits, λ = r d/(d-1).
        relaxation: relaxation of each of the operation's qubits during the operation.
        duration_ns: the operation's duration (for a context error: the time it builds up over,
            which adds nothing to its layer's duration).
    """

    op: Operation
    family: str
    coherent: np.ndarray = field(repr=False)
    hamiltonian: dict[str, float]
    pauli_rates: dict[str, float] = field(default_factory=dict)
    depolarizing: float = 0.0
    relaxation: tuple[Relaxation, ...] = ()
    duration_ns: float = 0.0
    knob_generators: dict[str, dict[str, float]] = field(default_factory=dict, repr=False)
    knob_values: dict[str, float] = field(default_factory=dict)

    @property
    def qubits(self) -> tuple[int, ...]:
        return self.op.qubits

    @property
    def has_coherent(self) -> bool:
        return bool(self.hamiltonian)

    @property
    def has_incoherent(self) -> bool:
        return self.depolarizing > 0 or bool(self.pauli_rates) or any(not r.is_trivial for r in self.relaxation)

    def __hash__(self) -> int:
        return id(self)


@dataclass(frozen=True)
class NoisyLayer:
    """A layer of noisy operations, idle relaxation to fill the layer's duration, and the layer's
    context errors.

    Channel order (docs/error-model.md, "Context errors"): the operations, each followed by its own
    errors; the idle relaxation; then ``context``, in order: drive crosstalk, spectator ZZ, and the
    pulse bleed into the next layer (:mod:`budget.errors.context_terms`). A context error is an
    error-only site (a :class:`NoisyOperation` whose ideal gate is the identity on its support,
    which may overlap the operations' qubits); engines read the errors of a layer through its
    normal form (:func:`budget.errors.normal_form.layer_errors`), never ``context`` by name. A layer
    with no operations and zero duration holding only ``context`` carries a bleed across a seam
    that no layer of its own precedes (the start of an if branch, a repetition of the whole circuit).
    """

    kind: ClassVar[Kind] = Kind.LAYER

    operations: tuple[NoisyOperation, ...]
    idle: tuple[Relaxation, ...]
    duration_ns: float
    context: tuple[NoisyOperation, ...] = ()

    @property
    def errors_only(self) -> bool:
        """A layer without operations that holds context errors only (a bleed across a seam)."""
        return not self.operations and bool(self.context)

    def without_context(self) -> tuple["NoisyLayer", ...]:
        """The layer split in two: its operations and idle relaxation, then a layer holding its
        context errors only (the same channel, for transforms that place something between them)."""
        if not self.context or not self.operations:
            return (self,)
        return replace(self, context=()), NoisyLayer((), (), 0.0, self.context)

    @property
    def sites(self) -> tuple[NoisyOperation, ...]:
        """The operations, then the context errors: every error carrier of the layer, channel order."""
        return self.operations + self.context if self.context else self.operations

    def map_sites(self, f: Callable[[NoisyOperation], NoisyOperation], **changes) -> "NoisyLayer":
        """The same layer with ``f`` applied to every operation and context error (and ``changes``)."""
        return replace(self, operations=tuple(map(f, self.operations)), context=tuple(map(f, self.context)), **changes)

    def __hash__(self) -> int:
        return id(self)


@dataclass(frozen=True)
class NoisyRepeat:
    """A block of noisy items run ``count`` times in a row (kept folded)."""

    kind: ClassVar[Kind] = Kind.REPEAT

    body: tuple["NoisyItem", ...]
    count: int

    def __hash__(self) -> int:
        return id(self)


@dataclass(frozen=True)
class NoisyMeasure:
    """A measurement item with its errors.

    Attributes:
        item: the ideal measurement (qubits and the bits they write).
        family: family name of the readout error (``"measure"`` unless the model names one).
        readout_error: per measured qubit (same order), the probability that the recorded bit is
            flipped; the post-measurement state is the projected one either way.
        idle: relaxation of every other qubit for the measurement's duration.
        duration_ns: the longest measurement duration among the qubits.
    """

    kind: ClassVar[Kind] = Kind.MEASURE

    item: Measure
    family: str
    readout_error: tuple[float, ...]
    idle: tuple[Relaxation, ...] = ()
    duration_ns: float = 0.0

    def __hash__(self) -> int:
        return id(self)


@dataclass(frozen=True)
class NoisyReset:
    """A reset item with its errors: each qubit ends in |1> with ``reset_error`` (same order as
    ``item.qubits``), else in |0>; every other qubit idles for ``duration_ns``."""

    kind: ClassVar[Kind] = Kind.RESET

    item: Reset
    family: str
    reset_error: tuple[float, ...]
    idle: tuple[Relaxation, ...] = ()
    duration_ns: float = 0.0

    def __hash__(self) -> int:
        return id(self)


@dataclass(frozen=True)
class NoisyIf:
    """A classically controlled block: ``then`` runs when ``item.bits`` hold ``item.value``."""

    kind: ClassVar[Kind] = Kind.IF

    item: IfBlock
    then: tuple["NoisyItem", ...]
    orelse: tuple["NoisyItem", ...] = ()

    def __hash__(self) -> int:
        return id(self)


NoisyItem = Union[NoisyLayer, NoisyRepeat, NoisyMeasure, NoisyReset, NoisyIf]
NOISY_MID_CIRCUIT = (NoisyMeasure, NoisyReset, NoisyIf)


@dataclass(frozen=True)
class NoisyCircuit:
    """The structured circuit with every operation's channel attached.

    Attributes:
        qubits: display names.
        body: items in time order (repeats kept).
        readout_error: per-qubit readout error probability, for measured qubits.
        source: where the circuit came from.
        later_body: the body of a repetition that follows another repetition of the whole circuit,
            when pulse bleed across that seam makes it differ from ``body`` (None: the same).
            Code that repeats the whole noisy circuit (depth curves) runs ``body`` once, then
            ``later_body`` for every further repetition.
    """

    qubits: tuple[str, ...]
    body: tuple[NoisyItem, ...]
    readout_error: dict[int, float] = field(default_factory=dict)
    source: str = "<memory>"
    later_body: tuple[NoisyItem, ...] | None = None

    @property
    def num_qubits(self) -> int:
        return len(self.qubits)

    @property
    def has_incoherent(self) -> bool:
        return any(
            nop.has_incoherent or any(not r.is_trivial for r in layer.idle)
            for layer in self.distinct_layers()
            for nop in layer.sites
        ) or any(not r.is_trivial for layer in self.distinct_layers() for r in layer.idle)

    @property
    def has_repeats(self) -> bool:
        return any(kind_of(it) is Kind.REPEAT for it in self.body)

    @property
    def has_mid_circuit(self) -> bool:
        """True when a measurement, reset or if block is an item (at any depth)."""
        return self.mid_circuit_reason() is not None

    def mid_circuit_reason(self) -> str | None:
        """None for a gate-only circuit, else a one-line reason for engines and metrics that
        handle only gate layers (naming the first such item and the metrics that take it)."""
        it = self.first_mid_circuit()
        if it is None:
            return None
        line = f" at line {it.item.line}" if it.item.line else ""
        return f"the circuit has a mid-circuit {item_kind(it.item)}{line}; use --metric detectors or --metric record"

    def first_mid_circuit(self) -> "NoisyMeasure | NoisyReset | NoisyIf | None":
        """The first measurement, reset or if item in program order, or None."""
        return first_mid_circuit(self.body)

    @property
    def has_errors(self) -> bool:
        """Whether any operation or idle slot carries an error (coherent or incoherent); engines
        answer exactly 0 when none does. Circuits with mid-circuit items count as having errors
        (their measurement errors are not looked at here)."""
        if self.has_mid_circuit:
            return True
        coherent = any(nop.has_coherent for layer in self.distinct_layers() for nop in layer.sites)
        return coherent or self.has_incoherent

    def distinct_layers(self) -> list[NoisyLayer]:
        """Every layer as written (once per place in the text, repeats not unrolled)."""
        return [layer for layer, _ in layers(self.body, where="distinct_layers")]

    def iter_layers(self) -> Iterator[NoisyLayer]:
        """Every executed layer, repeats unrolled (tests and small circuits only)."""
        for it in unrolled(self.body, where="iter_layers"):
            if it.kind is not Kind.LAYER:
                raise unsupported_item(it, f"iter_layers: {self.mid_circuit_reason()}")
            yield it

    def multiplicities(self) -> list[tuple[NoisyLayer, int]]:
        """Each distinct layer with the number of times it executes (Python int, exact); the
        layers of an if block count as if both branches ran (an upper bound)."""
        return list(layers(self.body, where="multiplicities"))


def map_items(
    items: tuple[NoisyItem, ...],
    layer: Callable[[NoisyLayer], NoisyLayer],
    probe: Callable[[NoisyMeasure | NoisyReset], NoisyItem] | None = None,
    memo: dict[ObjectKey, NoisyItem] | None = None,
) -> tuple[NoisyItem, ...]:
    """The same items with each layer replaced by ``layer(it)`` and each measurement or reset by
    ``probe(it)`` (kept when ``probe`` is None); repeats and if blocks are rebuilt around their
    mapped items, repeats still folded. With ``memo`` (keyed by :class:`budget.memo.ObjectKey`),
    an item that occurs at several places is mapped once and shared."""

    def one(it: NoisyItem) -> NoisyItem:
        kind = kind_of(it, "map_items")
        if kind is Kind.LAYER:
            return layer(it)
        if kind is Kind.REPEAT:
            return NoisyRepeat(map_items(it.body, layer, probe, memo), it.count)
        if kind is Kind.IF:
            return NoisyIf(it.item, map_items(it.then, layer, probe, memo), map_items(it.orelse, layer, probe, memo))
        return it if probe is None else probe(it)

    if memo is None:
        return tuple(one(it) for it in items)
    out = []
    for it in items:
        key = ObjectKey(it)
        if key not in memo:
            memo[key] = one(it)
        out.append(memo[key])
    return tuple(out)
