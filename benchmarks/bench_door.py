"""Two source trees side by side in one run: the paths the engine front door touches.

Run from the project root (never part of the tests):

    .venv/bin/python benchmarks/bench_door.py --before ../../main          # this tree against main
    .venv/bin/python benchmarks/bench_door.py --before ../../main --rounds 5

Each round runs one worker process per tree (``PYTHONPATH`` set to the tree, one BLAS thread),
alternating the order, so both trees see the same machine load; the table gives the median wall
time of each task per tree and the ratio after / before. Within a worker every task but the depth
curve runs once untimed (imports and first-call work) and then ``--repeats`` times, and the median
is kept (a single first call of a 20 ms task measures the machine's load more than the code). Tasks (the same code for both trees,
only public functions that both have):

- ``analyze <example>``: ``budget.analyze`` on the example circuits with their models, engine
  auto, process metric (the number and its family shares, as ``budget analyze`` computes them);
- ``engine <name>``: each engine's ``brief()`` run (the number alone) on the 8-qubit brickwork of
  bench_engines.py (state metric) and on its repeated block (N = 10^6, process metric);
- ``depth``: ``budget.analysis.depth.depth_curve`` of hopping_trotter (4 qubits, the generators
  engine's closed form under auto) with 25 points up to N = 10^4;
- ``form``: ``budget.analysis.sensitivity.quadratic_form`` of parity_cycle (auto's choice).
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
EXAMPLES = (("parity_cycle.qasm", "fen_q8.toml"), ("hopping_trotter.qasm", "fen_q8.toml"),
            ("pair_memory_zz.qasm", "fen_pair_zz.toml"), ("echo_xy4.qasm", "fen_q8.toml"))


def _once(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def worker(root: Path, repeats: int) -> dict[str, float]:
    """Every task once in this process; seconds per task."""
    sys.path.insert(0, str(HERE))
    from bench_engines import brickwork, repeated  # the same circuits for both trees

    from budget import analyze
    from budget.analysis.depth import depth_curve
    from budget.analysis.run import attach_grouped, read_circuit, read_model
    from budget.analysis.sensitivity import quadratic_form
    from budget.engines import ENGINE_NAMES, get_engine

    def _timed(fn) -> float:
        """One untimed call, then the median of ``repeats`` timed ones."""
        fn()
        return statistics.median(_once(fn) for _ in range(repeats))

    circuits = root / "circuits"
    out: dict[str, float] = {}
    for qasm, model in EXAMPLES:
        out[f"analyze {qasm}"] = _timed(lambda: analyze(circuits / qasm, circuits / model))
    wide, block = brickwork(8), repeated(4, 10**6)
    for name in ENGINE_NAMES:
        engine = get_engine(name).brief()
        for label, circuit, metric in (("brickwork 8q state", wide, "state"), ("block N=1e6 process", block, "process")):
            if engine.fits(circuit, metric) is None:
                out[f"engine {name}, {label}"] = _timed(lambda: engine.run(circuit, metric))
    hop = attach_grouped(read_circuit(circuits / "hopping_trotter.qasm"), read_model(circuits / "fen_q8.toml"))
    out["depth hopping_trotter, 25 points to 1e4"] = _once(lambda: depth_curve(hop, max_cycles=10**4, points=25))
    par = attach_grouped(read_circuit(circuits / "parity_cycle.qasm"), read_model(circuits / "fen_q8.toml"))
    out["form parity_cycle"] = _timed(lambda: quadratic_form(par, "process"))
    return out


def run_tree(tree: Path, repeats: int) -> dict[str, float]:
    env = dict(os.environ, PYTHONPATH=str(tree), OPENBLAS_NUM_THREADS="1", OMP_NUM_THREADS="1")
    p = subprocess.run([sys.executable, str(Path(__file__).resolve()), "--worker", str(tree), "--repeats", str(repeats)],
                       env=env, cwd=tree,
                       capture_output=True, text=True, check=True)
    return json.loads(p.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--before", type=Path, help="the other source tree (e.g. a worktree of main)")
    parser.add_argument("--after", type=Path, default=HERE.parent, help="this tree (default)")
    parser.add_argument("--rounds", type=int, default=3)
    parser.add_argument("--repeats", type=int, default=5, help="timed calls per task and worker (median kept)")
    parser.add_argument("--worker", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.worker is not None:
        print(json.dumps(worker(args.worker, args.repeats)))
        return
    trees = {"before": args.before.resolve(), "after": args.after.resolve()}
    runs: dict[str, list[dict[str, float]]] = {k: [] for k in trees}
    for r in range(args.rounds):
        for key in (("before", "after") if r % 2 == 0 else ("after", "before")):
            runs[key].append(run_tree(trees[key], args.repeats))
            print(f"round {r + 1}: {key} done", file=sys.stderr)
    tasks = [t for t in runs["after"][0] if t in runs["before"][0]]
    print("| task | before (s) | after (s) | after / before |\n|---|---|---|---|")
    for t in tasks:
        b = statistics.median(x[t] for x in runs["before"])
        a = statistics.median(x[t] for x in runs["after"])
        print(f"| {t} | {b:.3f} | {a:.3f} | {a / b:.2f} |")
    total_b = sum(statistics.median(x[t] for x in runs["before"]) for t in tasks)
    total_a = sum(statistics.median(x[t] for x in runs["after"]) for t in tasks)
    print(f"| all tasks | {total_b:.3f} | {total_a:.3f} | {total_a / total_b:.2f} |")


if __name__ == "__main__":
    main()
