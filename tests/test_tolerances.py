"""Tolerances and the worst case over signs, checked against brute force, scipy.optimize and cirq.

Sources:
- N repetitions of an X over-rotation: process infidelity sin²(Nδ/2) (design.md §3, §6; any
  textbook on rotations), so the exact tolerance is 2·arcsin(sqrt(E))/N; cirq gives the unitaries.
- The box maximum is compared with plain enumeration (itertools) and with multistart L-BFGS-B
  from scipy.optimize, neither of which shares code with budget.analysis.worstcase.
"""

from __future__ import annotations

import itertools
import json
import math
from pathlib import Path

import cirq
import numpy as np
import pytest
import scipy.optimize
from hypothesis import given, settings
from hypothesis import strategies as st

from budget.analysis.tolerance_output import floor_message, tolerances_json
from budget.analysis.tolerances import NO_EFFECT, tolerances
from budget.analysis.worstcase import box_maximum, worst_case_max
from budget.engines.base import QuadraticForm
from budget.problems import InputError


def _random_a(rng: np.random.Generator, n: int, *, psd: bool) -> np.ndarray:
    m = rng.normal(size=(n, n))
    if psd:
        return m @ m.T / n
    a = (m + m.T) / 2
    np.fill_diagonal(a, rng.uniform(0, 1, n))  # indefinite, diagonal >= 0
    return a


def _brute(a: np.ndarray, t: np.ndarray) -> float:
    return max(float((np.array(s) * t) @ a @ (np.array(s) * t)) for s in itertools.product((-1, 1), repeat=len(t)))


def _process_infidelity(u: np.ndarray, ideal: np.ndarray) -> float:
    d = len(u)
    return 1 - abs(np.trace(ideal.conj().T @ u)) ** 2 / d**2


def _rx(angle: float) -> np.ndarray:
    return cirq.unitary(cirq.rx(angle))


# ---- the worst case over signs ------------------------------------------------------------------


@pytest.mark.parametrize("n", [1, 2, 3, 5, 8, 11])
@pytest.mark.parametrize("psd", [True, False])
def test_box_maximum_matches_enumeration(n, psd):
    rng = np.random.default_rng(100 * n + psd)
    for _ in range(3):
        a, t = _random_a(rng, n, psd=psd), rng.uniform(0, 0.1, n)
        m = box_maximum(a, t)
        assert m.exact
        assert m.value == pytest.approx(_brute(a, t), rel=1e-12)
        assert float((m.signs * t) @ a @ (m.signs * t)) == pytest.approx(m.value, rel=1e-12)


@pytest.mark.parametrize("n", [2, 3, 4, 5])
def test_box_maximum_matches_scipy_multistart(n):
    """Multistart L-BFGS-B on -δᵀAδ in the box (scipy.optimize); 40 starts cover 2^n vertices."""
    rng = np.random.default_rng(7 + n)
    a, t = _random_a(rng, n, psd=False), rng.uniform(0.01, 0.2, n)
    best = -np.inf
    for _ in range(40):
        res = scipy.optimize.minimize(
            lambda x: -x @ a @ x, rng.uniform(-t, t), jac=lambda x: -2 * a @ x,
            bounds=list(zip(-t, t)), method="L-BFGS-B",
        )
        best = max(best, -res.fun)
    assert worst_case_max(a, t) == pytest.approx(best, rel=1e-9)


def test_groups_that_do_not_interfere_are_enumerated_separately():
    """24 knobs in two non-interfering groups of 12: exact, the sum of the two brute-force maxima."""
    rng = np.random.default_rng(3)
    a1, a2 = _random_a(rng, 12, psd=True), _random_a(rng, 12, psd=False)
    t = rng.uniform(0, 0.1, 24)
    a = np.zeros((24, 24))
    a[:12, :12], a[12:, 12:] = a1, a2
    m = box_maximum(a, t)
    assert m.exact
    assert m.value == pytest.approx(_brute(a1, t[:12]) + _brute(a2, t[12:]), rel=1e-12)


