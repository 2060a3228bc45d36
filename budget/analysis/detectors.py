"""Detectors and logical observables of a Clifford circuit with mid-circuit measurements.

In the ideal circuit every measurement outcome is r = r₀ ⊕ A s over GF(2): a fixed reference
record r₀ plus a linear function of independent random bits s (each random outcome of a
stabilizer measurement is a fresh bit; every later outcome is a GF(2) combination of earlier ones,
Gottesman, arXiv:quant-ph/9807006 (1998); Aaronson & Gottesman, PRA 70, 052328 (2004)). A parity v
of outcomes is deterministic exactly when vᵀA = 0. The columns of A are read from noiseless shots of
stim's compiled sampler (Gidney, Quantum 5, 497 (2021)): each shot XOR the reference sample is A s
for uniformly random s, so with ``rank + 64`` shots the span is complete except with probability
below 2⁻⁶⁴.

The basis follows the convention of the error-correction literature (e.g. Fowler, Mariantoni,
Martinis & Cleland, PRA 86, 032324 (2012); the detectors stim's generator declares):

1. a measurement whose outcome equals that of the previous measurement of the same qubit is
   compared with it (a check repeated every round), else one that equals the product of the two
   previous ones is compared with both (a check whose basis cycles X, Y, Z: stim's XYZ color code);
2. otherwise a measurement that is deterministic by itself is a detector (first round of a check);
3. the final data measurements (qubits measured once, with only one-qubit gates after) are combined with the last
   measurement of each neighbouring check qubit (neighbours: a two-qubit gate joins them) when that
   parity is deterministic, else with one earlier measurement, else with the last and one earlier
   (a check whose basis cycles from round to round, as in the XYZ color code; these two forms only
   with all the neighbours);
4. deterministic parities not spanned by 1-3 that include final data measurements are logical
   observables (unless the user names them); any other missing parity is added as a detector.
"""

from __future__ import annotations

from dataclasses import dataclass
from itertools import combinations
from typing import Iterator, Sequence

import numpy as np

from budget.circuit.walk import Kind, branches, kind_of
from budget.engines.clifford.stim_circuit import record_qubits, to_stim
from budget.errors.noisy import NoisyCircuit
from budget.problems import InputError

SHOT_MARGIN = 64
"""Shots beyond the rank of the random part; the span is complete except with probability 2^-64."""


@dataclass(frozen=True)
class Detector:
    """A parity of measurement outcomes that the ideal circuit fixes.

    Attributes:
        measurements: record indices (0-based, execution order), ascending.
        round: the check round: the largest number of earlier measurements of the same qubit among
            its measurements, plus one for a detector that closes with final data measurements.
        ideal: the parity's value in the ideal circuit (0 or 1).
        kind: ``"single"``, ``"repeat"``, ``"final"`` or ``"other"`` (rule 1-4 above).
    """

    measurements: tuple[int, ...]
    round: int
    ideal: int
    kind: str


@dataclass(frozen=True)
class Checks:
    """The detectors and observables of a circuit.

    Attributes:
        detectors: the chosen basis of checks.
        observables: deterministic parities with final data measurements outside the checks' span.
        observable_ideal: their values in the ideal circuit.
        num_measurements: length of the record.
        random_rank: number of independent random bits of the ideal record.
        qubits: the qubit of each record entry.
    """

    detectors: tuple[Detector, ...]
    observables: tuple[tuple[int, ...], ...]
    observable_ideal: tuple[int, ...]
    num_measurements: int
    random_rank: int
    qubits: tuple[int, ...]


class _Span:
    """A GF(2) basis of record parities (Python ints as bit sets), pivot = highest set bit."""

    def __init__(self) -> None:
        self.pivots: dict[int, int] = {}

    def reduce(self, v: int) -> int:
        while v:
            p = v.bit_length() - 1
            if p not in self.pivots:
                return v
            v ^= self.pivots[p]
        return 0

    def add(self, v: int) -> bool:
        v = self.reduce(v)
        if v:
            self.pivots[v.bit_length() - 1] = v
        return bool(v)


def _mask(indices) -> int:
    out = 0
    for i in indices:
        out |= 1 << i
    return out


def _indices(mask: int) -> tuple[int, ...]:
    out, i = [], 0
    while mask:
        if mask & 1:
            out.append(i)
        mask >>= 1
        i += 1
    return tuple(out)


