"""Second order in the effective generator (design.md §8, "Orders"; issue 10 items 1 and 2).

References outside the engines: cirq unitaries and numpy matrix powers (tests/echo_reference.py),
a direct numpy sum of the Magnus/BCH second-order term over the unrolled circuit, and the values
the issue quotes from exact simulation (checked here against cirq as well).
"""

from __future__ import annotations

import functools

import numpy as np
import pytest
from echo_reference import (
    as_circuit,
    cancelled_cycle,
    cpmg_cycle,
    cycle_unitaries,
    infidelity,
    op,
    repeated,
    xy4_cycle,
)
from reference import pauli_matrix

from budget import analyze
from budget.analysis.closed_loop import close_loop
from budget.analysis.sensitivity import quadratic_form
from budget.analysis.tolerances import tolerances
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel
from budget.engines.escalation import escalate
from budget.engines.base import EngineResult
from budget.engines.clifford.engine import CliffordEngine
from budget.engines.exact.engine import ExactEngine
from budget.engines.generators.engine import GeneratorsEngine
from budget.engines.pauli.engine import PauliEngine
from budget.engines.matrices.periodic import cross_cycle_sum
from budget.errors.fidelity import naive_infidelity
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyRepeat

GEN = GeneratorsEngine()
CLIFF = CliffordEngine(qubit_map=False)
XY4 = {"gates": {"x": {"overrotation": 0.02}, "y": {"overrotation": 0.02}}}


def _xy4_reference(count: int, metric: str) -> float:
    """x, y, x, y with over-rotation 0.02 (h = 0.01 on the gate's axis), by cirq."""
    cyc = tuple(NoisyLayer((op(g, (0,), {a: 0.01}),), (), 0.0) for g, a in (("x", "X"), ("y", "Y"), ("x", "X"), ("y", "Y")))
    u, v = repeated(("q[0]",), cyc, count)
    return infidelity(u, v, metric)


def test_cross_cycle_closed_form_equals_the_direct_double_sum():
    # -(i/2) Σ_{k<l} [U^k L U^-k, U^l R U^-l] summed directly (numpy) against the closed form,
    # for generic, degenerate (Clifford-like) and identity cycles
    rng = np.random.default_rng(3)
    for d, kind in [(2, "generic"), (4, "generic"), (4, "degenerate"), (2, "identity")]:
        q, _ = np.linalg.qr(rng.normal(size=(d, d)) + 1j * rng.normal(size=(d, d)))
        if kind == "generic":
            u = q
        elif kind == "degenerate":
            u = q @ np.diag(np.exp(1j * np.pi / 2 * rng.integers(0, 4, d))) @ q.conj().T
        else:
            u = np.eye(d)
        a, b = (rng.normal(size=(d, d)) + 1j * rng.normal(size=(d, d)) for _ in range(2))
        left, right = a + a.conj().T, b + b.conj().T
        for count in (1, 2, 7, 30):
            f = lambda k, x: np.linalg.matrix_power(u, k) @ x @ np.linalg.matrix_power(u.conj().T, k)  # noqa: E731
            direct = sum((-0.5j * (f(k, left) @ f(m, right) - f(m, right) @ f(k, left)) for m in range(count) for k in range(m)), np.zeros((d, d), complex))
            assert np.allclose(cross_cycle_sum(u, left, right, count), direct, atol=1e-9), (kind, count)


