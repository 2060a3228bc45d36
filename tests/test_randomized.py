"""Randomised compiling: frames keep the ideal circuit, average to the Pauli twirl, and an ensemble
converges to the twirled prediction (Wallman & Emerson, Phys. Rev. A 94, 052325 (2016)).

References outside the project: cirq builds the ideal unitaries and simulates the noisy copies
(tests/reference.py); the frame-average identity is exact (linearity of the fidelity in the channel).
"""

from __future__ import annotations

import itertools
import math

import cirq
import numpy as np
import pytest

from budget.analysis.randomized import (
    FRAME,
    MAX_COMPILED_LAYERS,
    compiled_copy,
    conjugated_pauli,
    dress_layer,
    ensemble,
)
from budget.analysis.twirl import twirled_circuit
from budget.circuit.gates import ideal_unitary
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyCircuit
from budget.problems import InputError, TooLargeError
from tests.reference import _ideal_ops, cirq_infidelity, random_noisy_circuit


def _ideal_unitary(circuit: NoisyCircuit) -> np.ndarray:
    qs = cirq.LineQubit.range(circuit.num_qubits)
    return cirq.unitary(cirq.Circuit([cirq.I(q) for q in qs] + _ideal_ops(circuit, qs)))


def _same_up_to_phase(a: np.ndarray, b: np.ndarray) -> bool:
    return cirq.allclose_up_to_global_phase(a, b, atol=1e-9)


@pytest.mark.parametrize(
    "gate,label",
    [("cx", "XI"), ("cx", "IZ"), ("cz", "XI"), ("cz", "YY"), ("swap", "XZ"), ("iswap", "XI"), ("h", "X")],
)
def test_conjugated_pauli_matches_cirq(gate, label):
    # reference: cirq's Pauli-string conjugation by the gate (cirq.PauliString.conjugated_by)
    qs = cirq.LineQubit.range(len(label))
    u = ideal_unitary(gate)
    ps = cirq.PauliString({q: getattr(cirq, ch) for q, ch in zip(qs, label) if ch != "I"})
    gate_op = {"cx": cirq.CNOT, "cz": cirq.CZ, "swap": cirq.SWAP, "iswap": cirq.ISWAP, "h": cirq.H}[gate].on(*qs)
    assert _same_up_to_phase(u, cirq.unitary(gate_op))
    expected = ps.after(gate_op)  # C P C† (cirq's documented convention)
    want = "".join(str(expected.get(q, "I")) for q in qs)
    assert conjugated_pauli(u, label) == want


def test_non_clifford_gates_are_recognised():
    assert conjugated_pauli(ideal_unitary("t"), "X") is None
    assert conjugated_pauli(ideal_unitary("crz", (0.3,)), "XI") is None
    assert conjugated_pauli(ideal_unitary("rzz", (math.pi / 2,)), "XI") is not None  # ZZ^(1/2) is Clifford


@pytest.mark.parametrize("seed", range(6))
def test_compiled_copies_keep_the_ideal_circuit(seed):
    # the ideal unitary of every compiled copy equals the original one (cirq builds both)
    rng = np.random.default_rng(seed)
    noisy = random_noisy_circuit(rng, num_qubits=3, num_layers=5, repeat_count=3)
    copy, _ = compiled_copy(noisy, rng)
    frames = sum(1 for layer in copy.iter_layers() for n in layer.operations if n.family == FRAME)
    dressed = sum(1 for layer in noisy.iter_layers() if any(len(n.qubits) == 2 for n in layer.operations))
    assert frames > 0 or dressed == 0
    assert _same_up_to_phase(_ideal_unitary(copy), _ideal_unitary(noisy))


def _framed_then_plain() -> NoisyCircuit:
    """A CZ with coherent and depolarizing errors, then an error-free H and S (not dressed)."""
    c = StructuredCircuit(
        ("q[0]", "q[1]"),
        (Layer((Operation("cz", (0, 1)),)), Layer((Operation("h", (0,)), Operation("s", (1,))))),
    )
    model = ErrorModel.from_dict(
        {"gates": {"cz": {"cphase": 0.3, "swap_angle": 0.2, "z_phase": [0.1, -0.15], "avg_infidelity": 0.01}}}
    )
    return attach(c, model)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_average_over_every_frame_is_the_twirl(metric):
    # Both metrics are linear in the channel, so the mean over all 16 frames of the CZ layer equals
    # the metric of the layer's Pauli twirl exactly (Wallman & Emerson, PRA 94, 052325 (2016)).
    # Both sides are computed by cirq's simulators (tests/reference.py).
    noisy = _framed_then_plain()
    first, rest = noisy.body[0], noisy.body[1:]
    values = []
    for frame in itertools.product("IXYZ", repeat=2):
        dressed, _ = dress_layer(first, dict(enumerate(frame)))
        values.append(cirq_infidelity(NoisyCircuit(noisy.qubits, tuple(dressed) + rest), metric))
    twirled = cirq_infidelity(twirled_circuit(noisy), metric)
    structured = cirq_infidelity(noisy, metric)
    assert np.mean(values) == pytest.approx(twirled, rel=1e-9, abs=1e-12)
    if metric == "state":
        assert abs(structured - twirled) > 1e-3  # the frames matter for the output state
        assert np.std(values) > 1e-4  # and single copies differ from each other
    else:
        # one error conjugated by a Pauli keeps its process fidelity, so every copy agrees
        assert np.std(values) < 1e-12 and structured == pytest.approx(twirled, abs=1e-12)


def test_non_clifford_layers_stay_undressed_with_a_note():
    c = StructuredCircuit(("a", "b"), (Layer((Operation("crz", (0, 1), (0.4,)),)),))
    noisy = attach(c, ErrorModel.from_dict({"gates": {"crz": {"overrotation": 0.01}}}))
    copy, notes = compiled_copy(noisy, np.random.default_rng(1))
    assert copy.body == noisy.body
    assert notes and "crz" in notes[0] and "Clifford" in notes[0]


def test_bad_ensemble_requests():
    noisy = _framed_then_plain()
    with pytest.raises(InputError, match="count"):
        ensemble(noisy, count=0, seed=1)
    with pytest.raises(InputError, match="seed"):
        ensemble(noisy, count=3, seed=-1)
    big = NoisyCircuit(noisy.qubits, (_repeat(noisy, MAX_COMPILED_LAYERS),))
    with pytest.raises(TooLargeError, match="unrolled"):
        ensemble(big, count=1, seed=1)


def _repeat(noisy: NoisyCircuit, count: int):
    from budget.errors.noisy import NoisyRepeat

    return NoisyRepeat(noisy.body, count)
