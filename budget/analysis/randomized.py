"""Randomised compiling: an ensemble of Pauli-framed copies of a circuit and its spread.

Randomised compiling (Wallman & Emerson, "Noise tailoring for scalable quantum computation via
randomized compiling", Phys. Rev. A 94, 052325 (2016)) dresses every layer that holds two-qubit
gates with a random Pauli frame: a Pauli P on the layer's qubits just before it and C P C† just after
it, C the layer's ideal unitary. For Clifford gates C P C† is again a Pauli, so both frames merge
into the neighbouring single-qubit gates and the ideal circuit is unchanged:
C P C† · C · P = C P P = C. The noisy layer E∘C becomes (P' E P'†)∘C with P' = C P C† uniformly
random, so the average over frames is the Pauli twirl of the layer's error, and the average over
an ensemble of compiled circuits tends to the twirled prediction (:mod:`budget.analysis.twirl`).

Modelling choices (standard assumptions, stated in the output):

- frames are error-free and take no time, because on the device they are absorbed into
  neighbouring single-qubit gates whose errors are assumed not to depend on the frame;
- only operations whose ideal gate is Clifford are dressed (checked numerically: C maps every
  Pauli to ± a Pauli); a non-Clifford operation in such a layer keeps no frame, and a note says so;
- single-qubit layers without two-qubit gates are not dressed, so their coherent errors are not
  tailored (in the twirled variant they are);
- T1/T2 relaxation inside a dressed layer is twirled by the frames, while the twirled variant keeps
  it as it is; with relaxation the ensemble average and the twirled value therefore differ slightly.

Each compiled copy draws new frames in every repetition, so copies are unrolled: their length is
limited by :data:`MAX_COMPILED_LAYERS`.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Callable

import numpy as np
import stim

from budget.circuit.clifford_check import clifford_tableau, conjugated_label
from budget.circuit.ir import Operation
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation
from budget.problems import InputError, TooLargeError
from budget.analysis.twirl import twirled_circuit
from budget.engines.door import choose_engine
from budget.engines.escalation import run_in_range

FRAME = "frame"
"""Family name of the error-free frame operations."""

MAX_COMPILED_LAYERS = 20_000
"""Most executed layers one compiled copy may have (copies are unrolled)."""

MAX_ENSEMBLE = 1000
"""Most compiled copies: the mean's standard error is the spread over √N, so 1000 copies pin the
mean to about 3 % of the spread (common practice, no source); each copy is a full engine run."""
MAX_ENSEMBLE_LAYERS = 2_000_000
"""Most executed layers summed over all copies (copies × layers per copy), the ensemble's work."""

Progress = Callable[[int, int], None]
"""Called as progress(done, total) while an ensemble is computed."""


@lru_cache(maxsize=256)
def _tableau(key: bytes, k: int) -> stim.Tableau | None:
    """The Clifford tableau of the matrix with these bytes (complex128, gate order), or None."""
    return clifford_tableau(np.frombuffer(key, dtype=complex).reshape(2**k, 2**k))


def conjugated_pauli(unitary: np.ndarray, label: str) -> str | None:
    """The Pauli label of U P U† (its ±1 sign is a global phase and dropped), or None when U is not
    a Clifford unitary (then U P U† is not a Pauli for some P).

    >>> from budget.circuit.gates import ideal_unitary
    >>> conjugated_pauli(ideal_unitary("cx"), "XI"), conjugated_pauli(ideal_unitary("cz"), "XI")
    ('XX', 'XZ')
    >>> conjugated_pauli(ideal_unitary("t"), "X") is None
    True
    """
    u = np.ascontiguousarray(np.asarray(unitary, dtype=complex))
    tab = _tableau(u.tobytes(), len(label))
    return None if tab is None else conjugated_label(tab, label)[1]


def _frame_op(qubit: int, letter: str) -> NoisyOperation:
    return NoisyOperation(
        op=Operation(letter.lower(), (qubit,)),
        family=FRAME,
        coherent=np.eye(2, dtype=complex),
        hamiltonian={},
    )


def _frame_layer(letters: dict[int, str]) -> NoisyLayer | None:
    ops = tuple(_frame_op(q, p) for q, p in sorted(letters.items()) if p != "I")
    return NoisyLayer(ops, (), 0.0) if ops else None


def dress_layer(layer: NoisyLayer, frame: dict[int, str]) -> tuple[list[NoisyLayer], list[str]]:
    """The layer between a Pauli frame and the frame that undoes it.

    Args:
        layer: a noisy layer.
        frame: qubit -> Pauli letter (``"I"``, ``"X"``, ``"Y"``, ``"Z"``) to put before the layer,
            for the qubits to dress; qubits of non-Clifford operations are skipped.

    Returns:
        (layers, notes): [before, layer, after] without empty frames, and a note for each
        non-Clifford operation left undressed. The ideal product after·layer·before equals the
        layer's ideal unitary up to a global phase.
    """
    before: dict[int, str] = {}
    after: dict[int, str] = {}
    notes: list[str] = []
    for nop in layer.operations:
        qs = nop.qubits
        if not any(q in frame for q in qs):
            continue
        label = "".join(frame.get(q, "I") for q in qs)
        image = conjugated_pauli(nop.op.unitary(), label)
        if image is None:
            name = nop.op.label or nop.op.gate
            notes.append(f"{name} is not a Clifford gate: left without a random frame")
            continue
        before.update(zip(qs, label))
        after.update(zip(qs, image))
    out = [x for x in (_frame_layer(before), layer, _frame_layer(after)) if x is not None]
    return out, notes


