"""Context errors (spectator ZZ, drive crosstalk, pulse bleed, calibration in context) against
closed forms worked out here and against cirq circuits built by hand from the stated conventions
(the ZZ as explicit cirq.CZPowGate in the stated order, independently of budget.errors)."""

from __future__ import annotations

import math

import cirq
import numpy as np
import pytest

from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.engines import get_engine
from budget.errors.attach import attach
from budget.errors.context_terms import ZZ_KNOB, knob_in_lab_units
from budget.errors.fidelity import naive_infidelity
from budget.errors.model import ErrorModel
from budget.errors.noisy import NoisyCircuit
from budget.problems import ModelError
from tests.reference import _noisy_ops

ENGINES = ("exact", "generators", "clifford")


def _names(n):
    return tuple(f"q[{i}]" for i in range(n))


def _circuit(n, *items):
    return StructuredCircuit(_names(n), tuple(items), source="ctx.qasm")


def _run(engine, noisy, metric="process"):
    return get_engine(engine).run(noisy, metric)


def _cphase_infidelity(phi):
    """F_pro of diag(1, 1, 1, e^{iφ}) = |Tr U / 4|² = |3 + e^{iφ}|²/16 (hand derivation)."""
    return 1 - abs(3 + np.exp(1j * phi)) ** 2 / 16


# ---- spectator ZZ: the fixed contract ------------------------------------------------------------


def test_idle_pair_gets_two_pi_zeta_t():
    # ζ = 100 kHz, t = 1 µs: φ = 2π·0.1 = 0.6283 rad (worked by hand; the example)
    model = ErrorModel.from_dict({"gates": {"id": {"duration_ns": 1000.0}}, "couplings": {"q[0],q[1]": {"zz_khz": 100.0}}})
    noisy = attach(_circuit(2, Layer((Operation("id", (0,)),))), model)
    zz = [op for layer in noisy.iter_layers() for op in layer.context]
    assert len(zz) == 1 and zz[0].family == "zz q[0],q[1]"
    phi = 0.6283185307179586
    # cirq's CZ**t is diag(1, 1, 1, e^{iπt}) (cirq's documented convention): t = φ/π
    assert np.allclose(zz[0].coherent, cirq.unitary(cirq.CZPowGate(exponent=phi / np.pi)), atol=1e-14)
    expected = _cphase_infidelity(phi)
    # |3 + e^{iφ}|² = 10 + 6 cos φ, so 1 - F_pro = (3/8)(1 - cos φ) = (3/8)(1 - 0.809017) = 0.071619
    assert expected == pytest.approx(0.071619, abs=1e-6)
    assert _run("exact", noisy).infidelity == pytest.approx(expected, abs=1e-12)
    assert naive_infidelity(noisy) == pytest.approx(expected, abs=1e-12)  # one error, naive = actual


def test_pair_running_its_own_gate_gets_none_and_default_covers_gate_pairs():
    model = ErrorModel.from_dict({
        "gates": {"cz": {"duration_ns": 60.0}, "sx": {"duration_ns": 20.0}},
        "couplings": {"zz_khz": 50.0, "q[1],q[2]": {"zz_khz": 200.0}},
    })
    c = _circuit(4, Layer((Operation("cz", (0, 1)), Operation("sx", (2,)))), Layer((Operation("cz", (2, 3)),)))
    noisy = attach(c, model)
    per_layer = [{op.family: op.hamiltonian["ZZ"] for op in layer.context} for layer in noisy.body]
    # default pairs: those of the circuit's two-qubit gates, (0,1) and (2,3); (1,2) from its own table
    assert set(per_layer[0]) == {"zz q[1],q[2]", "zz q[2],q[3]"}  # (0,1) runs its cz
    assert set(per_layer[1]) == {"zz q[0],q[1]", "zz q[1],q[2]"}
    # H = (φ/4)(ZI + IZ - ZZ), φ = 2π ζ T: ZZ coefficient -φ/4
    assert per_layer[0]["zz q[1],q[2]"] == pytest.approx(-2 * np.pi * 200e3 * 60e-9 / 4, rel=1e-12)
    assert per_layer[1]["zz q[0],q[1]"] == pytest.approx(-2 * np.pi * 50e3 * 60e-9 / 4, rel=1e-12)


