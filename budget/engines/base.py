"""One engine interface, one result type (style.md §6).

Every engine answers: for this noisy circuit and this metric, what is the infidelity, and how
much of it comes from each gate family? The report never knows which engine ran except through
:attr:`EngineResult.engine`.

Metrics (design.md §3):
    ``"process"``: e_F = 1 - F_pro of the whole circuit's channel against the ideal unitary,
        F_pro = (1/d²) Σ_k |Tr(U_ideal† K_k)|².
    ``"state"``: 1 - <ψ|ρ|ψ> for input |0…0>, ψ the ideal output, ρ the actual one.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal, Protocol

from budget.errors.noisy import NoisyCircuit

Metric = Literal["process", "state"]
METRICS: tuple[str, ...] = ("process", "state")


@dataclass(frozen=True)
class EngineResult:
    """What an engine returns.

    Attributes:
        engine: the engine's name (``"exact"``, ``"generators"``, ...).
        metric: ``"process"`` or ``"state"``.
        infidelity: the engine's best value for the metric, in [0, 1].
        shares: family name -> share of ``infidelity``; the shares add up to it (interference
            between families included, so a share can be negative when a family cancels another).
        first_order: the leading-order (quadratic) estimate, when the engine has it.
        warnings: validity warnings in plain words.
        details: engine-specific extra numbers (JSON-serialisable), e.g. ``{"hamiltonian_norm": x}``.
    """

    engine: str
    metric: str
    infidelity: float
    shares: dict[str, float]
    first_order: float | None = None
    warnings: tuple[str, ...] = ()
    details: dict[str, float] = field(default_factory=dict)


class Engine(Protocol):
    """What every engine provides."""

    name: str

    def fits(self, circuit: NoisyCircuit, metric: Metric) -> str | None:
        """None if the engine can run this circuit for this metric, else the reason in words."""

    def run(self, circuit: NoisyCircuit, metric: Metric) -> EngineResult:
        """Compute the metric; raises TooLargeError if :meth:`fits` would refuse."""
