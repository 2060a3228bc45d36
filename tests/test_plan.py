"""`budget plan`: the cheapest calibration schedule, checked by hand and against brute force.

References: N repetitions of an X over-rotation δ have coherent process infidelity
sin²(Nδ/2) ≈ N²δ²/4 (design.md §6, common practice), so A = N²/4; the MILP's optimum is
compared with an exhaustive search over the same menus (common practice, no source).
"""

from __future__ import annotations

import itertools
import json
import math

import pytest
from typer.testing import CliRunner

from budget.analysis.plan import _menu, plan
from budget.cli import app
from budget.problems import InputError
from calib_cases import ONE_X, X_AND_SX, files

runner = CliRunner()
N = 50


def test_no_drift_one_knob_by_hand(tmp_path):
    # A = N²/4 per rad²; the budget E allows σ_max = sqrt(E/A); the cheapest grid σ below it is
    # σ_max/√2 (cost falls as σ grows), measured once.
    c, m = files(tmp_path, ONE_X, "[gates.x]\nduration_ns = 40.0\noverrotation = 0.02\navg_infidelity = 0.0\n")
    target = 1e-2
    s = plan(c, m, target=target, hours=8, cycles=N)
    (k,) = s.knobs
    assert k.per_rad2 == pytest.approx(N**2 / 4, rel=1e-9)
    assert (k.action, k.rounds) == ("calibrate", 1)  # N²δ²/4 = 0.25 > 0.01: leaving it fails
    assert k.sigma_rad == pytest.approx(math.sqrt(target / (N**2 / 4)) / math.sqrt(2), rel=1e-12)
    assert s.predicted <= target


def test_a_knob_already_good_enough_is_left_alone(tmp_path):
    c, m = files(tmp_path, ONE_X, "[gates.x]\noverrotation = 0.001\n")
    s = plan(c, m, target=1e-2, hours=8, cycles=N)  # N²δ²/4 = 6.25e-4 < 0.01
    assert s.knobs[0].action == "leave" and s.device_s == 0.0


def test_milp_matches_exhaustive_search(tmp_path):
    c, m = files(tmp_path, X_AND_SX, "[gates.x]\nduration_ns = 40.0\noverrotation = 0.01\navg_infidelity = 1e-5\n"
                 "[gates.sx]\nduration_ns = 24.0\noverrotation = 0.008\navg_infidelity = 1e-5\n"
                 "[calibration.drift_rad_per_hour]\n\"x.overrotation\" = 0.004\n\"sx.overrotation\" = 0.001\n")
    target, hours = 2e-2, 12.0
    s = plan(c, m, target=target, hours=hours, cycles=N)
    # rebuild the same menus and search every combination
    from budget.analysis.calibration import read_calibration
    from budget.analysis.phase_estimation import find_probes
    from budget.analysis.sensitivity import quadratic_form
    from budget.analysis.run import read_circuit, read_model
    from budget.errors.attach import attach

    model = read_model(m)
    noisy = attach(read_circuit(c).with_cycles(N), model)
    qf = quadratic_form(noisy, "process")
    probes, settings = find_probes(noisy), read_calibration(model.calibration)
    menus = [_menu(label, float(qf.matrix[i, i]), float(qf.values_rad[i]), probes.get(label, ()), settings,
                   target - qf.floor, hours) for i, label in enumerate(qf.labels)]
    best = math.inf
    for combo in itertools.product(*menus):
        if qf.floor + sum(o.per_rad2 * o.mean_square_rad2 for o in combo) <= target:
            best = min(best, sum(o.device_s for o in combo))
    assert s.device_s == pytest.approx(best, rel=1e-9)
    assert any(k.rounds > 1 for k in s.knobs)  # the fast drift forces recalibration within 12 h
    assert s.predicted <= target * (1 + 1e-9)
    assert s.baseline_device_s is not None and s.baseline_device_s >= s.device_s


def test_floor_above_target(tmp_path):
    c, m = files(tmp_path, ONE_X, "[gates.x]\noverrotation = 0.01\navg_infidelity = 0.01\n")
    with pytest.raises(InputError, match="the incoherent floor alone is"):
        plan(c, m, target=1e-3, hours=8, cycles=10)


def test_cli_json(tmp_path):
    c, m = files(tmp_path, ONE_X, "[gates.x]\nduration_ns = 40.0\noverrotation = 0.02\n"
                 "[calibration.drift_rad_per_hour]\n\"x.overrotation\" = 0.002\n")
    j = tmp_path / "p.json"
    res = runner.invoke(app, ["plan", str(c), "-e", str(m), "--target", "0.01", "--hours", "24", "--cycles", str(N),
                              "--json", str(j), "--width", "150"])
    assert res.exit_code == 0, res.output
    data = json.loads(j.read_text())
    assert data["knobs"][0]["knob"] == "x.overrotation" and data["knobs"][0]["action"] == "calibrate"
    assert data["device_minutes_per_day"] == pytest.approx(data["device_minutes"])  # 24 h horizon
    assert "tightest tolerance" in res.output and "model predictions" in res.output
    res = runner.invoke(app, ["plan", str(c), "-e", str(m), "--target", "0.01", "--hours", "-1"])
    assert res.exit_code == 2 and "hours = -1.0" in res.output


def test_inline_drift_equals_the_calibration_table(tmp_path):
    base = "[gates.x]\nduration_ns = 40.0\navg_infidelity = 1e-5\n"
    c, m1 = files(tmp_path, ONE_X, base + "overrotation = 0.01\n[calibration.drift_rad_per_hour]\n\"x.overrotation\" = 0.003\n")
    m2 = tmp_path / "inline.toml"
    m2.write_text(base + "overrotation = { value = 0.01, drift_per_hour = 0.003 }\n")
    a, b = plan(c, m1, target=2e-2, hours=12, cycles=N), plan(c, m2, target=2e-2, hours=12, cycles=N)
    assert (a.knobs[0].sigma_rad, a.knobs[0].rounds, a.device_s) == (b.knobs[0].sigma_rad, b.knobs[0].rounds, b.device_s)
    assert a.knobs[0].rounds > 1


def test_an_uncertain_knob_left_alone_counts_its_spread(tmp_path):
    # δ = 0.001 alone passes (N²δ²/4 = 6.25e-4 < 0.01); known only to σ = 0.004 its mean square is
    # δ² + σ², N²(δ² + σ²)/4 = 0.0106 > 0.01: it must be calibrated.
    c, m = files(tmp_path, ONE_X, "[gates.x]\nduration_ns = 40.0\noverrotation = { value = 0.001, sigma = 0.004 }\n")
    s = plan(c, m, target=1e-2, hours=8, cycles=N)
    assert s.knobs[0].action == "calibrate"
