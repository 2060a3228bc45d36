"""The clifford engine against outside references.

Sources of truth, none of them the engine's own propagation code:
- dense first order (tests/clifford_reference.py): the generator formulas of Blume-Kohout et al.,
  PRX Quantum 3, 020335 (2022), evaluated with cirq unitaries on up to 5 qubits;
- cirq's DensityMatrixSimulator (tests/reference.py) for the exact infidelity;
- cirq.PauliString.conjugated_by and stim.Tableau for Pauli propagation;
- the generators engine (dense matrices), when present;
- closed forms: N repetitions of a rotation error (design.md §6) and the alternating H case.
"""

from __future__ import annotations

import dataclasses
import itertools

import cirq
import numpy as np
import pytest
import stim

from budget.circuit.clifford_check import is_clifford, local_clifford, operation_clifford
from budget.circuit.ir import Operation
from budget.errors.light_cone import light_cone_circuit
from budget.engines.frame.pauli_frame import Frame, layer_classes, pack_bits, unpack_bits
from budget.engines.frame.walk import Walker
from budget.engines.clifford.engine import CliffordEngine
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation, NoisyRepeat, Relaxation
from budget.problems import TooLargeError
from budget.pauli_algebra import hermitian_sign
from clifford_reference import ONE, TWO, dense_first_order, random_clifford_circuit, random_layer, unrolled
from reference import cirq_infidelity, pauli_matrix

ENGINE = CliffordEngine(qubit_map="always")
FIRST = CliffordEngine(qubit_map="always", second_order=False)  # first-order checks
try:
    from budget.engines.generators.engine import GeneratorsEngine
except ImportError:  # pragma: no cover - depends on the other engine having landed
    GeneratorsEngine = None


# -- the Clifford check --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "gate, params, clifford",
    [
        *[(g, (), True) for g in ["id", "x", "y", "z", "h", "s", "sdg", "sx", "sxdg", *TWO]],
        ("t", (), False),
        ("tdg", (), False),
        ("rx", (np.pi / 2,), True),
        ("ry", (-np.pi,), True),
        ("rz", (3 * np.pi / 2,), True),
        ("p", (np.pi,), True),
        ("u", (np.pi / 2, 0.0, np.pi), True),  # U(π/2, 0, π) = H (common practice, no source)
        ("rx", (0.3,), False),
        ("rx", (np.pi / 2 + 1e-6,), False),
        ("rx", (np.pi / 2 + 1e-12,), True),  # parser rounding passes
        ("cp", (np.pi / 2,), False),  # controlled-S is not Clifford
        ("cp", (np.pi,), True),  # = CZ
        ("rzz", (np.pi / 2,), True),
    ],
)
def test_clifford_check_of_table_gates(gate, params, clifford):
    qubits = (0, 1) if gate in TWO or gate in ("cp", "rzz") else (0,)
    assert is_clifford(Operation(gate, qubits, params)) is clifford


def test_local_tableau_of_h_and_cz():
    # Textbook conjugations (Nielsen & Chuang, Table 10.6): H X H = Z, CZ X_a CZ = X_a Z_b.
    h = local_clifford(cirq.unitary(cirq.H))
    assert h.forward == (((0,), (1,), 0), ((1,), (0,), 0))
    cz = local_clifford(cirq.unitary(cirq.CZ))
    assert cz.forward[0] == ((1, 0), (0, 1), 0)


def test_fits_names_the_first_non_clifford_gate_and_its_line():
    rng = np.random.default_rng(0)
    c = random_clifford_circuit(rng, 3, layers=2)
    bad = NoisyOperation(Operation("t", (2,), line=17), "t", np.eye(2), {})
    c = dataclasses.replace(c, body=c.body + (NoisyLayer((bad,), (), 0.0),), source="lab.qasm")
    reason = ENGINE.fits(c, "state")
    assert reason == "line 17: t on q[2] is not Clifford"  # short: select.py words the refusal
    with pytest.raises(TooLargeError, match="lab.qasm: engine clifford: line 17"):
        ENGINE.run(c, "process")


