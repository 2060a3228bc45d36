"""The Pauli-twirled variant of a noisy circuit.

Pauli twirling turns each operation's coherent error U into the stochastic Pauli channel with
probabilities p_P = |Tr(P U)/d|² (:func:`budget.pauli_algebra.twirl_probabilities`; exact per operation; see
"Noise tailoring for scalable quantum computation via randomized compiling", Wallman & Emerson,
Phys. Rev. A 94, 052325 (2016)), so coherent build-up becomes linear in depth. The incoherent part
is unchanged (depolarizing is already Pauli; relaxation is kept as it is).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from budget.errors.noisy import (
    NoisyCircuit,
    NoisyIf,
    NoisyItem,
    NoisyLayer,
    NoisyMeasure,
    NoisyOperation,
    NoisyRepeat,
    NoisyReset,
)
from budget.memo import ObjectKey
from budget.pauli_algebra import twirl_probabilities


def _twirl_op(nop: NoisyOperation) -> NoisyOperation:
    if not nop.hamiltonian:
        return nop
    rates = dict(nop.pauli_rates)
    for label, p in twirl_probabilities(nop.coherent).items():
        rates[label] = rates.get(label, 0.0) + p
    d = nop.coherent.shape[0]
    return replace(nop, coherent=np.eye(d, dtype=complex), hamiltonian={}, pauli_rates=rates)


def _twirl_items(items: tuple[NoisyItem, ...], memo: dict[ObjectKey, NoisyItem]) -> tuple[NoisyItem, ...]:
    out = []
    for it in items:
        key = ObjectKey(it)
        if key not in memo:
            if isinstance(it, NoisyLayer):
                memo[key] = replace(it, operations=tuple(_twirl_op(n) for n in it.operations))
            elif isinstance(it, NoisyRepeat):
                memo[key] = NoisyRepeat(_twirl_items(it.body, memo), it.count)
            elif isinstance(it, NoisyIf):
                memo[key] = NoisyIf(it.item, _twirl_items(it.then, memo), _twirl_items(it.orelse, memo))
            elif isinstance(it, (NoisyMeasure, NoisyReset)):
                memo[key] = it  # readout and reset errors are already stochastic
            else:
                raise TypeError(f"twirl: circuit item {type(it).__name__} is not supported")
        out.append(memo[key])
    return tuple(out)


def twirled_circuit(circuit: NoisyCircuit) -> NoisyCircuit:
    """The same circuit with every coherent error replaced by its Pauli twirl (repeats kept)."""
    return replace(circuit, body=_twirl_items(circuit.body, {}))
