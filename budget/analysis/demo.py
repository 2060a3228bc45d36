"""The built-in examples of the invented North Fen lab (``circuits/``), analysed one by one.

Each case is a circuit, its repetitions and metric, and the error model it runs with (the
spectator-ZZ memories have their own); :func:`demo_results` yields each case's title and budget
as soon as it is computed, so a view can show them one after the other.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import Iterator

from budget.analysis.result import BudgetResult
from budget.analysis.run import analyze

EXAMPLES = Path(__file__).resolve().parent.parent.parent / "circuits"
MODEL = "fen_q8.toml"

CASES = (
    ("Four Trotter steps of a 4-site hopping chain (process metric)", "hopping_trotter.qasm", 1, "process"),
    ("Parity-check cycle on a 5-qubit line, repeated 10 times (process metric)", "parity_cycle.qasm", 10, "process"),
    ("XY4 echo on one qubit, 25 repetitions: the echo cancels over-rotations (process metric)", "echo_xy4.qasm", 25,
     "process"),
    ("A coupled pair in memory, 20 cycles: the spectator ZZ builds up (process metric)", "pair_memory_zz.qasm", 20,
     "process"),
    ("The same memory echoed: the ZZ cancels (process metric)", "pair_memory_echo.qasm", 20, "process"),
)
"""(title, circuit file, cycles, metric) in the order shown."""

OWN_MODEL = {"pair_memory_zz.qasm": "fen_pair_zz.toml", "pair_memory_echo.qasm": "fen_pair_zz.toml"}
"""Circuits that run with a model of their own instead of :data:`MODEL`."""


def demo_results(examples: Path = EXAMPLES) -> Iterator[tuple[str, BudgetResult]]:
    """(title, budget with the Pauli-twirled variant) for each case of :data:`CASES`, in order."""
    for title, name, cycles, metric in CASES:
        errors = examples / OWN_MODEL.get(name, MODEL)
        yield title, analyze(shown(examples / name), shown(errors), cycles=cycles, metric=metric,
                             compare_twirled=True)


def shown(path: Path) -> str:
    """A path as a reader would type it: relative to the working folder when that is shorter."""
    rel = os.path.relpath(path)
    return rel if not rel.startswith("..") and len(rel) < len(str(path)) else str(path)
