"""The exact engine against the outside world.

Sources: cirq's DensityMatrixSimulator and Simulator (tests/reference.py, seeded random circuits),
cirq.unitary of the same circuit written as cirq gates, cirq's Pauli-string expectation values,
closed forms of design.md §6 (sin²(Nδ/2) for N repetitions of RX(δ)), and explicit unrolling of
repeated blocks for the Schur / eigendecomposition powers.
"""

from __future__ import annotations

import tracemalloc

import cirq
import numpy as np
import pytest

from budget.engines.door import choose
from budget.circuit.ir import Operation
from budget.engines.exact.power import channel_power
from budget.engines.exact.engine import ExactEngine
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation, NoisyRepeat, Relaxation
from budget.problems import TooLargeError
from reference import cirq_final_states, cirq_infidelity, random_noisy_circuit

EXACT = ExactEngine()
POWER = ExactEngine(repeats="power")
UNROLL = ExactEngine(repeats="unroll")


def _case(seed: int) -> tuple[NoisyCircuit, bool]:
    """Seeded random circuit: 1-5 qubits, coherent and incoherent errors, repeated blocks, Pauli
    rates; returns (circuit, process metric affordable for cirq's 2n-qubit Choi state: up to 4
    qubits, short repeats only at 4)."""
    rng = np.random.default_rng(1000 + seed)
    n = 1 + seed % 5
    repeat = [None, 2, 3, 5, 6, 17][seed % 6] if n <= 3 else [None, 2, 3][seed % 3]
    circuit = random_noisy_circuit(
        rng,
        num_qubits=n,
        num_layers=int(rng.integers(2, 5)),
        coherent_scale=float(rng.choice([0.0, 0.02, 0.3])) if seed % 7 else 0.05,
        incoherent=seed % 4 != 0,
        repeat_count=repeat,
        pauli_rates=seed % 3 == 0,
    )
    return circuit, n <= 3 or (n == 4 and repeat != 3)


@pytest.mark.parametrize("seed", range(60))
def test_random_circuits_match_cirq(seed: int) -> None:
    """Both metrics agree with cirq to 1e-8 (absolute); block powers and unrolling alike."""
    circuit, process_ok = _case(seed)
    engine = POWER if seed % 2 and circuit.num_qubits <= 4 else EXACT  # 4^5-wide eig takes seconds
    for metric in ("state", "process") if process_ok else ("state",):
        expected = cirq_infidelity(circuit, metric)
        got = engine.run(circuit, metric).infidelity
        assert got == pytest.approx(expected, abs=1e-8), (seed, metric)


@pytest.mark.parametrize("seed", range(12))
def test_observable_errors_match_cirq_expectation_values(seed: int) -> None:
    """<O>_actual - <O>_ideal against cirq's PauliString expectation values (input |0…0>)."""
    rng = np.random.default_rng(2000 + seed)
    n = 1 + seed % 3
    circuit = random_noisy_circuit(
        rng, num_qubits=n, coherent_scale=0.2, incoherent=seed % 3 != 0, repeat_count=[None, 4][seed % 2]
    )
    psi, rho = cirq_final_states(circuit)
    qs = cirq.LineQubit.range(n)
    qmap = {q: i for i, q in enumerate(qs)}
    labels = ["Z0", "X0", f"Y{n - 1}", "".join(f"{'XYZ'[(q + seed) % 3]}{q}" for q in range(n))]
    for metric in ("state", "process"):
        result = EXACT.run(circuit, metric, observables=tuple(labels))
        for label in labels:
            pauli = cirq.PauliString({qs[int(label[i + 1])]: getattr(cirq, label[i]) for i in range(0, len(label), 2)})
            actual = pauli.expectation_from_density_matrix(rho, qmap).real
            ideal = pauli.expectation_from_state_vector(psi, qmap).real
            assert result.observable_errors[label] == pytest.approx(actual - ideal, abs=1e-9), (label, metric)