def test_zero_duration_layers_get_no_zz_and_context_errors_add_no_time():
    model = ErrorModel.from_dict({"qubits": {"t1_us": 50.0}, "couplings": {"q[0],q[1]": {"zz_khz": 300.0}},
                                  "gates": {"sx": {"duration_ns": 30.0}}})
    noisy = attach(_circuit(2, Layer((Operation("rz", (0,), (0.3,)),)), Layer((Operation("sx", (1,)),))), model)
    layers = list(noisy.iter_layers())
    assert [len(l.context) for l in layers] == [0, 1]  # virtual rz: T = 0, no ZZ; the sx layer's ZZ is its own
    assert layers[1].duration_ns == 30.0  # the ZZ adds no time to its layer
    assert len(layers[1].idle) == 1 and layers[1].idle[0].duration_ns == 30.0  # idle time unchanged


def test_overlapping_pairs_all_get_their_zz_in_the_layer():
    # a triangle plus a tail: pairs sharing a qubit are error sites of the same layer, each with its
    # own family (their terms are diagonal and commute, so their order does not matter)
    pairs = {"q[0],q[1]": 10.0, "q[1],q[2]": 20.0, "q[0],q[2]": 30.0, "q[2],q[3]": 40.0}
    model = ErrorModel.from_dict({"gates": {"x": {"duration_ns": 40.0}},
                                  "couplings": {k: {"zz_khz": v} for k, v in pairs.items()}})
    noisy = attach(_circuit(4, Layer((Operation("x", (3,)),))), model)
    (layer,) = noisy.body
    assert sorted(op.family for op in layer.context) == sorted(f"zz {k}" for k in pairs)


def _echo(phi_total, correction=None):
    """Idle pair, x on q[1] between two equal idle spans (ζ·T each giving φ/2), ideal x of no duration."""
    zeta_khz, span_ns = 100.0, phi_total / 2 / (2 * np.pi * 100.0e-6)
    gates = {"id": {"duration_ns": span_ns}}
    if correction is not None:
        gates["id"]["z_phase"] = correction / 2  # half on each id of q[0]
    model = ErrorModel.from_dict({"gates": gates, "couplings": {"q[0],q[1]": {"zz_khz": zeta_khz}}})
    idle = Layer((Operation("id", (0,)),))
    return attach(_circuit(2, idle, Layer((Operation("x", (1,)),)), idle), model)


def test_echo_removes_zz_and_leaves_a_z_rotation_a_virtual_z_removes():
    # Derivation. U(a) = diag(1,1,1,e^{ia}) = e^{ia/4} exp(-i(a/4)(Z0 + Z1 - Z0Z1)).
    # X1 U(a) X1 = e^{ia/4} exp(-i(a/4)(Z0 - Z1 + Z0Z1)), so U(a) X1 U(a) = X1 (X1 U(a) X1) U(a)
    # = e^{ia/2} X1 exp(-i(a/2) Z0). With a = φ/2 per span: the ZZ part cancels exactly and q[0]
    # keeps exp(-i(φ/2) Z0/2) = Rz(φ/2), a state-independent Z rotation (global phase e^{iφ/4}).
    # Its process infidelity is 1 - cos²(φ/4); a virtual Z of -φ/2 on q[0] (z_phase -φ/2) removes it.
    phi = 0.6283185307179586
    echo = _echo(phi)
    rz = np.kron(np.diag([np.exp(-1j * phi / 4), np.exp(1j * phi / 4)]), np.eye(2))
    # the whole actual unitary from cirq: CZ**(φ/2π) X1 CZ**(φ/2π) equals X1 Rz0(φ/2) up to phase
    a, b = cirq.LineQubit.range(2)
    zz = cirq.CZPowGate(exponent=phi / 2 / np.pi)
    u = cirq.unitary(cirq.Circuit([zz(a, b), cirq.X(b), zz(a, b)]))
    target = np.kron(np.eye(2), cirq.unitary(cirq.X)) @ rz
    assert abs(abs(np.trace(target.conj().T @ u)) - 4) < 1e-12
    assert _run("exact", echo).infidelity == pytest.approx(math.sin(phi / 4) ** 2, abs=1e-12)
    for engine in ("generators", "clifford"):  # first order: (φ/4)², the Z0 coefficient squared
        got = _run(engine, echo)
        assert got.first_order == pytest.approx((phi / 4) ** 2, rel=1e-9)
        assert got.infidelity == pytest.approx(math.sin(phi / 4) ** 2, abs=1e-12)  # one Pauli term: exact
    for engine in ENGINES:
        assert abs(_run(engine, _echo(phi, correction=-phi / 2)).infidelity) < 1e-12
    # without the echo the same total phase leaves the full ZZ error
    model = ErrorModel.from_dict({"gates": {"id": {"duration_ns": 1000.0}}, "couplings": {"q[0],q[1]": {"zz_khz": 100.0}}})
    plain = attach(_circuit(2, Layer((Operation("id", (0,)),))), model)
    assert _run("exact", plain).infidelity == pytest.approx(_cphase_infidelity(phi), abs=1e-12)


