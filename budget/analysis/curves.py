"""The depth curves as a result: values, where each leaves its engine's range, and their words.

Computed by :func:`budget.analysis.depth.depth_curve`; shown by the terminal, the report, the
picture and the JSON, which all take their words from here (one name per curve: the fidelity
product (naive), the actual curve, the Pauli-twirled curve).
"""

from __future__ import annotations

from dataclasses import dataclass, field

CURVES = ("naive", "structured", "twirled")
CURVE_WORDS = {"naive": "fidelity product (naive)", "structured": "actual", "twirled": "Pauli-twirled"}
"""The one name of each curve in every view (terminal, JSON, report, plot)."""
JSON_KEYS = {"naive": "naive", "structured": "actual", "twirled": "twirled"}
CROSSOVER_FACTOR = 2.0
"""Accumulated > CROSSOVER_FACTOR × naive marks the crossover."""


@dataclass(frozen=True)
class DepthCurve:
    """The three curves and what they say.

    Attributes:
        source: the circuit.
        metric: ``"process"`` or ``"state"``.
        engine: engine of the structured curve; twirled_engine: of the twirled curve.
        repetitions: N values (ascending, from 1 to max_cycles).
        naive, structured, twirled: infidelity at each N; None where the curve's engine is beyond
            its range (``structured`` is the *actual* curve in every view and in the JSON).
        crossover_repetitions: first N with structured > 2 × naive (None: not within max_cycles).
        target: E, when given; deepest: curve name -> largest N <= max_cycles before the curve
            first exceeds E (None: even N = 1 exceeds it; max_cycles: never within the range).
        components: which error components build up or are echoed away (may be empty).
        warnings: validity notes from the engines, and limits of this analysis.
        range_ends: curve name -> first N beyond its engine's range (curves in range throughout
            are absent); the deepest count within a target stops there.
        switches: curve name -> first N whose value comes from the exact engine because the
            first-order engine left its range there (engine ``auto`` on small cycles).
    """

    source: str
    metric: str
    engine: str
    twirled_engine: str
    repetitions: tuple[int, ...]
    naive: tuple[float, ...]
    structured: tuple[float, ...]
    twirled: tuple[float, ...]
    crossover_repetitions: int | None
    target: float | None = None
    deepest: dict[str, int | None] = field(default_factory=dict)
    components: tuple = ()
    warnings: tuple[str, ...] = ()
    range_ends: dict[str, int] = field(default_factory=dict)
    switches: dict[str, int] = field(default_factory=dict)

    @property
    def max_cycles(self) -> int:
        return self.repetitions[-1]

    @property
    def checked_through(self) -> int:
        """The deepest N where the actual curve has a value (its range may end earlier)."""
        end = self.range_ends.get("structured")
        return self.max_cycles if end is None else end - 1

    def crossover_words(self) -> str:
        """The crossover in words, the same in every view (it cannot be claimed beyond the range)."""
        n = self.crossover_repetitions
        if n is not None:
            return f"from N = {n:,} on the actual error is more than twice the naive estimate"
        upto = self.checked_through
        if upto < 1:
            return "no crossover can be stated: the actual curve is beyond its engine's range from N = 1"
        limit = "" if upto == self.max_cycles else " (its engine's range ends there)"
        return f"up to N = {upto:,}{limit} the actual error stays below twice the naive estimate"

    def deepest_words(self, key: str) -> str:
        """The deepest count within the target of curve ``key`` in words (every view shows these)."""
        n = self.deepest.get(key)
        end = self.range_ends.get(key)
        if n is None:
            return "unknown: beyond its engine's range from N = 1" if end == 1 else "none (N = 1 already misses)"
        shown = f"≥ {n:,}" if n == self.max_cycles else f"{n:,}"
        return shown + (" (its engine's range ends there)" if end == n + 1 else "")

    def switch_words(self, key: str) -> str | None:
        """Where curve ``key`` changes to the exact engine, in words (None: it does not)."""
        n = self.switches.get(key)
        if n is None:
            return None
        if n == self.repetitions[0]:
            return f"{CURVE_WORDS[key]} curve: the exact engine at every N (the first-order engine is beyond its range)"
        return (f"{CURVE_WORDS[key]} curve: first-order closed form up to N = {n - 1:,}, the exact engine from "
                f"N = {n:,} on, where the first-order range ends")

    def notes(self) -> list[str]:
        """Where each curve changes engine or leaves its engine's range, in words."""
        out = [self.switch_words(k) for k in ("structured", "twirled")]
        out += [self.range_words(k) for k in ("structured", "twirled")]
        return [w for w in out if w]

    def range_words(self, key: str) -> str | None:
        """Where curve ``key`` leaves its engine's range, in words (None: it never does)."""
        n = self.range_ends.get(key)
        if n is None:
            return None
        engine = self.engine if key == "structured" else self.twirled_engine
        if n == self.repetitions[0]:
            return f"{CURVE_WORDS[key]} curve ({engine}): beyond the first-order range at every N; no value is shown"
        return (f"{CURVE_WORDS[key]} curve ({engine}): first-order range ends at N = {n:,}; "
                "no value is shown from there on")

    def to_dict(self) -> dict:
        """The documented JSON object (docs/report.md)."""
        out = {
            "source": self.source,
            "metric": self.metric,
            "engine": self.engine,
            "twirled_engine": self.twirled_engine,
            "repetitions": list(self.repetitions),
            "naive": list(self.naive),
            "actual": list(self.structured),
            "twirled": list(self.twirled),
            "range_ends": {JSON_KEYS[k]: n for k, n in self.range_ends.items()},
            "engine_switches": {JSON_KEYS[k]: n for k, n in self.switches.items()},
            "crossover_repetitions": self.crossover_repetitions,
            "crossover_factor": CROSSOVER_FACTOR,
            "components": [c.to_dict() for c in self.components],
            "warnings": list(self.warnings),
        }
        if self.target is not None:
            out["target"] = self.target
            out["deepest_within_target"] = {JSON_KEYS[k]: n for k, n in self.deepest.items()}
        return out