def _rx_repeat(count: int, delta: float, *, ideal_angle: float = 0.0) -> NoisyCircuit:
    """N repetitions of rx(θ) followed by the coherent error Rx(δ), as one NoisyRepeat."""
    err = cirq.unitary(cirq.rx(delta))
    nop = NoisyOperation(Operation("rx", (0,), (ideal_angle,)), "rx", err, {"X": delta / 2})
    return NoisyCircuit(("q[0]",), (NoisyRepeat((NoisyLayer((nop,), (), 0.0),), count),))


@pytest.mark.parametrize("engine", [EXACT, POWER, UNROLL], ids=["auto", "power", "unroll"])
@pytest.mark.parametrize("metric", ["process", "state"])
def test_design_check_value_rx_repetitions(engine: ExactEngine, metric: str) -> None:
    """design.md §6: N = 100 repetitions of RX(0.01) give coherent infidelity 0.2298488471
    = sin²(Nδ/2) (process; on |0> the state infidelity 1 - cos²(Nδ/2) is the same number);
    N = 1: 1 - cos²(δ/2) (F_pro = cos²(δ/2) for one qubit, design.md §6)."""
    assert engine.run(_rx_repeat(100, 0.01), metric).infidelity == pytest.approx(0.2298488471, abs=1e-10)
    assert engine.run(_rx_repeat(1, 0.01), metric).infidelity == pytest.approx(1 - np.cos(0.005) ** 2, abs=1e-14)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_billion_repetitions_keep_documented_precision(metric: str) -> None:
    """N = 10^9 through the Schur power: sin²(Nδ/2) to the documented ~N·1e-16 precision, with a
    large ideal rotation (θ = 1 rad per step) so the block phases are far from zero."""
    delta = 1e-9
    got = EXACT.run(_rx_repeat(10**9, delta, ideal_angle=1.0), metric)
    assert got.infidelity == pytest.approx(np.sin(10**9 * delta / 2) ** 2, abs=1e-6)
    assert got.details["repeat_methods"] == "schur"


def _op(gate: str, qubits: tuple[int, ...], h: dict[str, float], relax: float = 0.0) -> NoisyOperation:
    from reference import pauli_matrix
    import scipy.linalg

    k = len(qubits)
    herm = sum((c * pauli_matrix(p) for p, c in h.items()), np.zeros((2**k, 2**k), complex))
    rel = tuple(Relaxation(q, 40.0, relax, 1 - relax / 2) for q in qubits)
    return NoisyOperation(Operation(gate, qubits), gate, scipy.linalg.expm(-1j * herm), dict(h), relaxation=rel)


def _blocks(incoherent: bool) -> dict[str, tuple[NoisyLayer, ...]]:
    """Blocks with degenerate quasi-energies (Clifford cz + h, identity) and a generic one."""
    r = 2e-3 if incoherent else 0.0
    cz_h = (
        NoisyLayer((_op("cz", (0, 1), {"ZZ": 3e-3}, r),), (), 40.0),
        NoisyLayer((_op("h", (0,), {"X": 2e-3}, r), _op("h", (1,), {}, r)), (), 40.0),
    )
    exact_clifford = (
        NoisyLayer((_op("cz", (0, 1), {}, r),), (), 40.0),
        NoisyLayer((_op("h", (0,), {}, r), _op("h", (1,), {}, r)), (), 40.0),
    )
    identity = (NoisyLayer((_op("id", (0,), {}, r), _op("id", (1,), {"Z": 1e-3} if r else {}, r)), (), 40.0),)
    idle_only = (NoisyLayer((), (Relaxation(0, 40.0, r, 1 - r), Relaxation(1, 40.0, r / 2, 1.0)), 40.0),)
    generic = (
        NoisyLayer((_op("sx", (1,), {"Y": 1e-2}, r), _op("t", (0,), {"Z": -4e-3}, r)), (), 40.0),
        NoisyLayer((_op("cx", (1, 0), {"XZ": 5e-3, "IY": 1e-3}, r),), (), 40.0),
    )
    out = {"cz_h": cz_h, "exact_clifford": exact_clifford, "identity": identity, "generic": generic}
    if incoherent:
        out["idle_only"] = idle_only
    return out