# ---- drive crosstalk and pulse bleed ----------------------------------------------------------------


@pytest.mark.parametrize("axis, expected", [(None, "x"), ("y", "y"), ("z", "z")])
def test_crosstalk_rotates_the_neighbour_by_a_fraction(axis, expected):
    # sx = Rx(π/2) up to phase on q[0]; fraction f leaks Rx(f π/2) (or about y, z) onto q[1] after
    # its own x. State |00>: the neighbour ends in R(fπ/2) X |0>; infidelity against X|0> = |1> is
    # sin²(fπ/4) for a rotation about x or y, 0 about z (hand derivation).
    f = 0.05
    table = {"fraction": f} | ({"axis": axis} if axis else {})
    model = ErrorModel.from_dict({"gates": {"sx": {"duration_ns": 25.0}, "x": {"duration_ns": 25.0}},
                                  "crosstalk": {"q[0]->q[1]": table}})
    noisy = attach(_circuit(2, Layer((Operation("sx", (0,)), Operation("x", (1,))))), model)
    (spill,) = [op for layer in noisy.body for op in layer.context]
    assert spill.family == "crosstalk sx q[0]->q[1]" and spill.qubits == (1,)
    angle = f * np.pi / 2
    gate = {"x": cirq.rx, "y": cirq.ry, "z": cirq.rz}[expected](angle)
    assert abs(abs(np.trace(cirq.unitary(gate).conj().T @ spill.coherent)) - 2) < 1e-12
    state = 0.0 if expected == "z" else math.sin(angle / 2) ** 2
    assert _run("exact", noisy, "state").infidelity == pytest.approx(state, abs=1e-12)
    assert _run("exact", noisy, "process").infidelity == pytest.approx(math.sin(angle / 2) ** 2, abs=1e-12)


def test_crosstalk_only_for_listed_driven_gates():
    model = ErrorModel.from_dict({"gates": {"x": {"duration_ns": 25.0}, "sx": {"duration_ns": 25.0}},
                                  "crosstalk": {"q[0]->q[1]": {"fraction": 0.1, "gates": ["x"]}}})
    c = _circuit(2, Layer((Operation("sx", (0,)),)), Layer((Operation("rz", (0,), (1.0,)),)), Layer((Operation("x", (0,)),)))
    fams = [op.family for layer in attach(c, model).body for op in layer.context]
    assert fams == ["crosstalk x q[0]->q[1]"]


def test_bleed_spills_a_fraction_of_the_previous_pulse():
    # x then sx on one qubit; bleed x->sx f: Rx(f π) between them. Ideal SX·X, actual SX·Rx(fπ)·X:
    # process infidelity 1 - cos²(fπ/2) = sin²(fπ/2) (F_pro of a rotation by α is cos²(α/2)).
    f = 0.02
    model = ErrorModel.from_dict({"gates": {"x": {"duration_ns": 25.0}, "sx": {"duration_ns": 25.0}},
                                  "bleed": {"x->sx": {"fraction": f}}})
    noisy = attach(_circuit(1, Layer((Operation("x", (0,)),)), Layer((Operation("sx", (0,)),))), model)
    (spill,) = [op for layer in noisy.body for op in layer.context]
    assert spill.family == "bleed x->sx q[0]"
    for engine in ("exact",):
        assert _run(engine, noisy).infidelity == pytest.approx(math.sin(f * np.pi / 2) ** 2, abs=1e-12)
    # sx then x: no rule, no bleed
    other = attach(_circuit(1, Layer((Operation("sx", (0,)),)), Layer((Operation("x", (0,)),))), model)
    assert not any(layer.context for layer in other.body)


def test_bleed_across_a_repeat_peels_one_repetition():
    # x; {sx} x 5 with bleed sx->sx on q[0] only (a qubit table) and x->sx for every qubit:
    # the first sx follows x, the other four follow sx. Exact: all rotations about x add up.
    f_xs, f_ss = 0.01, 0.03
    model = ErrorModel.from_dict({"gates": {"x": {"duration_ns": 25.0}, "sx": {"duration_ns": 25.0}},
                                  "bleed": {"x->sx": {"fraction": f_xs}, "sx->sx": {"fraction": 0.0, "q[0]": {"fraction": f_ss}}}})
    c = _circuit(1, Layer((Operation("x", (0,)),)), Repeat((Layer((Operation("sx", (0,)),)),), 5))
    noisy = attach(c, model)
    total = f_xs * np.pi + 4 * f_ss * np.pi / 2
    assert _run("exact", noisy).infidelity == pytest.approx(math.sin(total / 2) ** 2, abs=1e-12)
    # one repetition peeled (the last: its sx bleeds into nothing), the rest still folded
    assert len(noisy.body) == 3 and noisy.body[1].count == 4