# -- Pauli propagation against cirq and stim -----------------------------------------------------

_CIRQ = {
    "id": cirq.I, "x": cirq.X, "y": cirq.Y, "z": cirq.Z, "h": cirq.H, "s": cirq.S, "sdg": cirq.S**-1,
    "sx": cirq.X**0.5, "sxdg": cirq.X**-0.5, "cx": cirq.CNOT, "cy": cirq.ControlledGate(cirq.Y),
    "cz": cirq.CZ, "swap": cirq.SWAP, "iswap": cirq.ISWAP,
}  # fmt: skip
_STIM = {
    "id": "I", "x": "X", "y": "Y", "z": "Z", "h": "H", "s": "S", "sdg": "S_DAG", "sx": "SQRT_X",
    "sxdg": "SQRT_X_DAG", "cx": "CX", "cy": "CY", "cz": "CZ", "swap": "SWAP", "iswap": "ISWAP",
}  # fmt: skip


def _random_ops(rng, n, depth):
    layers = []
    for _ in range(depth):
        free, ops = list(rng.permutation(n)), []
        while free:
            if len(free) >= 2 and rng.random() < 0.5:
                ops.append(Operation(str(rng.choice(TWO)), (int(free.pop()), int(free.pop()))))
            else:
                ops.append(Operation(str(rng.choice([g for g in ONE if g in _CIRQ])), (int(free.pop()),)))
        layers.append(ops)
    return layers


def _frame(layers, n, direction):
    f = Frame.identity(n)
    for ops in layers if direction == "pull" else reversed(layers):
        f.apply(layer_classes([(op.qubits, operation_clifford(op)) for op in ops], direction))
    return f


def _row_as_pauli(f: Frame, r: int, n: int) -> tuple[np.ndarray, np.ndarray, int]:
    x, z = unpack_bits(f.x[r], n), unpack_bits(f.z[r], n)
    return x, z, int(hermitian_sign(f.x[r : r + 1], f.z[r : r + 1], f.e[r : r + 1])[0])


@pytest.mark.parametrize("seed", range(2))
def test_frame_matches_cirq_pauli_string_conjugation(seed):
    rng = np.random.default_rng(seed)
    n = 6
    layers = _random_ops(rng, n, 8)
    qs = cirq.LineQubit.range(n)
    ops = [_CIRQ[op.gate].on(*[qs[q] for q in op.qubits]) for layer in layers for op in layer]
    pull = _frame(layers, n, "pull")
    for q, letter in itertools.product(range(n), "XZ"):
        ps = cirq.PauliString({qs[q]: getattr(cirq, letter)})
        for op in reversed(ops):  # V† P V for V = the whole circuit
            ps = ps.conjugated_by(op)
        x, z, sign = _row_as_pauli(pull, q + (n if letter == "Z" else 0), n)
        want = {qs.index(k): str(v) for k, v in ps.items()}
        got = {i: "IXZY"[x[i] + 2 * z[i]] for i in range(n) if x[i] or z[i]}
        assert got == want and sign == int(np.real(ps.coefficient))


def test_frame_matches_stim_tableau_on_sixty_qubits():
    rng = np.random.default_rng(7)
    n = 60
    layers = _random_ops(rng, n, 30)
    circuit = stim.Circuit()
    for layer in layers:
        for op in layer:
            circuit.append(_STIM[op.gate], op.qubits)
    tab = stim.Tableau.from_circuit(circuit)  # tab(P) = U P U†
    for direction, t in (("push", tab), ("pull", tab.inverse())):
        f = _frame(layers, n, direction)
        for q in range(n):
            for r, out in ((q, t.x_output(q)), (n + q, t.z_output(q))):
                xs, zs = out.to_numpy()
                x, z, sign = _row_as_pauli(f, r, n)
                assert np.array_equal(x.astype(bool), xs) and np.array_equal(z.astype(bool), zs)
                assert sign == int(out.sign.real)


# -- first-order values against the dense reference ----------------------------------------------

