"""Detector budgets of surface-code memory circuits at scale (issue 13). Not part of the tests.

Run: ``python benchmarks/bench_detectors.py`` (``--scenario d7`` / ``d15`` / ``rounds``).

Circuits come from stim's generator (``surface_code:rotated_memory_z``). ``d7``: stim's own
``to_qasm`` (OpenQASM 3, every round written out), distance 7, 25 rounds. ``d15`` and ``rounds``:
the same generator's circuit written as OpenQASM 3 with its REPEAT block kept as a ``for`` loop
(``folded_qasm`` below: stim's ``to_qasm`` writes every round out, so a 100-round distance-15 file
would be 100 times longer than the loop it encodes). Error model (invented device): coherent knobs
on every gate (h over-rotation 0.01 rad, cx conditional phase 0.02 rad and z phases), cx average
infidelity 3e-3, T1 = 60 µs / T2 = 45 µs, readout 1 %, reset 0.2 %, measurement 500 ns, reset
200 ns. Each scenario times reading, detector inference and the budget (per-detector probability
and family shares, clifford engine: coherent errors and relaxation as amplitude classes, and the
all-twirled comparison) and the peak memory (tracemalloc plus the process's maximum
resident size).

Targets: d7 under 60 s and 4 GB; d15 (100 rounds, folded input) under 5 minutes; ``rounds``: the
time for 10^4 rounds at most 3 times that of 100 rounds (distance 3, both runs in this process).
"""

from __future__ import annotations

import argparse
import datetime
import os
import platform
import resource
import sys
import time

if __name__ == "__main__":
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import stim

from budget.analysis.measured import analyze_measured
from budget.circuit.qasm import parse_qasm
from budget.errors.attach import attach
from budget.errors.model import ErrorModel

MODEL = {
    "qubits": {"t1_us": 60.0, "t2_us": 45.0, "readout_error": 0.01, "reset_error": 0.002},
    "gates": {
        "h": {"duration_ns": 25.0, "overrotation": 0.01, "avg_infidelity": 5e-4},
        "cx": {"duration_ns": 40.0, "cphase": 0.02, "z_phase": [0.01, -0.01], "avg_infidelity": 3e-3},
        "measure": {"duration_ns": 500.0},
        "reset": {"duration_ns": 200.0},
    },
}


def folded_qasm(circuit: stim.Circuit) -> str:
    """OpenQASM 3 of a noiseless stim circuit (R, H, CX, M, MR; annotations skipped), each REPEAT
    block written as one ``for`` loop whose body measures into the same bits every round."""
    lines: list[str] = []
    width = [0]

    def block(c: stim.Circuit, indent: str) -> None:
        k = 0
        for inst in c:
            if isinstance(inst, stim.CircuitRepeatBlock):
                lines.append(f"{indent}for int i in [1:{inst.repeat_count}] {{")
                block(inst.body_copy(), indent + "  ")
                lines.append(f"{indent}}}")
                continue
            qs = [t.value for t in inst.targets_copy()]
            if inst.name == "R":
                lines.extend(f"{indent}reset q[{q}];" for q in qs)
            elif inst.name in ("H", "X"):
                lines.extend(f"{indent}{inst.name.lower()} q[{q}];" for q in qs)
            elif inst.name == "CX":
                lines.extend(f"{indent}cx q[{a}], q[{b}];" for a, b in zip(qs[::2], qs[1::2]))
            elif inst.name in ("M", "MR"):
                for q in qs:
                    lines.append(f"{indent}m[{k}] = measure q[{q}];")
                    k += 1
                if inst.name == "MR":
                    lines.extend(f"{indent}reset q[{q}];" for q in qs)
            elif inst.name == "TICK":
                lines.append(f"{indent}barrier q;")
            elif inst.name not in ("DETECTOR", "OBSERVABLE_INCLUDE", "SHIFT_COORDS", "QUBIT_COORDS"):
                raise ValueError(f"folded_qasm: stim instruction {inst.name} not handled")
        width[0] = max(width[0], k)

    block(circuit, "")
    head = ["OPENQASM 3;", 'include "stdgates.inc";', f"qubit[{circuit.num_qubits}] q;", f"bit[{width[0]}] m;"]
    return "\n".join(head + lines) + "\n"


def run(name: str, text: str) -> dict:
    t0 = time.perf_counter()
    circuit = parse_qasm(text, source=name)
    t1 = time.perf_counter()
    noisy = attach(circuit, ErrorModel.from_dict(MODEL))
    result = analyze_measured(noisy, circuit, metric="detectors", engine="clifford")
    t2 = time.perf_counter()
    return {
        "name": name, "read_s": t1 - t0, "budget_s": t2 - t1, "total_s": t2 - t0,
        "detectors": len(result.detectors), "p_any": result.actual_infidelity,
        "maxrss_gb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6,
        "families": {f.name: f.share for f in result.families},
    }


def show(r: dict) -> None:
    fams = ", ".join(f"{k} {v:.3g}" for k, v in r["families"].items())
    print(f"{r['name']}: read {r['read_s']:.1f} s, detectors+budget {r['budget_s']:.1f} s, total {r['total_s']:.1f} s; "
          f"{r['detectors']} detectors, P(any fires) = {r['p_any']:.4g}; max RSS {r['maxrss_gb']:.2f} GB\n  shares: {fams}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--scenario", choices=("d7", "d15", "rounds", "all"), default="all")
    args = parser.parse_args()
    print(f"{datetime.date.today()} · {platform.processor() or platform.machine()} · python {platform.python_version()}")
    gen = "surface_code:rotated_memory_z"
    if args.scenario in ("d7", "all"):
        c = stim.Circuit.generated(gen, distance=7, rounds=25)
        r = run("d7 x 25 rounds (stim to_qasm)", c.without_noise().to_qasm(open_qasm_version=3, skip_dets_and_obs=True))
        show(r)
        print(f"  target 60 s / 4 GB: {'met' if r['total_s'] < 60 and r['maxrss_gb'] < 4 else 'MISSED'}")
    if args.scenario in ("d15", "all"):
        c = stim.Circuit.generated(gen, distance=15, rounds=100)
        r = run("d15 x 100 rounds (folded)", folded_qasm(c.without_noise()))
        show(r)
        print(f"  target 300 s: {'met' if r['total_s'] < 300 else 'MISSED'}")
    if args.scenario in ("rounds", "all"):
        times = {}
        for rounds in (100, 1000, 10_000):
            c = stim.Circuit.generated(gen, distance=3, rounds=rounds)
            r = run(f"d3 x {rounds} rounds (folded)", folded_qasm(c.without_noise()))
            show(r)
            times[rounds] = r["total_s"]
        ratio = times[10_000] / times[100]
        print(f"  time(10^4 rounds) / time(100 rounds) = {ratio:.1f} (target <= 3: {'met' if ratio <= 3 else 'MISSED'})")


if __name__ == "__main__":
    sys.exit(main())