# ---- calibration in context ----------------------------------------------------------------------


def test_context_table_replaces_knobs_most_specific_wins():
    model = ErrorModel.from_dict({
        "gates": {"cz": {"duration_ns": 60.0, "cphase": 0.01}},
        "context": [
            {"gate": "cz", "with": ["cz q[2],q[3]"], "cphase": 0.02},
            {"name": "crowded", "gate": "cz", "qubits": "q[0],q[1]", "with": ["cz q[3],q[2]"], "cphase": 0.05},
        ],
    })
    both = Layer((Operation("cz", (0, 1)), Operation("cz", (2, 3))))
    noisy = attach(_circuit(4, both, Layer((Operation("cz", (0, 1)),))), model)
    got = {(layer_i, op.qubits): (op.family, op.knob_values["cphase"])
           for layer_i, layer in enumerate(noisy.body) for op in layer.operations}
    assert got[(0, (0, 1))] == ("cz [crowded]", 0.05)  # two conditions beat one
    assert got[(0, (2, 3))] == ("cz [with cz q[2],q[3]]", 0.02) or got[(0, (2, 3))][1] == 0.01
    assert got[(1, (0, 1))] == ("cz", 0.01)  # alone: the gate's own table


def test_context_table_for_the_other_qubit_order_of_a_symmetric_gate():
    # cz is symmetric: a table written for q[1],q[0] applies to cz q[0],q[1] with its per-qubit
    # z_phase reversed, so each value stays on its physical qubit (as for [gates.GATE."Q1,Q2"])
    model = ErrorModel.from_dict({"gates": {"cz": {"duration_ns": 60.0}, "x": {"duration_ns": 30.0}},
                                  "context": [{"gate": "cz", "qubits": "q[1],q[0]", "with": ["x q[2]"],
                                               "z_phase": [0.01, -0.02]}]})
    noisy = attach(_circuit(3, Layer((Operation("cz", (0, 1)), Operation("x", (2,))))), model)
    cz = noisy.body[0].operations[0]
    assert cz.knob_values == {"z_phase[0]": -0.02, "z_phase[1]": 0.01}


def test_all_driven_context():
    model = ErrorModel.from_dict({"gates": {"sx": {"duration_ns": 25.0, "overrotation": 0.001}},
                                  "context": [{"gate": "sx", "all_driven": True, "overrotation": 0.004, "name": "full"}]})
    full = Layer((Operation("sx", (0,)), Operation("sx", (1,))))
    part = Layer((Operation("sx", (0,)), Operation("rz", (1,), (0.2,))))
    noisy = attach(_circuit(2, full, part), model)
    fams = [[op.family for op in layer.operations] for layer in noisy.body]
    assert fams == [["sx [full]", "sx [full]"], ["sx", "rz"]]


def test_equally_specific_context_tables_are_an_error():
    model = ErrorModel.from_dict({"gates": {"cz": {"duration_ns": 60.0}},
                                  "context": [{"gate": "cz", "with": ["cz q[2],q[3]"], "cphase": 0.02},
                                              {"gate": "cz", "all_driven": True, "cphase": 0.03}]})
    with pytest.raises(ModelError, match=r"context\.0 and context\.1 .*equally specifically"):
        attach(_circuit(4, Layer((Operation("cz", (0, 1)), Operation("cz", (2, 3))))), model)


# ---- against cirq: seeded random circuits ---------------------------------------------------------

ONE = ("sx", "x", "h", "rz", "rx")
TWO = ("cz", "cx")
DUR = {"sx": 25.0, "x": 30.0, "h": 35.0, "rz": 0.0, "rx": 40.0, "cz": 60.0, "cx": 80.0}