CASES = [
    dict(seed=s, n=2 + s % 4, repeat=[None, 3, 5][s % 3], nested=s % 2 == 1, rates=s % 4 == 0) for s in range(10)
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: f"seed{c['seed']}")
def test_first_order_matches_dense_reference(case):
    rng = np.random.default_rng(case["seed"])
    c = random_clifford_circuit(rng, case["n"], layers=4, repeat=case["repeat"], nested=case["nested"], rates=case["rates"])
    obs = ("Z0", "X1Y0")
    ref = dense_first_order(c, obs)
    for metric in ("process", "state"):
        r = FIRST.run(c, metric, observables=obs)
        assert r.first_order == pytest.approx(ref[metric], abs=1e-12)
        fam = r.details["first_order_family_shares"]
        for f, v in ref["shares"][metric].items():
            assert fam.get(f, 0.0) == pytest.approx(v, abs=1e-12)
        assert sum(r.shares.values()) == pytest.approx(r.infidelity, abs=1e-12)
        for o in obs:
            assert r.observable_errors[o] == pytest.approx(ref["observables"][o], abs=1e-12)
    assert sum(r.details["qubit_map"].values()) >= ref["process"] - 1e-12  # each error counted per qubit it touches


def _dense_marginals(c: NoisyCircuit) -> np.ndarray:
    """Σ over Paulis acting on q of (h_P,total² + p_P,total) at the output, by dense Pauli decomposition."""
    n = c.num_qubits
    qs = cirq.LineQubit.range(n)
    layers = list(c.iter_layers())
    d = 2**n
    suffix = np.eye(d, dtype=complex)
    h = np.zeros((d, d), complex)
    stoch = []
    from clifford_reference import _embed, _terms

    for layer in reversed(layers):
        for _, kind, lab, qubits, v in _terms(layer):
            q = suffix @ _embed(lab, qubits, n) @ suffix.conj().T
            if kind == "h":
                h += v * q
            else:
                stoch.append((v, q))
        u = cirq.Circuit([cirq.I(q) for q in qs] + [cirq.MatrixGate(nop.op.unitary()).on(*[qs[q] for q in nop.qubits]) for nop in layer.operations]).unitary(qubit_order=qs)
        suffix = suffix @ u
    out = np.zeros(n)
    for letters in itertools.product("IXYZ", repeat=n):
        p = pauli_matrix("".join(letters))
        w = abs(np.trace(p @ h) / d) ** 2 + sum(v for v, q in stoch if abs(np.trace(p @ q) / d) > 0.5)
        out += w * (np.array(letters) != "I")
    return out


@pytest.mark.parametrize("seed", range(3))
def test_qubit_map_is_the_dense_output_marginal(seed):
    rng = np.random.default_rng(100 + seed)
    c = random_clifford_circuit(rng, 3, layers=3, repeat=3 if seed else None)
    got = np.array(list(ENGINE.run(c, "process").details["qubit_map"].values()))
    assert np.allclose(got, _dense_marginals(c), atol=1e-12)


@pytest.mark.skipif(GeneratorsEngine is None, reason="budget/engines/generators/engine.py has not landed yet")
@pytest.mark.parametrize("seed", range(6))
def test_agrees_with_generators_engine_to_first_order(seed):
    rng = np.random.default_rng(200 + seed)
    relax = seed % 2 == 0  # generators uses jump operators for relaxation in the state metric
    c = random_clifford_circuit(rng, 2 + seed % 3, layers=4, repeat=[None, 3, 4][seed % 3], relaxation=relax, rates=seed == 1)
    gen = GeneratorsEngine()
    for metric in ("process",) if relax else ("process", "state"):
        a, b = ENGINE.run(c, metric), gen.run(c, metric)
        assert a.first_order == pytest.approx(b.first_order, abs=1e-10)
        for key in ("coherent_first_order", "stochastic_first_order"):
            assert a.details[key] == pytest.approx(b.details[key], abs=1e-10)
        qa, qb = ENGINE.quadratic_form(c, metric), gen.quadratic_form(c, metric)
        assert qa.labels == qb.labels
        assert np.allclose(qa.matrix, qb.matrix, atol=1e-10) and qa.floor == pytest.approx(qb.floor, abs=1e-10)
        assert np.allclose(qa.values_rad, qb.values_rad)
    # shares and observables at first order: coherent-only, tiny errors (second order < 1e-12)
    small = random_clifford_circuit(rng, 3, layers=4, repeat=3, scale=1e-6, depolarizing=False, relaxation=False)
    for metric in ("process", "state"):
        a, b = ENGINE.run(small, metric, observables=("Z0", "X1Z2")), gen.run(small, metric, observables=("Z0", "X1Z2"))
        scale = b.details["coherent_exponentiated"] / b.details["coherent_first_order"]
        for f, v in a.details["first_order_family_shares"].items():
            assert v == pytest.approx(b.shares.get(f, 0.0) / scale, abs=1e-10)
        for o in ("Z0", "X1Z2"):
            assert a.observable_errors[o] == pytest.approx(b.observable_errors[o], abs=1e-10)


