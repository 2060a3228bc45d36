"""Per-operation channels and fidelities against published values and cirq.

Every expected number says where it comes from; "design §6" values are recomputed here from the
cited closed forms, so both the constant and the formula are checked.
"""

from __future__ import annotations

import dataclasses
import math

import cirq
import numpy as np
import pytest
import scipy.linalg

from budget.circuit.gates import GATES, ideal_unitary
from budget.circuit.ir import Operation
from budget.errors.fidelity import (
    error_channel_kraus,
    naive_infidelity,
    operation_process_fidelity,
    relaxation_process_fidelity,
)
from budget.errors.knobs import coherent_error
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation, NoisyRepeat
from budget.errors.params import GateParams, QubitParams
from budget.pauli_algebra import pauli_decompose, pauli_hamiltonian, pauli_labels, pauli_matrix
from tests.reference import cirq_process_infidelity, random_noisy_circuit

Q = cirq.LineQubit.range(2)


def f_avg(f_pro: float, d: int) -> float:
    """F_avg = (d F_pro + 1)/(d + 1) (Nielsen, Phys. Lett. A 303, 249 (2002))."""
    return (d * f_pro + 1) / (d + 1)


def noisy(gate: str, params=(), gp: GateParams | None = None, *, relax=(), depol=0.0, rates=None) -> NoisyOperation:
    k = GATES[gate].num_qubits
    coh = coherent_error(gate, tuple(params), gp or GateParams(), k)
    return NoisyOperation(Operation(gate, tuple(range(k)), tuple(params)), gate, coh.unitary, coh.hamiltonian,
                          pauli_rates=rates or {}, depolarizing=depol, relaxation=tuple(relax),
                          knob_generators=coh.generators, knob_values=coh.values)


def unitary_fpro(u_ideal: np.ndarray, u_actual: np.ndarray) -> float:
    d = u_ideal.shape[0]
    return abs(np.trace(u_ideal.conj().T @ u_actual)) ** 2 / d**2


# ---- Pauli-basis helpers ------------------------------------------------------------------------

def test_pauli_matrices_match_cirq():
    # Reference: cirq.PauliString.matrix with cirq's big-endian qubit order.
    for label in pauli_labels(2):
        ps = cirq.PauliString({q: getattr(cirq, c) for q, c in zip(Q, label) if c != "I"})
        assert np.allclose(pauli_matrix(label), ps.matrix(Q))


def cirq_pauli_coefficients(m: np.ndarray) -> dict[str, complex]:
    """c_P = Tr(P M)/d with P built by cirq.PauliString (reference for the decomposition)."""
    n = m.shape[0].bit_length() - 1
    out = {}
    for label in pauli_labels(n):
        ps = cirq.PauliString({q: getattr(cirq, c) for q, c in zip(Q, label) if c != "I"})
        out[label] = complex(np.trace(ps.matrix(Q[:n]) @ m)) / m.shape[0]
    return out


def test_pauli_decompose_matches_cirq_expansion():
    # Reference: cirq.pauli_expansion of a MatrixGate (labels in cirq's qubit order).
    m = cirq.testing.random_unitary(4, random_state=7)
    ours = pauli_decompose(m)
    theirs = cirq.pauli_expansion(cirq.MatrixGate(m))
    for label, c in ours.items():
        assert c == pytest.approx(complex(theirs.get(label, 0)), abs=1e-12)
    assert np.allclose(sum(c * pauli_matrix(l) for l, c in ours.items()), m)


def test_pauli_hamiltonian_inverts_expm():
    # Reference: scipy.linalg.expm; a global phase must not matter.
    rng = np.random.default_rng(3)
    h = {l: float(rng.normal(0, 0.05)) for l in pauli_labels(2)[1:]}
    u = np.exp(0.7j) * scipy.linalg.expm(-1j * sum(c * pauli_matrix(l) for l, c in h.items()))
    got = pauli_hamiltonian(u)
    assert set(got) == set(h)
    for l in h:
        assert got[l] == pytest.approx(h[l], abs=1e-13)


