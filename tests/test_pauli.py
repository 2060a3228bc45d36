"""The pauli engine (sparse Pauli propagation) against references outside it.

- the generators engine (dense matrices and state vectors, a different code path) on 110 seeded
  random non-Clifford circuits: untruncated first-order values equal to 1e-9 relative, both
  metrics; observables against a first-order reference assembled from the generators engine's
  dense pieces (H ψ and the incoherent Heisenberg sum), not from its exponentiated value;
- cirq's state-vector simulator (exact, coherent errors) on a 16- and a 20-qubit Ising Trotter loop,
  within the first-order accuracy stated in docs/methods.md (|e_first - e_exact| ≤ e_exact^1.5);
- the clifford engine on random Clifford circuits with folded blocks, to 1e-10;
- the truncation bound: |truncated - untruncated| ≤ bound on random cases, and halving the
  threshold moves the value by no more than the previous bound.
"""

from __future__ import annotations

import json

import cirq
import numpy as np
import pytest
from typer.testing import CliRunner

from budget.cli import app
from budget.engines import get_engine
from budget.engines.matrices.channels import by_family, content_cache
from budget.engines.generators.dense import DensePropagator
from budget.engines.generators.observables import IncoherentObservables, observable_vector
from budget.engines.generators.states import StatePath
from budget.engines.base import parse_observable
from budget.engines.clifford.engine import CliffordEngine
from budget.engines.generators.engine import GeneratorsEngine
from budget.engines.pauli import PauliEngine
from budget.errors.noisy import NoisyCircuit
from clifford_reference import random_clifford_circuit
from pauli_cases import ising, ising_qasm
from reference import random_noisy_circuit

EXACT = PauliEngine(truncate=0.0)
TAGS = PauliEngine(truncate=0.0, vector_qubits=0)  # state metric through pulled jump tags at any size
FIRST = PauliEngine(truncate=0.0, second_order=False)
GEN = GeneratorsEngine()
OBS = ("Z0", "X1", "Z0Z1", "Y0X1")


def _random(seed: int, n: int) -> NoisyCircuit:
    rng = np.random.default_rng(1000 + seed)
    return random_noisy_circuit(
        rng,
        num_qubits=n,
        num_layers=3 + seed % 3,
        coherent_scale=0.01,
        incoherent=seed % 4 != 0,
        repeat_count=[None, 2, 3, 4][seed % 4],
        pauli_rates=seed % 5 == 1,
    )


def _first_order_observables(c: NoisyCircuit, labels) -> dict[str, float]:
    """i<ψ|[H, O]|ψ> from the generators engine's dense H ψ, plus its incoherent Heisenberg sum."""
    n = c.num_qubits
    content_of = content_cache(n, by_family)
    dense = DensePropagator(n, content_of)
    path = StatePath(c, content_of, dense)
    psi = path.final_state()
    hpsi = sum(path.group_vectors().values(), np.zeros_like(psi))
    inc = IncoherentObservables(n, content_of, dense)
    out = {}
    for label in labels:
        letters = parse_observable(label, n)
        value = -2 * np.vdot(hpsi, observable_vector(letters, psi, n)).imag
        out[label] = float(value + (inc.change(c.body, letters, psi) if c.has_incoherent else 0.0))
    return out


@pytest.mark.parametrize("block", range(11))
def test_untruncated_equals_generators_engine(block):
    """110 circuits of 2-6 qubits (10 per block) plus one of 8-10 qubits per block."""
    seeds = range(10 * block, 10 * block + 10)
    cases = [(_random(s, 2 + s % 5), s) for s in seeds]
    if block < 3:  # 8-10 qubits without repeated blocks (the reference's dense blocks are slow there)
        rng = np.random.default_rng(500 + block)
        cases.append((random_noisy_circuit(rng, num_qubits=8 + block, num_layers=4, coherent_scale=0.01), 500 + block))
    for c, seed in cases:
        for metric in ("process", "state"):
            if metric == "process" and c.num_qubits > 8:
                continue  # dense 4^n process matrices of the reference: slow beyond 8 qubits
            a, b = EXACT.run(c, metric), GEN.run(c, metric)
            assert a.first_order == pytest.approx(b.first_order, rel=1e-9), (seed, metric)
            assert a.details["truncation_bound"] == 0.0
            if metric == "state" and c.num_qubits <= 6:  # the sparse path (jump tags) of large registers
                assert TAGS.run(c, metric).first_order == pytest.approx(b.first_order, rel=1e-9), seed
            assert sum(a.shares.values()) == pytest.approx(a.infidelity, rel=1e-9, abs=1e-15)
        if seed % 3 == 0 and c.num_qubits <= 6:
            labels = tuple(o for o in OBS if max(map(int, "".join(ch if ch.isdigit() else " " for ch in o).split())) < c.num_qubits)
            want = _first_order_observables(c, labels)
            for metric in ("process", "state"):
                # the first-order definition (by default the coherent change goes beyond it:
                # tests/test_pauli_observables_order.py)
                got = FIRST.run(c, metric, observables=labels).observable_errors
                for label in labels:
                    assert got[label] == pytest.approx(want[label], rel=1e-9, abs=1e-13), (seed, label)


