"""Uncertainty sweep: the same sweep in this process, on local processes, and on a local Dask
cluster, side by side in one run; prints seconds and the speed-up over one process, and checks
that all three give the same numbers (the draws are seeded per sample).

    .venv/bin/python benchmarks/bench_sweep.py              # 400 samples, hopping_trotter, generators engine
    .venv/bin/python benchmarks/bench_sweep.py --samples 100 --workers 2
"""

from __future__ import annotations

import argparse
import os
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
MODEL = """# invented: fen-q8 with fit uncertainties
[qubits]
t1_us = { low = 100.0, high = 140.0 }
t2_us = 100.0
[gates.sx]
duration_ns = 24.0
overrotation = { value = 0.005, sigma = 0.001 }
[gates.sxdg]
duration_ns = 24.0
overrotation = { value = 0.005, sigma = 0.001 }
[gates.h]
duration_ns = 24.0
overrotation = { value = 0.005, sigma = 0.001 }
[gates.x]
duration_ns = 40.0
overrotation = { value = 0.02, sigma = 0.004 }
[gates.cz]
duration_ns = 60.0
cphase = { value = 0.03, sigma = 0.005 }
avg_infidelity = 1.5e-3
"""


def main() -> None:
    os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
    from budget.analysis.sweep import sweep

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=400)
    ap.add_argument("--workers", type=int, default=os.cpu_count() or 1)
    args = ap.parse_args()
    model = Path("/tmp") / f"bench_sweep_{os.getpid()}.toml"
    model.write_text(MODEL)
    circuit = ROOT / "circuits" / "hopping_trotter.qasm"
    common = dict(samples=args.samples, sobol_base=0, engine="generators")
    runs = {}
    try:
        for name, extra in (("one process", {"workers": 1}), (f"{args.workers} processes", {"workers": args.workers}),
                            (f"Dask local cluster, {args.workers} workers", {"scheduler": "local"})):
            t = time.perf_counter()
            result = sweep(circuit, model, **common, **extra)
            runs[name] = (time.perf_counter() - t, result.to_dict())
    finally:
        model.unlink(missing_ok=True)
    base = runs["one process"][0]
    same = all(r[1] == runs["one process"][1] for r in runs.values())
    print(f"{args.samples} samples of {circuit.name} (generators engine, process metric)")
    for name, (seconds, _) in runs.items():
        print(f"  {name:40s} {seconds:8.1f} s   speed-up {base / seconds:5.2f}")
    print(f"  identical results: {same}")


if __name__ == "__main__":
    main()