def _random_case(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.choice([3, 4]))

    def layer():
        free, ops = list(rng.permutation(n)), []
        while free:
            if len(free) >= 2 and rng.random() < 0.4:
                ops.append(Operation(str(rng.choice(TWO)), (int(free.pop()), int(free.pop()))))
            elif rng.random() < 0.75:
                g = str(rng.choice(ONE))
                ops.append(Operation(g, (int(free.pop()),), (float(rng.uniform(-3, 3)),) if g in ("rz", "rx") else ()))
            else:
                free.pop()  # idle qubit
        return Layer(tuple(ops))

    items = [layer() for _ in range(2)] + [Repeat((layer(), layer()), int(rng.integers(2, 4)))] + [layer()]
    all_pairs = [(a, b) for a in range(n) for b in range(a + 1, n)]
    chosen = [all_pairs[i] for i in rng.choice(len(all_pairs), size=int(rng.integers(1, len(all_pairs) + 1)), replace=False)]
    zz = {p: float(rng.uniform(50, 800)) for p in chosen}
    gates = {g: {"duration_ns": DUR[g]} for g in DUR}
    for g in ("sx", "x", "h", "rx"):
        gates[g] |= {"overrotation": float(rng.normal(0, 0.02)), "avg_infidelity": float(rng.uniform(0, 1e-3))}
    gates["cz"] |= {"cphase": float(rng.normal(0, 0.03)), "avg_infidelity": 2e-3}
    model = {"qubits": {"t1_us": float(rng.uniform(20, 80)), "t2_us": float(rng.uniform(10, 40))}, "gates": gates}
    return _circuit(n, *items), model, zz


def _cirq_choi_infidelity(circuit: StructuredCircuit, base: NoisyCircuit, zz: dict, model: dict) -> float:
    """Process infidelity by cirq: each layer's own channels (tests/reference.py), then a CZ**t with
    t = 2ζT·1e-6 (φ = πt) on every pair not running a two-qubit gate there, T the longest gate."""
    n = circuit.num_qubits
    qs, anc = cirq.LineQubit.range(n), cirq.LineQubit.range(n, 2 * n)
    prep = [cirq.H(a) for a in anc] + [cirq.CNOT(a, q) for a, q in zip(anc, qs)]
    ideal, noisy = list(prep), list(prep)
    for layer, nl in zip(circuit.iter_layers(), base.iter_layers()):
        single = NoisyCircuit(base.qubits, (nl,))
        noisy += _noisy_ops(single, qs)
        ideal += [cirq.MatrixGate(op.unitary()).on(*[qs[q] for q in op.qubits]) for op in layer.operations]
        t_ns = max((model["gates"][op.gate]["duration_ns"] for op in layer.operations), default=0.0)
        busy = {tuple(sorted(op.qubits)) for op in layer.operations if len(op.qubits) == 2}
        for (a, b), khz in zz.items():
            if (a, b) not in busy and t_ns > 0:
                noisy.append(cirq.CZPowGate(exponent=2 * khz * 1e3 * t_ns * 1e-9).on(qs[a], qs[b]))
    order = qs + anc
    psi = cirq.Simulator(dtype=np.complex128).simulate(cirq.Circuit(ideal), qubit_order=order).final_state_vector
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(cirq.Circuit(noisy), qubit_order=order).final_density_matrix
    return float(1 - np.real(psi.conj() @ rho @ psi))


@pytest.mark.parametrize("seed", range(30))
def test_exact_engine_matches_cirq_with_zz(seed):
    circuit, model, zz = _random_case(seed)
    base = attach(circuit, ErrorModel.from_dict(model))  # the gates' own errors, no context
    assert not any(layer.context for layer in base.iter_layers())
    couplings = {f"q[{a}],q[{b}]": {"zz_khz": v} for (a, b), v in zz.items()}
    noisy = attach(circuit, ErrorModel.from_dict(model | {"couplings": couplings}))
    want = _cirq_choi_infidelity(circuit, base, zz, model)
    assert _run("exact", noisy).infidelity == pytest.approx(want, abs=1e-8)


@pytest.mark.parametrize("metric", ["process", "state"])
@pytest.mark.parametrize("seed", range(5))
def test_first_order_engines_agree_with_exact_on_small_zz(seed, metric):
    # Clifford gates, ZZ only (coherent): generators = clifford (same first order) and both ≈ exact
    rng = np.random.default_rng(100 + seed)
    n = 4
    layers = []
    for _ in range(3):
        ops = [Operation(str(rng.choice(["sx", "h", "x"])), (q,)) for q in range(n) if rng.random() < 0.7]
        layers.append(Layer(tuple(ops)))
        layers.append(Layer((Operation("cz", (0, 1)), Operation("cz", (2, 3))) if rng.random() < 0.5 else (Operation("cz", (1, 2)),)))
    model = ErrorModel.from_dict({"gates": {g: {"duration_ns": DUR[g]} for g in ("sx", "h", "x", "cz")},
                                  "couplings": {"zz_khz": float(rng.uniform(20, 60))}})
    noisy = attach(_circuit(n, Repeat(tuple(layers), 3)), model)
    exact = _run("exact", noisy, metric).infidelity
    gen, cl = _run("generators", noisy, metric), _run("clifford", noisy, metric)
    assert gen.first_order == pytest.approx(cl.first_order, rel=1e-9)
    assert gen.infidelity == pytest.approx(exact, rel=0.02) and cl.infidelity == pytest.approx(exact, rel=0.02)