def test_beyond_the_exact_limit_a_safe_bound_is_used():
    rng = np.random.default_rng(4)
    a, t = _random_a(rng, 9, psd=False), rng.uniform(0, 0.1, 9)
    m = box_maximum(a, t, exact_up_to=4)
    exact = _brute(a, t)
    assert not m.exact
    assert m.attained <= exact + 1e-15 <= m.value + 2e-15
    assert m.value <= np.sum(np.abs(a * np.outer(t, t))) * (1 + 1e-12)  # never above the triangle bound


def test_unbounded_knob_needs_a_zero_row():
    a = np.array([[1.0, 0.0], [0.0, 0.0]])
    assert worst_case_max(a, np.array([0.1, math.inf])) == pytest.approx(0.01)
    with pytest.raises(ValueError, match="unbounded"):
        worst_case_max(np.array([[1.0, 0.1], [0.1, 0.0]]), np.array([0.1, math.inf]))
    with pytest.raises(ValueError, match="negative"):
        worst_case_max(np.array([[-1.0]]), np.array([0.1]))


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 6), st.integers(0, 10**6), st.floats(0.1, 10))
def test_box_maximum_invariants(n, seed, c):
    """Scales as c²; beats every point of the box; beats the random-sign mean Σ A_ff t_f²."""
    rng = np.random.default_rng(seed)
    a, t = _random_a(rng, n, psd=bool(seed % 2)), rng.uniform(0, 1, n)
    w = worst_case_max(a, t)
    assert worst_case_max(a, c * t) == pytest.approx(c * c * w, rel=1e-9)
    x = rng.uniform(-t, t, size=(50, n))
    assert np.all(np.einsum("ij,jk,ik->i", x, a, x) <= w + 1e-12)
    assert np.sum(np.diag(a) * t**2) <= w + 1e-12


# ---- tolerances ----------------------------------------------------------------------------------


def _x_repeated(n_reps: int, *, current: float = 1e-3, floor: float = 0.0) -> QuadraticForm:
    """N repetitions of an X over-rotation, process metric: h = δ/2 per repetition, amplitudes add,
    e ≈ (N δ/2)², so A = N²/4 (design.md §3)."""
    return QuadraticForm((("x", "overrotation"),), np.array([[n_reps**2 / 4]]), np.array([current]), floor,
                         {"x": floor} if floor else {})


@pytest.mark.parametrize("n_reps", [1, 10, 1000])
@pytest.mark.parametrize("target", [1e-4, 1e-2, 0.1])
def test_issue_check_worst_case_inverts_the_rotation(n_reps, target):
    """Worst-case tolerance vs the exact inversion 2·arcsin(sqrt(E))/N within 5 % (the issue's check),
    and cirq: N X gates over-rotated by the tolerance stay within the target."""
    tol = tolerances(_x_repeated(n_reps), target).rows[0].tolerance_rad
    exact = 2 * math.asin(math.sqrt(target)) / n_reps
    assert tol == pytest.approx(exact, rel=0.05)
    u, u0 = _rx(math.pi + tol), _rx(math.pi)
    actual, ideal = np.linalg.matrix_power(u, n_reps), np.linalg.matrix_power(u0, n_reps)
    e = _process_infidelity(actual, ideal)
    assert e <= target * (1 + 1e-9)
    assert e == pytest.approx(target, rel=0.05)


def _two_families(sign: int) -> QuadraticForm:
    """Family "a": X over-rotation; family "b" the same on one qubit, after an ideal Y when sign < 0
    (Y Rx(δ) Y† = Rx(-δ), an echo). e = sin²((δ_b + sign·δ_a)/2) ≈ (δ_b + sign δ_a)²/4."""
    a = np.array([[0.25, 0.25 * sign], [0.25 * sign, 0.25]])
    return QuadraticForm((("a", "overrotation"), ("b", "overrotation")), a, np.array([0.02, 0.01]), 0.0, {})


def _two_families_cirq(sign: int, da: float, db: float) -> float:
    mid = cirq.unitary(cirq.Y) if sign < 0 else np.eye(2)
    u = _rx(math.pi + db) @ mid @ _rx(math.pi + da)
    return _process_infidelity(u, _rx(math.pi) @ mid @ _rx(math.pi))