# ---- coherent knobs -----------------------------------------------------------------------------

def test_rotation_error_fidelity():
    # F_pro = cos²(δ/2), F_avg = (2 + cos δ)/3; δ = 0.1 -> 0.9983347217593419 (design §6, with
    # F_avg = (d F_pro + 1)/(d + 1), Nielsen, Phys. Lett. A 303, 249 (2002)).
    delta = 0.1
    nop = noisy("rx", (0.7,), GateParams(overrotation=delta))
    f = operation_process_fidelity(nop)
    assert f == pytest.approx(math.cos(delta / 2) ** 2, abs=1e-15)
    assert f_avg(f, 2) == pytest.approx((2 + math.cos(delta)) / 3, abs=1e-15)
    assert f_avg(f, 2) == pytest.approx(0.9983347217593419, abs=1e-15)
    # cirq reference: the actual gate is cirq.rx(θ + δ)
    assert f == pytest.approx(unitary_fpro(cirq.unitary(cirq.rx(0.7)), cirq.unitary(cirq.rx(0.7 + delta))), abs=1e-14)


def test_overrotation_generator_is_half_delta_on_the_axis():
    # Generator form: an over-rotation δ is h = δ/2 on the rotation axis (design §6; Blume-Kohout
    # et al., PRX Quantum 3, 020335 (2022)); h = 0.01 -> infidelity sin²(h) = 9.99967e-5.
    nop = noisy("rx", (1.1,), GateParams(overrotation=0.02))
    assert nop.hamiltonian == pytest.approx({"X": 0.01}, abs=1e-15)
    assert nop.knob_generators["overrotation"] == pytest.approx({"X": 0.5}, abs=1e-14)
    assert 1 - operation_process_fidelity(nop) == pytest.approx(9.99967e-5, abs=5e-11)
    assert noisy("ry", (0.4,), GateParams(overrotation=0.02)).hamiltonian == pytest.approx({"Y": 0.01}, abs=1e-15)
    assert noisy("sx", (), GateParams(overrotation=0.02)).hamiltonian == pytest.approx({"X": 0.01}, abs=1e-15)


@pytest.mark.parametrize("gate", ["x", "y", "sx", "sxdg", "rx", "ry"])
def test_axis_error_matches_cirq_phased_x(gate):
    # Reference: cirq.PhasedXPowGate(p, t) = Z^p X^t Z^-p, the rotation with its axis turned by πp.
    alpha = 0.07
    params = (0.9,) if GATES[gate].num_params else ()
    g = ideal_unitary(gate, params)
    axis_phase = 0.5 if gate.startswith("y") or gate == "ry" else 0.0
    exponent = {"x": 1.0, "y": 1.0, "sx": 0.5, "sxdg": -0.5, "rx": 0.9 / np.pi, "ry": 0.9 / np.pi}[gate]
    actual = cirq.unitary(cirq.PhasedXPowGate(phase_exponent=axis_phase + alpha / np.pi, exponent=exponent))
    ideal = cirq.unitary(cirq.PhasedXPowGate(phase_exponent=axis_phase, exponent=exponent))
    nop = noisy(gate, params, GateParams(axis_error=alpha))
    assert operation_process_fidelity(nop) == pytest.approx(unitary_fpro(ideal, actual), abs=1e-14)
    # the coherent unitary times the ideal gate is the turned gate, up to global phase
    assert cirq.allclose_up_to_global_phase(nop.coherent @ g, actual @ ideal.conj().T @ g, atol=1e-12)


def test_cphase_and_swap_angle_on_cz():
    # Conditional phase δφ: F_pro = (10 + 6 cos δφ)/16, δφ = 0.1 -> F_avg = 0.99850124958;
    # swap angle δθ = 0.01: F_pro = ((2 + 2 cos δθ)/4)² = 0.99995000104 (design §6).
    f = operation_process_fidelity(noisy("cz", (), GateParams(cphase=0.1)))
    assert f == pytest.approx((10 + 6 * math.cos(0.1)) / 16, abs=1e-15)
    assert f_avg(f, 4) == pytest.approx(0.99850124958, abs=1e-11)
    f = operation_process_fidelity(noisy("cz", (), GateParams(swap_angle=0.01)))
    assert f == pytest.approx(((2 + 2 * math.cos(0.01)) / 4) ** 2, abs=1e-15)
    assert f == pytest.approx(0.99995000104, abs=1e-11)


