"""The verdict on a budget, decided once: every view (terminal, JSON, report, plots) shows these words.

Two comparisons, each a ratio with a symmetric band of :data:`BAND` around 1 (a ratio within
1/1.2 … 1.2 counts as "about the same", common practice, no source):

- actual ÷ naive (the *amplification*): above the band, coherent errors build up in amplitude
  and the fidelity product underestimates the loss; below it, errors partly cancel; inside it, the
  product is a fair guide.
- actual ÷ Pauli-twirled, when the twirled variant is known: randomised compiling turns
  coherent errors into stochastic ones that add in probability (Wallman & Emerson, Phys. Rev. A 94,
  052325 (2016)). Above the band the circuit's structure *hurts* (compiling randomly would lose
  less), below it the structure *helps* (it echoes coherent errors away better than twirling),
  inside it the structure is *neutral*. So "the structure echoes errors away" is said only when the
  circuit as compiled beats its twirled variant, never merely because it beats the naive product.

No verdict is drawn from a value beyond its engine's range (:attr:`EngineResult.beyond_range`), and
no ratio from numbers at rounding level (:mod:`budget.analysis.ratios`).

    >>> classify(0.01, 0.0121).kind, classify(0.01, 0.0121).words
    ('build-up', 'coherent build-up: the circuit loses 1.21x what the fidelity product predicts')
    >>> classify(0.01, 0.005, twirled=0.004).structure
    'neutral'
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from budget.analysis.ratios import Ratio, at_rounding_level, safe_ratio

BAND = 1.2
"""Ratios within [1/BAND, BAND] count as about the same."""

KINDS = ("beyond-range", "no-error", "build-up", "fair", "cancellation")
STRUCTURE = ("hurts", "helps", "neutral")


@dataclass(frozen=True)
class Verdict:
    """What a budget says, in one sentence and its parts.

    Attributes:
        kind: one of :data:`KINDS`.
        words: the sentence every view shows.
        tone: ``"bad"``, ``"good"`` or ``""`` (for colours and tiles).
        amplification: actual ÷ naive (or why it is no ratio).
        structure: ``"hurts"``, ``"helps"``, ``"neutral"`` against the twirled variant, or None.
        versus_twirled: actual ÷ twirled (or why it is no ratio).
    """

    kind: str
    words: str
    tone: str
    amplification: Ratio
    structure: str | None = None
    versus_twirled: Ratio = Ratio(None)

    def to_dict(self) -> dict[str, Any]:
        return {
            "kind": self.kind,
            "words": self.words,
            "structure": self.structure,
            "actual_over_naive": self.amplification.value,
            "actual_over_twirled": self.versus_twirled.value,
        }


def _band(r: Ratio) -> int | None:
    """+1 above the band, -1 below it, 0 inside, None when there is no ratio."""
    if r.value is None:
        return None
    return 1 if r.value > BAND else -1 if r.value < 1 / BAND else 0


def _structure(accumulated: float, twirled: float | None) -> tuple[str | None, Ratio, str]:
    r = safe_ratio(accumulated, twirled)
    side = _band(r)
    if side is None:
        return None, r, ""
    if side > 0:
        return "hurts", r, (f"; the structure hurts: the Pauli-twirled variant loses {r.value:.3g}x less, so "
                            "randomised compiling would help")
    if side < 0:
        less = "far less" if r.value == 0 else f"{1 / r.value:.3g}x less"
        return "helps", r, f"; the structure helps: it echoes errors away, losing {less} than the Pauli-twirled variant"
    return "neutral", r, f"; the structure is neutral: the Pauli-twirled variant loses about as much ({r.shown()})"


def classify(naive: float, accumulated: float | None, *, twirled: float | None = None,
             beyond_range: str | None = None) -> Verdict:
    """The verdict for a naive product, an accumulated value and (optionally) the twirled variant.

    Args:
        naive: the fidelity-product infidelity.
        accumulated: the engine's value (None when unknown).
        twirled: the Pauli-twirled variant's value, when computed.
        beyond_range: the engine's reason when its value is beyond its range (then no verdict).
    """
    if beyond_range is not None or accumulated is None:
        why = beyond_range or "no accumulated value"
        return Verdict("beyond-range", f"no verdict: the error is beyond the first-order range ({why})", "bad",
                       Ratio(None, "no ratio beyond range"))
    amp = safe_ratio(accumulated, naive)
    if at_rounding_level(naive) and at_rounding_level(accumulated):
        return Verdict("no-error", "no error above rounding level: nothing accumulates", "", amp)
    structure, tw, clause = _structure(accumulated, twirled)
    side = _band(amp)
    if side is None:  # the naive product is at rounding level, the accumulated value is not
        words = "coherent build-up: the circuit loses more than rounding while the fidelity product predicts no loss"
        return Verdict("build-up", words + clause, "bad", amp, structure, tw)
    if side > 0:
        words = f"coherent build-up: the circuit loses {amp.shown()} what the fidelity product predicts"
        return Verdict("build-up", words + clause, "bad", amp, structure, tw)
    if side < 0:
        words = f"cancellation: the circuit loses only {amp.shown()} what the fidelity product predicts"
        return Verdict("cancellation", words + clause, "bad" if structure == "hurts" else "good", amp, structure, tw)
    words = f"the fidelity product is a fair guide here ({amp.shown()})"
    return Verdict("fair", words + clause, "bad" if structure == "hurts" else "", amp, structure, tw)
