"""Budgets of circuits with mid-circuit measurement: the detector and record metrics (design.md §8).

``detectors``: the checks of :mod:`budget.analysis.detectors`; the actual infidelity is the
probability that at least one detector fires (independent of the basis of detectors chosen), each
detector gets its firing probability, its round and each family's share of it. The twirled value
is always the Pauli-frame one (every channel, relaxation included, replaced by its Pauli twirl). Engines: ``exact``
(density matrix with classical branches, :mod:`budget.engines.exact.branches`: coherent errors kept
coherent, exact) and ``clifford`` (Pauli frames through stim's detector error model,
:mod:`budget.engines.clifford.frames`: every error twirled, first order, any size). ``auto`` takes exact
when it fits.

``record``: one minus the classical fidelity (Σ_r √(p_ideal(r) p_actual(r)))² of the whole
measurement record (Bhattacharyya overlap squared; Nielsen & Chuang 2000, §9.2.2), and for every
bit that is deterministic in the ideal circuit the probability that it differs. Exact engine only.

The naive estimate is the fidelity product: every operation's F_pro, every idle slot's, and
(1 - readout error) per recorded bit and (1 - reset error) per reset, repeats counted exactly.
Family shares of the exact results are split in the proportions of the first-order frame
decomposition (detectors) or by leaving one family out at a time (record), scaled to the total.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from budget.analysis.detectors import Checks, infer_checks, recorded_qubits
from budget.analysis.folding import fold_target, folded_frames, scaled
from budget.analysis.families import family_counts, family_table
from budget.analysis.result import BudgetResult, DetectorBudget, ReadoutSummary, RecordBit, circuit_fields
from budget.analysis.twirl import twirled_circuit
from budget.circuit.ir import StructuredCircuit
from budget.circuit.walk import Kind, branches, counted
from budget.engines.clifford.coherent import MAX_DEFERRED_QUBITS
from budget.engines.clifford.frames import families_of, frames, has_coherent
from budget.engines.exact.branches import MAX_BYTES, MAX_KEY_BITS, MAX_QUBITS, Plan, condition_bits, key_bits_needed, simulate
from budget.engines.door import measured_engine
from budget.engines.base import MEASURED_METRICS
from budget.errors.fidelity import naive_infidelity, relaxation_process_fidelity
from budget.errors.noisy import IDLE, NoisyCircuit, NoisyIf, NoisyLayer, map_items
from budget.memo import ObjectKey
from budget.problems import InputError, TooLargeError

COHERENT_NOTE = ("coherent errors on the clifford engine: amplitudes of errors that act alike add within a round "
                 "and across rounds while no check sees them, then are squared (first order in the amplitudes; "
                 "the exact engine keeps every order on small circuits)")
TWIRLED_NOTE = (f"coherent errors and relaxation enter as their Pauli twirl here: the deferred-measurement register "
                f"(qubits + recorded bits + resets) exceeds {MAX_DEFERRED_QUBITS:,} qubits")

__all__ = ["MEASURED_METRICS", "analyze_measured", "naive_measured", "record_infidelity", "without_family"]


def analyze_measured(
    noisy: NoisyCircuit,
    structured: StructuredCircuit,
    *,
    metric: str,
    engine: str = "auto",
    compare_twirled: bool = False,
    cycles: int = 1,
    logical: tuple[tuple[int, ...], ...] | None = None,
) -> BudgetResult:
    """The detector or record budget of ``noisy`` (see the module docstring)."""
    measured_engine(metric, engine, None)  # an engine that does not compute the metric is refused here
    if metric == "record":
        return _record(noisy, structured, engine, cycles, compare_twirled)
    recorded_qubits(noisy, metric)
    index = fold_target(noisy) if logical is None and engine != "exact" else None
    if index is not None:
        folded = folded_frames(noisy, index)
        sc = folded.small_checks
        small_plan = Plan(tuple(d.measurements for d in sc.detectors), tuple(d.ideal for d in sc.detectors),
                          False, tuple(condition_bits(noisy.body)), sc.num_measurements)
        unroll = not folded.steady and noisy.num_qubits + 2 * folded.num_measurements <= MAX_DEFERRED_QUBITS
        if not unroll and measured_engine(metric, engine, exact_refusal(folded.small, small_plan)) == "clifford":
            warnings = [f"the repeated block of {noisy.body[index].count:,} iterations is folded: its first and last "
                        "iterations are computed, the middle ones repeat the steady state (docs/methods.md)"]
            if not folded.steady:
                warnings.append("a coherent error that no check sees builds up over the repeated block: the folded "
                                "values after the block include its growth over 6 iterations only (too many "
                                "iterations to unroll)")
            warnings += clifford_notes(noisy, folded.coherent_twirled)
            return _result(noisy, structured, metric, "clifford", folded.any_fires, None,
                           scaled(folded.any_families, folded.any_fires), cycles, warnings, folded.twirled_any_fires,
                           detectors=folded.detectors, logical=folded.logical,
                           details={"detectors": len(folded.detectors), "record_length": folded.num_measurements,
                                    "random_bits": folded.random_rank})
    checks = _checks(noisy, logical)
    plan = Plan(tuple(d.measurements for d in checks.detectors), tuple(d.ideal for d in checks.detectors),
                False, tuple(condition_bits(noisy.body)), checks.num_measurements)
    use_exact = measured_engine(metric, engine, exact_refusal(noisy, plan)) == "exact"
    fo = frames(noisy, plan.detectors, coherent=True)
    twirled = frames(noisy, plan.detectors, shares=False).any_fires
    warnings = []
    first_order = None
    if use_exact:
        exact = simulate(noisy, plan)
        probs, any_fires, name = exact.detector_probability, exact.any_fires, "exact"
        first_order = fo.any_fires
    else:
        probs, any_fires, name = fo.detector_probability, fo.any_fires, "clifford"
        warnings += clifford_notes(noisy, fo.coherent_twirled)
    detectors = tuple(
        DetectorBudget(d.measurements, d.round, float(p), scaled(fams, p))
        for d, p, fams in zip(checks.detectors, probs, fo.detector_families)
    )
    shares = scaled(fo.any_families, any_fires)
    return _result(noisy, structured, metric, name, any_fires, first_order, shares, cycles, warnings,
                   twirled, detectors=detectors,
                   logical=checks.observables, details={"detectors": len(detectors),
                                                        "record_length": checks.num_measurements,
                                                        "random_bits": checks.random_rank})


def conditioned_noise_note(noisy: NoisyCircuit) -> str | None:
    """On the clifford path, incoherent errors (Pauli rates, relaxation) of gates inside an if block
    whose branch depends on a recorded bit are left out: stim has no noise conditioned on a
    measurement outcome (budget/engines/clifford/frames.py). One line naming the if blocks' lines,
    or None when no branch carries such an error. Coherent errors there are included."""
    lines = sorted({
        it.item.line or 0
        for it, _ in counted(noisy.body, where="measured budget")
        if isinstance(it, NoisyIf)
        and any(nop.has_incoherent for branch in branches(it) for layer, _ in counted(branch, where="measured budget")
                if isinstance(layer, NoisyLayer) for nop in layer.sites)
    })
    if not lines:
        return None
    where = ", ".join(str(n) for n in lines[:5]) + (" …" if len(lines) > 5 else "")
    return (f"incoherent errors of gates under if blocks (line {where}) are left out on the clifford engine (stim "
            "conditions no noise on a recorded bit); their coherent errors are included; the exact engine includes "
            "both where it fits (--engine exact)")


def clifford_notes(noisy: NoisyCircuit, coherent_twirled: bool) -> list[str]:
    """What a clifford-engine detector value rests on: coherent errors twirled (the deferred
    register too large) or added in amplitude, and incoherent errors left out under if blocks."""
    notes = [TWIRLED_NOTE] if coherent_twirled else [COHERENT_NOTE] if has_coherent(noisy) else []
    if note := conditioned_noise_note(noisy):
        notes.append(note)
    return notes


def measured_values(noisy: NoisyCircuit, metric: str, engine: str = "auto") -> tuple[float, float, str]:
    """(actual, twirled, engine name) of the detector or record metric, without shares (depth
    curves). Twirled: the frame value for detectors, the exact value of the twirled circuit for the
    record."""
    if metric == "record":
        qubits = recorded_qubits(noisy, metric)
        plan = Plan((), (), True, tuple(condition_bits(noisy.body)), len(qubits))
        reason = exact_refusal(noisy, plan)
        measured_engine("record", engine, reason)
        if reason is not None:
            raise TooLargeError(f"{noisy.source}: record metric: {reason}")
        ideal = simulate(strip_errors(noisy), plan).record
        return (record_infidelity(ideal, simulate(noisy, plan).record),
                record_infidelity(ideal, simulate(twirled_circuit(noisy), plan).record), "exact")
    actual, twirled, _, name = detector_values(noisy, engine)
    return actual, twirled, name


def detector_values(noisy: NoisyCircuit, engine: str = "auto") -> tuple[float, float, tuple[float, ...], str]:
    """(P(some detector fires), its twirled frame value, each detector's probability, engine name)."""
    checks = _checks(noisy, None)
    plan = Plan(tuple(d.measurements for d in checks.detectors), tuple(d.ideal for d in checks.detectors),
                False, tuple(condition_bits(noisy.body)), checks.num_measurements)
    twirled = frames(noisy, plan.detectors, shares=False)
    if measured_engine("detectors", engine, exact_refusal(noisy, plan)) == "exact":
        exact = simulate(noisy, plan)
        return exact.any_fires, twirled.any_fires, exact.detector_probability, "exact"
    fo = frames(noisy, plan.detectors, coherent=True, shares=False)
    return fo.any_fires, twirled.any_fires, fo.detector_probability, "clifford"


def strip_errors(noisy: NoisyCircuit) -> NoisyCircuit:
    """The ideal circuit: every family's errors removed."""
    for fam in _families(noisy):
        noisy = without_family(noisy, fam)
    return noisy


def _checks(noisy: NoisyCircuit, logical) -> Checks:
    try:
        return infer_checks(noisy, observables=logical)
    except InputError as exc:
        if "not Clifford" in str(exc):
            raise InputError(f"{exc}; detectors are inferred for Clifford circuits: use --metric record") from None
        raise


def exact_refusal(noisy: NoisyCircuit, plan: Plan) -> str | None:
    """None when the branching density matrix fits, else the limit it breaks."""
    if noisy.num_qubits > MAX_QUBITS:
        return f"{noisy.num_qubits} qubits exceed the exact engine's {MAX_QUBITS}"
    bits = key_bits_needed(plan)
    if bits > MAX_KEY_BITS:
        return f"{bits} classical bits tracked at once exceed the exact engine's {MAX_KEY_BITS}"
    size = 2**bits * 4**noisy.num_qubits * 16
    if size > MAX_BYTES:
        return (f"2^{bits} branches of a {noisy.num_qubits}-qubit density matrix need {size / 2**30:.1f} GiB, "
                f"above the exact engine's {MAX_BYTES / 2**30:.0f} GiB")
    return None


def _record(noisy: NoisyCircuit, structured: StructuredCircuit, engine: str, cycles: int,
            compare_twirled: bool = False) -> BudgetResult:
    measured_engine("record", engine, None)
    qubits = recorded_qubits(noisy, "record")
    plan = Plan((), (), True, tuple(condition_bits(noisy.body)), len(qubits))
    reason = exact_refusal(noisy, plan)
    if reason is not None:
        raise TooLargeError(f"{noisy.source}: record metric: {reason} (no other engine computes the record)")
    ideal = simulate(strip_errors(noisy), plan).record
    actual = simulate(noisy, plan).record
    total = record_infidelity(ideal, actual)
    bits = []
    for j, q in enumerate(qubits):
        p1 = sum(p for r, p in ideal.items() if r >> j & 1)
        if min(p1, 1 - p1) < 1e-12:
            want = int(round(p1))
            flip = sum(p for r, p in actual.items() if (r >> j & 1) != want)
            bits.append(RecordBit(j, noisy.qubits[q], float(flip)))
    parts = {}
    for fam in _families(noisy):
        parts[fam] = total - record_infidelity(ideal, simulate(without_family(noisy, fam), plan).record)
    twirled = None
    if compare_twirled:
        twirled = record_infidelity(ideal, simulate(twirled_circuit(noisy), plan).record)
    return _result(noisy, structured, "record", "exact", total, None, scaled(parts, total), cycles, [], twirled,
                   record_bits=tuple(bits), details={"record_length": len(qubits)})


def record_infidelity(ideal: dict[int, float], actual: dict[int, float]) -> float:
    """1 - (Σ_r √(p(r) q(r)))², the classical infidelity of two record distributions."""
    overlap = math.fsum(math.sqrt(max(p, 0.0) * max(actual.get(r, 0.0), 0.0)) for r, p in ideal.items())
    return float(min(max(1.0 - overlap**2, 0.0), 1.0))


def _result(noisy, structured, metric, engine, actual, first_order, shares, cycles, warnings, twirled, *,
            detectors=(), logical=(), record_bits=(), details=None) -> BudgetResult:
    families = family_table(_family_counts(noisy), shares)
    return BudgetResult(
        **circuit_fields(structured, cycles),
        metric=metric,
        engine=engine,
        naive_infidelity=naive_measured(noisy),
        actual_infidelity=float(actual),
        first_order=None if first_order is None else float(first_order),
        families=families,
        readout=ReadoutSummary.in_metric(),
        warnings=tuple(warnings),
        twirled_infidelity=None if twirled is None else float(twirled),
        details=dict(details or {}),
        detectors=detectors,
        logical=tuple(logical),
        record_bits=record_bits,
    )


def _walk_probes(items, mult: int, out: list) -> None:
    out.extend((it, n) for it, n in counted(items, mult, where="measured") if it.kind in (Kind.MEASURE, Kind.RESET))


def naive_measured(noisy: NoisyCircuit) -> float:
    """1 - Π F over gates and idle slots (:func:`naive_infidelity`) × Π (1 - e) over every executed
    readout and reset (and the idle slots during them), in log space with exact multiplicities."""
    log = math.log1p(-naive_infidelity(noisy)) if naive_infidelity(noisy) < 1 else -math.inf
    probes: list = []
    _walk_probes(noisy.body, 1, probes)
    terms = [log]
    for it, mult in probes:
        errs = it.readout_error if it.kind is Kind.MEASURE else it.reset_error
        part = sum(math.log1p(-e) if e < 1 else -math.inf for e in errs)
        part += sum(math.log(max(relaxation_process_fidelity(r), 1e-300)) for r in it.idle if not r.is_trivial)
        terms.append(mult * part)
    total = math.fsum(terms)
    return float(-math.expm1(total)) if total > -math.inf else 1.0


def _family_counts(noisy: NoisyCircuit) -> dict[str, int]:
    """Gate and idle counts (:func:`family_counts`) plus recorded bits and resets per family."""
    counts = family_counts(noisy)
    probes: list = []
    _walk_probes(noisy.body, 1, probes)
    for it, mult in probes:
        counts[it.family] = counts.get(it.family, 0) + len(it.item.qubits) * mult
    return counts


def _families(noisy: NoisyCircuit) -> list[str]:
    return families_of(noisy)


def without_family(noisy: NoisyCircuit, family: str) -> NoisyCircuit:
    """The same circuit with one family's errors removed (gate family, idle, readout or reset)."""
    memo: dict[ObjectKey, object] = {}

    def op(nop):
        if nop.family != family:
            return nop
        d = nop.coherent.shape[0]
        return dataclasses.replace(nop, coherent=np.eye(d, dtype=complex), hamiltonian={}, pauli_rates={},
                                   depolarizing=0.0, relaxation=())

    def layer(it):
        return it.map_sites(op, idle=() if family == IDLE else it.idle)

    def probe(it):
        errors = "readout_error" if it.kind is Kind.MEASURE else "reset_error"
        mine = tuple(0.0 for _ in getattr(it, errors)) if it.family == family else getattr(it, errors)
        return dataclasses.replace(it, **{errors: mine}, idle=() if family == IDLE else it.idle)

    return dataclasses.replace(noisy, body=map_items(noisy.body, layer, probe, memo=memo))