@pytest.mark.parametrize("metric", ["process", "state"])
def test_quadratic_form_equals_generators_engine(metric):
    for seed in range(4):
        c = _random(200 + seed, 3)
        qa, qb = EXACT.quadratic_form(c, metric), GEN.quadratic_form(c, metric)
        assert qa.labels == qb.labels
        assert np.allclose(qa.matrix, qb.matrix, rtol=1e-9, atol=1e-14)
        assert np.allclose(qa.values_rad, qb.values_rad)
        assert qa.floor == pytest.approx(qb.floor, rel=1e-9, abs=1e-15)
        e = qa.values_rad @ qa.matrix @ qa.values_rad + qa.floor
        assert e == pytest.approx(EXACT.run(c, metric).first_order, rel=1e-9)


def _cirq_state_infidelity(c: NoisyCircuit) -> float:
    """1 - |<ψ|χ>|² from cirq.Simulator: ideal gates, and ideal gates each followed by its exact
    coherent error unitary (the noisy operation's matrix)."""
    qs = cirq.LineQubit.range(c.num_qubits)
    ideal, noisy = [], []
    for layer in c.iter_layers():
        for nop in layer.operations:
            g = cirq.MatrixGate(nop.op.unitary()).on(*[qs[q] for q in nop.qubits])
            ideal.append(g)
            noisy += [g, cirq.MatrixGate(nop.coherent).on(*[qs[q] for q in nop.qubits])]
    sim = cirq.Simulator(dtype=np.complex128)
    psi = sim.simulate(cirq.Circuit(ideal), qubit_order=qs).final_state_vector
    chi = sim.simulate(cirq.Circuit(noisy), qubit_order=qs).final_state_vector
    return float(1 - abs(np.vdot(psi, chi)) ** 2)


@pytest.mark.parametrize(("n", "steps", "scale"), [(16, 3, 1.0), (16, 3, 5.0), (20, 2, 3.0)])
def test_ising_loop_against_cirq_state_vector(n, steps, scale):
    """First order is accurate to relative order sqrt(e) (docs/methods.md): the neglected terms are
    the quartic term of the exponential and the second-order Magnus commutators."""
    c = ising(n, steps, incoherent=False, scale=scale)
    exact = _cirq_state_infidelity(c)
    r = EXACT.run(c, "state")
    assert abs(r.first_order - exact) <= exact**1.5
    assert abs(r.infidelity - exact) <= exact**1.5
    # n <= 16: read from the state vector in the middle frame, the loop cut at the meeting point
    block = r.details["repeated_blocks"][0]
    assert (block["count"], block["mode"], block.get("cut_at_meeting_point", False)) == (steps, "cycles", n <= 16)


@pytest.mark.parametrize("seed", range(8))
def test_clifford_circuits_equal_the_clifford_engine(seed):
    rng = np.random.default_rng(300 + seed)
    relax = seed % 2 == 0  # the clifford engine twirls relaxation in the state metric; jumps here
    c = random_clifford_circuit(rng, 2 + seed % 4, layers=4, repeat=[None, 3, 5, 40][seed % 4], nested=seed % 3 == 0,
                                relaxation=relax, rates=seed % 3 == 1)
    cl = CliffordEngine(qubit_map=False, second_order=False)  # first order on both sides
    for metric in ("process",) if relax else ("process", "state"):
        a, b = FIRST.run(c, metric), cl.run(c, metric)
        assert a.first_order == pytest.approx(b.first_order, rel=1e-10, abs=1e-15)
        assert a.infidelity == pytest.approx(b.infidelity, rel=1e-10, abs=1e-15)
        for f, v in b.shares.items():
            assert a.shares[f] == pytest.approx(v, rel=1e-10, abs=1e-15)