@pytest.mark.parametrize(
    "count, metric, quoted",
    [(300, "process", 3.595e-3), (1000, "process", 0.03947), (300, "state", 7.19e-7)],
)
def test_xy4_echo_of_the_issue(count, metric, quoted):
    # circuits/echo_xy4.qasm with over-rotation 0.02 on x and y: the first order cancels in every
    # cycle; values quoted in issue 10 from exact simulation, recomputed here with cirq
    ref = _xy4_reference(count, metric)
    assert ref == pytest.approx(quoted, rel=2e-3)
    r = analyze("circuits/echo_xy4.qasm", XY4, cycles=count, metric=metric, engine="generators")
    assert r.actual_infidelity == pytest.approx(ref, rel=1e-3)
    assert any("cancel" in w for w in r.warnings)
    # the pauli engine sums every order on these one-qubit light cones, and says the value rests on a
    # cancellation, as the other engines do
    p = analyze("circuits/echo_xy4.qasm", XY4, cycles=count, metric=metric, engine="pauli")
    assert p.actual_infidelity == pytest.approx(ref, rel=1e-6)
    assert p.details["rests_on_cancellation"] and p.details["coherent_order"].startswith("all orders")
    assert any("cancel" in w and "every order" in w for w in p.warnings)
    assert not any("no longer small" in w for w in p.warnings)
    if metric == "process":  # the clifford engine reaches second order: ±1 % here
        c = analyze("circuits/echo_xy4.qasm", XY4, cycles=count, metric=metric, engine="clifford")
        assert c.actual_infidelity == pytest.approx(ref, rel=0.01)
        assert c.details["rests_on_cancellation"] and c.details["second_order_share"] > 0.99


def test_xy4_on_24_qubits_with_auto(tmp_path):
    # the same echo on 24 independent qubits: 1 - (1 - e_1)^24 with e_1 from cirq (issue 10: 0.0828)
    path = tmp_path / "xy24.qasm"
    path.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[24];\nx q;\ny q;\nx q;\ny q;\n')
    r = analyze(path, XY4, cycles=300, metric="process", engine="auto")
    want = 1 - (1 - _xy4_reference(300, "process")) ** 24
    assert want == pytest.approx(0.0828, abs=5e-5)
    assert r.engine == "clifford"
    assert r.actual_infidelity == pytest.approx(want, rel=0.01)
    # every order on 24 one-qubit components; the map shows each qubit's own echo (cirq, 1 qubit)
    assert r.details["coherent_order"] == "all orders (components of at most 1 qubit)"
    assert r.details["qubit_map"] == pytest.approx({f"q[{i}]": _xy4_reference(300, "process") for i in range(24)}, rel=1e-6)


def test_h_x_h_state_metric(tmp_path):
    # h; x; h with h over-rotation 0.3, state metric: the first order vanishes on the output
    # (issue 10: 8.9e-16 before, 4.99e-4 exact); reference by cirq
    path = tmp_path / "hxh.qasm"
    path.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[1];\nh q[0];\nx q[0];\nh q[0];\n')
    model = {"gates": {"h": {"overrotation": 0.3}}}
    exact = analyze(path, model, metric="state", engine="exact").actual_infidelity
    cyc = (
        NoisyLayer((op("h", (0,), {"X": 0.15 / np.sqrt(2), "Z": 0.15 / np.sqrt(2)}),), (), 0.0),
        NoisyLayer((op("x", (0,), {}),), (), 0.0),
        NoisyLayer((op("h", (0,), {"X": 0.15 / np.sqrt(2), "Z": 0.15 / np.sqrt(2)}),), (), 0.0),
    )
    u, v = cycle_unitaries(("q[0]",), cyc)
    ref = infidelity(u, v, "state")
    assert ref == pytest.approx(4.99e-4, rel=2e-3) and exact == pytest.approx(ref, rel=1e-6)
    assert analyze(path, model, metric="state", engine="generators").actual_infidelity == pytest.approx(ref, rel=1e-6)
    assert analyze(path, model, metric="state", engine="clifford").actual_infidelity == pytest.approx(ref, rel=0.05)


