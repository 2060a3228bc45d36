"""Folding long-period blocks by the orbits of their error terms (budget/engines/frame/orbits.py).

References outside the code under test: explicit unrolling of the block (every repetition walked
and grouped Pauli by Pauli, itself checked against dense cirq matrices in test_clifford.py), the
period fold of the walker, and brute-force enumeration of orbit positions for the run lengths.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest

import budget.engines.frame.orbits as orbits
from budget.circuit.ir import Operation
from budget.engines.frame.orbits import runs
from budget.engines.clifford.engine import CliffordEngine
from budget.errors.noisy import NoisyCircuit, NoisyLayer, NoisyOperation, NoisyRepeat
from clifford_reference import random_layer, unrolled

# the orbit fold is a first-order fold: its checks compare first-order engines
SMALL_BABY = CliffordEngine(orbit_baby=2, qubit_map=False, second_order=False)
PERIOD_FOLD = CliffordEngine(orbit_baby=0, qubit_map=False, second_order=False)


def _block_circuit(rng, n: int, count: int, *, body_layers: int = 2, noisy_outside: bool = False) -> NoisyCircuit:
    """Only the repeated block carries coherent errors; outside layers (optional) carry stochastic
    errors only, so the block may be folded by orbits."""
    body: list = [NoisyRepeat(tuple(random_layer(rng, n, rates=True) for _ in range(body_layers)), count)]
    if noisy_outside:
        body = [random_layer(rng, n, scale=0, rates=True)] + body + [random_layer(rng, n, scale=0)]
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), tuple(body))


def _same(a, b, *, rel=1e-10) -> None:
    assert a.first_order == pytest.approx(b.first_order, rel=rel, abs=1e-14)
    assert a.infidelity == pytest.approx(b.infidelity, rel=rel, abs=1e-14)
    for key in ("coherent_first_order", "coherent_exponentiated", "stochastic_first_order", "max_group_amplitude_rad"):
        assert a.details[key] == pytest.approx(b.details[key], rel=rel, abs=1e-14), key
    # a group that cancels exactly may be left at rounding level (1e-18) by one of the two sums
    assert abs(a.details["coherent_groups"] - b.details["coherent_groups"]) <= 2
    for f, v in b.details["first_order_family_shares"].items():
        assert a.details["first_order_family_shares"][f] == pytest.approx(v, rel=1e-8, abs=1e-13), f


@pytest.mark.parametrize("seed", range(12))
def test_orbit_fold_equals_explicit_unrolling(seed):
    rng = np.random.default_rng(900 + seed)
    n = int(rng.integers(2, 6))
    count = int(rng.choice([8, 13, 40, 97, 256]))
    c = _block_circuit(rng, n, count, body_layers=int(rng.integers(1, 4)), noisy_outside=seed % 3 == 0)
    folded = SMALL_BABY.run(c, "process")
    if not folded.details["orbit_folds"]:  # the frame came back within the baby steps
        assert folded.details["folded_blocks"][0]["period"] <= 2
    _same(folded, PERIOD_FOLD.run(unrolled(c), "process"))


def test_orbit_fold_meets_twisted_shared_and_open_orbits():
    # The cases the run lengths distinguish all occur across these random blocks: orbits whose
    # Pauli comes back with a minus sign, orbits holding several of the block's Paulis, and
    # orbits longer than N (never closed). Each case is checked against unrolling.
    seen = {"sign_flipping_orbits": 0, "orbits_with_several_paulis": 0, "open_orbits": 0}
    cases = []
    for seed in range(40):
        rng = np.random.default_rng(1300 + seed)
        n = int(rng.integers(3, 6))
        count = int(rng.choice([9, 30, 64]))
        cases.append(_block_circuit(rng, n, count, body_layers=int(rng.integers(1, 3))))
    for c in cases + [_grid(5, 9), _grid(6, 30)]:  # grid cycles: orbits longer than N
        folded = SMALL_BABY.run(c, "process")
        for rec in folded.details["orbit_folds"]:
            hit = [k for k in seen if rec[k]]
            if hit and not all(seen[k] >= 2 for k in hit):
                _same(folded, PERIOD_FOLD.run(unrolled(c), "process"))
                for k in hit:
                    seen[k] += 1
    assert all(v >= 2 for v in seen.values()), seen


@pytest.mark.parametrize("count", [10**6 + 3, 10**9])
def test_orbit_fold_equals_period_fold_for_huge_counts(count):
    rng = np.random.default_rng(77)
    c = _block_circuit(rng, 5, count, body_layers=3, noisy_outside=True)
    a, b = SMALL_BABY.run(c, "process"), PERIOD_FOLD.run(c, "process")
    assert a.details["orbit_folds"] and b.details["folded_blocks"][0]["period"]
    _same(a, b)


@pytest.mark.parametrize("around", [False, True])
def test_quadratic_form_of_an_orbit_folded_block_equals_unrolling(around):
    rng = np.random.default_rng(31)
    c = _block_circuit(rng, 4, 97, body_layers=2)
    if around:  # coherent layers before and after the block
        c = NoisyCircuit(c.qubits, (random_layer(rng, 4),) + c.body + (random_layer(rng, 4),))
    a, b = SMALL_BABY.quadratic_form(c, "process"), PERIOD_FOLD.quadratic_form(unrolled(c), "process")
    assert a.labels == b.labels
    np.testing.assert_allclose(a.matrix, b.matrix, rtol=1e-10, atol=1e-14)
    assert a.floor == pytest.approx(b.floor, rel=1e-12)


def test_grid_cycle_with_default_baby_steps_matches_the_period_fold():
    # 8 x 8 grid (sx layer, CZ in four directions; period 252): long orbits, found by giant steps with the
    # default 64 baby steps; the period fold walks the whole period instead.
    c = _grid(8, 10**6)
    a, b = CliffordEngine(qubit_map=False, second_order=False).run(c, "process"), PERIOD_FOLD.run(c, "process")
    rec = a.details["orbit_folds"][0]
    assert rec["longest_orbit"] > 64 and rec["giant_steps"] >= 2
    _same(a, b)


@pytest.mark.parametrize("seed", range(10))
def test_coherent_errors_before_and_after_the_block_are_matched_against_its_orbits(seed):
    # Plain layers with coherent errors before and after the block: their Paulis are mapped to
    # the block's frame and placed on its orbits (before: N repetitions later).
    rng = np.random.default_rng(1700 + seed)
    n = int(rng.integers(2, 6))
    c = _block_circuit(rng, n, int(rng.choice([9, 40, 97, 256])), body_layers=int(rng.integers(1, 3)))
    before = tuple(random_layer(rng, n, rates=True) for _ in range(int(rng.integers(0, 3))))
    after = tuple(random_layer(rng, n) for _ in range(int(rng.integers(1 if not before else 0, 3))))
    c = NoisyCircuit(c.qubits, before + c.body + after)
    r = SMALL_BABY.run(c, "process")
    assert r.details["orbit_folds"], "the block was not folded by orbits"
    _same(r, PERIOD_FOLD.run(unrolled(c), "process"))


def test_terms_outside_landing_on_the_block_orbits_are_grouped_with_them():
    # An X error on qubit 0 after an x-echo block and before it: X commutes with the block, so
    # every repetition's X error and both outside ones land on X_0 and add in amplitude (hand
    # derivation: (N h + h_before + h_after)², N = 300). The block's h gate on qubit 1 makes its
    # period 2, found by the search rather than by the frame alone.
    def op(gate, qs, h):
        return NoisyOperation(Operation(gate, qs), gate, np.eye(2 ** len(qs)), h)

    block = NoisyRepeat((NoisyLayer((op("x", (0,), {"X": 1e-4}), op("h", (1,), {})), (), 0.0),), 300)
    c = NoisyCircuit(
        ("q[0]", "q[1]"),
        (NoisyLayer((op("x", (0,), {"X": 2e-4}),), (), 0.0), block, NoisyLayer((op("x", (0,), {"X": -5e-5}),), (), 0.0)),
    )
    r = SMALL_BABY.run(c, "process")
    assert r.details["orbit_folds"]
    assert r.first_order == pytest.approx((300 * 1e-4 + 2e-4 - 5e-5) ** 2, rel=1e-12)


@pytest.mark.parametrize("seed", range(6))
def test_blocks_nested_in_the_folded_block_fold_by_their_period_inside_it(seed):
    # e.g. `--cycles N` around a file that has its own loop: Repeat(layer, Repeat(inner, m)) x N
    rng = np.random.default_rng(1900 + seed)
    n = int(rng.integers(2, 5))
    inner = NoisyRepeat(tuple(random_layer(rng, n, rates=True) for _ in range(2)), int(rng.integers(2, 6)))
    block = NoisyRepeat((random_layer(rng, n), inner), int(rng.choice([9, 40, 97])))
    c = NoisyCircuit(tuple(f"q[{i}]" for i in range(n)), (block,) + ((random_layer(rng, n),) if seed % 2 else ()))
    r = SMALL_BABY.run(c, "process")
    if seed % 2:  # a coherent layer outside: always the orbit search (else the period may be <= 2)
        assert r.details["orbit_folds"], "the block was not folded by orbits"
    _same(r, PERIOD_FOLD.run(unrolled(c), "process"))


def test_blocks_with_rates_only_around_the_folded_block_are_walked_with_it():
    rng = np.random.default_rng(21)
    c = _block_circuit(rng, 4, 120)
    quiet = NoisyRepeat((random_layer(rng, 4, scale=0, rates=True),), 5)
    c = NoisyCircuit(c.qubits, (quiet, random_layer(rng, 4)) + c.body + (random_layer(rng, 4), quiet))
    r = SMALL_BABY.run(c, "process")
    assert r.details["orbit_folds"]
    _same(r, PERIOD_FOLD.run(unrolled(c), "process"))


def test_coherent_errors_in_another_repeated_block_keep_the_period_fold():
    rng = np.random.default_rng(12)
    c = _block_circuit(rng, 4, 300)
    c = NoisyCircuit(c.qubits, (NoisyRepeat((random_layer(rng, 4),), 3),) + c.body)
    r = SMALL_BABY.run(c, "process")
    assert r.details["orbit_folds"] == []
    _same(r, PERIOD_FOLD.run(unrolled(c), "process"))


def test_state_metric_is_not_folded_by_orbits():
    rng = np.random.default_rng(13)
    c = _block_circuit(rng, 3, 300)
    r = SMALL_BABY.run(c, "state")
    assert r.details["orbit_folds"] == []
    _same(r, PERIOD_FOLD.run(unrolled(c), "state"))


def test_search_that_does_not_close_is_approximated_with_a_warning(monkeypatch):
    monkeypatch.setattr(orbits, "MAX_GIANT_STEPS", 1)
    c = _grid(6, 10**4)
    r = CliffordEngine(qubit_map=False, orbit_baby=4, second_order=False).run(c, "process")
    assert r.details["orbit_folds"] == []
    assert any("did not close" in w for w in r.warnings)


def test_approximate_fallback_counts_terms_outside_the_block_once(monkeypatch):
    # When the search gives up, terms outside the block are kept as their own groups (not matched
    # against the block): an extra layer of X errors h on 36 qubits adds exactly 36 h².
    monkeypatch.setattr(orbits, "MAX_GIANT_STEPS", 1)
    c = _grid(6, 10**4)
    h = 3e-4
    extra = NoisyLayer(
        tuple(NoisyOperation(Operation("sx", (q,)), "sx", np.eye(2), {"X": h}) for q in range(36)), (), 0.0
    )
    engine = CliffordEngine(qubit_map=False, orbit_baby=4, second_order=False)
    base = engine.run(c, "process")
    more = engine.run(NoisyCircuit(c.qubits, (extra,) + c.body), "process")
    assert any("did not close" in w for w in more.warnings)
    assert more.first_order - base.first_order == pytest.approx(36 * h**2, rel=1e-9)


@pytest.mark.parametrize("seed", range(40))
def test_run_lengths_equal_brute_force_enumeration(seed):
    rng = np.random.default_rng(seed)
    length = int(rng.integers(0, 9))
    eps = int(rng.choice([1, -1]))
    k = int(rng.integers(1, 4))
    counts = rng.integers(1, 40, k) if seed % 2 else np.full(k, int(rng.integers(1, 40)))
    pos = rng.integers(0, 3 * length if length else 30, k)
    lens, w = runs(0, length, eps, pos, counts)
    # brute force: the signed count of each term on each Pauli of the orbit (or of the line)
    size = length if length else int((pos + counts).max())
    want = np.zeros((size, k))
    for t, (p0, cnt) in enumerate(zip(pos, counts)):
        for step in range(int(cnt)):
            p = int(p0) + step
            if length:
                wraps, p = divmod(p, length)
                want[p, t] += eps**wraps
            else:
                want[p, t] += 1
    got = np.repeat(w, lens.astype(int), axis=0)
    # the same rows with the same multiplicities (runs are unordered)
    assert sorted(map(tuple, got)) == sorted(tuple(r) for r in want if np.any(r))


def _grid(side: int, count: int) -> NoisyCircuit:
    q = lambda r, c: r * side + c  # noqa: E731

    def op(gate: str, qs: tuple[int, ...], h: dict[str, float]) -> NoisyOperation:
        return NoisyOperation(Operation(gate, qs), gate, np.eye(2 ** len(qs)), h, depolarizing=1e-4)

    layers = [[op("sx", (q(r, c),), {"X": 1e-3}) for r in range(side) for c in range(side)]]
    for horizontal, parity in itertools.product((True, False), (0, 1)):
        pairs = [
            (q(r, c), q(r, c + 1)) if horizontal else (q(c, r), q(c + 1, r))
            for r in range(side)
            for c in range(parity, side - 1, 2)
        ]
        layers.append([op("cz", p, {"ZZ": 2e-3, "ZI": 1e-3, "IZ": -5e-4}) for p in pairs])
    block = NoisyRepeat(tuple(NoisyLayer(tuple(ops), (), 0.0) for ops in layers), count)
    return NoisyCircuit(tuple(f"q[{i}]" for i in range(side * side)), (block,))


def test_identity_fingerprints_read_off_the_masks_equal_the_computed_ones():
    from budget.engines.frame.pauli_frame import Frame, fingerprints, identity_fingerprints

    for n in (1, 63, 64, 130):
        f = Frame.identity(n)
        fx, fxz = identity_fingerprints(n)
        np.testing.assert_array_equal(fx, fingerprints(f.x, None))
        np.testing.assert_array_equal(fxz, fingerprints(f.x, f.z))


def test_byte_table_product_equals_bitwise_xor():
    from budget.engines.frame.orbits import _XorProduct

    rng = np.random.default_rng(3)
    rows = rng.integers(0, 256, (37, 5), dtype=np.uint8)
    of = rng.integers(0, 2**63, (40, 2), dtype=np.uint64)
    bits = np.unpackbits(rows, axis=1, bitorder="little")
    want = np.array([np.bitwise_xor.reduce(of[np.flatnonzero(b)], axis=0) if b.any() else np.zeros(2, np.uint64) for b in bits])
    np.testing.assert_array_equal(_XorProduct(rows)(of), want)


def test_grouping_hash_separates_rows_differing_in_the_top_bits_of_two_words():
    # With a multiply-and-sum hash these rows collide (2^63 + 2^63 = 0 mod 2^64) and the grouping
    # fell back to a slow exact sort; the grouping must be right either way and hash them apart.
    from budget.engines.frame.rows import group_rows, row_hash

    top = np.uint64(1) << np.uint64(63)
    keys = np.zeros((4, 4), np.uint64)
    keys[1, [0, 2]] = top
    keys[2, [1, 3]] = top
    keys[3, :] = top
    assert len(set(row_hash(keys).tolist())) == 4
    inv, first = group_rows(keys)
    assert len(first) == 4 and sorted(inv.tolist()) == [0, 1, 2, 3]


def test_exact_engine_refuses_a_thousand_qubits_without_overflow():
    # 4^n x 4^n sizes overflow a float from about 256 qubits on; the plan must still refuse cleanly.
    from budget.engines.exact.engine import ExactEngine

    c = _grid(32, 3)
    reason = ExactEngine().fits(c, "process")
    assert reason == "superoperator, limit 6 qubits"


def test_auto_engine_on_three_hundred_qubits_picks_clifford_and_folds_by_orbits(tmp_path):
    # End to end from an OpenQASM 3 file: the exact engine's size estimate must not overflow before
    # `auto` reaches the clifford engine (it used to raise OverflowError from about 250 qubits).
    from budget import analyze

    n = 300
    lines = ['OPENQASM 3.0;', 'include "stdgates.inc";', f"qubit[{n}] q;", "for int i in [0:999999] {"]
    lines += [f"  sx q[{k}];" for k in range(n)]
    lines += [f"  cz q[{k}], q[{k + 1}];" for p in (0, 1) for k in range(p, n - 1, 2)]
    lines.append("}")
    path = tmp_path / "line.qasm"
    path.write_text("\n".join(lines) + "\n")
    model = {"gates": {"sx": {"overrotation": 1e-4, "avg_infidelity": 1e-5}, "cz": {"cphase": 2e-4}}}
    r = analyze(path, model)
    assert r.engine == "clifford"
    assert r.details["orbit_folds"] and r.details["orbit_folds"][0]["count"] == 10**6


def test_brief_engine_skips_only_the_per_qubit_map():
    # Depth curves, twirled variants and compiled ensembles read only totals: their engine runs
    # without the per-qubit map, which can cost more than the rest of a run.
    from budget.engines.door import choose_engine

    c = _grid(4, 20)
    full = choose_engine(c, "process")
    brief = choose_engine(c, "process", brief=True)
    a, b = full.run(c, "process"), brief.run(c, "process")
    assert "qubit_map" in a.details and "qubit_map" not in b.details
    assert (a.infidelity, a.first_order, a.shares) == (b.infidelity, b.first_order, b.shares)
