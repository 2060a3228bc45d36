"""Benchmark of the pauli engine (run: python benchmarks/bench_pauli.py [--scenario NAME]).

Scenarios (figures recorded in docs/benchmarks.md, section "Pauli"):

- ``scale``: 1D transverse-field Ising Trotter loop (cx-rz(0.4)-cx on every bond, rx(0.6) on every
  qubit, the steps a folded loop), coherent and incoherent errors on every gate (tests/pauli_cases.py,
  invented lab), 100 qubits x 20 steps: wall time, peak RSS, truncation bound / result, terms held,
  for the process and the state metric with the default threshold and its 60 s tightening budget;
- ``growth``: 100 qubits, growing step counts at fixed thresholds (cost growth with steps) and
  the default threshold (bound / result reached);
- ``versus``: 10 qubits x 10 steps, the generators engine against the pauli engine untruncated,
  side by side in one process (ratio of CPU times, difference of the first-order values);
- ``frontier``: 100 qubits, growing step counts, each metric: fixed thresholds halved until the
  bound is under 1 % of the result (one pass each, CPU time), until a pass passes 60 CPU seconds;
- ``public``: every circuit of ../shared/qasm-public with 10-27 qubits and no measurement-dependent
  control, analysed with ``auto`` (engine chosen, time).

Each scenario runs in its own process (``--scenario``) so that its peak RSS is its own. Times
are wall clock and CPU (the process's user + system time; on a shared machine the CPU time is the
stable figure).
"""

from __future__ import annotations

import argparse
import resource
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from pauli_cases import ising, ising_model, ising_qasm  # noqa: E402

from budget.engines.generators.engine import GeneratorsEngine  # noqa: E402
from budget.engines.pauli import PauliEngine  # noqa: E402
from budget.problems import TooLargeError  # noqa: E402


def _rss_mb() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def _line(label: str, r, clock: tuple[float, float]) -> str:
    d = r.details
    wall, cpu = time.perf_counter() - clock[0], time.process_time() - clock[1]
    return (
        f"{label}: first order {r.first_order:.6g}, bound {d['truncation_bound']:.3g} "
        f"({d['truncation_bound'] / max(r.first_order, 1e-300):.2%}), threshold {d['truncate']:.3g}, "
        f"terms max {d['pauli_terms_max']}, wall {wall:.1f} s, CPU {cpu:.1f} s, peak RSS {_rss_mb():.0f} MB"
    )


def _clock() -> tuple[float, float]:
    return time.perf_counter(), time.process_time()


def scale(n: int = 100, steps: int = 20) -> None:
    c = ising(n, steps)
    for metric in ("process", "state"):
        t = _clock()
        r = PauliEngine().run(c, metric)
        print(_line(f"{n} qubits x {steps} steps, {metric}", r, t), flush=True)
        for w in r.warnings:
            print("  warning:", w)


def growth(n: int = 100) -> None:
    for metric in ("process", "state"):
        for steps in (2, 4, 6, 8, 10):
            for eps in (1e-5, None):
                c = ising(n, steps)
                t = _clock()
                r = PauliEngine(truncate=eps, time_budget_s=60).run(c, metric)
                print(_line(f"{n} x {steps} {metric} truncate={eps}", r, t), flush=True)
                if time.process_time() - t[1] > 90:
                    break


def versus() -> None:
    c = ising(10, 10)
    for metric in ("process", "state"):
        t = time.process_time()
        g = GeneratorsEngine().run(c, metric)
        tg = time.process_time() - t
        t = time.process_time()
        try:
            p = PauliEngine(truncate=0.0).run(c, metric)
        except TooLargeError as err:
            print(f"10 x 10 {metric}: CPU generators {tg:.2f} s; pauli untruncated refused after "
                  f"{time.process_time() - t:.1f} s: {err}", flush=True)
            continue
        tp = time.process_time() - t
        rel = abs(g.first_order - p.first_order) / g.first_order
        print(f"10 x 10 {metric}: CPU generators {tg:.2f} s, pauli {tp:.2f} s, ratio {tg / tp:.1f}x, "
              f"first order {g.first_order:.12g} vs {p.first_order:.12g} (relative {rel:.1e})", flush=True)


def frontier(n: int = 100, limit_s: float = 60.0) -> None:
    for metric, start, steps_list in (("state", 1e-6, (2, 3, 4, 5, 6, 8)), ("process", 2e-5, (10, 14, 16, 18, 20, 22))):
        eps = start
        for steps in steps_list:
            c = ising(n, steps)
            while True:
                t = _clock()
                try:
                    r = PauliEngine(truncate=eps, second_order=False).run(c, metric)
                except TooLargeError as err:
                    print(f"{n} x {steps} {metric} truncate={eps:.3g}: refused ({str(err)[:80]})", flush=True)
                    break
                cpu = time.process_time() - t[1]
                print(_line(f"{n} x {steps} {metric} truncate={eps:.3g}", r, t), flush=True)
                if r.details["truncation_bound"] <= 0.01 * r.first_order or cpu > limit_s:
                    break
                eps /= 2
            if cpu > limit_s:
                break


def public() -> None:
    from budget.analysis.run import analyze
    from budget.circuit.load import load_circuit
    from budget.problems import InputError

    folder = ROOT.parent / "shared" / "qasm-public"
    for path in sorted(folder.glob("*.qasm")):
        try:
            sc = load_circuit(str(path))
        except InputError as err:
            print(f"{path.name}: not read ({str(err)[:80]})")
            continue
        if not 10 <= sc.num_qubits <= 27:
            continue
        t = _clock()
        try:
            r = analyze(sc, ising_model(), metric="process")
            print(f"{path.name}: {sc.num_qubits} qubits, engine {r.engine}, first order {r.first_order:.4g}, "
                  f"bound {r.truncation_bound:.2g}, wall {time.perf_counter() - t[0]:.1f} s, "
                  f"CPU {time.process_time() - t[1]:.1f} s", flush=True)
        except InputError as err:
            print(f"{path.name}: {sc.num_qubits} qubits, refused: {str(err)[:120]}")


SCENARIOS = {"scale": scale, "growth": growth, "versus": versus, "frontier": frontier, "public": public}

if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--scenario", choices=sorted(SCENARIOS))
    args = ap.parse_args()
    if args.scenario:
        SCENARIOS[args.scenario]()
    else:
        for name in SCENARIOS:
            subprocess.run([sys.executable, __file__, "--scenario", name], check=False)
