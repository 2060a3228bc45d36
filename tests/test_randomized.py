"""Randomised compiling: frames keep the ideal circuit, average to the Pauli twirl, and an ensemble
converges to the twirled prediction (Wallman & Emerson, Phys. Rev. A 94, 052325 (2016)).

References outside the project: cirq builds the ideal unitaries and simulates the noisy copies
(tests/reference.py); the frame-average identity is exact (linearity of the fidelity in the channel).
"""

from __future__ import annotations

import itertools
import json
import math
from pathlib import Path

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


def _clifford_three_qubit() -> NoisyCircuit:
    """Every layer holds a two-qubit gate, with Clifford single-qubit gates beside it, so every
    coherent error is dressed by the frames."""
    c = StructuredCircuit(
        ("q[0]", "q[1]", "q[2]"),
        (
            Repeat(
                (
                    Layer((Operation("cz", (0, 1)), Operation("h", (2,)))),
                    Layer((Operation("sx", (0,)), Operation("cx", (1, 2)))),
                ),
                4,
            ),
        ),
    )
    model = ErrorModel.from_dict(
        {
            "gates": {
                "cz": {"cphase": 0.08, "swap_angle": 0.05, "avg_infidelity": 2e-3},
                "cx": {"overrotation": 0.06, "z_phase": [0.03, -0.02]},
                "h": {"overrotation": 0.05},
                "sx": {"overrotation": 0.07, "axis_error": 0.02},
            }
        }
    )
    return attach(c, model)


@pytest.mark.parametrize("engine", ["exact", "generators", "clifford"])
@pytest.mark.parametrize("metric", ["process", "state"])
def test_twirled_variant_runs_in_every_engine(engine, metric):
    # the twirled circuit (Pauli rates instead of coherent errors) through each engine, against
    # cirq's density-matrix simulation of the same channels (tests/reference.py)
    twirled = twirled_circuit(_clifford_three_qubit())
    from budget.engines import get_engine

    got = get_engine(engine).run(twirled, metric).infidelity
    want = cirq_infidelity(twirled, metric)
    # exact engine: exact; first-order engines: within their second-order error (want² scale)
    assert got == pytest.approx(want, rel=1e-9 if engine == "exact" else 0.0, abs=1e-12 if engine == "exact" else 2 * want**2)


def test_ensemble_converges_to_the_twirled_prediction():
    # 120 seeded copies through the exact engine: the mean lies within 4 standard errors of the
    # twirled prediction (Wallman & Emerson, PRA 94, 052325 (2016)), and many standard errors below
    # the structured (coherent) value for this circuit.
    noisy = _clifford_three_qubit()
    result = ensemble(noisy, count=120, seed=7, engine="exact")
    assert result.count == 120 and len(result.values) == 120 and result.engine == "exact"
    assert abs(result.mean - result.twirled_infidelity) <= 4 * result.standard_error
    assert result.twirled_infidelity == pytest.approx(cirq_infidelity(twirled_circuit(noisy), "process"), rel=1e-9)
    structured = cirq_infidelity(noisy, "process")
    assert structured - result.mean > 10 * result.standard_error
    again = ensemble(noisy, count=5, seed=7, engine="exact")
    assert again.values == result.values[:5]  # the seed fixes the frames
    d = result.to_dict()
    assert d["count"] == 120 and d["seed"] == 7 and d["mean"] == pytest.approx(result.mean)


def _cli(*args: str):
    from typer.testing import CliRunner

    from budget.cli import app

    return CliRunner().invoke(app, list(args), catch_exceptions=False)


def test_compare_twirled_from_the_command_line(tmp_path):
    # design.md §6: 100 repetitions of an X gate over-rotated by 0.01 rad: coherent 0.2298488471,
    # twirled 0.0024938019, naive 0.0024969.
    qasm = tmp_path / "x.qasm"
    qasm.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nx q[0];\n')
    model = tmp_path / "m.toml"
    model.write_text("[gates.x]\noverrotation = 0.01\n")
    out = tmp_path / "r.json"
    res = _cli("analyze", str(qasm), "-e", str(model), "--cycles", "100", "--compare-twirled", "--json", str(out),
               "--width", "120")
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert data["actual"]["infidelity"] == pytest.approx(0.2298488471, abs=1e-9)
    assert data["twirled"]["infidelity"] == pytest.approx(0.0024938019, abs=1e-9)
    assert data["naive"]["infidelity"] == pytest.approx(0.0024969, abs=5e-8)
    assert "Pauli-twirled" in res.output


