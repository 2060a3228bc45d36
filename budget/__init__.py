"""Error budgets for structured quantum circuits.

The public API, stated once. Everything else is internal and may change.

    >>> from budget import analyze
    >>> r = analyze(
    ...     "circuits/parity_cycle.qasm",
    ...     {"gates": {"cz": {"cphase": 0.02}}},
    ...     cycles=50,
    ... )                                                       # doctest: +SKIP
    >>> r.coherent_amplification                                # doctest: +SKIP
"""

from budget.analysis.compose import Analysis, analyze_all
from budget.analysis.decide import Decisions, decide
from budget.analysis.depth import DepthCurve, depth_curve
from budget.analysis.randomized import EnsembleResult, ensemble
from budget.analysis.result import BudgetResult, FamilyShare, ReadoutSummary
from budget.analysis.run import analyze, analyze_noisy
from budget.analysis.twirl import twirled_circuit
from budget.analysis.verdict import Verdict, classify
from budget.circuit.ir import Layer, Operation, Repeat, StructuredCircuit
from budget.circuit.load import load_circuit
from budget.engines import ENGINE_NAMES, EngineResult, get_engine
from budget.errors.attach import attach
from budget.errors.model import ErrorModel, load_model
from budget.errors.noisy import NoisyCircuit
from budget.problems import CircuitSyntaxError, InputError, ModelError, TooLargeError

__version__ = "0.1.0"


def from_cirq(circuit, source: str = "<cirq.Circuit>") -> StructuredCircuit:
    """A cirq circuit as a StructuredCircuit (moments become layers, CircuitOperation repetitions
    become repeats); see :func:`budget.circuit.cirq_reader.from_cirq`. cirq is imported here, on
    first use, because it takes seconds to import."""
    from budget.circuit.cirq_reader import from_cirq as _from_cirq  # slow optional import: cirq takes seconds

    return _from_cirq(circuit, source)

__all__ = [
    "Analysis",
    "Verdict",
    "analyze_all",
    "classify",
    "BudgetResult",
    "CircuitSyntaxError",
    "Decisions",
    "DepthCurve",
    "ENGINE_NAMES",
    "EngineResult",
    "EnsembleResult",
    "ErrorModel",
    "FamilyShare",
    "InputError",
    "Layer",
    "ModelError",
    "NoisyCircuit",
    "Operation",
    "ReadoutSummary",
    "Repeat",
    "StructuredCircuit",
    "TooLargeError",
    "analyze",
    "analyze_noisy",
    "attach",
    "decide",
    "depth_curve",
    "ensemble",
    "from_cirq",
    "get_engine",
    "load_circuit",
    "load_model",
    "twirled_circuit",
]