def _random_columns(stim_circuit, seed: int) -> tuple[list[int], np.ndarray, int]:
    """Column j of A as a Python int over shots, the reference record, and the rank of A."""
    reference = np.asarray(stim_circuit.reference_sample(), dtype=bool)
    shots = 256
    while True:
        sampler = stim_circuit.compile_sampler(seed=seed)
        dev = sampler.sample(shots) ^ reference[None, :]
        packed = np.packbits(dev.T, axis=1)
        cols = [int.from_bytes(row.tobytes(), "big") for row in packed]
        rank = _rank(cols)
        if rank + SHOT_MARGIN <= shots:
            return cols, reference, rank
        shots *= 2


def _rank(vectors: Sequence[int]) -> int:
    span = _Span()
    return sum(span.add(v) for v in vectors)


def recorded_qubits(noisy: NoisyCircuit, metric: str) -> list[int]:
    """The qubit of each recorded outcome (:func:`record_qubits`), or a refusal when there is none.

    Measurements that only end the circuit are its readout, kept apart (``noisy.readout_error``):
    the detector and record metrics have nothing to compare then.

    Raises:
        InputError: the circuit records no outcome.
    """
    qubits = record_qubits(noisy)
    if not qubits:
        raise InputError(f"{noisy.source}: the {metric} metric needs measurements inside the circuit, and this one "
                         "has none (measurements that only end a gate circuit are its readout, kept apart); "
                         "use --metric process or state")
    return qubits


def infer_checks(
    circuit: NoisyCircuit, *, observables: Sequence[Sequence[int]] | None = None, seed: int = 0
) -> Checks:
    """Detectors (in the field's convention) and logical observables of a Clifford circuit.

    Args:
        circuit: the circuit (its errors are ignored: the ideal circuit decides).
        observables: record index lists the user names as logical observables; each must be
            deterministic. None: infer them (rule 4).
        seed: seed of the sampler.

    Raises:
        InputError: a named observable is not deterministic, lies in the span of the detectors
            (or of the observables named before it), or names a record index that does not exist;
            the circuit is not Clifford (from the stim writer).
    """
    qubits = recorded_qubits(circuit, "detectors")
    ideal = to_stim(circuit)
    m = len(qubits)
    cols, ref, rank = _random_columns(ideal, seed)
    last: dict[int, int] = {}
    prev: list[int | None] = []
    counts: list[int] = []
    seen: dict[int, int] = {}
    for j, q in enumerate(qubits):
        prev.append(last.get(q))
        counts.append(seen.get(q, 0))
        seen[q] = seen.get(q, 0) + 1
        last[q] = j
    ends = _measured_last(circuit)
    data = {j for j, q in enumerate(qubits) if seen[q] == 1 and q in ends}
    span = _Span()
    detectors: list[Detector] = []

    def value(ms) -> int:
        return int(np.bitwise_xor.reduce(ref[list(ms)])) if ms else 0

    def add(ms: tuple[int, ...], kind: str) -> None:
        if span.add(_mask(ms)):
            rnd = max(counts[i] for i in ms) + (1 if kind == "final" else 0)
            detectors.append(Detector(ms, rnd, value(ms), kind))

    for j in range(m):
        if j in data:
            continue
        if prev[j] is not None and cols[j] == cols[prev[j]]:
            add((prev[j], j), "repeat")
        elif prev[j] is not None and prev[prev[j]] is not None and cols[j] == cols[prev[j]] ^ cols[prev[prev[j]]]:
            add((prev[prev[j]], prev[j], j), "repeat")  # a cycling basis: Z = X·Y up to phase
        elif cols[j] == 0:
            add((j,), "single")
    neighbours = _neighbours(circuit)
    for q, j in sorted(last.items(), key=lambda kv: kv[1]):
        if j in data:
            continue
        near = sorted(i for i in data if qubits[i] in neighbours.get(q, ()))
        for own in _own_outcomes(j, prev):
            found = _solve(cols, _xor(cols, own), near, subsets=own == (j,))
            if found:
                add(tuple(sorted(own + found)), "final")
                break
    named = observables is not None
    obs: list[tuple[int, ...]] = []
    if named:
        for k, o in enumerate(observables):
            ms = tuple(sorted(set(int(i) for i in o)))
            if not ms or any(not 0 <= i < m for i in ms):
                raise InputError(f"observable {k}: record indices {list(o)} must lie in 0..{m - 1}")
            if _xor(cols, ms) != 0:
                raise InputError(f"--logical {','.join(map(str, ms))} (observable {k}): this parity is random in the ideal "
                                 "circuit; a logical observable must be a deterministic parity of recorded bits")
            if not span.add(_mask(ms)):
                raise InputError(f"--logical {','.join(map(str, ms))}: this parity is fixed by the checks (a combination "
                                 "of detectors or of the observables named before it), so no error flips it without "
                                 "firing a detector: a logical observable must be a deterministic parity the detectors "
                                 "do not span")
            obs.append(ms)
    else:
        for combo in _dependencies(cols, sorted(data)):
            if span.add(combo):
                obs.append(_indices(combo))
    if len(detectors) + len(obs) < m - rank:
        for v in _dependencies(cols, range(m)):
            if len(detectors) + len(obs) >= m - rank:
                break
            ms = _indices(v)
            if span.reduce(v):
                if not named and data.intersection(ms):
                    span.add(v)
                    obs.append(ms)
                else:
                    add(ms, "other")
    return Checks(tuple(detectors), tuple(obs), tuple(value(o) for o in obs), m, rank, tuple(qubits))