def _brute_second_order(n: int, cycle, count: int) -> tuple[np.ndarray, np.ndarray]:
    """H_1 and H_2 = -(i/2) Σ_{j<k} [G_k, G_j] over the unrolled circuit, summed directly with
    numpy (the Magnus/BCH second order; Blanes et al., Phys. Rep. 470, 151 (2009))."""
    qs = tuple(f"q[{i}]" for i in range(n))
    d = 2**n
    ideal = [cycle_unitaries(qs, (NoisyLayer(tuple(op(o.op.gate, o.op.qubits, {}, o.op.params) for o in lay.operations), (), 0.0),))[0] for lay in cycle]
    gens = []
    for lay in cycle:
        g = np.zeros((d, d), complex)
        for nop in lay.operations:
            for p, c in nop.hamiltonian.items():
                letters = ["I"] * n
                for pos, q in enumerate(nop.op.qubits):
                    letters[q] = p[pos]
                g += c * pauli_matrix("".join(letters))
        gens.append(g)
    pushed, rest = [], np.eye(d)
    for k in range(count * len(cycle) - 1, -1, -1):  # push every generator to the end
        j = k % len(cycle)
        pushed.append(rest @ gens[j] @ rest.conj().T)
        rest = rest @ ideal[j]
    h1, h2 = np.zeros((d, d), complex), np.zeros((d, d), complex)
    for g in reversed(pushed):  # time order
        h2 += -0.5j * (g @ h1 - h1 @ g)
        h1 += g
    return h1, h2


def _quadratic(h: np.ndarray) -> float:
    d = h.shape[0]
    return float(np.vdot(h, h).real / d - (np.trace(h).real / d) ** 2)


@functools.lru_cache(maxsize=1)
def _echo_cases() -> tuple:
    """100 seeded echoed cycles (first order cancelled by an identity carrying -H_1, the same
    with up to 10 % left over, x/y/x/y, CPMG-like pairs with inverted pulses, non-Clifford
    cycles cancelled the same way), repeated 10-1000 times, with cirq's infidelities."""
    rng = np.random.default_rng(2026)
    cases = []
    for case in range(100):
        kind = ["cancelled", "cancelled_off", "xy4", "cpmg", "cancelled_non_clifford"][case % 5]
        n = int(rng.integers(1, 3)) if kind.startswith("cancelled") else int(rng.integers(1, 4))
        count = int(np.exp(rng.uniform(np.log(10), np.log(1000))))
        eps = float(rng.uniform(0.2, 1.0) * min(0.01, np.sqrt(0.1 / count)))
        if kind.startswith("cancelled"):
            cyc = cancelled_cycle(rng, n, eps, clifford=kind != "cancelled_non_clifford", exact=kind != "cancelled_off")
        elif kind == "xy4":
            cyc = xy4_cycle(rng, n, eps)
        else:
            cyc = cpmg_cycle(rng, n, eps)
        u, v = repeated(tuple(f"q[{i}]" for i in range(n)), cyc, count)
        refs = {metric: infidelity(u, v, metric) for metric in ("process", "state")}
        cases.append((case, kind, n, count, cyc, refs))
    return tuple(cases)


ECHO_ENGINES = {
    "generators": GEN,
    "clifford": CLIFF,
    "pauli": PauliEngine(truncate=0.0),
}


@pytest.mark.parametrize("name", ["generators", "clifford", "pauli"])
def test_random_echoed_blocks_against_cirq(name):
    """Issue 10's check: 100 seeded echoed blocks repeated 10-1000 times; the engine within 5 % of
    cirq wherever the exact infidelity is at most 0.02 (the clifford engine on the Clifford
    cycles; the others on all of them), both metrics."""
    engine = ECHO_ENGINES[name]
    checked = 0
    for case, kind, n, count, cyc, refs in _echo_cases():
        if name == "clifford" and kind == "cancelled_non_clifford":
            continue
        c = as_circuit(n, cyc, count)
        for metric, ref in refs.items():
            if ref > 0.02:
                continue
            got = engine.run(c, metric).infidelity
            assert got == pytest.approx(ref, rel=0.05, abs=1e-12), (case, kind, metric, got, ref)
            checked += 1
    assert checked >= (150 if name != "clifford" else 120)