@pytest.mark.parametrize("incoherent", [False, True], ids=["coherent", "incoherent"])
@pytest.mark.parametrize("count", [7, 64, 300])
def test_block_power_equals_unrolling(incoherent: bool, count: int) -> None:
    """Schur (unitary) or eig/squaring (channel) power equals explicit unrolling of the block,
    within 1e-9 (coherent) and 1e-8 (incoherent), also for degenerate blocks."""
    tol = 1e-8 if incoherent else 1e-9
    for name, block in _blocks(incoherent).items():
        head = NoisyLayer((_op("h", (0,), {}), _op("sx", (1,), {})), (), 0.0)
        structured = NoisyCircuit(("a", "b"), (head, NoisyRepeat(block, count)))
        flat = NoisyCircuit(("a", "b"), tuple(structured.iter_layers()))
        for metric in ("process", "state"):
            powered = POWER.run(structured, metric)
            if not structured.has_errors:  # error-free blocks answer exactly 0 without a power
                assert powered.infidelity == 0.0 and UNROLL.run(flat, metric).infidelity == 0.0
                continue
            assert powered.details["repeat_methods"] != "none"
            unrolled = UNROLL.run(flat, metric)
            assert powered.infidelity == pytest.approx(unrolled.infidelity, abs=tol), (name, metric)


def test_channel_power_methods_agree_with_repeated_products() -> None:
    """Both branches of channel_power (eig when well conditioned, squaring otherwise) equal
    numpy.linalg.matrix_power, checked on a generic channel and a defective one."""
    rng = np.random.default_rng(5)
    kraus = np.linalg.qr(rng.normal(size=(8, 8)) + 1j * rng.normal(size=(8, 8)))[0][:, :2].reshape(4, 2, 2)
    generic = sum(np.kron(k, k.conj()) for k in kraus)
    jordan = np.array([[1.0, 0, 0, 0], [0, 0.5, 1.0, 0], [0, 0, 0.5, 0], [0, 0, 0, 0.25]])  # defective
    for block, method in ((generic, "eig"), (jordan, "squaring")):
        for count in (1, 5, 123):
            power, used = channel_power(block, count)
            assert used == method
            np.testing.assert_allclose(power, np.linalg.matrix_power(block, count), atol=1e-10)


def _cirq_unitaries(circuit: NoisyCircuit) -> tuple[np.ndarray, np.ndarray]:
    qs = cirq.LineQubit.range(circuit.num_qubits)
    ideal, noisy = [cirq.I(q) for q in qs], [cirq.I(q) for q in qs]
    for layer in circuit.iter_layers():
        for nop in layer.operations:
            targets = [qs[q] for q in nop.qubits]
            ideal.append(cirq.MatrixGate(nop.op.unitary()).on(*targets))
            noisy += [cirq.MatrixGate(nop.op.unitary()).on(*targets), cirq.MatrixGate(nop.coherent).on(*targets)]
    return cirq.unitary(cirq.Circuit(ideal)), cirq.unitary(cirq.Circuit(noisy))


@pytest.mark.parametrize("seed", range(25))
def test_invariants_on_random_circuits(seed: int) -> None:
    """Infidelity in [0, 1] for weak and strong errors; coherent-only process infidelity equals
    1 - |Tr(U† V)|²/d² with U, V from cirq.unitary."""
    rng = np.random.default_rng(3000 + seed)
    n = 1 + seed % 4
    scale = [0.01, 0.3, 2.0][seed % 3]
    coherent = random_noisy_circuit(rng, num_qubits=n, coherent_scale=scale, incoherent=False, repeat_count=[None, 3, 8][seed % 3])
    noisy = random_noisy_circuit(rng, num_qubits=n, coherent_scale=scale, repeat_count=[None, 4][seed % 2])
    for circuit in (coherent, noisy):
        for metric in ("state", "process"):
            assert 0.0 <= EXACT.run(circuit, metric).infidelity <= 1.0
    u, v = _cirq_unitaries(coherent)
    expected = 1 - abs(np.trace(u.conj().T @ v)) ** 2 / 4**n
    assert EXACT.run(coherent, "process").infidelity == pytest.approx(expected, abs=1e-10)