@pytest.mark.parametrize(("metric", "vq"), [("process", 16), ("state", 16), ("state", 0)])
def test_truncation_bound_is_honest(metric, vq):
    for seed in range(6):
        c = _random(400 + seed, 5 + seed % 2)
        exact = EXACT.run(c, metric, observables=("Z0", "X1Z2"))
        h = max(abs(v) for layer in c.distinct_layers() for nop in layer.operations for v in nop.hamiltonian.values())
        previous = None
        for k in range(1, 6):
            eps = h * 10.0 ** (-k / 2)
            r = PauliEngine(truncate=eps, vector_qubits=vq).run(c, metric, observables=("Z0", "X1Z2"))
            bound = r.details["truncation_bound"]
            assert abs(r.first_order - exact.first_order) <= bound * (1 + 1e-9) + 1e-15
            for o in ("Z0", "X1Z2"):
                ob = r.details["observable_truncation_bounds"][o]
                assert abs(r.observable_errors[o] - exact.observable_errors[o]) <= ob * (1 + 1e-9) + 1e-15
            half = PauliEngine(truncate=eps / 2, vector_qubits=vq).run(c, metric)
            assert abs(half.first_order - r.first_order) <= bound * (1 + 1e-9) + 1e-15
            previous = bound
        assert previous is not None


@pytest.mark.parametrize(("metric", "steps"), [("process", 8), ("state", 2)])
def test_default_threshold_meets_its_target_on_a_wide_loop(metric, steps):
    c = ising(40, steps)
    r = PauliEngine().run(c, metric)
    assert 0 < r.details["truncation_bound"] <= 0.01 * r.first_order
    assert r.details["truncate"] > 0 and r.details["pauli_terms_max"] > 0


def test_fixed_point_block_stops_early():
    """An error-free block of phase gates leaves a Z error unchanged (diagonal gates commute with
    Z), so the carried sum is a fixed point after one cycle; the value must not depend on the count
    (generators engine as reference)."""
    from budget.circuit.qasm import parse_qasm
    from budget.errors.attach import attach
    from budget.errors.model import ErrorModel

    text = 'OPENQASM 3.0;\ninclude "stdgates.inc";\nqubit[2] q;\nrz(0.3) q[0];\nfor int i in [1:100000] { p(0.7) q[0]; p(0.2) q[1]; }\n'
    c = attach(parse_qasm(text), ErrorModel.from_dict({"gates": {"rz": {"z_phase": [0.01]}}}))
    for metric in ("process", "state"):
        r = EXACT.run(c, metric)
        block = r.details["repeated_blocks"][0]
        assert (block["count"], block["mode"]) == (100000, "fixed point")
        # the process metric cuts the block at its meeting point: one cycle walked on each side
        assert block["cycles_walked"] == (1 if metric == "state" else 2)
        assert r.first_order == pytest.approx(GEN.run(c, metric).first_order, rel=1e-12, abs=1e-16)


def test_twirled_and_randomly_compiled_variants_run_with_the_pauli_engine(tmp_path):
    from budget.analysis.run import analyze

    path = tmp_path / "ising.qasm"
    path.write_text(ising_qasm(4, 2))
    from pauli_cases import ising_model

    a = analyze(str(path), ising_model(), engine="pauli", compare_twirled=True)
    b = analyze(str(path), ising_model(), engine="generators", compare_twirled=True)
    assert a.engine == "pauli"
    assert a.twirled_infidelity == pytest.approx(b.twirled_infidelity, rel=1e-9)
    from budget.analysis.randomized import ensemble as run_ensemble
    from budget.circuit.qasm import read_qasm
    from budget.errors.attach import attach
    from budget.errors.model import ErrorModel

    noisy = attach(read_qasm(path), ErrorModel.from_dict(ising_model()))
    ens = run_ensemble(noisy, count=3, seed=1, metric="process", engine="pauli")
    ens_g = run_ensemble(noisy, count=3, seed=1, metric="process", engine="generators")
    assert np.allclose(sorted(ens.values), sorted(ens_g.values), rtol=2e-2)


