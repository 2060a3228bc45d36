"""The spectator-ZZ knob reads the same in every view: rad/µs with its rate in kHz.

The knob ``zz_rad_per_us`` is 2π·ζ·1 µs (docs/error-model.md); a lab sets ζ in kHz. The terminal
tolerance table, the JSON (``tolerance_lab``) and the Markdown report must show one number in one
unit, so a reader comparing them does not take rad/µs for rad.

Outside reference for the value: two idle qubits with static ZZ ζ for a time T pick up
diag(1, 1, 1, e^{iφ}), φ = 2π·ζ·T, whose process infidelity is 1 - |3 + e^{iφ}|²/16 ≈ 3φ²/16 for
small φ (the closed form issue 14 states; expand |3 + e^{iφ}|² = 10 + 6 cos φ). With the knob
x = 2π·ζ·1 µs that is (3/16)·(T/1 µs)²·x², so the coherent budget B gives the tolerance
x_tol = sqrt(16 B / 3) / (T/1 µs), ζ_tol = x_tol / (2π) in MHz.
"""

from __future__ import annotations

import json
import math
import re
from pathlib import Path

from typer.testing import CliRunner

from budget.cli import app

ROOT = Path(__file__).resolve().parent.parent
CIRCUIT = ROOT / "circuits" / "pair_memory_zz.qasm"  # four 200 ns idles: 800 ns per cycle
MODEL = ROOT / "circuits" / "fen_pair_zz.toml"  # zz_khz = 20 on q[0],q[1]
runner = CliRunner()
CYCLES, TARGET = 2, 0.05


def _closed_form_tolerance_khz(floor: float) -> float:
    t_us = CYCLES * 0.8
    x_tol = math.sqrt(16 * (TARGET - floor) / 3) / t_us
    return x_tol * 1000 / (2 * math.pi)


def test_zz_tolerance_in_khz_agrees_in_terminal_json_and_markdown(tmp_path):
    args = [str(CIRCUIT), "-e", str(MODEL), "--target", str(TARGET), "--cycles", str(CYCLES)]
    res = runner.invoke(app, ["tolerances", *args, "--json", str(tmp_path / "t.json"), "--width", "200"])
    assert res.exit_code == 0, res.output
    doc = json.loads((tmp_path / "t.json").read_text())
    (row,) = [r for r in doc["tolerances"] if r["knob"] == "zz_rad_per_us"]
    expected_khz = _closed_form_tolerance_khz(doc["incoherent_floor"])
    assert row["lab_unit"] == "kHz"
    assert abs(row["tolerance_lab"] - expected_khz) < 0.02 * expected_khz  # leading order vs small-φ form
    assert abs(row["current_rad"] - 2 * math.pi * 0.020) < 1e-12  # ζ = 20 kHz = 0.020 per µs

    # terminal: today's value and the tolerance with both units
    assert "0.1257 rad/µs = 20 kHz" in res.output
    terminal_khz = float(re.search(r"rad/µs = ([0-9.]+) kHz │ +(?:[0-9.]+x|—)", res.output).group(1))
    assert abs(terminal_khz - row["tolerance_lab"]) < 0.01

    # Markdown report: the same numbers, the same units, not "(rad)" alone
    rep = runner.invoke(app, ["report", *args, "--out", str(tmp_path / "rep")])
    assert rep.exit_code == 0, rep.output
    md = (tmp_path / "rep" / "report.md").read_text()
    (line,) = [ln for ln in md.splitlines() if ln.startswith("| zz q[0],q[1] · ZZ rate")]
    cells = [c.strip() for c in line.strip("|").split("|")]
    assert cells[1] == "0.126 rad/µs = 20 kHz"
    md_khz = float(re.fullmatch(r"[0-9.]+ rad/µs = ([0-9.]+) kHz", cells[2]).group(1))
    assert abs(md_khz - row["tolerance_lab"]) < 0.01 * row["tolerance_lab"]  # 3 significant digits


def test_report_model_section_lists_the_context_sections(tmp_path):
    # the report's "Error model used" must show what the file says about couplings, crosstalk,
    # bleed and [[context]] tables: a reader cannot otherwise see the ZZ rates behind the shares
    model = tmp_path / "m.toml"
    model.write_text(MODEL.read_text() + (
        '\n[crosstalk."q[0]->q[1]"]\nfraction = 0.02\naxis = "y"\n'
        '\n[bleed."x->x"."q[0]"]\nfraction = -0.01\n'
        '\n[[context]]\nname = "pair busy"\ngate = "x"\nqubits = "q[0]"\nall_driven = true\noverrotation = 0.004\n'
    ))
    rep = runner.invoke(app, ["report", str(CIRCUIT), "-e", str(model), "--target", "0.3", "--out", str(tmp_path / "r")])
    assert rep.exit_code == 0, rep.output
    md = (tmp_path / "r" / "report.md").read_text()
    section = md[md.index("## Error model used"):]
    assert "| spectator ZZ | q[0],q[1] | ζ = 20 kHz |" in section
    assert "| drive crosstalk | q[0] -> q[1] | +0.02 × the rotation of every driven gate on q[0], about y |" in section
    assert "| pulse bleed | x -> x on q[0] | -0.01 × the x rotation |" in section
    assert "| calibration in context [pair busy] | x on q[0] | overrotation = 0.004 |" in section
    html = (tmp_path / "r" / "report.html").read_text()
    assert "ζ = 20 kHz" in html


def test_by_operation_keeps_one_zz_knob_per_coupler(tmp_path):
    # A coupler has one ZZ rate, however many layers it acts in: --by-operation splits gates per
    # line but must not split the ZZ knob per layer. Its A entry is the closed form's (3/16)·T²
    # (T = 1.6 µs of idling over two cycles, module docstring): 0.48 per (rad/µs)².
    args = [str(CIRCUIT), "-e", str(MODEL), "--target", str(TARGET), "--cycles", str(CYCLES)]
    res = runner.invoke(app, ["tolerances", *args, "--by-operation", "--json", str(tmp_path / "t.json")])
    assert res.exit_code == 0, res.output
    doc = json.loads((tmp_path / "t.json").read_text())
    zz = [k for k in doc["sensitivity"]["knobs"] if k["knob"] == "zz_rad_per_us"]
    assert [k["family"] for k in zz] == ["zz q[0],q[1]"]
    assert abs(zz[0]["per_rad2"] - 3 / 16 * (CYCLES * 0.8) ** 2) < 0.01 * 0.48