# ---- reports: families, knobs, naive ----------------------------------------------------------------


def test_families_and_knob_in_khz():
    from budget.analysis.sensitivity import quadratic_form

    model = ErrorModel.from_dict({"gates": {"sx": {"duration_ns": 25.0}, "cz": {"duration_ns": 60.0}},
                                  "couplings": {"q[0],q[1]": {"zz_khz": 150.0}}})
    c = _circuit(3, Repeat((Layer((Operation("sx", (0,)), Operation("sx", (1,)))), Layer((Operation("cz", (1, 2)),))), 10))
    qf = quadratic_form(attach(c, model), "process")
    (i,) = [k for k, lab in enumerate(qf.labels) if lab == ("zz q[0],q[1]", ZZ_KNOB)]
    assert knob_in_lab_units(ZZ_KNOB, qf.values_rad[i]) == pytest.approx((150.0, "kHz"))
    # one knob value ζ for layers of different length: first order δᵀAδ equals the engine's value
    assert qf.values_rad[i] ** 2 * qf.matrix[i][i] == pytest.approx(_run("clifford", attach(c, model)).first_order, rel=1e-9)


# ---- bad input ------------------------------------------------------------------------------------


@pytest.mark.parametrize("data, match", [
    ({"couplings": {"q[0],q[1]": {"zz_khz": -5.0}}}, r'couplings\."q\[0\],q\[1\]"\.zz_khz = -5\.0 .*must not be negative'),
    ({"couplings": {"zz_khz": "lots"}}, r"couplings\.zz_khz = 'lots' .*expected a number \(kHz\)"),
    ({"couplings": {"q[0]": {"zz_khz": 5.0}}}, r'couplings\."q\[0\]" = .*2 distinct qubit names'),
    ({"couplings": {"q[0],q[1]": {"zz_khz": 5.0}, "q[1], q[0]": {"zz_khz": 6.0}}}, r"already described"),
    ({"couplings": {"q[0],q[1]": {"zz_kHz": 5.0}}}, r"unknown key; did you mean 'zz_khz'"),
    ({"crosstalk": {"q[0]->q[1]": {"fraction": 1.5}}}, r'crosstalk\."q\[0\]->q\[1\]"\.fraction = 1\.5 .*\[-1\.0, 1\.0\]'),
    ({"crosstalk": {"q[0]->q[1]": {"fraction": 0.1, "axis": "w"}}}, r'axis = .w. .*"x", "y" or "z"'),
    ({"crosstalk": {"q[0]->q[1]": {"fraction": 0.1, "gates": ["rz"]}}}, r"driven single-qubit gate"),
    ({"crosstalk": {"q[0]-q[1]": {"fraction": 0.1}}}, r"separated by '->'"),
    ({"bleed": {"x->sx": {"fraction": -2}}}, r'bleed\."x->sx"\.fraction = -2 .*\[-1\.0, 1\.0\]'),
    ({"bleed": {"x": {"fraction": 0.1}}}, r'"PREVIOUS->NEXT"'),
    ({"bleed": {"cz->sx": {"fraction": 0.1}}}, r"driven single-qubit gate"),
    ({"context": [{"gate": "cz", "cphase": 0.1}]}, r"needs a condition on the layer"),
    ({"context": [{"gate": "cz", "with": ["cz q[1]"], "cphase": 0.1}]}, r"2 distinct qubit names"),
    ({"context": [{"gate": "sx", "all_driven": True, "cphase": 0.1}]}, r"context\.0\.cphase = 0\.1 .*two-qubit gates"),
    ({"context": [{"gate": "sx", "all_driven": True}]}, r"names no key of gate sx"),
])
def test_bad_context_values(data, match):
    with pytest.raises(ModelError, match=match):
        ErrorModel.from_dict(data, "lab.toml")


def test_unknown_pair_names_are_caught_against_the_circuit():
    model = ErrorModel.from_dict({"couplings": {"q[0],Q[1]": {"zz_khz": 5.0}}}, "lab.toml")
    with pytest.raises(ModelError, match=r'couplings\."q\[0\],Q\[1\]" in lab.toml: qubit .Q\[1\]. .*did you mean'):
        attach(_circuit(2, Layer((Operation("x", (0,)),))), model)