@pytest.mark.parametrize("sign", [1, -1])
def test_worst_case_tolerances_hold_in_cirq(sign):
    """At every vertex of the tolerance box the cirq infidelity stays within the target, and the
    worst vertex reaches it (to leading-order accuracy)."""
    target = 1e-3
    rep = tolerances(_two_families(sign), target)
    t = {r.family: r.tolerance_rad for r in rep.rows}
    assert t["a"] == pytest.approx(t["b"])  # equal shares, equal sensitivities
    values = [_two_families_cirq(sign, sa * t["a"], sb * t["b"]) for sa in (1, -1) for sb in (1, -1)]
    assert max(values) <= target and max(values) == pytest.approx(target, rel=1e-3)
    assert min(values) < 1e-12  # the other sign pattern cancels exactly


def test_random_sign_tolerances_hold_on_average_in_cirq():
    target = 1e-3
    rep = tolerances(_two_families(-1), target, assume="random")
    s = {r.family: r.tolerance_rad for r in rep.rows}
    mean = np.mean([_two_families_cirq(-1, sa * s["a"], sb * s["b"]) for sa in (1, -1) for sb in (1, -1)])
    assert mean == pytest.approx(target, rel=1e-3)
    assert 0.25 * s["a"] ** 2 == pytest.approx(0.25 * s["b"] ** 2)  # equal shares


@pytest.mark.parametrize("assume", ["worst", "random"])
def test_common_factor_scales_todays_values(assume):
    rng = np.random.default_rng(11)
    a = _random_a(rng, 4, psd=True)
    now = rng.normal(0, 0.05, 4)
    qf = QuadraticForm(tuple(("g", f"k{i}") for i in range(4)), a, now, 1e-4, {"g": 1e-4})
    rep = tolerances(qf, 2e-3, assume=assume, allocation="common-factor")
    t = np.array([next(r.tolerance_rad for r in rep.rows if r.knob == f"k{i}") for i in range(4)])
    np.testing.assert_allclose(t * rep.common_factor, np.abs(now), rtol=1e-12)
    used = worst_case_max(a, t) if assume == "worst" else float(np.sum(np.diag(a) * t**2))
    assert used == pytest.approx(rep.coherent_budget, rel=1e-9)
    assert all(r.tighten_by == pytest.approx(rep.common_factor) for r in rep.rows)
    equal = tolerances(qf, 2e-3, assume=assume)
    assert equal.common_factor == pytest.approx(rep.common_factor)


def test_ranking_and_statuses():
    a = np.diag([1.0, 4.0, 0.0])
    qf = QuadraticForm((("x", "overrotation"), ("cz", "cphase"), ("cz", "z_phase[0]")), a,
                       np.array([0.001, -0.02, 0.5]), 0.0, {})
    rep = tolerances(qf, 1e-4)
    assert [r.knob for r in rep.rows] == ["cphase", "overrotation", "z_phase[0]"]
    assert [r.status for r in rep.rows] == ["tighten", "ok", NO_EFFECT]
    # equal shares of 1e-4: A t² = 5e-5 each
    assert rep.rows[0].tolerance_rad == pytest.approx(math.sqrt(5e-5 / 4))
    assert rep.rows[0].current_rad == -0.02 and rep.rows[0].tighten_by == pytest.approx(0.02 / math.sqrt(5e-5 / 4))
    doc = json.loads(json.dumps(tolerances_json(rep), allow_nan=False))
    assert doc["target"] == 1e-4 and doc["incoherent_floor"] == 0.0
    assert set(doc["tolerances"][0]) >= {"family", "knob", "current_rad", "tolerance_rad", "tighten_by"}
    assert doc["tolerances"][2]["tolerance_rad"] is None


def test_floor_above_target_is_said_plainly():
    qf = _x_repeated(10, floor=0.02)
    rep = tolerances(qf, 0.01, cycles=10)
    assert not rep.feasible and rep.max_cycles == 5
    msg = floor_message(rep)
    assert "0.02 alone exceeds the target 0.01" in msg and "x 0.02" in msg and "at most 5 repetitions" in msg
    assert rep.rows[0].status == "floor too high"
    assert not tolerances(_x_repeated(1, floor=0.01), 0.01).feasible  # the floor uses the whole target
    assert "not even one" in floor_message(tolerances(_x_repeated(1, floor=0.5), 0.01))
    assert floor_message(tolerances(_x_repeated(1, floor=0.001), 0.01)) is None


