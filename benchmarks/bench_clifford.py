"""Benchmark of the clifford engine on a 32 x 32 grid (run: python benchmarks/bench_clifford.py).

One cycle = a layer of single-qubit Clifford gates on every qubit, then CZ layers in four
directions (horizontal even/odd, vertical even/odd couplers). Every gate carries coherent knobs
(over-rotation, conditional phase, Z phases) and incoherent errors (average infidelity, T1/T2 for
its duration, idle relaxation). Invented device numbers.

Figures printed (and recorded in docs/benchmarks.md, section "Clifford"); each scenario runs in
its own process so that its peak RSS is its own; times are wall clock and CPU (user + system):

- ``unrolled``: 100 cycles written out (new layer objects per cycle): build time (circuit +
  error model), analysis time (process metric, state metric with three observables), ratio,
  peak RSS;
- ``folded``: the same cycle as one repeated block, N = 100, 10**6 and 10**9 (cost follows the
  block's period, not N), for the sx cycle (long period) and the x cycle (short period);
- ``ratio``: N = 10^6 against N = 100 of the folded cycle, alternated in one process (ratio of
  the best CPU times);
- ``orbits``: the orbit fold against the period fold on the sx cycle, N = 10^6, side by side;
- ``versus``: generators against clifford on small grids (side by side, same circuit), if the
  generators engine is present;
- ``zz``: spectator ZZ on every coupler against none, the folded cycle with N = 100, side by side
  (attach and process-metric run, best CPU times and their ratio; goal: within 2x);
- ``second``: the engine with and without its second-order pass, alternated in one process.

Run: ``.venv/bin/python benchmarks/bench_clifford.py`` (all, several minutes) or
``--scenario unrolled|folded|ratio|orbits|versus|zz|second``.
"""

from __future__ import annotations

import argparse
import resource
import time

import numpy as np

from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.errors.attach import attach
from budget.errors.model import ErrorModel

MODEL = {
    "qubits": {"t1_us": 80.0, "t2_us": 60.0},
    "gates": {
        "sx": {"duration_ns": 25.0, "overrotation": 0.002, "avg_infidelity": 2e-4},
        "h": {"duration_ns": 25.0, "overrotation": 0.0015, "avg_infidelity": 2e-4},
        "x": {"duration_ns": 25.0, "overrotation": 0.002, "axis_error": 0.001, "avg_infidelity": 2e-4},
        "s": {"z_phase": 0.001},
        "cz": {"duration_ns": 60.0, "cphase": 0.01, "z_phase": [0.002, -0.0015], "avg_infidelity": 3e-3},
    },
}

PATTERNS = {
    "sx": lambda r, c: "sx",
    "x": lambda r, c: "x",
    "checker": lambda r, c: "h" if (r + c) % 2 else "sx",
}


def grid_cycle(rows: int, cols: int, pattern: str = "sx") -> tuple[Layer, ...]:
    """One cycle on a rows x cols grid (fresh objects on every call)."""
    q = lambda r, c: r * cols + c  # noqa: E731
    single = Layer(tuple(Operation(PATTERNS[pattern](r, c), (q(r, c),)) for r in range(rows) for c in range(cols)))
    layers = [single]
    for horizontal in (True, False):
        for parity in (0, 1):
            ops = []
            for r in range(rows):
                for c in range(cols):
                    if horizontal and c % 2 == parity and c + 1 < cols:
                        ops.append(Operation("cz", (q(r, c), q(r, c + 1))))
                    if not horizontal and r % 2 == parity and r + 1 < rows:
                        ops.append(Operation("cz", (q(r, c), q(r + 1, c))))
            layers.append(Layer(tuple(ops)))
    return tuple(layers)


def grid_circuit(rows: int, cols: int, cycles: int, *, folded: bool, pattern: str = "sx") -> StructuredCircuit:
    names = tuple(f"q[{i}]" for i in range(rows * cols))
    if folded:
        body: tuple = (Repeat(grid_cycle(rows, cols, pattern), cycles),)
    else:
        body = tuple(layer for _ in range(cycles) for layer in grid_cycle(rows, cols, pattern))
    return StructuredCircuit(names, body, source=f"<grid {rows}x{cols}, {cycles} cycles>")


def build(rows: int, cols: int, cycles: int, *, folded: bool, pattern: str = "sx", zz_khz: float = 0.0):
    model = ErrorModel.from_dict(MODEL | ({"couplings": {"zz_khz": zz_khz}} if zz_khz else {}))
    return attach(grid_circuit(rows, cols, cycles, folded=folded, pattern=pattern), model)


def peak_rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _clock():
    t = resource.getrusage(resource.RUSAGE_SELF)
    return time.perf_counter(), t.ru_utime + t.ru_stime


def _since(start) -> tuple[float, float]:
    wall, cpu = _clock()
    return wall - start[0], cpu - start[1]