def compiled_copy(circuit: NoisyCircuit, rng: np.random.Generator) -> tuple[NoisyCircuit, tuple[str, ...]]:
    """One randomly compiled copy: every layer with a two-qubit operation gets a random Pauli frame
    on the qubits of its operations (uniform over I, X, Y, Z per qubit). Repeats are unrolled.

    Returns the copy and the notes about undressed operations.
    """
    body: list[NoisyLayer] = []
    notes: list[str] = []
    for layer in circuit.iter_layers():
        if any(len(n.qubits) == 2 for n in layer.operations):
            gates, *context = layer.without_context()  # context errors get no frame: they stay after it
            qubits = sorted(q for n in layer.operations for q in n.qubits)
            letters = rng.integers(0, 4, size=len(qubits))
            layers, why = dress_layer(gates, {q: "IXYZ"[i] for q, i in zip(qubits, letters)})
            body.extend(layers + context)
            notes.extend(why)
        else:
            body.append(layer)
    copy = NoisyCircuit(circuit.qubits, tuple(body), dict(circuit.readout_error), circuit.source)
    return copy, tuple(dict.fromkeys(notes))


@dataclass(frozen=True)
class EnsembleResult:
    """The actual infidelity over an ensemble of randomly compiled copies.

    Attributes:
        count: number of compiled copies whose value is in range (the others are left out, with a note).
        seed: the seed of numpy's default generator that drew the frames.
        metric: ``"process"`` or ``"state"``.
        engine: the engine that ran the copies.
        values: infidelity of each copy in range, in drawing order.
        twirled_infidelity: the Pauli-twirled prediction for the same circuit (same engine choice);
            None when it is beyond its engine's range.
        notes: modelling notes (undressed operations).
    """

    count: int
    seed: int
    metric: str
    engine: str
    values: tuple[float, ...]
    twirled_infidelity: float | None
    notes: tuple[str, ...] = ()

    @property
    def mean(self) -> float:
        return float(np.mean(self.values))

    @property
    def spread(self) -> float:
        """Sample standard deviation across copies (0 for a single copy)."""
        return float(np.std(self.values, ddof=1)) if self.count > 1 else 0.0

    @property
    def standard_error(self) -> float:
        """Standard error of the mean, spread / sqrt(count)."""
        return self.spread / float(np.sqrt(self.count))

    def to_dict(self) -> dict:
        return {
            "count": self.count,
            "seed": self.seed,
            "engine": self.engine,
            "mean": self.mean,
            "spread": self.spread,
            "standard_error": self.standard_error,
            "min": float(min(self.values)),
            "max": float(max(self.values)),
            "twirled": self.twirled_infidelity,
            "notes": list(self.notes),
        }


def ensemble(
    circuit: NoisyCircuit,
    *,
    count: int,
    seed: int,
    metric: str = "process",
    engine: str = "auto",
    progress: Progress | None = None,
) -> EnsembleResult:
    """Actual infidelity of ``count`` randomly compiled copies of ``circuit`` (frames drawn with
    ``numpy.random.default_rng(seed)``), with the twirled prediction beside them.

    Raises:
        InputError: count < 1 or seed < 0.
        TooLargeError: a compiled copy would exceed :data:`MAX_COMPILED_LAYERS` executed layers.
    """
    if isinstance(count, bool) or not isinstance(count, int) or count < 1:
        raise InputError(f"ensemble count = {count!r}: expected a whole number >= 1")
    if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
        raise InputError(f"seed = {seed!r}: expected a whole number >= 0")
    if count > MAX_ENSEMBLE:
        raise InputError(
            f"ensemble count = {count}: at most {MAX_ENSEMBLE} copies (the mean's error, spread/√N, is then "
            "about 3 % of the spread; each copy is a full engine run)"
        )
    layers = sum(m for _, m in circuit.multiplicities())
    if count * layers > MAX_ENSEMBLE_LAYERS:
        raise TooLargeError(
            f"ensemble of {count} copies x {layers:,} executed layers = {count * layers:,} layers to run; the "
            f"limit is {MAX_ENSEMBLE_LAYERS:,}: use at most {max(1, MAX_ENSEMBLE_LAYERS // layers)} copies"
        )
    if layers > MAX_COMPILED_LAYERS:
        raise TooLargeError(
            f"{circuit.source}: random compiling draws new frames in every repetition, so each copy "
            f"is unrolled; {layers:,} executed layers exceed the limit of {MAX_COMPILED_LAYERS:,} "
            "(use fewer cycles; the twirled variant needs no unrolling)"
        )
    rng = np.random.default_rng(seed)
    values: list[float] = []
    notes: list[str] = []
    name = ""
    for i in range(count):
        copy, why = compiled_copy(circuit, rng)
        notes.extend(why)
        result, _ = run_in_range(copy, metric, choose_engine(copy, metric, engine, brief=True), engine, brief=True)
        name = result.engine
        if result.beyond_range is None:
            values.append(float(result.infidelity))
        else:
            notes.append(f"copies beyond the range of the {result.engine} engine are left out of the mean "
                         f"({result.beyond_range})")
        if progress is not None:
            progress(i + 1, count)
    if not values:
        raise TooLargeError(f"{circuit.source}: every randomly compiled copy is beyond the range of the {name} engine "
                            "and no engine valid there fits; use fewer cycles")
    tw = twirled_circuit(circuit)
    tw_result, _ = run_in_range(tw, metric, choose_engine(tw, metric, engine, brief=True), engine, brief=True)
    twirled = None if tw_result.beyond_range is not None else float(tw_result.infidelity)
    return EnsembleResult(len(values), seed, metric, name, tuple(values), twirled, tuple(dict.fromkeys(notes)))