def test_clifford_second_order_terms_equal_the_direct_sum():
    """The clifford engine's second-order Pauli coefficients (its leading-order value Σ_P c_P² for
    H = H_1 + H_2) against the Magnus/BCH second order summed directly with numpy over the
    unrolled circuit, on the Clifford echoed cycles; where all orders are in reach the reported
    value comes from them, and says so."""
    for case, kind, n, count, cyc, refs in _echo_cases():
        if kind == "cancelled_non_clifford" or refs["process"] > 0.02:
            continue
        r = CLIFF.run(as_circuit(n, cyc, count), "process")
        brute = _brute_second_order(n, cyc, count)
        assert r.details["coherent_leading_order"] == pytest.approx(_quadratic(brute[0] + brute[1]), rel=1e-8, abs=1e-16), (case, kind)
        assert r.details["coherent_order"].startswith("all orders")


def test_clifford_period_fold_equals_unrolling_at_second_order():
    # the folded second order (pair weights q + [k < s], budget/engines/clifford/second.py) against the
    # same engine on the unrolled layers
    rng = np.random.default_rng(77)
    engine = CliffordEngine(qubit_map=False, orbit_baby=0)
    for trial in range(6):
        n = 1 + trial % 2
        cyc = cancelled_cycle(rng, n, 0.01, clifford=True, exact=trial % 3 != 0)
        count = int(rng.integers(5, 40))
        inner = NoisyRepeat(cyc, 3)
        head = NoisyLayer(tuple(op("h", (q,), {"Y": 0.004}) for q in range(n)), (), 0.0)
        c = NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), (head, NoisyRepeat((head, inner), count), head))
        flat = NoisyCircuit(c.qubits, tuple(c.iter_layers()))
        for metric in ("process", "state"):
            a, b = engine.run(c, metric), engine.run(flat, metric)
            assert a.infidelity == pytest.approx(b.infidelity, rel=1e-9, abs=1e-15), (trial, metric)
            assert a.shares == pytest.approx(b.shares, rel=1e-7, abs=1e-15)
            assert any(f["period"] for f in a.details["folded_blocks"])


def test_generators_shares_add_up_with_the_second_order():
    rng = np.random.default_rng(8)
    for metric in ("process", "state"):
        c = as_circuit(2, cancelled_cycle(rng, 2, 0.01, clifford=False), 200)
        r = GEN.run(c, metric)
        assert sum(r.shares.values()) == pytest.approx(r.infidelity, rel=1e-9)
        assert r.details["second_order_share"] > 0.5 and r.details["cancellation"] < 0.01


@pytest.mark.parametrize("path, cycles", [("circuits/echo_xy4.qasm", 30), ("circuits/parity_cycle.qasm", 5), ("circuits/hopping_trotter.qasm", 2)])
def test_zero_error_models_give_exactly_zero(path, cycles):
    # a model without errors (empty, or every knob at 0): 0.0 exactly (not 2.2e-16, not -0.0)
    for model in ({"gates": {}}, {"gates": {"x": {"overrotation": 0.0}, "h": {"overrotation": 0.0, "avg_infidelity": 0.0}}}):
        for metric in ("process", "state"):
            for engine in ("exact", "generators", "clifford", "auto"):
                if engine == "clifford" and "hopping" in path:
                    continue  # not a Clifford circuit
                r = analyze(path, model, cycles=cycles, metric=metric, engine=engine, observables=("Z0",))
                values = [r.actual_infidelity, r.naive_infidelity, *r.observables.values(), *(f.share for f in r.families)]
                assert all(v == 0.0 and np.copysign(1.0, v) > 0 for v in values), (path, engine, metric, values)


def test_naive_product_of_an_error_free_circuit_is_exactly_zero():
    c = as_circuit(1, (NoisyLayer((op("h", (0,), {}),), (), 0.0),), 10**6)
    value = naive_infidelity(c)
    assert value == 0.0 and np.copysign(1.0, value) > 0


