"""Keep answers inside their engine's range: with ``auto``, switch to an engine valid there.

The first-order engines (``clifford``, ``generators``) say when their approximation no longer holds
(:attr:`budget.engines.base.EngineResult.beyond_range`). With engine ``auto`` such a result is not
the answer: the other engines of ``AUTO_ORDER`` that fit (and are estimated to finish within
auto's MAX_SECONDS) are tried in turn (``exact`` first, when
``auto`` passed it over) and the first whose value is in range is used (after ``clifford``, the
``generators`` engine exponentiates the summed Hamiltonian, which stays accurate further, design.md §4). When none is in range the out-of-range
result is kept and marked, so the views say plainly that the error is beyond the first-order range
and by how much, instead of printing a number as if it were an infidelity.
"""

from __future__ import annotations

from budget.analysis.select import AUTO_ORDER, MAX_SECONDS, estimate_seconds
from budget.engines import Engine, get_engine
from budget.engines.base import EngineResult
from budget.errors.noisy import NoisyCircuit


def run_in_range(circuit: NoisyCircuit, metric: str, chosen: Engine, requested: str, *,
                 observables: tuple[str, ...] = ()) -> tuple[EngineResult, tuple[str, ...]]:
    """Run ``chosen``; with ``requested == "auto"`` and a result beyond range, try the other engines.

    Returns the result used and notes saying which engine was left and why.
    """
    outcome = chosen.run(circuit, metric, observables=observables)
    if outcome.beyond_range is None or requested != "auto" or chosen.name not in AUTO_ORDER:
        return outcome, ()
    for name in (n for n in AUTO_ORDER if n != chosen.name):
        try:
            other = get_engine(name)
        except ImportError:  # pragma: no cover - every engine is part of the package
            continue
        if other.fits(circuit, metric) is not None or estimate_seconds(other, circuit, metric) > MAX_SECONDS:
            continue
        candidate = other.run(circuit, metric, observables=observables)
        if candidate.beyond_range is None:
            note = (f"the {chosen.name} engine is beyond its range here ({outcome.beyond_range}); "
                    f"auto used the {name} engine, which is within its range")
            return candidate, (note,)
    return outcome, ()
