"""`budget sweep`: uncertain and drifting model values, checked against closed forms.

References: E[cos(aε)] = exp(-a²σ²/2) for ε ~ Normal(0, σ) (the normal characteristic function,
textbook); Var(X²) = 4μ²s² + 2s⁴ for X ~ Normal(μ, s) (textbook); Sobol indices as variance
shares (Sobol, Math. Comput. Simul. 55, 271 (2001)); F_pro = cos²(δ/2) for a rotation error δ
(design.md §6, common practice).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from typer.testing import CliRunner

from budget.analysis.sweep import sweep
from budget.cli import app
from budget.errors.model import ErrorModel, load_model
from budget.problems import InputError, ModelError
from calib_cases import ONE_X, X_AND_SX, files

ROOT = Path(__file__).resolve().parent.parent
runner = CliRunner()



def test_uncertain_values_load_with_their_central_value():
    m = ErrorModel.from_dict({"qubits": {"t1_us": {"low": 80, "high": 120}},
                              "gates": {"cz": {"z_phase": [{"value": 0.002, "sigma": 0.001}, 0.0],
                                               "cphase": {"value": 0.03, "sigma": 0.004, "drift_per_hour": 0.002}}}})
    assert m.qubit_defaults.t1_us == 100.0
    assert m.gates["cz"].z_phase == (0.002, 0.0) and m.gates["cz"].cphase == 0.03
    assert {s.path for s in m.uncertain} == {("qubits", "t1_us"), ("gates", "cz", "z_phase", "0"), ("gates", "cz", "cphase")}


@pytest.mark.parametrize("table,message", [
    ({"value": 0.1, "sigma": -1}, r"gates.x.overrotation.sigma = -1.0 in <dict>: a standard deviation must not be negative"),
    ({"low": 0.2, "high": 0.1}, r"gates.x.overrotation = .* needs low < high"),
    ({"low": 0.1}, r"needs both low and high"),
    ({"value": 0.1, "low": 0.0, "high": 0.2}, r"either \{ value, sigma \} \(normal\) or \{ low, high \}"),
    ({"value": "a", "sigma": 0.1}, r"gates.x.overrotation = 'a' in <dict>: expected a number \(radians\)"),
    ({"value": 0.1, "drift_per_hour": -2}, r"drift_per_hour = -2.0 .* must not be negative"),
])
def test_bad_uncertainty_tables(table, message):
    with pytest.raises(ModelError, match=message):
        ErrorModel.from_dict({"gates": {"x": {"overrotation": table}}})


def test_closed_form_repeated_rotation(tmp_path):
    # N repetitions of X with over-rotation ε (one value per sample): the errors commute and add,
    # U_err = RX(Nε), process infidelity sin²(Nε/2) = (1 - cos Nε)/2. For ε ~ Normal(0, σ),
    # E[cos Nε] = exp(-N²σ²/2) (characteristic function), so E = (1 - exp(-N²σ²/2))/2.
    n, sigma = 20, 0.05
    c, m = files(tmp_path, ONE_X, f"[gates.x]\noverrotation = {{ value = 0.0, sigma = {sigma} }}\n")
    r = sweep(c, m, samples=600, cycles=n, workers=1, sobol_base=0, seed=3)
    expected = (1 - math.exp(-n * n * sigma * sigma / 2)) / 2
    assert abs(r.now.mean - expected) < 3 * r.now.mean_stderr
    assert r.now.mean_stderr == pytest.approx(r.now.std / math.sqrt(600))
    # median: sin²(N|ε|/2) at the median of |ε| = 0.6745 σ (half-normal median, textbook)
    assert r.now.median == pytest.approx(math.sin(n * 0.6744897501960817 * sigma / 2) ** 2, rel=0.15)


def test_sobol_indices_are_variance_shares(tmp_path):
    # Two independent over-rotations on two qubits, N = 10 repetitions, small angles: infidelity
    # ≈ a²/4 + b²/4 with a = N(μ1+ε1), b = N(μ2+ε2) (the a²b²/16 interaction is ~1e-7 of it), so
    # the variance shares are V_i ∝ 4 m_i² s_i² + 2 s_i⁴ (m = Nμ, s = Nσ): S_1 = 0.902, S_2 = 0.098.
    c, m = files(tmp_path, X_AND_SX, "[gates.x]\noverrotation = { value = 0.003, sigma = 0.001 }\n"
                                      "[gates.sx]\noverrotation = { value = 0.002, sigma = 0.0005 }\n")
    r = sweep(c, m, samples=2, cycles=10, workers=1, sobol_base=256, seed=2)
    v = [(4 * (10 * mu) ** 2 * (10 * s) ** 2 + 2 * (10 * s) ** 4) for mu, s in ((0.003, 0.001), (0.002, 0.0005))]
    shares = {"x.overrotation": v[0] / sum(v), "sx.overrotation": v[1] / sum(v)}
    assert [c.knob for c in r.contributions] == ["x.overrotation", "sx.overrotation"]
    for c in r.contributions:
        assert c.index == pytest.approx(shares[c.knob], abs=0.04)
        assert c.first_order == pytest.approx(shares[c.knob], abs=0.04)
        assert c.index_low <= shares[c.knob] <= c.index_high  # the 90 % bootstrap interval holds the true share
        assert c.index_high - c.index_low < 0.3


def test_drift_moves_the_distribution_as_the_calibration_table_says(tmp_path):
    # x.overrotation drifts at D = 0.01 rad/h from an exact 0: at hour h every sample has δ = ±D h,
    # so with N = 1 the infidelity is sin²(D h/2) exactly, for every sample.
    c, m = files(tmp_path, ONE_X, "[gates.x]\noverrotation = 0.0\n[calibration.drift_rad_per_hour]\n\"x.overrotation\" = 0.01\n")
    r = sweep(c, m, samples=8, hours=4, hour_points=3, workers=1, sobol_base=0)
    assert [h for h, _ in r.hours] == [0.0, 2.0, 4.0]
    for h, dist in r.hours:
        assert dist.median == pytest.approx(math.sin(0.01 * h / 2) ** 2, abs=1e-15)
        assert dist.std == pytest.approx(0.0, abs=1e-15)


def test_inline_drift_and_target(tmp_path):
    c, m = files(tmp_path, ONE_X, "[gates.x]\noverrotation = { value = 0.0, sigma = 0.01, drift_per_hour = 0.02 }\n")
    r = sweep(c, m, samples=200, hours=2, hour_points=2, target=1e-4, workers=1, sobol_base=0)
    p0, p2 = r.hours[0][1].p_meet_target, r.hours[1][1].p_meet_target
    # P(sin²(ε/2) <= 1e-4) = P(|ε| <= 0.02) = P(|Z| <= 2) = 0.954 for σ = 0.01 (normal table)
    assert p0 == pytest.approx(0.954, abs=0.05)
    assert p2 < p0  # after 2 h every sample has moved by 0.04 rad in its own direction


def test_same_seed_same_numbers_and_resume(tmp_path):
    c, m = files(tmp_path, X_AND_SX, "[gates.x]\noverrotation = { low = -0.05, high = 0.05 }\n"
                                      "[gates.sx]\noverrotation = { value = 0.0, sigma = 0.01 }\n")
    out = tmp_path / "r.jsonl"
    full = sweep(c, m, samples=40, cycles=5, workers=1, sobol_base=4, out=out)
    lines = out.read_text().split("\n")
    # interrupted after 15 results, the last line cut in half
    out.write_text("\n".join(lines[:16]) + "\n" + lines[16][:10])
    calls = []
    resumed = sweep(c, m, samples=40, cycles=5, workers=1, sobol_base=4, out=out,
                    progress=lambda done, total: calls.append((done, total)))
    assert calls[0] == (15, 40 + 4 * (2 + 2))  # 40 samples, Saltelli design n (d + 2) with n = 4, d = 2
    assert resumed.to_dict() == full.to_dict()
    assert len(out.read_text().strip().split("\n")) == 1 + 40 + 16
    with pytest.raises(InputError, match="holds results of a different sweep \\(seed"):
        sweep(c, m, samples=40, cycles=5, workers=1, sobol_base=4, out=out, seed=9)


def test_dask_local_cluster_gives_the_same_numbers(tmp_path):
    distributed = pytest.importorskip("distributed")
    c, m = files(tmp_path, X_AND_SX, "[gates.x]\noverrotation = { value = 0.01, sigma = 0.02 }\n"
                                      "[gates.sx]\noverrotation = { low = -0.01, high = 0.01 }\n")
    local = sweep(c, m, samples=24, cycles=3, workers=1, sobol_base=4)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as cluster, \
            distributed.Client(cluster) as client:
        on_dask = sweep(c, m, samples=24, cycles=3, sobol_base=4, scheduler=client)
    assert on_dask.to_dict() == local.to_dict()


def test_cli_json_schema_and_bad_input(tmp_path):
    c, m = files(tmp_path, ONE_X, "[gates.x]\noverrotation = { value = 0.0, sigma = 0.02 }\n")
    j = tmp_path / "s.json"
    res = runner.invoke(app, ["sweep", str(c), "-e", str(m), "--samples", "30", "--hours", "1", "--target", "0.01",
                              "--sobol-base", "4", "--workers", "1", "--json", str(j), "--width", "120"])
    assert res.exit_code == 0, res.output
    data = json.loads(j.read_text())
    assert set(data) == {"metric", "samples", "infidelity", "p_meet_target", "contributions", "hours"}
    assert set(data["infidelity"]) == {"mean", "std", "median", "q05", "q95"}
    assert data["contributions"] == [{"knob": "x.overrotation", "site": "all", "index": 1.0}]  # the only uncertain value
    assert "model predictions" in res.output
    res = runner.invoke(app, ["sweep", str(c), "-e", str(m), "--sobol-base", "6", "--json", str(tmp_path / "no.json")])
    assert res.exit_code == 2 and "power of 2" in res.output and not (tmp_path / "no.json").exists()


def test_model_examples_still_load():
    load_model(ROOT / "circuits" / "fen_q8.toml")


def test_uncertain_t1_against_the_coherence_limit_formula(tmp_path):
    # One X of 40 ns, T2 = 100 µs fixed, T1 uniform on [80, 120] µs. Per draw the average fidelity is
    # (3 + e^{-t/T1} + 2 e^{-t/T2})/6 (design.md §6, widely used) and F_pro = (3 F_avg - 1)/2
    # (Nielsen 2002, d = 2); the sweep's mean must match its average over T1 (scipy quad).
    from scipy.integrate import quad

    c, m = files(tmp_path, ONE_X, "[qubits]\nt1_us = { low = 80.0, high = 120.0 }\nt2_us = 100.0\n"
                                  "[gates.x]\nduration_ns = 40.0\n")
    r = sweep(c, m, samples=64, workers=1, sobol_base=0)
    t = 0.040

    def infidelity(t1: float) -> float:
        f_avg = (3 + math.exp(-t / t1) + 2 * math.exp(-t / 100.0)) / 6
        return 1 - (3 * f_avg - 1) / 2

    expected = quad(infidelity, 80.0, 120.0)[0] / 40.0
    assert abs(r.now.mean - expected) < 3 * r.now.mean_stderr + 1e-12
    assert r.now.q05 < expected < r.now.q95


def test_uncertain_zz_rate_against_its_closed_form(tmp_path):
    # An idle pair (one 1 µs identity per cycle, no other error) with static ZZ ζ: N cycles give
    # diag(1,1,1,e^{iφ}), φ = 2π ζ T N (issue 14's convention), process infidelity
    # 1 - |3 + e^{iφ}|²/16 = (3/8)(1 - cos φ). For ζ ~ Normal(μ, σ), φ = aζ with a = 2π T N:
    # E[cos aζ] = cos(aμ) exp(-a²σ²/2) (characteristic function), so
    # E = (3/8)(1 - cos(aμ) exp(-a²σ²/2)).
    n, mu_khz, sigma_khz = 10, 20.0, 4.0  # P(draw < 0) ≈ 3e-7: the rate's floor at 0 never matters
    circuit = 'OPENQASM 2.0;\ninclude "qelib1.inc";\nqreg q[2];\nid q[0];\n'
    model = ("[gates.id]\nduration_ns = 1000.0\n"
             f'[couplings."q[0],q[1]"]\nzz_khz = {{ value = {mu_khz}, sigma = {sigma_khz} }}\n')
    c, m = files(tmp_path, circuit, model)
    r = sweep(c, m, samples=600, cycles=n, workers=1, sobol_base=0, seed=5)
    a = 2 * math.pi * 1e-6 * n * 1e3  # rad per kHz: T = 1 µs per cycle, N cycles
    expected = 3 / 8 * (1 - math.cos(a * mu_khz) * math.exp(-(a * sigma_khz) ** 2 / 2))
    assert abs(r.now.mean - expected) < 3 * r.now.mean_stderr
    assert r.now.std > 0  # the coupler's rate is drawn, not held at its central value