@pytest.mark.parametrize("bad", [0, 0.0, 1, 1.5, -0.1, float("nan"), float("inf"), "0.01", True, None])
def test_invalid_targets(bad):
    with pytest.raises(InputError, match="target"):
        tolerances(_x_repeated(1), bad)


def test_invalid_options_and_forms():
    with pytest.raises(InputError, match="assume"):
        tolerances(_x_repeated(1), 0.01, assume="typical")
    with pytest.raises(InputError, match="allocation"):
        tolerances(_x_repeated(1), 0.01, allocation="greedy")
    with pytest.raises(InputError, match="cycles"):
        tolerances(_x_repeated(1), 0.01, cycles=0)
    labels = (("a", "k"), ("b", "k"))
    with pytest.raises(ValueError, match="symmetric"):
        tolerances(QuadraticForm(labels, np.array([[1, 1], [0, 1.0]]), np.zeros(2), 0.0, {}), 0.01)
    with pytest.raises(ValueError, match="negative"):
        tolerances(QuadraticForm(labels, np.diag([1, -1.0]), np.zeros(2), 0.0, {}), 0.01)
    with pytest.raises(ValueError, match="shape"):
        tolerances(QuadraticForm(labels, np.eye(3), np.zeros(2), 0.0, {}), 0.01)


# ---- from the engines, checked against cirq's density-matrix simulator ---------------------------


@pytest.mark.parametrize("engine", ["clifford", "generators"])
@pytest.mark.parametrize("n_reps, target", [(10, 1e-2), (1000, 1e-4)])
def test_issue_check_from_the_engines(engine, n_reps, target):
    """The issue's check with the engine's own quadratic form: N X gates with one over-rotation,
    no incoherent error; tolerance vs 2·arcsin(sqrt(E))/N within 5 %."""
    from budget.analysis.sensitivity import quadratic_form
    from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
    from budget.errors.attach import attach
    from budget.errors.model import ErrorModel

    circuit = StructuredCircuit(("q[0]",), (Repeat((Layer((Operation("x", (0,)),)),), n_reps),))
    noisy = attach(circuit, ErrorModel.from_dict({"gates": {"x": {"overrotation": 1e-3}}}))
    qf = quadratic_form(noisy, "process", engine=engine)
    assert qf.floor == 0
    tol = tolerances(qf, target).rows[0].tolerance_rad
    assert tol == pytest.approx(2 * math.asin(math.sqrt(target)) / n_reps, rel=0.05)


def _knob_model(values: dict[tuple[str, str], float], r: float) -> dict:
    gates: dict[str, dict] = {"h": {"duration_ns": 24.0, "avg_infidelity": r}, "sx": {"duration_ns": 24.0, "avg_infidelity": r},
                              "cz": {"duration_ns": 60.0, "avg_infidelity": 4 * r, "z_phase": [0.0, 0.0]}}
    for (family, knob), v in values.items():
        if knob.startswith("z_phase["):
            gates[family]["z_phase"][int(knob[8])] = v
        else:
            gates[family][knob] = v
    return {"qubits": {"t1_us": 80.0, "t2_us": 60.0}, "gates": gates}