def unrolled(rows: int = 32, cols: int = 32, cycles: int = 100) -> dict:
    from budget.engines.clifford.engine import CliffordEngine

    t = _clock()
    noisy = build(rows, cols, cycles, folded=False)
    build_wall, build_cpu = _since(t)
    engine = CliffordEngine()
    t = _clock()
    process = engine.run(noisy, "process")
    centre = (rows // 2) * cols + cols // 2
    state = engine.run(noisy, "state", observables=("Z0", f"Z{centre}Z{centre + 1}", f"X{centre}"))
    wall, cpu = _since(t)
    return {
        "scenario": f"unrolled {rows}x{cols}, {cycles} cycles",
        "operations": noisy_ops(noisy),
        "build_wall_s": build_wall,
        "build_cpu_s": build_cpu,
        "analysis_wall_s": wall,
        "analysis_cpu_s": cpu,
        "ratio_cpu": cpu / build_cpu,
        "peak_rss_mb": peak_rss_mb(),
        "process_first_order": process.first_order,
        "state_first_order": state.first_order,
        "qubit_map": "qubit_map" in process.details,
    }


def noisy_ops(noisy) -> int:
    return sum(len(layer.sites) * m for layer, m in noisy.multiplicities())


def folded(pattern: str, count: int, rows: int = 32, cols: int = 32) -> dict:
    from budget.engines.clifford.engine import CliffordEngine

    noisy = build(rows, cols, count, folded=True, pattern=pattern)
    t = _clock()
    r = CliffordEngine().run(noisy, "process")
    wall, cpu = _since(t)
    return {
        "scenario": f"folded {pattern} cycle {rows}x{cols}, N = {count}",
        "analysis_wall_s": wall,
        "analysis_cpu_s": cpu,
        "peak_rss_mb": peak_rss_mb(),
        "period": r.details["folded_blocks"][0]["period"] if r.details["folded_blocks"] else None,
        "layers_walked": r.details["layers_walked"],
        "first_order": r.first_order,
    }


def fold_ratio(pattern: str = "sx", rounds: int = 3, rows: int = 32, cols: int = 32) -> dict:
    """N = 10^6 and N = 100 of the folded cycle, alternated in one process; best CPU time of each
    and their ratio (the issue's goal: at most 3x). The per-qubit map is off in both runs: by
    default it is computed for N = 100 and skipped for N = 10^6, which would flatter the ratio."""
    from budget.engines.clifford.engine import CliffordEngine

    circuits = {n: build(rows, cols, n, folded=True, pattern=pattern) for n in (100, 10**6)}
    best = {n: float("inf") for n in circuits}
    values = {}
    for _ in range(rounds):
        for n, noisy in circuits.items():
            t = _clock()
            r = CliffordEngine(qubit_map=False).run(noisy, "process")
            best[n] = min(best[n], _since(t)[1])
            values[n] = r.first_order
    return {
        "scenario": f"fold ratio, {pattern} cycle {rows}x{cols}, best of {rounds}",
        "cpu_N100_s": best[100],
        "cpu_N1e6_s": best[10**6],
        "ratio": best[10**6] / best[100],
        "first_order_N1e6": values[10**6],
    }


def orbits_vs_period(pattern: str = "sx", count: int = 10**6, rows: int = 32, cols: int = 32) -> dict:
    """The orbit fold against the period fold (walks the whole period) on the same circuit."""
    from budget.engines.clifford.engine import CliffordEngine

    noisy = build(rows, cols, count, folded=True, pattern=pattern)
    out: dict = {"scenario": f"orbit fold vs period fold, {pattern} cycle {rows}x{cols}, N = {count}"}
    for name, engine in (("orbits", CliffordEngine()), ("period", CliffordEngine(orbit_baby=0))):
        t = _clock()
        r = engine.run(noisy, "process")
        out[f"{name}_cpu_s"] = _since(t)[1]
        out[f"{name}_first_order"] = r.first_order
    out["speed_ratio"] = out["period_cpu_s"] / out["orbits_cpu_s"]
    out["relative_difference"] = abs(out["orbits_first_order"] / out["period_first_order"] - 1)
    return out


def versus(rows: int, cols: int, cycles: int, metric: str) -> dict:
    from budget.engines.clifford.engine import CliffordEngine
    from budget.engines.generators.engine import GeneratorsEngine

    noisy = build(rows, cols, cycles, folded=False)
    out = {"scenario": f"versus {rows}x{cols}, {cycles} cycles, {metric}"}
    for name, engine in (("clifford", CliffordEngine()), ("generators", GeneratorsEngine())):
        t = _clock()
        r = engine.run(noisy, metric)
        out[f"{name}_wall_s"], out[f"{name}_cpu_s"] = _since(t)
        out[f"{name}_first_order"] = r.first_order
    out["speed_ratio_cpu"] = out["generators_cpu_s"] / out["clifford_cpu_s"]
    return out


def with_zz(pattern: str = "sx", count: int = 100, rounds: int = 2, rows: int = 32, cols: int = 32) -> dict:
    """Spectator ZZ on every coupler (50 kHz, the default of [couplings]) against no ZZ, the same
    folded cycle, alternated in one process; best CPU time of attach and of the process-metric run
    (per-qubit map off in both, so that its budget cut-off cannot favour either)."""
    from budget.engines.clifford.engine import CliffordEngine

    best = {k: [float("inf"), float("inf")] for k in ("plain", "zz")}
    values, ops = {}, {}
    for _ in range(rounds):
        for key, zz in (("plain", 0.0), ("zz", 50.0)):
            t = _clock()
            noisy = build(rows, cols, count, folded=True, pattern=pattern, zz_khz=zz)
            best[key][0] = min(best[key][0], _since(t)[1])
            t = _clock()
            r = CliffordEngine(qubit_map=False).run(noisy, "process")
            best[key][1] = min(best[key][1], _since(t)[1])
            values[key], ops[key] = r.first_order, noisy_ops(noisy)
    return {
        "scenario": f"spectator ZZ on every coupler, {pattern} cycle {rows}x{cols}, N = {count}, best of {rounds}",
        "operations_plain": ops["plain"],
        "operations_zz": ops["zz"],
        "attach_cpu_plain_s": best["plain"][0],
        "attach_cpu_zz_s": best["zz"][0],
        "run_cpu_plain_s": best["plain"][1],
        "run_cpu_zz_s": best["zz"][1],
        "ratio_run": best["zz"][1] / best["plain"][1],
        "ratio_total": sum(best["zz"]) / sum(best["plain"]),
        "first_order_plain": values["plain"],
        "first_order_zz": values["zz"],
        "peak_rss_mb": peak_rss_mb(),
    }


def second_order(rows: int = 32, cols: int = 32, cycles: int = 20, rounds: int = 2) -> dict:
    """The engine with and without its second-order pass (budget/engines/clifford/second.py), alternated
    in one process on the unrolled grid circuit (process metric, state metric with three
    observables); ratio of the best CPU times."""
    from budget.engines.clifford.engine import CliffordEngine

    noisy = build(rows, cols, cycles, folded=False)
    centre = (rows // 2) * cols + cols // 2
    obs = ("Z0", f"Z{centre}Z{centre + 1}", f"X{centre}")
    best = {True: float("inf"), False: float("inf")}
    notes = {}
    for _ in range(rounds):
        for flag in (False, True):
            engine = CliffordEngine(second_order=flag, qubit_map=False)
            t = _clock()
            p = engine.run(noisy, "process")
            st = engine.run(noisy, "state", observables=obs)
            best[flag] = min(best[flag], _since(t)[1])
            notes[flag] = (p.details.get("second_order", "formed"), st.details.get("second_order", "formed"), p.infidelity)
    return {
        "scenario": f"second order on/off, unrolled {rows}x{cols}, {cycles} cycles",
        "first_order_only_cpu_s": best[False],
        "with_second_order_cpu_s": best[True],
        "slowdown": best[True] / best[False],
        "second_order_process_state": notes[True][:2],
        "infidelity_on_off": (notes[True][2], notes[False][2]),
    }


SCENARIOS = {
    "unrolled": [("unrolled", ())],
    "folded": [("folded", (p, n)) for p in ("sx", "x") for n in (100, 10**6, 10**9)],
    "ratio": [("fold_ratio", ("sx",)), ("fold_ratio", ("x",))],
    "orbits": [("orbits_vs_period", ("sx",))],
    "versus": [("versus", (2, 5, 20, "process")), ("versus", (3, 4, 20, "state"))],
    "zz": [("with_zz", ("sx",)), ("with_zz", ("x",))],
    "second": [("second_order", (32, 32, 20))],
}


def main() -> None:
    import json
    import subprocess
    import sys

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--scenario", choices=[*SCENARIOS, "all"], default="all")
    parser.add_argument("--one", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        name, params = json.loads(args.one)
        print(json.dumps(globals()[name](*params)))
        return
    chosen = SCENARIOS if args.scenario == "all" else {args.scenario: SCENARIOS[args.scenario]}
    for group in chosen.values():
        for name, params in group:
            if name == "versus":
                try:
                    import budget.engines.generators.engine  # noqa: F401
                except ImportError:
                    print("versus: skipped (budget/engines/generators/engine.py is absent)")
                    continue
            done = subprocess.run(
                [sys.executable, __file__, "--one", json.dumps([name, list(params)])], capture_output=True, text=True
            )
            if done.returncode:
                print(f"{name} {params}: failed\n{done.stderr[-2000:]}")
                continue
            row = json.loads(done.stdout.strip().splitlines()[-1])
            print("  ".join(f"{k}={v:.4g}" if isinstance(v, float) else f"{k}={v}" for k, v in row.items()), flush=True)


if __name__ == "__main__":
    main()