def test_two_qubit_knobs_match_cirq_gates():
    # Reference: cirq.FSimGate(θ, φ) has cos θ, -i sin θ on |01>,|10> and e^{-iφ} on |11>, so
    # swap_angle θ and cphase φ together are FSimGate(θ, -φ); z_phase is cirq.rz on each qubit,
    # applied before them (U_coh = U_swap · U_cphase · U_zphase).
    gp = GateParams(cphase=0.05, swap_angle=0.03, z_phase=(0.01, -0.02))
    nop = noisy("cz", (), gp)
    ref = cirq.unitary(cirq.Circuit(cirq.rz(0.01)(Q[0]), cirq.rz(-0.02)(Q[1]), cirq.FSimGate(0.03, -0.05)(*Q)))
    assert np.allclose(nop.coherent, ref, atol=1e-14)
    assert set(nop.knob_values) == {"cphase", "swap_angle", "z_phase[0]", "z_phase[1]"}


def test_pauli_knob_matches_cirq_pauli_sum():
    # Reference: expm of cirq.PauliSum.matrix; labels are in gate order (first letter, first qubit).
    gp = GateParams(pauli={"XI": 0.02, "ZY": -0.01})
    h = 0.02 * cirq.X(Q[0]) - 0.01 * cirq.Z(Q[0]) * cirq.Y(Q[1])
    ref = scipy.linalg.expm(-1j * h.matrix(Q))
    nop = noisy("cx", (), gp)
    assert np.allclose(nop.coherent, ref, atol=1e-14)
    assert nop.hamiltonian == pytest.approx({"XI": 0.02, "ZY": -0.01}, abs=1e-15)
    assert nop.knob_generators == {"pauli:XI": {"XI": 1.0}, "pauli:ZY": {"ZY": 1.0}}


KNOB_CASES = [
    ("rx", (0.8,), "overrotation"), ("u3", (0.4, 0.3, -1.2), "overrotation"), ("h", (), "overrotation"),
    ("p", (0.3,), "overrotation"), ("crz", (0.6,), "overrotation"), ("rzz", (0.2,), "overrotation"),
    ("cx", (), "overrotation"), ("sx", (), "axis_error"), ("ry", (1.3,), "axis_error"),
    ("cz", (), "cphase"), ("iswap", (), "swap_angle"), ("cz", (), "z_phase"), ("t", (), "z_phase"),
]


@pytest.mark.parametrize("gate,params,knob", KNOB_CASES)
def test_knob_generators_are_derivatives(gate, params, knob):
    # Independent derivative: central difference of scipy.linalg.logm of the knob's unitary,
    # decomposed in cirq's Pauli matrices; generator = d/dδ of H at δ = 0 (hand derivation).
    n = GATES[gate].num_qubits
    eps = 1e-5

    def h_of(delta):
        value = (delta,) * n if knob == "z_phase" else delta
        u = coherent_error(gate, params, GateParams(**{knob: value}), n).unitary
        u = u / np.linalg.det(u) ** (1 / u.shape[0])
        return {k: v.real for k, v in cirq_pauli_coefficients(1j * scipy.linalg.logm(u)).items()}

    plus, minus = h_of(eps), h_of(-eps)
    numeric = {l: (plus.get(l, 0) - minus.get(l, 0)) / (2 * eps) for l in set(plus) | set(minus)}
    gens = coherent_error(gate, params, GateParams(**{knob: (0.0,) * n if knob == "z_phase" else 0.0}), n).generators
    total = {}
    for g in gens.values():  # z_phase on every qubit at once: the generators add
        for l, c in g.items():
            total[l] = total.get(l, 0) + c
    for label in set(numeric) | set(total):
        if set(label) != {"I"}:
            assert total.get(label, 0.0) == pytest.approx(numeric.get(label, 0.0), abs=1e-6), label


