"""Calibration cost: phase estimation against its closed form and a simulation of the experiment.

Sources:
- Cramér-Rao for amplified phase estimation: Var >= e^{2nΓ}/(m n²), n* = 1/Γ, Var_min = e²Γ²/m;
  Γ = 1e-3, m = 1000 gives n* = 1000, Var = 7.389056e-9 (design.md §6; robust phase estimation,
  Kimmel, Low, Yoder, PRA 92, 062315 (2015)); the optimum is also found with scipy.optimize.
- Seeded Monte Carlo: binomial shots of the cos/sin quadratures (numpy), estimator variance within
  the chi-square interval of its sample variance (scipy.stats.chi2).
- Decay per repetition: randomized-benchmarking relations p = 1 - d r/(d-1) (Magesan, Gambetta,
  Emerson, PRL 106, 180504 (2011)): d = 2, r = 0.001 -> p = 0.998; d = 4, r = 0.0075 -> p = 0.99.
  Relaxation: the mean shrink of the three Bloch axes under cirq's amplitude and phase damping.
- Phase per repetition: eigenphase spread of (G e^{-iδK})^n (G^n)† for small δ and large n (numpy).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import cirq
import numpy as np
import pytest
import scipy.linalg
import scipy.optimize
import scipy.stats

from budget.analysis.calibration import (
    CalibrationSettings, calibration_json, calibration_plan, read_calibration,
)
from budget.analysis.phase_estimation import (
    Probe, decay_per_repetition, find_probes, minimum_variance, optimal_depth, phase_per_radian,
    shots_needed, two_quadrature_variance, variance_bound,
)
from budget.analysis.tolerances import tolerances
from budget.circuit.ir import Layer, Operation, StructuredCircuit
from budget.engines.base import QuadraticForm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel, load_model
from budget.errors.noisy import NoisyOperation, Relaxation
from budget.pauli_algebra import pauli_matrix
from budget.problems import ModelError

TRIALS = 20_000


def _chi2_interval(sample_var: float, trials: int, level: float = 0.999) -> tuple[float, float]:
    """Interval for the true variance from a sample variance of ``trials`` draws."""
    lo, hi = scipy.stats.chi2.ppf([(1 + level) / 2, (1 - level) / 2], trials - 1)
    return (trials - 1) * sample_var / lo, (trials - 1) * sample_var / hi


def _quadratures(rng, depth, gamma, shots_each, phase, size):
    """Binomial outcomes of the cos and sin quadratures -> estimates of V cos φ and V sin φ."""
    v = math.exp(-depth * gamma)
    xc = 2 * rng.binomial(shots_each, (1 + v * math.cos(phase)) / 2, size=size) / shots_each - 1
    xs = 2 * rng.binomial(shots_each, (1 + v * np.sin(phase)) / 2, size=size) / shots_each - 1
    return xc, xs


def _wrap(x):
    return (x + np.pi) % (2 * np.pi) - np.pi


# ---- closed form ---------------------------------------------------------------------------------


def test_closed_form_check_values():
    assert optimal_depth(1e-3) == 1000
    assert variance_bound(1000, 1e-3, 1000) == pytest.approx(7.389056e-9, rel=1e-6)
    assert minimum_variance(1e-3, 1000) == pytest.approx(7.389056e-9, rel=1e-6)


@pytest.mark.parametrize("gamma", [2e-4, 3.7e-3, 0.05, 0.3])
def test_optimal_depth_against_scipy(gamma):
    log_var = lambda n: 2 * n * gamma - 2 * math.log(n)  # noqa: E731, log of e^{2nΓ}/n²
    res = scipy.optimize.minimize_scalar(log_var, bounds=(0.5, 10 / gamma), method="bounded", options={"xatol": 1e-8})
    assert res.x == pytest.approx(1 / gamma, rel=1e-4)
    n = optimal_depth(gamma)
    assert all(variance_bound(n, gamma, 1) <= variance_bound(k, gamma, 1) for k in (n - 1, n + 1) if k >= 1)


# ---- Monte Carlo of the experiment ---------------------------------------------------------------


def test_monte_carlo_at_the_steep_point_reaches_the_cramer_rao_bound():
    """Known visibility, one quadrature at the fringe's steepest point, φ̂ = arccos(x̂ / V).
    m = 4000 keeps the estimator's nonlinearity (order 1/(m V²)) well inside the interval."""
    rng = np.random.default_rng(20150601)
    gamma, n, m = 1e-3, 1000, 4000
    v = math.exp(-n * gamma)
    delta = 2e-6
    phase = math.pi / 2 + n * delta  # reference phase π/2 set by the probe's last pulse
    x = 2 * rng.binomial(m, (1 + v * math.cos(phase)) / 2, size=TRIALS) / m - 1
    est = (np.arccos(np.clip(x / v, -1, 1)) - math.pi / 2) / n
    lo, hi = _chi2_interval(float(np.var(est, ddof=1)), TRIALS)
    assert lo <= variance_bound(n, gamma, m) <= hi
    assert abs(np.mean(est) - delta) < 5 * math.sqrt(variance_bound(n, gamma, m) / TRIALS)


