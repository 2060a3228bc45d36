"""The report's sections on measured data and decisions: provenance, uncertainty band,
compensation, schedule. Their numbers are those of the commands (whose physics is checked in
test_import, test_sweep, test_compensate, test_plan); here: they appear, and agree."""

from __future__ import annotations

from pathlib import Path

import pytest

from budget import analyze
from budget.analysis.compensate import compensate
from budget.calibdata.importer import import_tables, to_toml
from budget.report.content import gather
from budget.report.render import report_files

ROOT = Path(__file__).resolve().parent.parent
ECHO = ROOT / "circuits" / "echo_xy4.qasm"
MODEL = """[qubits]
t1_us = { low = 300.0, high = 400.0 }
[gates.x]
duration_ns = 40.0
overrotation = { value = 0.004, sigma = 0.002 }   # amplitude scan of the invented lab
[gates.y]
duration_ns = 40.0
overrotation = { value = 0.003, sigma = 0.002 }
z_phase = 0.001
[calibration.drift_rad_per_hour]
"x.overrotation" = 0.0005
"""


def test_sections_appear_and_agree_with_the_commands(tmp_path):
    m = tmp_path / "m.toml"
    m.write_text(MODEL)
    data = gather(ECHO, m, target=0.05, cycles=5, max_cycles=200, points=6, hours=12)
    ex = data.extras
    assert ("gates.x.overrotation", "{ value = 0.004, sigma = 0.002 }", "amplitude scan of the invented lab") in ex.provenance
    band = ex.band
    assert band is not None and band.samples >= 10
    # the central curve is the actual infidelity of the central model at each N
    for n, value in list(zip(band.repetitions, band.central))[:3]:
        assert value == pytest.approx(analyze(ECHO, m, cycles=n).actual_infidelity, rel=1e-9)
    assert all(lo <= hi for lo, hi in zip(band.q05, band.q95))
    assert ex.compensation.after == pytest.approx(compensate(ECHO, m, cycles=5).after, rel=1e-12)
    assert ex.schedule is not None and ex.schedule.hours == 12
    files = report_files(data)
    md = files["report.md"]
    for heading in ("Where the model's numbers came from", "How sure: the depth curve", "Free compensation",
                    "Calibration schedule for the next 12 hours"):
        assert heading in md
    assert "uncertainty-band.svg" in files and files["uncertainty-band.svg"].startswith("<svg")


def test_imported_model_shows_its_sources(tmp_path):
    data_dir = ROOT / "circuits" / "calibration"
    m = tmp_path / "fen.toml"
    m.write_text(to_toml(import_tables([data_dir / "fen_q8_qubits.csv", data_dir / "fen_q8_gates.csv"])))
    data = gather(ECHO, m, target=0.05, cycles=2, max_cycles=50, points=4)
    rows = {k: note for k, _, note in data.extras.provenance}
    assert rows["qubits.t1_us"] == "fen_q8_qubits.csv row 2, t1 [ms] (ms × 1000)"
    assert data.extras.band is not None  # the gates table gives standard deviations


def test_a_model_without_notes_or_uncertainties(tmp_path):
    data = gather(ECHO, {"gates": {"x": {"overrotation": 0.01}}}, target=0.05, cycles=2, max_cycles=20, points=3)
    assert data.extras.band is None and data.extras.provenance == ()
    md = report_files(data)["report.md"]
    assert "no uncertainties" in md and "carries no notes" in md