def test_auto_escalates_to_exact_when_the_result_rests_on_a_cancellation():
    c = as_circuit(1, xy4_cycle(np.random.default_rng(1), 1, 0.01), 50)
    leaning = EngineResult("clifford", "process", 1e-6, {}, details={"rests_on_cancellation": True})
    steady = EngineResult("clifford", "process", 1e-6, {}, details={"rests_on_cancellation": False})
    assert isinstance(escalate(c, "process", "auto", leaning), ExactEngine)
    assert escalate(c, "process", "auto", steady) is None
    assert escalate(c, "process", "clifford", leaning) is None  # a named engine is kept


@pytest.mark.parametrize("count, eps", [(300, 0.02), (1000, 0.05)])
def test_orbit_folded_block_carries_the_second_order_within_each_repetition(count, eps):
    # x/y/x/y with random over-rotations on 6 qubits, then an error-free scrambling Clifford
    # (h, s, a cx chain; period 102 > 64 baby steps, so the default engine folds by orbits): the
    # first order cancels in every repetition; cirq's value (64 x 64 unitary powers) against the
    # orbit fold with the second-order terms of each repetition (the commutators between
    # repetitions vanish with the per-repetition first order)
    rng = np.random.default_rng(5)
    n = 6
    scramble = [NoisyLayer((op("h", (0,), {}),) + tuple(op("s", (q,), {}) for q in range(1, n)), (), 0.0)]
    scramble += [NoisyLayer((op("cx", (q, q + 1), {}),), (), 0.0) for q in range(n - 1)]
    cyc = tuple(xy4_cycle(rng, n, eps)) + tuple(scramble)
    c = as_circuit(n, cyc, count)
    u, v = repeated(c.qubits, cyc, count)
    ref = infidelity(u, v, "process")
    r = CLIFF.run(c, "process")
    assert r.details["orbit_folds"] and r.details["orbit_folds"][0]["longest_orbit"] is not None
    assert r.first_order == 0.0 or r.first_order < 1e-6 * ref
    assert r.infidelity == pytest.approx(ref, rel=0.02)
    assert "within each repetition" in r.details["second_order"]


@pytest.mark.parametrize("assume", ["worst", "random"])
def test_tolerances_of_an_echo_from_the_clifford_engine_at_all_orders(assume):
    # x/y/x/y on 4 independent qubits, 300 cycles, over-rotation 0.02 on x and y, target 0.01; the
    # quadratic form sees no effect (the first order cancels), the closed loop runs on the clifford
    # engine (named here; it is what runs beyond the exact engine's reach). Reference: cirq on one
    # qubit with the reported tolerances and signs, 1 - (1 - e_1)^4 for 4 independent qubits.
    n = 4
    layers = tuple(Layer(tuple(Operation(g, (q,)) for q in range(n))) for g in ("x", "y", "x", "y"))
    circuit = StructuredCircuit(tuple(f"q[{i}]" for i in range(n)), (Repeat(layers, 300),))
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": 0.02}, "y": {"overrotation": 0.02}}}))
    qf = quadratic_form(noisy, "process", engine="clifford")
    assert np.max(np.abs(qf.matrix)) < 1e-20  # no first-order effect at all
    report = close_loop(tolerances(qf, 0.01, metric="process", assume=assume), noisy, qf, engine="clifford")
    assert report.closed_loop.engine == "clifford" and {r.order for r in report.rows} == {"second"}
    tol = {r.family: r.tolerance_rad for r in report.rows}

    def exact(sx: float, sy: float) -> float:
        cyc = tuple(NoisyLayer((op(g, (0,), {a: s * tol[g] / 2}),), (), 0.0) for g, a, s in (("x", "X", sx), ("y", "Y", sy), ("x", "X", sx), ("y", "Y", sy)))
        return 1 - (1 - infidelity(*repeated(("q[0]",), cyc, 300), "process")) ** n

    if assume == "worst":
        signs = report.closed_loop.worst_signs
        value = exact(signs["x.overrotation"], signs["y.overrotation"])
    else:
        value = float(np.mean([exact(sx, sy) for sx in (1, -1) for sy in (1, -1)]))
    assert 0.95 * 0.01 <= value <= 1.0001 * 0.01