def test_cli_engine_pauli_writes_the_truncation_fields(tmp_path):
    qasm = tmp_path / "ising.qasm"
    qasm.write_text(ising_qasm(30, 2))
    model = tmp_path / "lab.toml"
    model.write_text('[gates.cx]\noverrotation = 0.004\navg_infidelity = 2e-5\n[gates.rx]\noverrotation = 0.002\n')
    out = tmp_path / "r.json"
    res = CliRunner().invoke(app, ["analyze", str(qasm), "-e", str(model), "--engine", "pauli", "--truncate", "0", "--json", str(out)])
    assert res.exit_code == 0, res.output
    data = json.loads(out.read_text())
    assert data["engine"] == "pauli" and data["actual"]["truncation_bound"] == 0.0
    assert data["details"]["truncate"] == 0.0 and data["details"]["pauli_terms_max"] > 0
    res = CliRunner().invoke(app, ["analyze", str(qasm), "-e", str(model), "--engine", "pauli", "--truncate", "-1"])
    assert res.exit_code == 2 and "truncate" in res.output
    auto = CliRunner().invoke(app, ["analyze", str(qasm), "-e", str(model), "--json", str(out)])
    assert auto.exit_code == 0, auto.output
    assert json.loads(out.read_text())["engine"] == "pauli"


def test_registered_under_its_name():
    assert get_engine("pauli").name == "pauli"


@pytest.mark.parametrize("seed", range(4))
def test_clifford_block_inside_a_non_clifford_circuit_is_folded_by_its_period(seed):
    """Non-Clifford layers around a Clifford block repeated 37 or 1001 times: the block is folded
    by its period (walked r cycles) and the first order equals the generators engine's (periodic
    closed form, a different method)."""
    from clifford_reference import random_layer as clifford_layer
    from budget.errors.noisy import NoisyRepeat

    rng = np.random.default_rng(700 + seed)
    n = 3 + seed % 2
    outside = random_noisy_circuit(rng, num_qubits=n, num_layers=2, coherent_scale=0.01, incoherent=seed % 2 == 0)
    block = NoisyRepeat(tuple(clifford_layer(rng, n, scale=0.01, relaxation=seed % 2 == 0) for _ in range(2)), [37, 1001][seed % 2])
    c = NoisyCircuit(outside.qubits, (outside.body[0], block, outside.body[1]))
    for metric, engine in (("process", EXACT), ("state", EXACT), ("state", TAGS)):
        a, b = engine.run(c, metric), GEN.run(c, metric)
        assert a.first_order == pytest.approx(b.first_order, rel=1e-9), metric
        mode = a.details["repeated_blocks"][0]
        # the middle frame (process metric; state metric on small registers) cuts the block at its
        # meeting point and folds each side by the period; the pulled sum (TAGS) folds it once
        walked = mode["period"] * (1 if engine is TAGS else 2)
        assert mode["mode"] == "period" and mode["cycles_walked"] == walked < block.count
    if c.has_incoherent and block.count > 64:
        return  # the reference samples 64 repetitions of the incoherent observable sum beyond 64
    labels = ("Z0", "X1Z2")
    got = FIRST.run(c, "state", observables=labels).observable_errors  # first-order definition
    want = _first_order_observables(c, labels)
    for label in labels:
        assert got[label] == pytest.approx(want[label], rel=1e-9, abs=1e-13)


def test_too_many_terms_is_one_clear_refusal(monkeypatch):
    import budget.engines.pauli._sweep as sweep
    from budget.problems import TooLargeError

    monkeypatch.setattr(sweep, "MAX_TERMS", 50)
    with pytest.raises(TooLargeError, match="more than 50 Pauli terms"):
        PauliEngine(truncate=0.0).run(ising(8, 3), "process")


def test_estimate_grows_with_depth_and_meets_the_measured_order():
    """estimate_seconds counts rows through a growth model (no allocation): it must grow with the
    number of Trotter steps, and on a 40-qubit loop stay within a factor 30 of the measured CPU time
    (an order-of-magnitude estimate for auto; common practice, no source)."""
    import time

    engine = PauliEngine()
    for metric in ("process", "state"):
        est = [engine.estimate_seconds(ising(40, steps), metric) for steps in (2, 4, 6, 8)]
        assert all(a < b for a, b in zip(est, est[1:])), (metric, est)
    c = ising(40, 8)
    start = time.process_time()
    PauliEngine(truncate=1e-5).run(c, "process")
    took = time.process_time() - start
    guess = engine.estimate_seconds(c, "process")
    assert took / 30 <= guess <= 30 * max(took, 0.05), (guess, took)