def test_measuring_zz_is_priced_with_the_idle_time():
    # A ZZ Ramsey repeats idle spans of T; per unit of zz_rad_per_us the conditional phase of one
    # span is (T/1 µs)·[eigenvalue spread of (ZI + IZ - ZZ)/4] = (T/1 µs)·(1/4 - (-3/4)) (hand derivation).
    from budget.analysis.phase_estimation import find_probes

    model = ErrorModel.from_dict({"gates": {"id": {"duration_ns": 200.0}}, "couplings": {"q[0],q[1]": {"zz_khz": 20.0}}})
    probes = find_probes(attach(_circuit(2, Layer((Operation("id", (0,)),))), model))
    (probe,) = probes[("zz q[0],q[1]", ZZ_KNOB)]
    assert probe.duration_ns == 200.0
    assert probe.phase_per_rad == pytest.approx(0.2, rel=1e-12)


# ---- crosstalk and bleed against cirq: seeded random circuits -------------------------------------

_X = np.array([[0, 1], [1, 0]], complex)
_Z = np.diag([1.0 + 0j, -1.0])
_AXIS = {"x": _X, "y": np.array([[0, -1j], [1j, 0]]), "z": _Z, "h": (_X + _Z) / np.sqrt(2)}
# a pulse's rotation angle and axis, from the textbook forms x = i·Rx(π), sx = e^{iπ/4}·Rx(π/2),
# h = i·exp(-i (π/2)(X + Z)/√2), rx(θ) = Rx(θ) (common knowledge, no source)
_PULSE = {"x": (lambda p: np.pi, "x"), "sx": (lambda p: np.pi / 2, "x"), "h": (lambda p: np.pi, "h"),
          "rx": (lambda p: p[0], "x")}


def _rotation(angle, axis):
    """exp(-i angle n·σ/2) for the unit axis n (σ_n = the axis matrix above), as a cirq gate."""
    m = _AXIS[axis]
    return cirq.MatrixGate(np.cos(angle / 2) * np.eye(2) - 1j * np.sin(angle / 2) * m)


def _random_spill_case(seed, spill=0.2):
    rng = np.random.default_rng(1000 + seed)
    n = 3

    def layer():
        free, ops = list(rng.permutation(n)), []
        while free:
            if len(free) >= 2 and rng.random() < 0.25:
                ops.append(Operation("cz", (int(free.pop()), int(free.pop()))))
            elif rng.random() < 0.8:
                g = str(rng.choice(["sx", "x", "h", "rx"]))
                ops.append(Operation(g, (int(free.pop()),), (float(rng.uniform(-3, 3)),) if g == "rx" else ()))
            else:
                free.pop()
        return Layer(tuple(ops))

    items = [layer(), Repeat((layer(), layer()), int(rng.integers(2, 4))), layer()]
    crosstalk = {}
    for s, t in [(a, b) for a in range(n) for b in range(n) if a != b]:
        if rng.random() < 0.5:
            crosstalk[(s, t)] = (float(rng.uniform(-spill, spill)), [None, "x", "y", "z"][int(rng.integers(4))])
    bleed = {(a, b): float(rng.uniform(-spill, spill)) for a in ("sx", "x", "h", "rx") for b in ("sx", "x", "h", "rx")
             if rng.random() < 0.5}
    gates = {"sx": {"duration_ns": 25.0, "overrotation": 0.01}, "x": {"duration_ns": 30.0, "avg_infidelity": 1e-3},
             "h": {"duration_ns": 35.0}, "rx": {"duration_ns": 40.0}, "cz": {"duration_ns": 60.0, "cphase": 0.02}}
    model = {"qubits": {"t1_us": 40.0, "t2_us": 30.0}, "gates": gates}
    context = {
        "crosstalk": {f"q[{s}]->q[{t}]": {"fraction": f} | ({"axis": a} if a else {}) for (s, t), (f, a) in crosstalk.items()},
        "bleed": {f"{a}->{b}": {"fraction": f} for (a, b), f in bleed.items()},
        "couplings": {"q[0],q[1]": {"zz_khz": 300.0}},
    }
    return _circuit(n, *items), model, context, crosstalk, bleed