@pytest.mark.parametrize("metric", ["process", "state"])
def test_worst_case_tolerances_meet_the_target_in_cirq(metric):
    """End to end: a 2-qubit block repeated 6 times with five coherent knobs and incoherent error;
    the knobs set to the worst corner of their tolerance box give, in cirq's density-matrix
    simulation (tests/reference.py), an infidelity close to the target (leading-order accuracy),
    and today's values give the leading-order prediction."""
    from budget.analysis.sensitivity import quadratic_form
    from budget.analysis.worstcase import box_maximum
    from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
    from budget.errors.attach import attach
    from budget.errors.model import ErrorModel
    from tests.reference import cirq_infidelity

    block = (Layer((Operation("h", (0,)), Operation("sx", (1,)))), Layer((Operation("cz", (0, 1)),)),
             Layer((Operation("sx", (0,)),)))
    circuit = StructuredCircuit(("q[0]", "q[1]"), (Repeat(block, 6),))
    today = {("h", "overrotation"): 0.004, ("sx", "overrotation"): -0.003, ("cz", "cphase"): 0.01,
             ("cz", "z_phase[0]"): 0.002, ("cz", "z_phase[1]"): -0.002}
    noisy = attach(circuit, ErrorModel.from_dict(_knob_model(today, 1e-4)))
    qf = quadratic_form(noisy, metric, engine="generators")
    assert cirq_infidelity(noisy, metric) == pytest.approx(float(qf.values_rad @ qf.matrix @ qf.values_rad) + qf.floor, rel=0.05)
    target = qf.floor + 2e-3
    rep = tolerances(qf, target)
    t = np.array([next(r.tolerance_rad for r in rep.rows if (r.family, r.knob) == label) for label in qf.labels])
    signs = box_maximum(qf.matrix, np.where(np.isinf(t), 0, t)).signs
    corner = dict(zip(qf.labels, signs * np.where(np.isinf(t), 0, t)))
    worst = cirq_infidelity(attach(circuit, ErrorModel.from_dict(_knob_model(corner, 1e-4))), metric)
    assert worst == pytest.approx(target, rel=0.05)


# ---- the command line ----------------------------------------------------------------------------

EXAMPLES = Path(__file__).resolve().parent.parent / "circuits"


def _cli(*args: str):
    from typer.testing import CliRunner

    from budget.cli import app

    return CliRunner().invoke(app, list(args), catch_exceptions=False)


def test_cli_tolerances_worked_example(tmp_path):
    """The worked example of docs/tolerances.md: terminal and JSON carry the same numbers."""
    out = tmp_path / "t.json"
    res = _cli("tolerances", str(EXAMPLES / "parity_cycle.qasm"), "--errors", str(EXAMPLES / "fen_q8.toml"),
               "--target", "0.06", "--cycles", "3", "--json", str(out), "--width", "120")
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text())
    assert doc["schema_version"] == 1 and doc["kind"] == "tolerances" and doc["feasible"] and doc["target"] == 0.06
    top = doc["tolerances"][0]
    assert (top["family"], top["knob"], top["status"]) == ("cz", "cphase", "tighten")
    assert f"{top['tighten_by']:.3g}x" in res.output and "tighten" in res.output
    assert abs(sum(k["share"] for k in doc["sensitivity"]["knobs"]) - doc["sensitivity"]["coherent"]) < 1e-12
    assert "calibration round" in res.output
    docs = (EXAMPLES.parent / "docs" / "tolerances.md").read_text()
    assert f"│ cz     │ cphase       │        0.03 │ {top['tolerance_rad']:15.4g} │ {top['tighten_by']:9.3g}x │" in docs
    f = doc["common_factor"]
    assert (f"calibration must get {f:.3g}x better" if f > 1 else f"they could all grow by {1 / f:.3g}x") in docs
    assert f"at the tolerances   {doc['closed_loop']['achieved']:.4g}" in docs and doc["closed_loop"]["converged"]


@pytest.mark.parametrize("extra, message", [
    (("--target", "0"), "target = 0.0"),
    (("--target", "1.5"), "target = 1.5"),
    (("--target", "0.1", "--engine", "exact"), "quadratic forms come from"),
    (("--target", "0.1", "--by-pair", "--by-operation"), "choose one grouping"),
])
def test_cli_tolerances_bad_input(tmp_path, extra, message):
    out = tmp_path / "t.json"
    res = _cli("tolerances", str(EXAMPLES / "parity_cycle.qasm"), "--errors", str(EXAMPLES / "fen_q8.toml"),
               "--json", str(out), *extra)
    assert res.exit_code == 2
    assert message in res.output and "Traceback" not in res.output
    assert len(res.output.strip().splitlines()) == 1
    assert not out.exists()