def test_overrotation_of_controlled_gates_is_a_conditional_phase_error():
    # cx, cz and cp all rotate the |11> (or |1+>) phase; an over-rotation δ gives the same
    # F_pro = (10 + 6 cos δ)/16 as a conditional-phase offset (design §6 formula).
    for gate, params in [("cz", ()), ("cx", ()), ("cp", (0.4,))]:
        f = operation_process_fidelity(noisy(gate, params, GateParams(overrotation=0.1)))
        assert f == pytest.approx((10 + 6 * math.cos(0.1)) / 16, abs=1e-14), gate


# ---- incoherent parts ---------------------------------------------------------------------------

T1_US, T2_US, T_NS = 100.0, 80.0, 50.0


def test_idle_relaxation_coherence_limit():
    # F_avg = (3 + e^{-t/T1} + 2 e^{-t/T2})/6 (coherence limit, widely used); t = 50 ns, T1 = 100 µs,
    # T2 = 80 µs -> 0.9997084192538003 (design §6).
    r = QubitParams(T1_US, T2_US).relaxation(0, T_NS)
    t1, t2 = T1_US * 1e3, T2_US * 1e3
    expected = (3 + math.exp(-T_NS / t1) + 2 * math.exp(-T_NS / t2)) / 6
    assert f_avg(relaxation_process_fidelity(r), 2) == pytest.approx(expected, abs=1e-16)
    assert f_avg(relaxation_process_fidelity(r), 2) == pytest.approx(0.9997084192538003, abs=1e-16)
    # the same number from the Kraus operators of the operation channel
    nop = noisy("id", (), relax=[r])
    assert operation_process_fidelity(nop) == pytest.approx(relaxation_process_fidelity(r), abs=1e-15)


def test_relaxation_pauli_twirl():
    # Tomita & Svore, PRA 90, 062320 (2014): p_x = p_y = (1 - e^{-t/T1})/4,
    # p_z = (1 - e^{-t/T2})/2 - (1 - e^{-t/T1})/4; values from design §6.
    r = QubitParams(T1_US, T2_US).relaxation(0, T_NS)
    px, py, pz = r.pauli_twirl()
    assert px == py == pytest.approx(1.2496875520767725e-4, rel=1e-12)
    assert pz == pytest.approx(1.8743360888417993e-4, rel=1e-12)
    # twirling keeps the process fidelity: F_pro(twirl) = 1 - p_x - p_y - p_z
    assert px + py + pz == pytest.approx(1 - relaxation_process_fidelity(r), rel=1e-11)


def test_t1_only_means_no_pure_dephasing_and_t2_only_no_damping():
    # Convention (docs/error-model.md): T2 absent -> T2 = 2 T1; T1 absent -> γ = 0, 1/Tφ = 1/T2.
    r = QubitParams(t1_us=50.0).relaxation(0, 100.0)
    assert r.dephasing_factor == 1.0 and r.gamma == pytest.approx(-math.expm1(-100 / 50e3), rel=1e-15)
    r = QubitParams(t2_us=50.0).relaxation(0, 100.0)
    assert r.gamma == 0.0 and r.dephasing_factor == pytest.approx(math.exp(-100 / 50e3), rel=1e-15)
    # overall coherence decays as e^{-t/T2}: sqrt(1-γ)·c (the definition of T2)
    r = QubitParams(t1_us=40.0, t2_us=30.0).relaxation(0, 700.0)
    assert math.sqrt(1 - r.gamma) * r.dephasing_factor == pytest.approx(math.exp(-700 / 30e3), rel=1e-14)