@pytest.mark.parametrize("seed", range(10))
def test_exact_engine_matches_cirq_with_crosstalk_and_bleed(seed):
    circuit, model, context, crosstalk, bleed = _random_spill_case(seed)
    base = attach(circuit, ErrorModel.from_dict(model))
    noisy = attach(circuit, ErrorModel.from_dict(model | context))
    n = circuit.num_qubits
    qs, anc = cirq.LineQubit.range(n), cirq.LineQubit.range(n, 2 * n)
    prep = [cirq.H(a) for a in anc] + [cirq.CNOT(a, q) for a, q in zip(anc, qs)]
    ideal, ops = list(prep), list(prep)
    prev = {}
    for layer, nl in zip(circuit.iter_layers(), base.iter_layers()):
        now = {op.qubits[0]: op for op in layer.operations if len(op.qubits) == 1}
        for q, b in sorted(now.items()):  # bleed of the pulse before, then the layer
            a = prev.get(q)
            if a is not None and (a.gate, b.gate) in bleed:
                theta, axis = _PULSE[a.gate]
                ops.append(_rotation(bleed[(a.gate, b.gate)] * theta(a.params), axis).on(qs[q]))
        ops += _noisy_ops(NoisyCircuit(base.qubits, (nl,)), qs)
        ideal += [cirq.MatrixGate(op.unitary()).on(*[qs[q] for q in op.qubits]) for op in layer.operations]
        for s, op in sorted(now.items()):  # crosstalk in the order of the source qubits
            for t in range(n):
                if (s, t) in crosstalk:
                    f, axis = crosstalk[(s, t)]
                    theta, own = _PULSE[op.gate]
                    ops.append(_rotation(f * theta(op.params), axis or own).on(qs[t]))
        t_ns = max((model["gates"][op.gate]["duration_ns"] for op in layer.operations), default=0.0)
        if t_ns and not any(set(op.qubits) == {0, 1} for op in layer.operations):
            ops.append(cirq.CZPowGate(exponent=2 * 300e3 * t_ns * 1e-9).on(qs[0], qs[1]))
        prev = now
    order = qs + anc
    psi = cirq.Simulator(dtype=np.complex128).simulate(cirq.Circuit(ideal), qubit_order=order).final_state_vector
    rho = cirq.DensityMatrixSimulator(dtype=np.complex128).simulate(cirq.Circuit(ops), qubit_order=order).final_density_matrix
    want = float(1 - np.real(psi.conj() @ rho @ psi))
    assert _run("exact", noisy).infidelity == pytest.approx(want, abs=1e-8)


def test_heat_map_puts_context_errors_in_the_column_of_their_layer():
    # columns are circuit layers; a ZZ error sits in its layer's column, split over its two qubits;
    # its local infidelity is that of diag(1, 1, 1, e^{iφ}) (see _cphase_infidelity)
    from budget.analysis.heatmap import error_map

    model = ErrorModel.from_dict({"gates": {"id": {"duration_ns": 1000.0}}, "couplings": {"q[0],q[1]": {"zz_khz": 100.0}}})
    noisy = attach(_circuit(3, Layer((Operation("id", (2,)),)), Layer((Operation("rz", (2,), (0.1,)),))), model)
    m = error_map(noisy)
    assert m.columns == ("L1", "L2")
    e = _cphase_infidelity(2 * np.pi * 0.1)
    assert m.values[:, 0] == pytest.approx([e / 2, e / 2, 0.0], abs=1e-12)
    assert m.values[:, 1] == pytest.approx([0.0, 0.0, 0.0], abs=1e-15)


def test_random_compiling_puts_no_frames_around_context_errors():
    # two cz layers, each with ZZ context errors: frames (before and after) may dress the
    # two gate layers only, so at most 4 frame layers, and 4 for most draws; dressing the context
    # errors (a layer of their own each in the copy) too would give up to 8
    from budget.analysis.randomized import FRAME, compiled_copy

    model = ErrorModel.from_dict({"gates": {"cz": {"duration_ns": 60.0}}, "couplings": {"zz_khz": 100.0}})
    noisy = attach(_circuit(3, Layer((Operation("cz", (0, 1)),)), Layer((Operation("cz", (1, 2)),))), model)
    counts = []
    for seed in range(20):
        copy, _ = compiled_copy(noisy, np.random.default_rng(seed))
        counts.append(sum(any(op.family == FRAME for op in l.operations) for l in copy.body))
        assert sum(bool(l.context) for l in copy.body) == 2
    assert max(counts) == 4


@pytest.mark.parametrize("seed", range(5))
def test_generators_engine_agrees_with_exact_on_small_crosstalk_and_bleed(seed):
    # small spills (|f| <= 0.01), no ZZ, no relaxation: first order within 1 % of exact, and the
    # spills are no small part of the total (they add more than 5 % to the gates' own errors)
    circuit, model, context, _, _ = _random_spill_case(seed, spill=0.01)
    model, context = {"gates": model["gates"]}, {k: v for k, v in context.items() if k != "couplings"}
    noisy = attach(circuit, ErrorModel.from_dict(model | context))
    exact = _run("exact", noisy).infidelity
    assert exact > 1.05 * _run("exact", attach(circuit, ErrorModel.from_dict(model))).infidelity
    assert _run("generators", noisy).infidelity == pytest.approx(exact, rel=0.01)