@pytest.mark.parametrize("phase", [0.0, math.pi / 4, 2.0])
def test_monte_carlo_two_quadratures_match_the_planned_variance(phase):
    """φ̂ = atan2(ŷ, x̂), half the shots per quadrature: the delta-method variance, which lies
    between the Cramér-Rao bound and twice it (the factor the planner counts)."""
    rng = np.random.default_rng(int(100 * phase) + 7)
    gamma, n, m = 1e-3, 1000, 4000
    xc, xs = _quadratures(rng, n, gamma, m // 2, phase, TRIALS)
    est = _wrap(np.arctan2(xs, xc) - phase) / n
    predicted = two_quadrature_variance(n, gamma, m, phase)
    lo, hi = _chi2_interval(float(np.var(est, ddof=1)), TRIALS)
    assert lo <= predicted <= hi
    bound = variance_bound(n, gamma, m)
    assert bound <= predicted <= 2 * bound + 1e-30


@pytest.mark.parametrize("target", [1e-3, 1e-6])
def test_the_planned_experiment_delivers_the_required_sigma(target):
    """The whole plan for one knob, simulated: ladder depths 1, 2, 4, … (ladder_shots per
    quadrature) fix the branch, the final depth uses the planned shots; robust phase estimation
    (Kimmel, Low, Yoder 2015). The sample std stays within σ = tolerance / k, no branch is lost.
    Target 1e-3: a loose tolerance, final depth below n*; 1e-6: final depth n* = 1000."""
    rng = np.random.default_rng(42)
    settings = CalibrationSettings(drift_rad_per_hour={})
    qf = QuadraticForm((("cz", "cphase"),), np.array([[2500.0 / 16]]), np.array([0.02]), 0.0, {})
    report = tolerances(qf, target)
    probe = Probe(("q[0]", "q[1]"), 1e-3, 1.0, 60.0)
    plan = calibration_plan(report, {("cz", "cphase"): (probe,)}, settings)
    site = plan.knobs[0].sites[0]
    sigma = plan.knobs[0].sigma_rad
    trials = 4000
    truth = rng.uniform(-0.02, 0.02, trials)  # today's offsets, far outside the tolerance
    est = np.zeros(trials)
    for depth, each in [(d, settings.ladder_shots) for d in site.ladder] + [(site.depth, site.shots_final // 2)]:
        v = math.exp(-depth * probe.gamma_per_rep)
        phase = depth * probe.phase_per_rad * truth
        xc = 2 * rng.binomial(each, (1 + v * np.cos(phase)) / 2) / each - 1
        xs = 2 * rng.binomial(each, (1 + v * np.sin(phase)) / 2) / each - 1
        est += _wrap(np.arctan2(xs, xc) - depth * probe.phase_per_rad * est) / (depth * probe.phase_per_rad)
    err = est - truth
    assert np.max(np.abs(err)) < math.pi / (site.depth * probe.phase_per_rad)  # no branch lost
    lo, _ = _chi2_interval(float(np.var(err, ddof=1)), trials)
    assert lo <= sigma**2
    assert np.std(err) > 0.5 * sigma  # the plan does not overspend by a large factor


# ---- from the error model ------------------------------------------------------------------------


def _op(gate: str, qubits: tuple[int, ...], *, r: float = 0.0, relax: tuple[Relaxation, ...] = ()) -> NoisyOperation:
    d = 2 ** len(qubits)
    return NoisyOperation(Operation(gate, qubits), gate, np.eye(d, dtype=complex), {},
                          depolarizing=r * d / (d - 1), relaxation=relax)


@pytest.mark.parametrize("gate, qubits, r, p", [("x", (0,), 0.001, 0.998), ("cz", (0, 1), 0.0075, 0.99)])
def test_decay_per_repetition_from_average_infidelity(gate, qubits, r, p):
    assert decay_per_repetition(_op(gate, qubits, r=r)) == pytest.approx(-math.log(p), rel=1e-9)


def test_decay_per_repetition_from_relaxation_matches_cirq_channels():
    """t = 50 ns, T1 = 100 µs, T2 = 80 µs: Γ = -ln(mean shrink of X, Y, Z) of cirq's channels."""
    t, t1, t2 = 50.0, 100e3, 80e3
    gamma = 1 - math.exp(-t / t1)
    c = math.exp(-t * (1 / t2 - 1 / (2 * t1)))
    op = _op("x", (0,), relax=(Relaxation(0, t, gamma, c),))
    kraus = [p @ a for p in cirq.kraus(cirq.phase_damp(1 - c * c)) for a in cirq.kraus(cirq.amplitude_damp(gamma))]
    shrink = [np.real(np.trace(s @ sum(k @ s @ k.conj().T for k in kraus))) / 2 for s in map(pauli_matrix, "XYZ")]
    assert decay_per_repetition(op) == pytest.approx(-math.log(np.mean(shrink)), rel=1e-9)
    assert decay_per_repetition(op) == pytest.approx(-math.log(2 * 0.9997084192538003 - 1), rel=1e-9)


def _attached():
    ops = (Operation("x", (0,)), Operation("sx", (1,)), Operation("h", (2,)), Operation("cz", (3, 4)),
           Operation("iswap", (5, 6)), Operation("rx", (7,), (0.3,)))
    circuit = StructuredCircuit(tuple(f"q[{i}]" for i in range(8)), (Layer(ops),))
    model = ErrorModel.from_dict({
        "qubits": {"t1_us": 100.0, "t2_us": 80.0},
        "gates": {
            "x": {"duration_ns": 40, "overrotation": 0.004, "axis_error": 0.001, "avg_infidelity": 1e-3},
            "sx": {"overrotation": 0.01}, "h": {"overrotation": 0.0}, "rx": {"overrotation": 0.0, "axis_error": 0.0},
            "cz": {"duration_ns": 60, "cphase": 0.01, "z_phase": [0.0, 0.001], "swap_angle": 0.0},
            "iswap": {"swap_angle": 0.0},
        },
    })
    return attach(circuit, model)


def test_phase_per_radian_matches_the_repeated_gate():
    """a = eigenphase spread of (G e^{-iδK})^n (G^n)† / (n δ), n = 4000, δ = 1e-6."""
    expected = {("x", "overrotation"): 1, ("x", "axis_error"): 0, ("sx", "overrotation"): 1,
                ("h", "overrotation"): 1, ("cz", "cphase"): 1, ("cz", "z_phase[1]"): 1,
                ("cz", "swap_angle"): 2, ("iswap", "swap_angle"): 2, ("rx", "axis_error"): 0}
    seen = set()
    for nop in _attached().distinct_layers()[0].operations:
        for knob, gen in nop.knob_generators.items():
            g = nop.op.unitary()
            k = sum(h * pauli_matrix(p) for p, h in gen.items())
            n, delta = 4000, 1e-6
            w = np.linalg.matrix_power(g @ scipy.linalg.expm(-1j * delta * k), n) @ np.linalg.matrix_power(g, n).conj().T
            phases = np.angle(np.linalg.eigvals(w))
            assert phase_per_radian(nop, knob) == pytest.approx((phases.max() - phases.min()) / (n * delta), abs=1e-3)
            if (nop.family, knob) in expected:
                assert phase_per_radian(nop, knob) == pytest.approx(expected[nop.family, knob], abs=1e-9)
                seen.add((nop.family, knob))
    assert seen == set(expected)


# ---- the plan ------------------------------------------------------------------------------------


def _report(values=(0.02, 1e-4), floor=0.0, target=1e-5):
    a = np.diag([2500.0 / 16, 100.0])
    qf = QuadraticForm((("cz", "cphase"), ("x", "overrotation")), a, np.array(values), floor, {"cz": floor})
    return tolerances(qf, target)


_PROBES = {
    ("cz", "cphase"): (Probe(("q[0]", "q[1]"), 1e-3, 1.0, 60.0), Probe(("q[1]", "q[2]"), 2e-3, 1.0, 60.0)),
    ("x", "overrotation"): (Probe(("q[0]",), 5e-4, 1.0, 40.0),),
}


def test_plan_numbers_follow_the_formulas():
    settings = read_calibration({"shot_overhead_us": 50, "circuit_overhead_ms": 2})
    report = _report()
    plan = calibration_plan(report, _PROBES, settings)
    assert [(p.family, p.reason) for p in plan.knobs] == [("cz", "tighten")]  # x is within tolerance
    knob = plan.knobs[0]
    tol = next(r.tolerance_rad for r in report.rows if r.family == "cz")
    assert knob.sigma_rad == pytest.approx(tol / 3)
    first, second = knob.sites
    assert (first.depth, second.depth) == (1000, 500)
    assert first.ladder == (1, 2, 4, 8, 16, 32, 64, 128, 256, 512) and first.circuits == 22
    m = 2 * math.e**2 * 1e-6 / knob.sigma_rad**2  # 2 e^{2nΓ}/(n² σ²) at n = 1/Γ
    assert m <= first.shots_final <= m + 2
    time = sum(2 * 100 * (50e-6 + d * 60e-9) for d in first.ladder) + first.shots_final * (50e-6 + 1000 * 60e-9) + 22 * 2e-3
    assert first.device_s == pytest.approx(time)
    assert knob.device_s == pytest.approx(first.device_s + second.device_s)
    assert plan.round_s == pytest.approx(knob.device_s) and plan.rounds_per_day is None
    parallel = calibration_plan(report, _PROBES, read_calibration({"parallel_sites": True}))
    assert parallel.knobs[0].device_s == pytest.approx(max(s.device_s for s in parallel.knobs[0].sites))


def test_drift_gives_interval_rounds_and_share():
    settings = read_calibration({"drift_rad_per_hour": {"cz.cphase": 0.002, "x.overrotation": 0.0005}})
    report = _report()
    plan = calibration_plan(report, _PROBES, settings)
    tol = {(r.family, r.knob): r.tolerance_rad for r in report.rows}
    hold = {(p.family, p.knob): p.hold_hours for p in plan.knobs}
    assert hold["cz", "cphase"] == pytest.approx(tol["cz", "cphase"] * (2 / 3) / 0.002)
    assert hold["x", "overrotation"] == pytest.approx(tol["x", "overrotation"] * (2 / 3) / 0.0005)
    assert {p.reason for p in plan.knobs} == {"tighten", "drift"}
    assert plan.interval_hours == pytest.approx(min(hold.values()))
    assert plan.rounds_per_day == pytest.approx(24 / plan.interval_hours)
    assert plan.day_share == pytest.approx(plan.round_s * plan.rounds_per_day / 86400)
    assert plan.scheduled_share <= plan.day_share
    doc = calibration_json(plan)
    assert doc["totals"]["round_minutes"] == pytest.approx(plan.round_s / 60)
    assert doc["knobs"][0]["sites"][0]["depth"] in (500, 1000, 2000)


def test_a_loose_tolerance_stops_the_ladder_early():
    """When n* would need fewer shots than a ladder step, the final depth is the shallowest that
    reaches σ with 2·ladder_shots shots (and no shallower one would)."""
    plan = calibration_plan(_report(target=1e-3, values=(0.02, 0.01)), _PROBES, CalibrationSettings())
    for knob in plan.knobs:
        for site in knob.sites:
            assert site.depth < round(1 / site.gamma_per_rep) and site.shots_final == 200
            assert shots_needed(knob.sigma_rad, site.depth, site.gamma_per_rep, 1.0) <= 200
            assert shots_needed(knob.sigma_rad, site.depth - 1, site.gamma_per_rep, 1.0) > 200
            assert max(site.ladder) < site.depth <= 2 * max(site.ladder)


def test_plan_edge_cases():
    settings = read_calibration({"drift_rad_per_hour": {"cz.cphase": 0.001}})
    infeasible = calibration_plan(_report(floor=2e-5), _PROBES, settings)
    assert infeasible.knobs == () and infeasible.round_s == 0
    echo = {("cz", "cphase"): (Probe(("q[0]", "q[1]"), 1e-3, 0.0, 60.0),)}
    plan = calibration_plan(_report(), echo, CalibrationSettings())
    assert "interleaved" in plan.unplanned["cz.cphase"]
    with pytest.raises(ModelError, match=r'calibration.drift_rad_per_hour."cz.cphse" = 0.001 in lab.toml: .*cz.cphase'):
        calibration_plan(_report(), _PROBES, read_calibration({"drift_rad_per_hour": {"cz.cphse": 0.001}}, source="lab.toml"))


def test_probes_from_an_attached_model():
    probes = find_probes(_attached())
    (x,) = probes["x", "overrotation"]
    assert x.qubits == ("q[0]",) and x.phase_per_rad == pytest.approx(1.0) and x.duration_ns == 40
    assert x.gamma_per_rep > -math.log(1 - 2e-3)  # depolarizing r = 1e-3 plus relaxation
    assert probes["x", "axis_error"][0].phase_per_rad == 0
    assert probes["cz", "swap_angle"][0].phase_per_rad == pytest.approx(2.0)


@pytest.mark.parametrize("table, message", [
    ({"drift": {"cz.cphase": 0.002}}, "calibration.drift = .* with their unit, as calibration.drift_rad_per_hour"),
    ({"drift_per_hour": {}}, "with their unit"),
    ({"drift_rad_per_hour": {"cz.cphase": "0.002 rad/h"}}, "plain number in rad per hour"),
    ({"drift_rad_per_hour": {"cz.cphase": -1.0}}, "drift rate >= 0"),
    ({"drift_rad_per_hour": 0.002}, "expected a table"),
    ({"shot_overhead": 10}, "unknown key; did you mean 'shot_overhead_us'"),
    ({"shot_overhead_us": -1}, "µs >= 0"),
    ({"sigma_factor": 1}, "> 1"),
    ({"ladder_shots": 2.5}, "whole number"),
    ({"max_depth": True}, "whole number"),
    ({"parallel_sites": "yes"}, "true or false"),
])
def test_bad_calibration_tables(table, message):
    with pytest.raises(ModelError, match=message):
        read_calibration(table, source="lab.toml")


def test_defaults_and_shots_formula():
    s = read_calibration(None)
    assert (s.shot_overhead_us, s.sigma_factor, s.ladder_shots, s.max_depth) == (100.0, 3.0, 100, 10_000)
    assert shots_needed(1e-4, 1000, 1e-3, 1.0) == 2 * math.ceil(math.e**2 * 1e-6 / 1e-8)


# ---- the command line ----------------------------------------------------------------------------

EXAMPLES = Path(__file__).resolve().parent.parent / "circuits"


def _cli(*args: str):
    from typer.testing import CliRunner

    from budget.cli import app

    return CliRunner().invoke(app, list(args), catch_exceptions=False)


def test_cli_cost_worked_example(tmp_path):
    """docs/tolerances.md's example: the plan's totals in the terminal and in JSON agree, and the
    drift rates of the model's [calibration] table set the schedule."""
    out = tmp_path / "c.json"
    res = _cli("cost", str(EXAMPLES / "parity_cycle.qasm"), "--errors", str(EXAMPLES / "fen_q8.toml"),
               "--target", "0.06", "--cycles", "3", "--json", str(out), "--width", "140")
    assert res.exit_code == 0, res.output
    doc = json.loads(out.read_text())["calibration"]
    assert doc["settings"]["drift_rad_per_hour"]["cz.cphase"] == 0.002
    cphase = next(k for k in doc["knobs"] if k["knob"] == "cphase")
    assert cphase["reason"] == "tighten" and len(cphase["sites"]) == 4
    totals = doc["totals"]
    assert f"{totals['round_minutes']:.3g} device minutes" in res.output
    assert f"{totals['rounds_per_day']:.3g} rounds per day" in res.output
    assert totals["day_share"] == pytest.approx(totals["round_minutes"] * totals["rounds_per_day"] / 1440)
    docs = (EXAMPLES.parent / "docs" / "tolerances.md").read_text()  # the worked example quotes this run
    assert f"{totals['round_minutes']:.3g} device minutes; drift sets {totals['rounds_per_day']:.3g} rounds" in docs


@pytest.mark.parametrize("table, message", [
    ('[calibration]\ndrift = { "cz.cphase" = 0.002 }\n', "calibration.drift = "),
    ('[calibration.drift_rad_per_hour]\n"cz.cphse" = 0.002\n', "the model has no knob cz.cphse; did you mean 'cz.cphase'"),
    ('[calibration.drift_rad_per_hour]\n"cz.cphase" = "2 mrad/h"\n', "plain number in rad per hour"),
])
def test_cli_cost_bad_calibration_table(tmp_path, table, message):
    model = tmp_path / "m.toml"
    model.write_text("[gates.cz]\nduration_ns = 60.0\ncphase = 0.05\navg_infidelity = 1e-3\n" + table)
    circ = tmp_path / "c.qasm"
    circ.write_text('OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nh q[0];\ncz q[0],q[1];\n')
    out = tmp_path / "out.json"
    res = _cli("cost", str(circ), "--errors", str(model), "--target", "0.05", "--json", str(out))
    assert res.exit_code == 2 and message in res.output and str(model) in res.output
    assert len(res.output.strip().splitlines()) == 1 and "Traceback" not in res.output
    assert not out.exists()


def test_drift_keys_follow_the_families_of_the_model():
    """"cz.cphase" reaches the per-pair families; a knob the model defines but the circuit does not
    use is ignored; a knob the model lacks is an error."""
    from budget.analysis.decide import decide

    circ = StructuredCircuit(("q[0]", "q[1]", "q[2]"), (Layer((Operation("h", (0,)),)), Layer((Operation("cz", (0, 1)),)),
                                                        Layer((Operation("cz", (1, 2)),))))
    model = {"gates": {"h": {"duration_ns": 24, "overrotation": 0.001}, "sx": {"overrotation": 0.001},
                       "cz": {"duration_ns": 60, "cphase": 0.05, "avg_infidelity": 1e-3}},
             "calibration": {"drift_rad_per_hour": {"cz.cphase": 0.002, "sx.overrotation": 0.001}}}
    d = decide(circ, model, target=0.01, family_by="pair")
    planned = {p.family: p.drift_rad_per_hour for p in d.plan.knobs if p.knob == "cphase"}
    assert planned == {"cz q[0],q[1]": 0.002, "cz q[1],q[2]": 0.002}
    model["calibration"]["drift_rad_per_hour"]["cz.swap_angle"] = 0.001
    with pytest.raises(ModelError, match="the model has no knob cz.swap_angle"):
        decide(circ, model, target=0.01)


# ---- one wording for the whole error-model file ---------------------------------------------------

def _message(fn) -> str:
    with pytest.raises(ModelError) as info:
        fn()
    return str(info.value)


def test_calibration_table_and_model_word_the_same_fault_the_same_way(tmp_path):
    """The [calibration] table and the rest of the model file share one message template
    (budget/errors/toml_keys.py): KEY.PATH = VALUE in FILE: RULE (style rule 4, docs/error-model.md)."""
    # not a table: the same key, the same value, so the very same line
    assert _message(lambda: ErrorModel.from_dict({"calibration": 3}, "lab.toml")) \
        == _message(lambda: read_calibration(3, source="lab.toml")) \
        == "calibration = 3 in lab.toml: expected a table"
    # a misspelt key: the same rule text, only the key path and suggestion differ
    model = _message(lambda: ErrorModel.from_dict({"qubits": {"t1_uss": 50.0}}, "lab.toml"))
    calib = _message(lambda: read_calibration({"sigma_factr": 2}, source="lab.toml"))
    assert model.startswith("qubits.t1_uss = 50.0 in lab.toml: unknown key; did you mean 't1_us'? valid keys here: ")
    assert calib.startswith("calibration.sigma_factr = 2 in lab.toml: unknown key; did you mean 'sigma_factor'? valid keys here: ")
    # a boolean key given a string
    ctx = {"context": [{"name": "c", "gate": "cz", "all_driven": "yes", "cphase": 0.01}]}
    assert _message(lambda: ErrorModel.from_dict(ctx, "lab.toml")) == \
        "context.0.all_driven = 'yes' in lab.toml: expected true or false"
    assert _message(lambda: read_calibration({"parallel_sites": "yes"}, source="lab.toml")) == \
        "calibration.parallel_sites = 'yes' in lab.toml: expected true or false"
    # a long value is shortened the same way everywhere (60 characters), uncertainty tables included
    spread = {"value": 0.0123456789, "low": 0.000123456789, "high": 0.0000987654321}  # uniform and normal at once
    for text in (_message(lambda: ErrorModel.from_dict({"gates": {"cz": {"cphase": "z" * 80}}}, "lab.toml")),
                 _message(lambda: ErrorModel.from_dict({"gates": {"cz": {"cphase": spread}}}, "lab.toml")),
                 _message(lambda: read_calibration({"drift_rad_per_hour": "y" * 80}, source="lab.toml"))):
        value = text.split(" = ", 1)[1].split(" in lab.toml: ", 1)[0]
        assert len(value) <= 60 and value.endswith("...")
    # read from a file, the calibration message names the file like every other key
    path = tmp_path / "m.toml"
    path.write_text("[calibration]\nladder_shots = 2.5\n")
    loaded = load_model(path)
    assert _message(lambda: read_calibration(loaded.calibration, source=loaded.source)) == \
        f"calibration.ladder_shots = 2.5 in {path}: expected a whole number >= 1"