def test_too_large_names_fitting_engine_without_allocating() -> None:
    """40 qubits with incoherent errors: one message with the qubit count, the limit, the memory
    and the engines that would fit; fits() returns it; nothing large is allocated."""
    circuit = random_noisy_circuit(np.random.default_rng(9), num_qubits=40, num_layers=2)
    tracemalloc.start()
    try:
        reason = EXACT.fits(circuit, "state")
        with pytest.raises(TooLargeError) as info:
            EXACT.run(circuit, "state")
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 50 * 2**20
    message = str(info.value)
    assert reason is not None and reason in message
    assert reason == "density matrix, limit 12 qubits"  # short: select.py words the refusal
    assert EXACT.fits(circuit, "process") == "superoperator, limit 6 qubits"
    with pytest.raises(TooLargeError) as info:
        choose(circuit, "state", "exact")
    assert "40 qubits" in str(info.value) and "limit 12 qubits" in str(info.value)


def test_unrollable_billion_repeat_is_refused_with_alternative() -> None:
    """A repeat of 10^9 on 8 qubits with incoherent errors: the block superoperator is too wide
    to raise to a power and unrolling is too much work, so fits() refuses and names generators."""
    circuit = random_noisy_circuit(np.random.default_rng(3), num_qubits=8, num_layers=2, repeat_count=10**9)
    reason = EXACT.fits(circuit, "state")
    assert reason is not None and "multiply-adds" in reason
    with pytest.raises(TooLargeError, match="generators( or pauli)? fits"):
        choose(circuit, "state", "exact")
    assert EXACT.fits(random_noisy_circuit(np.random.default_rng(3), num_qubits=8, num_layers=2), "state") is None


def test_bad_arguments() -> None:
    with pytest.raises(ValueError, match="repeats"):
        ExactEngine(repeats="sometimes")
    circuit = _rx_repeat(2, 0.1)
    with pytest.raises(ValueError, match="metric"):
        EXACT.run(circuit, "average")
    assert "metric" in EXACT.fits(circuit, "average")
    with pytest.raises(ValueError, match="observable"):
        EXACT.run(circuit, "state", observables=("Q0",))


@pytest.mark.parametrize("count", [10**6, 10**9])
def test_long_repeat_reaches_the_channel_fixed_point(count: int) -> None:
    """sx with amplitude damping and dephasing, repeated 10^6 and 10^9 times (both multiples of
    4, so the ideal output is |0>): the state is the channel's fixed point ρ*, the null vector of
    S - 1 with S = Σ K ⊗ conj(K) built from cirq's Kraus operators; infidelity 1 - ρ*[0, 0]."""
    gamma, phase = 2e-3, 1e-3
    relax = Relaxation(0, 30.0, gamma, float(np.sqrt(1 - phase)))
    nop = NoisyOperation(Operation("sx", (0,)), "sx", np.eye(2, dtype=complex), {}, relaxation=(relax,))
    circuit = NoisyCircuit(("q",), (NoisyRepeat((NoisyLayer((nop,), (), 30.0),), count),))
    sx = cirq.unitary(cirq.XPowGate(exponent=0.5))
    kraus = [p @ a @ sx for a in cirq.kraus(cirq.amplitude_damp(gamma)) for p in cirq.kraus(cirq.phase_damp(phase))]
    superop = sum(np.kron(k, k.conj()) for k in kraus)
    fixed = np.linalg.svd(superop - np.eye(4))[2][-1].conj().reshape(2, 2)
    fixed = fixed / np.trace(fixed)
    assert EXACT.run(circuit, "state").infidelity == pytest.approx(1 - fixed[0, 0].real, abs=1e-10)