@pytest.mark.parametrize("seed", range(5))
def test_within_five_percent_of_cirq_density_matrix(seed):
    rng = np.random.default_rng(300 + seed)
    relax = seed % 2 == 0
    c = random_clifford_circuit(rng, 3, layers=3, scale=0.01, relaxation=relax)
    for metric in ("process",) if relax else ("process", "state"):  # state: twirled relaxation is approximate
        r = ENGINE.run(c, metric)
        exact = cirq_infidelity(c, metric)
        if exact <= 0.02:
            assert r.infidelity == pytest.approx(exact, rel=0.05)


# -- check values and closed forms ----------------------------------------------------------------


def _single(gate: str, h: dict[str, float], count: int, params=(), rates=None) -> NoisyCircuit:
    nop = NoisyOperation(Operation(gate, (0,), params), gate, np.eye(2), h, pauli_rates=rates or {})
    return NoisyCircuit(("q[0]",), (NoisyRepeat((NoisyLayer((nop,), (), 0.0),), count),))


def test_rotation_error_repeated_hundred_times():
    # design.md §6: N = 100 repetitions of RX(0.01): coherent infidelity 0.2298488471 = sin²(0.5)
    # (the error RX(δ) is h = δ/2 on X, so the amplitudes add to 0.5).
    r = ENGINE.run(_single("x", {"X": 0.005}, 100), "process")
    assert r.infidelity == pytest.approx(0.2298488471, abs=1e-10)
    assert r.first_order == pytest.approx(0.25, abs=1e-12)
    assert any("no longer small" in w for w in r.warnings)


