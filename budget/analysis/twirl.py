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

from budget.errors.noisy import NoisyCircuit, NoisyOperation, map_items
from budget.pauli_algebra import twirl_probabilities


def _twirl_op(nop: NoisyOperation) -> NoisyOperation:
    if not nop.hamiltonian:
        return nop
    rates = dict(nop.pauli_rates)
    for label, p in twirl_probabilities(nop.coherent).items():
        rates[label] = rates.get(label, 0.0) + p
    d = nop.coherent.shape[0]
    return replace(nop, coherent=np.eye(d, dtype=complex), hamiltonian={}, pauli_rates=rates)




def twirled_circuit(circuit: NoisyCircuit) -> NoisyCircuit:
    """The same circuit with every coherent error replaced by its Pauli twirl (repeats kept)."""
    # readout and reset errors are already stochastic: measurements and resets are kept
    layer = lambda it: it.map_sites(_twirl_op)  # noqa: E731
    return replace(circuit, body=map_items(circuit.body, layer, memo={}))