def _xor(cols: list[int], ms) -> int:
    acc = 0
    for i in ms:
        acc ^= cols[i]
    return acc


def _own_outcomes(j: int, prev: list[int | None]) -> Iterator[tuple[int, ...]]:
    """The check qubit's own outcomes a final detector may close with: its last one ``j``, then
    one earlier outcome alone, then ``j`` with one earlier outcome (latest first). A check that
    repeats unchanged needs only the first; one whose basis cycles (stim's XYZ color code) closes
    with the round measured in the data's basis, or with the product of two rounds, and then only
    with all its data neighbours (a subset could be another check's parity)."""
    earlier = []
    p = prev[j]
    while p is not None:
        earlier.append(p)
        p = prev[p]
    yield (j,)
    yield from ((p,) for p in earlier)
    yield from ((p, j) for p in earlier)


def _solve(cols: list[int], target: int, near: list[int], *, subsets: bool = True) -> tuple[int, ...] | None:
    """All of ``near`` when ⊕_{i∈near} col_i = target (the check's full support), else (with
    ``subsets``) the smallest non-empty subset that gives it (searched when ``near`` has at most 10
    entries), or None."""
    if not near:
        return None
    if _xor(cols, near) == target:
        return tuple(near)
    if len(near) > 10 or not subsets:
        return None
    for size in range(1, len(near) + 1):
        for combo in combinations(near, size):
            if _xor(cols, combo) == target:
                return combo
    return None


def _dependencies(cols: list[int], among) -> Iterator[int]:
    """Deterministic parities among the columns ``among``, as record-index masks: Gaussian
    elimination with the combination tracked; each column that reduces to zero closes one."""
    basis: dict[int, tuple[int, int]] = {}  # pivot -> (vector, combination mask)
    for i in among:
        v, combo = cols[i], 1 << i
        while v:
            p = v.bit_length() - 1
            if p not in basis:
                basis[p] = (v, combo)
                break
            bv, bc = basis[p]
            v, combo = v ^ bv, combo ^ bc
        if not v:
            yield combo


def _measured_last(circuit: NoisyCircuit) -> set[int]:
    """Qubits whose last event (two-qubit gate, reset, measurement; repeat bodies walked once) is
    a measurement: nothing but one-qubit gates acts on them after they are read."""
    last: dict[int, str] = {}

    def walk(items) -> None:
        for it in items:
            kind = kind_of(it, "detectors")
            if kind is Kind.LAYER:
                for nop in it.sites:  # a one-qubit gate after the readout cannot change the record
                    last.update({q: "gate" for q in nop.qubits if len(nop.qubits) == 2 or last.get(q) != "measure"})
            elif kind is Kind.MEASURE:
                last.update({q: "measure" for q in it.item.qubits})
            elif kind is Kind.RESET:
                last.update({q: "reset" for q in it.item.qubits})
            for inner in branches(it):
                walk(inner)

    walk(circuit.body)
    return {q for q, kind in last.items() if kind == "measure"}


def _neighbours(circuit: NoisyCircuit) -> dict[int, set[int]]:
    out: dict[int, set[int]] = {}
    for layer in circuit.distinct_layers():
        for nop in layer.sites:
            if len(nop.qubits) == 2:
                a, b = nop.qubits
                out.setdefault(a, set()).add(b)
                out.setdefault(b, set()).add(a)
    return out