def test_alternating_axes_fold_to_closed_form_for_a_billion_repetitions():
    # H maps an X error to Z and back: after N layers of (H then X error) the output-frame amplitudes
    # are h·ceil(N/2) on one axis and h·floor(N/2) on the other (hand derivation).
    n_rep, h = 10**9, 1e-12
    r = ENGINE.run(_single("h", {"X": h}, n_rep), "process")
    want = h**2 * ((n_rep + 1) // 2) ** 2 + h**2 * (n_rep // 2) ** 2
    assert r.first_order == pytest.approx(want, rel=1e-12)
    assert r.details["folded_blocks"] == [{"count": n_rep, "period": 2, "walks": 1}]
    assert r.details["layers_walked"] <= 4


@pytest.mark.parametrize("seed", range(6))
def test_folded_repeats_equal_explicit_unrolling(seed):
    rng = np.random.default_rng(400 + seed)
    count = int(rng.integers(5, 300 if seed % 2 == 0 else 60))
    c = random_clifford_circuit(rng, 3, layers=2, repeat=count, nested=seed % 2 == 1)
    flat = unrolled(c)
    engine = CliffordEngine(qubit_map=False, second_order=False)  # the folds at first order
    for metric in ("process", "state"):
        a, b = engine.run(c, metric, observables=("Z0", "Y1X2")), engine.run(flat, metric, observables=("Z0", "Y1X2"))
        assert a.first_order == pytest.approx(b.first_order, rel=1e-10, abs=1e-14)
        assert a.infidelity == pytest.approx(b.infidelity, rel=1e-10, abs=1e-14)
        for f, v in b.details["first_order_family_shares"].items():
            assert a.details["first_order_family_shares"][f] == pytest.approx(v, rel=1e-9, abs=1e-14)
        for o, v in b.observable_errors.items():
            assert a.observable_errors[o] == pytest.approx(v, rel=1e-9, abs=1e-14)
    assert any(b["period"] for b in a.details["folded_blocks"]), "the block was not folded"
    assert a.details["layers_walked"] < b.details["layers_walked"]


def test_block_without_period_in_reach_is_approximated_with_a_warning():
    rng = np.random.default_rng(5)
    c = random_clifford_circuit(rng, 4, layers=2, repeat=40)
    small = CliffordEngine(max_unrolled=3, qubit_map=False)
    r = small.run(c, "process")
    assert any("no period within 3" in w for w in r.warnings)
    # the frame after the block is the exact power (stim) whatever the approximation of the sums
    block = next(it for it in c.body if isinstance(it, NoisyRepeat))
    exact = Walker(4, "pull").run(tuple(block.body) * block.count)
    approx = Walker(4, "pull", max_unrolled=3).run((block,))
    assert approx.equals(exact)


# -- light cones ----------------------------------------------------------------------------------


@pytest.mark.parametrize("seed", range(4))
def test_light_cone_pruning_gives_the_same_observable_errors(seed):
    rng = np.random.default_rng(500 + seed)
    c = random_clifford_circuit(rng, 6, layers=3, repeat=[None, 4, 7, 9][seed], nested=seed == 3)
    for label in ("Z0", "X2Y3", "Z5"):
        pruned = FIRST.observable_error(c, label, prune=True)
        full = FIRST.observable_error(c, label, prune=False)
        assert pruned == pytest.approx(full, abs=1e-14)
        # with the second order, errors outside the cone still enter the full walk's commutators
        # (their effect cancels only at higher orders, as exactly they do not act on <O>)
        pruned = ENGINE.observable_error(c, label, prune=True)
        full = ENGINE.observable_error(c, label, prune=False)
        assert pruned == pytest.approx(full, rel=0.01, abs=1e-14)


def test_light_cone_of_a_local_observable_is_small_on_a_wide_shallow_circuit():
    rng = np.random.default_rng(9)
    layers = [random_layer(rng, 40) for _ in range(2)]
    c = NoisyCircuit(tuple(f"q[{i}]" for i in range(40)), (NoisyRepeat(tuple(layers), 10**6),))
    sub, kept = light_cone_circuit(c, {0})
    assert len(kept) < 40 and 0 in kept
    # the restricted circuit keeps the repeat (saturated live set), so N = 10^6 stays folded
    assert any(isinstance(it, NoisyRepeat) and it.count > 10**5 for it in sub.body)


# -- invariants -------------------------------------------------------------------------------------


def test_twirled_relaxation_is_flagged_for_the_state_metric():
    rng = np.random.default_rng(11)
    c = random_clifford_circuit(rng, 3, layers=2)
    assert any("Tomita" in w for w in ENGINE.run(c, "state").warnings)
    assert not any("Tomita" in w for w in ENGINE.run(c, "process").warnings)


def test_top_operations_rank_by_share_and_carry_places():
    rng = np.random.default_rng(12)
    c = random_clifford_circuit(rng, 4, layers=5)
    r = ENGINE.run(c, "process")
    top = r.details["top_operations"]
    shares = [abs(t["first_order_share"]) for t in top]
    assert shares == sorted(shares, reverse=True) and top[0]["qubits"]
    assert sum(r.details["first_order_family_shares"].values()) == pytest.approx(r.first_order, abs=1e-14)


def test_relaxation_twirl_check_values():
    # design.md §6 (Tomita & Svore, PRA 90, 062320 (2014)): t = 50 ns, T1 = 100 µs, T2 = 80 µs.
    t, t1, t2 = 50.0, 100e3, 80e3
    r = Relaxation(0, t, 1 - np.exp(-t / t1), float(np.exp(-t * (1 / t2 - 1 / (2 * t1)))))
    px, py, pz = r.pauli_twirl()
    assert px == pytest.approx(1.2496875520767725e-4, rel=1e-12)
    assert pz == pytest.approx(1.8743360888417993e-4, rel=1e-12)
    c = NoisyCircuit(("q[0]",), (NoisyLayer((), (r,), t),))
    assert ENGINE.run(c, "process").first_order == pytest.approx(px + py + pz, rel=1e-12)


def test_parity_cycle_example_through_analyze_matches_generators():
    # The lab's example circuit (Clifford: h and cz) with its model, repeated 1000 times, through the
    # public analysis call; first order equals the generators engine (dense, 5 qubits).
    from pathlib import Path

    from budget.analysis.run import analyze

    here = Path(__file__).resolve().parent.parent / "circuits"
    qasm, model = here / "parity_cycle.qasm", here / "fen_q8.toml"
    r = analyze(qasm, model, cycles=1000, engine="clifford")
    assert r.engine == "clifford" and 0 < r.actual_infidelity <= 1
    assert sum(f.share for f in r.families) == pytest.approx(r.actual_infidelity, rel=1e-9)
    if GeneratorsEngine is not None:
        g = analyze(qasm, model, cycles=1000, engine="generators")
        assert r.first_order == pytest.approx(g.first_order, rel=1e-10)


def test_grouping_in_parts_gives_the_same_sums(monkeypatch):
    import budget.engines.frame.groups as groups

    rng = np.random.default_rng(13)
    c = random_clifford_circuit(rng, 4, layers=4, repeat=3)
    engine = CliffordEngine(qubit_map=False)
    whole = {m: engine.run(c, m) for m in ("process", "state")}
    monkeypatch.setattr(groups, "BUCKET_TERMS", 5)
    for metric, w in whole.items():
        parts = engine.run(c, metric)
        assert parts.first_order == pytest.approx(w.first_order, abs=1e-15)
        assert parts.infidelity == pytest.approx(w.infidelity, abs=1e-15)
        assert parts.details["first_order_family_shares"] == pytest.approx(w.details["first_order_family_shares"], abs=1e-15)
        assert np.allclose(engine.quadratic_form(c, metric).matrix, CliffordEngine().quadratic_form(c, metric).matrix, atol=1e-15)


def test_malformed_observable_is_one_input_error():
    from budget.problems import InputError

    c = random_clifford_circuit(np.random.default_rng(14), 2, layers=1)
    with pytest.raises(InputError, match="Z7"):
        ENGINE.run(c, "process", observables=("Z7",))


def _grid_cycle(side: int) -> tuple[NoisyLayer, ...]:
    """sx on every qubit, then CZ in four directions on a side x side grid (no errors)."""
    q = lambda r, c: r * side + c  # noqa: E731
    bare = lambda op: NoisyOperation(op, op.gate, np.eye(2 ** len(op.qubits)), {})  # noqa: E731
    layers = [[bare(Operation("sx", (q(r, c),))) for r in range(side) for c in range(side)]]
    for horizontal, parity in itertools.product((True, False), (0, 1)):
        pairs = [
            (q(r, c), q(r, c + 1)) if horizontal else (q(c, r), q(c + 1, r))
            for r in range(side)
            for c in range(parity, side - 1, 2)
        ]
        layers.append([bare(Operation("cz", p)) for p in pairs])
    return tuple(NoisyLayer(tuple(ops), (), 0.0) for ops in layers)


def test_long_period_fold_leaves_the_exact_frame_after_the_block():
    # 8 x 8 grid cycle: period 252 (found by the walker); N = 252 + 70 exercises the snapshot
    # used to advance the frame by N mod 252 without walking from the start again.
    cycle = _grid_cycle(8)
    folded = Walker(64, "pull")
    frame = folded.run((NoisyRepeat(cycle, 322),))
    assert folded.periods == [(322, 252)]
    assert frame.equals(Walker(64, "pull").run(cycle * 322))
