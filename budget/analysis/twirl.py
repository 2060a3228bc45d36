"""The Pauli-twirled variant of a noisy circuit.

Pauli twirling turns each operation's coherent error U into the stochastic Pauli channel with
probabilities p_P = |Tr(P U)/d|² (exact per operation; see
"Noise tailoring for scalable quantum computation via randomized compiling", Wallman & Emerson,
Phys. Rev. A 94, 052325 (2016)), so coherent build-up becomes linear in depth. The incoherent part
is unchanged (depolarizing is already Pauli; relaxation is kept as it is).
"""

from __future__ import annotations

import itertools
from dataclasses import replace
from functools import lru_cache

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

_P = {
    "I": np.eye(2, dtype=complex),
    "X": np.array([[0, 1], [1, 0]], complex),
    "Y": np.array([[0, -1j], [1j, 0]], complex),
    "Z": np.diag([1.0 + 0j, -1.0]),
}


@lru_cache(maxsize=4)
def _paulis(k: int) -> tuple[tuple[str, np.ndarray], ...]:
    out = []
    for letters in itertools.product("IXYZ", repeat=k):
        m = np.ones((1, 1), complex)
        for ch in letters:
            m = np.kron(m, _P[ch])
        out.append(("".join(letters), m))
    return tuple(out)


def twirl_probabilities(unitary: np.ndarray) -> dict[str, float]:
    """Pauli probabilities p_P = |Tr(P U)/d|² of the twirled unitary channel (identity excluded).

    >>> p = twirl_probabilities(np.array([[np.cos(0.05), -1j*np.sin(0.05)], [-1j*np.sin(0.05), np.cos(0.05)]]))
    >>> bool(abs(p["X"] - np.sin(0.05)**2) < 1e-15)
    True
    """
    d = unitary.shape[0]
    k = int(round(np.log2(d)))
    out = {}
    for label, m in _paulis(k)[1:]:
        p = abs(np.trace(m @ unitary) / d) ** 2
        if p > 1e-300:
            out[label] = float(p)
    return out


def _twirl_op(nop: NoisyOperation) -> NoisyOperation:
    if not nop.hamiltonian:
        return nop
    rates = dict(nop.pauli_rates)
    for label, p in twirl_probabilities(nop.coherent).items():
        rates[label] = rates.get(label, 0.0) + p
    d = nop.coherent.shape[0]
    return replace(nop, coherent=np.eye(d, dtype=complex), hamiltonian={}, pauli_rates=rates)


def _twirl_items(items: tuple[NoisyItem, ...], memo: dict[int, NoisyItem]) -> tuple[NoisyItem, ...]:
    out = []
    for it in items:
        key = id(it)
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