@pytest.mark.parametrize("d,p,r", [(2, 0.998, 0.001), (4, 0.99, 0.0075)])
def test_randomized_benchmarking_relation(d, p, r):
    # r = (d-1)(1-p)/d (Magesan, Gambetta, Emerson, PRL 106, 180504 (2011)); the depolarizing
    # channel with λ = 1 - p = r d/(d-1) has F_avg = 1 - r. cirq.depolarize(p_c, n) applies each
    # non-identity Pauli with p_c/(d²-1), so p_c = λ (d²-1)/d².
    assert (d - 1) * (1 - p) / d == pytest.approx(r, rel=1e-12)
    gate = "sx" if d == 2 else "cz"
    from budget.circuit.ir import StructuredCircuit, Layer
    from budget.errors.attach import attach
    from budget.errors.model import ErrorModel

    circ = StructuredCircuit(("a", "b"), (Layer((Operation(gate, (0,) if d == 2 else (0, 1)),)),))
    nop = attach(circ, ErrorModel.from_dict({"gates": {gate: {"avg_infidelity": r}}})).body[0].operations[0]
    assert nop.depolarizing == pytest.approx(1 - p, rel=1e-12)
    assert f_avg(operation_process_fidelity(nop), d) == pytest.approx(1 - r, rel=1e-12)
    n = 1 if d == 2 else 2
    ours = cirq.kraus_to_superoperator(tuple(error_channel_kraus(nop)))
    theirs = cirq.kraus_to_superoperator(cirq.kraus(cirq.depolarize(nop.depolarizing * (d * d - 1) / d**2, n_qubits=n)))
    assert np.allclose(ours, theirs, atol=1e-14)


def test_relaxation_kraus_match_cirq():
    # Reference: cirq.amplitude_damp(γ) then cirq.phase_damp(1 - c²) (cirq's phase_damp scales
    # coherences by sqrt(1 - γ_pd)).
    r = QubitParams(30.0, 25.0).relaxation(0, 900.0)
    ours = cirq.kraus_to_superoperator(tuple(error_channel_kraus(noisy("id", (), relax=[r]))))
    ad = cirq.kraus_to_superoperator(cirq.kraus(cirq.amplitude_damp(r.gamma)))
    pd = cirq.kraus_to_superoperator(cirq.kraus(cirq.phase_damp(1 - r.dephasing_factor**2)))
    assert np.allclose(ours, pd @ ad, atol=1e-14)


def _cirq_channel(nop: NoisyOperation) -> cirq.Circuit:
    k = len(nop.qubits)
    qs = Q[:k]
    ops = [cirq.MatrixGate(nop.coherent).on(*qs)]
    if nop.pauli_rates:
        p0 = 1 - sum(nop.pauli_rates.values())
        ops.append(cirq.KrausChannel([np.sqrt(p0) * np.eye(2**k)] + [np.sqrt(p) * pauli_matrix(l) for l, p in nop.pauli_rates.items()]).on(*qs))
    d = 2**k
    ops.append(cirq.depolarize(nop.depolarizing * (d * d - 1) / d**2, n_qubits=k).on(*qs))
    for r in nop.relaxation:
        ops += [cirq.amplitude_damp(r.gamma).on(qs[r.qubit]), cirq.phase_damp(1 - r.dephasing_factor**2).on(qs[r.qubit])]
    return cirq.Circuit(ops)


def test_whole_error_channel_matches_cirq_on_random_states():
    # Reference: cirq.DensityMatrixSimulator applying cirq's own channels in the documented order
    # (coherent, Pauli rates, depolarizing, relaxation); 16 random states span the 2-qubit operators.
    rng = np.random.default_rng(11)
    relax = [QubitParams(20.0, 15.0).relaxation(0, 300.0), QubitParams(35.0, 60.0).relaxation(1, 300.0)]
    nop = noisy("cz", (), GateParams(cphase=0.2, swap_angle=0.1, z_phase=(0.1, -0.3), pauli={"XY": 0.05}),
                relax=relax, depol=0.03, rates={"ZX": 0.01, "YI": 0.02})
    kraus = error_channel_kraus(nop)
    assert np.allclose(sum(k.conj().T @ k for k in kraus), np.eye(4), atol=1e-13)  # trace preserving
    sim = cirq.DensityMatrixSimulator(dtype=np.complex128)
    for _ in range(16):
        a = rng.normal(size=(4, 4)) + 1j * rng.normal(size=(4, 4))
        rho = a @ a.conj().T
        rho /= np.trace(rho)
        ours = sum(k @ rho @ k.conj().T for k in kraus)
        theirs = sim.simulate(_cirq_channel(nop), initial_state=rho, qubit_order=Q).final_density_matrix
        assert np.allclose(ours, theirs, atol=1e-12)