def test_against_and_ensemble_from_the_command_line(tmp_path):
    root = Path(__file__).resolve().parent.parent / "circuits"
    out = tmp_path / "r.json"
    res = _cli("analyze", str(root / "echo_xy4.qasm"), "-e", str(root / "fen_q8.toml"), "--cycles", "5",
               "--against", "random", "--seed", "3", "--ensemble", "4", "--json", str(out), "--width", "140")
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    rand = data["against_random"]
    assert rand["draws"] == 10 and rand["seeds"][0] == 3
    assert rand["mean"] == pytest.approx(sum(rand["actual"]) / 10)
    assert rand["actual_ratio"] == pytest.approx(data["actual"]["infidelity"] / rand["mean"])
    assert data["ensemble"]["count"] == 4 and data["ensemble"]["seed"] == 3
    assert "same layers" in res.output and "randomly compiled copies" in res.output
    # a second circuit file
    res = _cli("analyze", str(root / "echo_xy4.qasm"), "-e", str(root / "fen_q8.toml"),
               "--against", str(root / "echo_xy4.qasm"), "--width", "140")
    assert res.exit_code == 0 and "ratio (first ÷ second): 1" in res.output
    # bad input: one line, exit code 2, no JSON written
    bad = tmp_path / "bad.json"
    res = _cli("analyze", str(root / "echo_xy4.qasm"), "-e", str(root / "fen_q8.toml"),
               "--against", str(tmp_path / "missing.qasm"), "--json", str(bad))
    assert res.exit_code == 2 and "missing.qasm" in res.output and not bad.exists()


def test_random_counterpart_keeps_gate_counts_and_pairs():
    from collections import Counter

    from budget.analysis.compare import random_counterpart
    from budget.circuit.load import load_circuit

    root = Path(__file__).resolve().parent.parent / "circuits"
    c = load_circuit(str(root / "parity_cycle.qasm")).with_cycles(3)
    r = random_counterpart(c, seed=11)
    flat = lambda s: [op for layer in s.iter_layers() for op in layer.operations]  # noqa: E731
    assert Counter(op.gate for op in flat(r)) == Counter(op.gate for op in flat(c))
    assert {op.qubits for op in flat(r) if op.gate == "cz"} <= {op.qubits for op in flat(c) if op.gate == "cz"}
    assert r.qubits == c.qubits and not any(isinstance(it, Repeat) for it in r.body)
    assert [op.qubits for op in flat(r)] != [op.qubits for op in flat(c)]


def test_random_counterparts_keep_the_layer_structure_and_the_idle_error():
    # issue 9 item 13: the same layers (busy qubits and durations per layer), only the order random,
    # so the naive product (an independent product over operations and idle slots) is unchanged
    from collections import Counter

    from budget.analysis.compare import random_counterpart
    from budget.circuit.load import load_circuit
    from budget.errors.attach import attach
    from budget.errors.fidelity import naive_infidelity
    from budget.errors.model import ErrorModel

    root = Path(__file__).resolve().parent.parent / "circuits"
    c = load_circuit(str(root / "hopping_trotter.qasm"))
    model = ErrorModel.from_dict({"qubits": {"t1_us": 90.0, "t2_us": 70.0},
                                  "gates": {"h": {"duration_ns": 24, "overrotation": 0.01},
                                            "cz": {"duration_ns": 60, "cphase": 0.03},
                                            "sx": {"duration_ns": 24}, "sxdg": {"duration_ns": 24}}})
    busy = lambda s: Counter(frozenset(q for op in layer.operations for q in op.qubits)  # noqa: E731
                             for layer in s.iter_layers())
    for seed in (1, 7):
        r = random_counterpart(c, seed=seed)
        assert r.executed_counts() == c.executed_counts()
        assert busy(r) == busy(c)
        assert naive_infidelity(attach(r, model)) == pytest.approx(naive_infidelity(attach(c, model)), rel=1e-12)


def test_against_random_is_an_ensemble_with_its_spread():
    from budget.analysis.compose import analyze_all

    root = Path(__file__).resolve().parent.parent / "circuits"
    a = analyze_all(str(root / "echo_xy4.qasm"), str(root / "fen_q8.toml"), cycles=5, against="random", draws=6,
                    seed=1)
    r = a.random
    assert len(r.seeds) == 6 and r.seeds == (1, 2, 3, 4, 5, 6)
    vals = np.array(r.actual)
    assert r.mean == pytest.approx(vals.mean()) and r.spread == pytest.approx(vals.std(ddof=1))
    assert r.ratio.value == pytest.approx(a.result.actual / vals.mean())
    low, high = r.ratio_range
    assert low.value <= r.ratio.value <= high.value
    d = a.to_dict()
    assert d["against_random"]["draws"] == 6 and d["actual"]["infidelity"] == a.result.actual
    with pytest.raises(InputError, match="draws"):
        analyze_all(str(root / "echo_xy4.qasm"), str(root / "fen_q8.toml"), against="random", draws=1)