# ---- naive product ------------------------------------------------------------------------------

def _single(nop: NoisyOperation) -> NoisyCircuit:
    """The operation alone, moved to qubits 0..k-1, as a one-layer circuit."""
    k = len(nop.qubits)
    where = {q: i for i, q in enumerate(nop.qubits)}
    moved = dataclasses.replace(
        nop, op=Operation(nop.op.gate, tuple(range(k)), nop.op.params),
        relaxation=tuple(dataclasses.replace(r, qubit=where[r.qubit]) for r in nop.relaxation),
    )
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(k)), (NoisyLayer((moved,), (), 0.0),))


def test_operation_fidelity_matches_cirq_choi_state():
    # Reference: tests/reference.py, 1 - F_pro from cirq's density-matrix simulation of the Choi state.
    rng = np.random.default_rng(5)
    circuit = random_noisy_circuit(rng, num_qubits=3, num_layers=3, pauli_rates=True, coherent_scale=0.05)
    for layer in circuit.distinct_layers():
        for nop in layer.operations:
            assert 1 - operation_process_fidelity(nop) == pytest.approx(cirq_process_infidelity(_single(nop)), abs=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_naive_infidelity_equals_unrolled_product(seed):
    # Independent computation: unroll the circuit, take each operation's F_pro from cirq (Choi
    # state) and each idle slot's from the coherence-limit formula, multiply in plain Python.
    rng = np.random.default_rng(seed)
    circuit = random_noisy_circuit(rng, num_qubits=3, num_layers=3, repeat_count=int(rng.integers(2, 5)),
                                   pauli_rates=bool(seed % 2))
    cache: dict[int, float] = {}
    product = 1.0
    for layer in circuit.iter_layers():
        for nop in layer.operations:
            if id(nop) not in cache:
                cache[id(nop)] = 1 - cirq_process_infidelity(_single(nop))
            product *= cache[id(nop)]
        for r in layer.idle:
            e1, e2 = 1 - r.gamma, math.sqrt(1 - r.gamma) * r.dephasing_factor  # e^{-t/T1}, e^{-t/T2}
            product *= (3 * (3 + e1 + 2 * e2) / 6 - 1) / 2  # F_pro from F_avg, d = 2
    assert naive_infidelity(circuit) == pytest.approx(1 - product, rel=1e-10, abs=1e-15)


def test_naive_infidelity_with_a_billion_repeats():
    # 1 - cos(δ/2)^(2N) for N = 10**9 over-rotated rx gates, evaluated with 50-digit mpmath.
    mpmath = pytest.importorskip("mpmath")
    delta, n = 1e-6, 10**9
    nop = noisy("rx", (0.3,), GateParams(overrotation=delta))
    circuit = NoisyCircuit(("q[0]",), (NoisyRepeat((NoisyLayer((nop,), (), 0.0),), n),))
    with mpmath.workdps(50):
        expected = float(1 - mpmath.cos(mpmath.mpf(delta) / 2) ** (2 * n))
    assert naive_infidelity(circuit) == pytest.approx(expected, rel=1e-9)


def test_naive_infidelity_keeps_precision_for_tiny_idle_times():
    # For t << T1, T2: 1 - F_pro = t/(4 T1) + t/(2 T2) + O(t²) (expansion of the coherence-limit
    # formula); computing 1 - F in floating point would keep only about four digits at 1e-12.
    r = QubitParams(100.0, 80.0).relaxation(0, 1e-7)
    circuit = NoisyCircuit(("q[0]",), (NoisyLayer((), (r,), 1e-7),))
    t1, t2 = 100e3, 80e3
    assert naive_infidelity(circuit) == pytest.approx(1e-7 / (4 * t1) + 1e-7 / (2 * t2), rel=1e-9)
