"""The report as a list of plain blocks (:mod:`budget.report.blocks`), so HTML and Markdown show
exactly the same content. The renderers (:mod:`budget.report.html`, :mod:`budget.report.markdown`)
only decide how a block looks.
"""

from __future__ import annotations

import math

from budget.analysis.depth import CURVE_WORDS
from budget.analysis.ratios import at_rounding_level
from budget.analysis.result import naive_words
from budget.errors.context_terms import knob_label, knob_text
from budget.report.blocks import Block, Figure, Heading, Para, Table, Tiles
from budget.report.calib_sections import blocks as calibration_blocks
from budget.report.content import CAUTION_WORDS, ENGINE_WORDS, ReportData, fixed, minutes, num, short_name, summary_words, verdict


def build(data: ReportData, figures: dict[str, str]) -> list[Block]:
    """All blocks in reading order; ``figures`` maps figure name -> SVG text (from plots.py)."""
    r = data.result
    ok, words = verdict(r, data.target)
    out: list[Block] = [Para(summary_words(data), "summary")]
    v = r.verdict
    tone = "" if ok is None else "good" if ok else "bad"
    tiles = [
        ("fidelity product (naive)", num(r.naive_infidelity), naive_words(r.metric), ""),
        ("actual", "beyond range" if r.actual is None else num(r.actual),
         f"{r.metric} infidelity, {r.engine} engine", tone or "bad"),
        ("actual ÷ naive", v.amplification.shown(suffix="×"), v.words, v.tone),
        ("target", num(data.target), {True: "meets it", False: "misses it", None: "cannot be judged"}[ok], tone),
    ]
    if r.twirled_infidelity is not None:
        tiles.insert(2, ("Pauli-twirled", num(r.twirled_infidelity), "same errors, randomly compiled", ""))
    out.append(Tiles(tuple(tiles)))
    out += _depth(data, figures)
    out += _shares(data, figures)
    out += _detectors(data, figures)
    out += _error_map(data, figures)
    out += _tolerances(data)
    out += _calibration(data)
    out += calibration_blocks(data.extras, figures)
    out += _model(data)
    out.append(Heading("Engine and validity", "engine"))
    out.append(Para(f"Engine: {r.engine} — {ENGINE_WORDS.get(r.engine, 'see docs/methods.md')}"))
    for w in r.warnings + (data.curve.warnings if data.curve else ()):
        out.append(Para(w, "warning"))
    for n in data.notes:
        out.append(Para(n, "note"))
    out.append(Para(CAUTION_WORDS, "caution"))
    return out


def _depth(data: ReportData, figures: dict[str, str]) -> list[Block]:
    c = data.curve
    out: list[Block] = [Heading("Depth: repeating the circuit", "depth")]
    if c is None:
        return out + [Para("The depth curves could not be computed for this circuit; see the notes at the end.", "note")]
    text = (
        f"The whole circuit is treated as one cycle and repeated N = 1 … {c.max_cycles:,} times. The naive curve "
        "multiplies fidelities; the actual curve follows the errors as the circuit is compiled; the "
        "Pauli-twirled curve shows the same errors after random compiling, where coherent errors add in "
        f"probability instead of amplitude. Curves computed by: {c.engine}"
        + (f" (twirled: {c.twirled_engine})." if c.twirled_engine != c.engine else ".")
    )
    words = c.crossover_words()
    text += f" {words[0].upper()}{words[1:]}."
    same = _headline_point(data)
    if same:
        text += " " + same
    out.append(Para(text))
    out += [Para(w, "note") for w in c.notes()]
    if "depth-curves" in figures:
        out.append(Figure("depth-curves", figures["depth-curves"], "Infidelity against repetitions (log–log)."))
    if c.deepest:
        rows = []
        for key, words in CURVE_WORDS.items():
            rows.append((words, c.deepest_words(key)))
        out.append(Para(f"Deepest repetition count that still meets the target {num(c.target)}:"))
        out.append(Table(("curve", "repetitions"), tuple(rows), (False, True)))
    if c.components:
        out.append(Para("Which coherent errors build up over repetitions (they commute with the cycle) and which are echoed away:"))
        out.append(Table(
            ("error", "grows per cycle (rad)", "bounded part (rad)", "behaviour"),
            tuple((k.name, num(k.growing_rad), num(k.bounded_rad), k.behaviour) for k in c.components),
            (False, True, True, False),
        ))
    pick = _thin(list(range(len(c.repetitions))), 10)
    out.append(Table(
        ("repetitions N", CURVE_WORDS["naive"], f"{CURVE_WORDS['structured']} ({c.engine})",
         f"{CURVE_WORDS['twirled']} ({c.twirled_engine})"),
        tuple((f"{c.repetitions[i]:,}", num(c.naive[i]), _point(c.structured[i]), _point(c.twirled[i])) for i in pick),
        (True, True, True, True),
    ))
    return out


def _meaningful(total: float) -> bool:
    """A total that percentages can be taken of: positive and above rounding level."""
    return total > 0 and not at_rounding_level(total)


def _point(x: float | None) -> str:
    return "beyond range" if x is None else num(x)


def _headline_point(data: ReportData) -> str:
    """When the curve and the headline come from different engines, say so and give both values."""
    c, r = data.curve, data.result
    if c is None or r.cycles not in c.repetitions or c.engine.split(" ")[0] == r.engine:
        return ""  # the periodic closed form gives what the generators engine gives for that repeat
    switch = c.switches.get("structured")
    if switch is not None and switch <= r.cycles and r.engine == "exact":
        return ""  # the curve's point there is the exact engine's, as the headline
    at = c.structured[c.repetitions.index(r.cycles)]
    gives = "has no value (beyond its engine's range)" if at is None else f"gives {num(at)} from the {c.engine} engine"
    return (f"At N = {r.cycles:,} (the circuit as analysed above) this curve {gives}, "
            f"while the headline value {_point(r.actual)} comes from the {r.engine} engine"
            + (": the difference is the curve engine's approximation, and the headline value is the one to use."
               if r.engine == "exact" else "."))


def _shares(data: ReportData, figures: dict[str, str]) -> list[Block]:
    r = data.result
    out: list[Block] = [Heading("Which gate families cost the most", "families")]
    out.append(Para(
        "Each family's share of the actual infidelity. Shares add up to the total; a negative share "
        "means that family's coherent error partly cancels another's."
    ))
    if "family-shares" in figures:
        out.append(Figure("family-shares", figures["family-shares"], "Share of the actual infidelity per gate family."))
    if not r.shows_shares:
        why = "the error is beyond the first-order range" if r.actual is None else \
            "no engine within its range could split the total (see the warnings at the end)"
        return out + [Para(f"Family shares are left out: {why}.", "note")]
    total = r.actual_infidelity
    out.append(Table(
        ("family", "operations executed", "share", "of total"),
        tuple((f.name, f"{f.operations:,}", num(f.share), f"{fixed(100 * f.share / total)} %" if _meaningful(total) else "—")
              for f in r.families),
        (False, True, True, True),
    ))
    return out


def _detectors(data: ReportData, figures: dict[str, str]) -> list[Block]:
    """Detector metric: the rounds-by-detector map and the detectors that fire most."""
    r = data.result
    if not r.detectors:
        return []
    out: list[Block] = [Heading("Which checks fire: rounds by detector", "detectors")]
    out.append(Para(
        f"{len(r.detectors)} detectors (parities of measurement outcomes that the ideal circuit fixes) were found; "
        "each cell is the probability that one fires. A check that detects an error projects it, so coherent "
        "errors build up across rounds only where the checks cannot see them. The family table above gives "
        "each family's share of the probability that some detector fires."
    ))
    if "detector-map" in figures:
        out.append(Figure("detector-map", figures["detector-map"], "Firing probability per round and detector."))
    top = sorted(r.detectors, key=lambda d: -d.probability)[:8]
    out.append(Table(
        ("round", "measurements", "P(fires)", "largest family"),
        tuple((str(d.round), ",".join(map(str, d.measurements)), num(d.probability),
               max(d.families, key=d.families.get) if d.families else "—") for d in top),
        (True, False, True, False),
    ))
    return out


def _error_map(data: ReportData, figures: dict[str, str]) -> list[Block]:
    m = data.emap
    out: list[Block] = [Heading("Where the error comes from: layer by qubit", "map")]
    out.append(Para(
        "Each cell is the local error of one layer on one qubit: the process infidelity 1 − F_pro of every "
        "operation in that layer (coherent, stochastic, depolarizing and relaxation parts together), split "
        "evenly over the operation's qubits, plus the idle relaxation of that qubit in that layer, times the "
        "number of times the layer runs. A layer inside a repeated block appears once. This is a first-order "
        "picture that adds errors as if independent: it shows where the error arises, not how it builds up "
        "or cancels between layers (the depth curves and family shares show that)."
    ))
    if "error-map" in figures:
        out.append(Figure("error-map", figures["error-map"], "Local first-order infidelity per layer and qubit, % of the map total."))
    hot = m.hottest(5)
    if hot:
        out.append(Table(
            ("qubit", "layer", "local infidelity", "of map total"),
            tuple((q, col, num(v), f"{fixed(100 * v / m.total)} %" if _meaningful(m.total) else "—") for q, col, v in hot),
            (False, False, True, True),
        ))
    if m.note:
        out.append(Para(m.note, "note"))
    return out


def _tolerances(data: ReportData) -> list[Block]:
    out: list[Block] = [Heading(f"Calibration tolerances for the target {num(data.target)}", "tolerances")]
    t = data.tolerances
    if t is None:
        return out + [Para("Tolerances are not available in this installation; section left out.", "note")]
    if not t.feasible:
        remedy = t.floor_remedy.message() if t.floor_remedy is not None else "improve T1, T2 or gate error rates"
        return out + [Para(
            f"The incoherent floor {num(t.incoherent_floor)} alone exceeds the target: no calibration of coherent "
            f"knobs can meet it; {remedy}; or run fewer repetitions.", "warning")]
    out.append(Para(
        f"Largest allowed size of each coherent error knob ({'worst case over signs' if t.assume == 'worst' else 'random signs, r.m.s.'}), "
        f"with today's value and the factor by which calibration must tighten. Incoherent floor: {num(t.incoherent_floor)}; "
        f"budget left for coherent errors: {num(t.coherent_budget)}."
    ))
    loop = t.closed_loop
    if loop is not None:
        out.append(Para(
            f"Checked in closed loop: with every knob at its tolerance the {loop.engine} engine gives "
            f"{num(loop.achieved)} against the target {num(t.target)} ({100 * loop.achieved / t.target:.1f} %; "
            f"{loop.method})."
        ))
    rows = tuple(
        (f"{row.family} · {knob_label(row.knob)}", knob_text(row.current_rad, row.knob, num),
         knob_text(row.tolerance_rad, row.knob, num),
         f"{row.tighten_by:.3g}×" if row.status == "tighten" else "—",
         f"{row.sites_over} of {len(row.sites)}" + (f" (worst {row.worst_site})" if row.sites_over else ""), row.status)
        for row in t.rows
    )
    out.append(Table(("knob", "today (rad)", "tolerance (rad)", "tighten by", "sites outside", "status"), rows,
                     (False, True, True, True, False, False)))
    for w in t.warnings + (loop.notes if loop is not None else ()):
        out.append(Para(w, "warning"))
    return out


def _calibration(data: ReportData) -> list[Block]:
    out: list[Block] = [Heading("Device time to calibrate", "calibration")]
    p = data.plan
    if p is None:
        why = "no tolerance table" if data.tolerances is not None else "not available in this installation"
        return out + [Para(f"Calibration cost: {why}; section left out.", "note")]
    if not p.knobs:
        return out + [Para("No knob needs a calibration experiment for this target.")]
    out.append(Para(
        "Amplified phase estimation on every place the gate acts: depth n* = 1/Γ set by the decay per "
        "repetition, shots from the Cramér–Rao bound (Kimmel, Low, Yoder, PRA 92, 062315 (2015))."
    ))
    rows = tuple(
        (f"{k.family} · {knob_label(k.knob)}", k.reason, knob_text(k.sigma_rad, k.knob, num), str(len(k.sites)),
         ", ".join(str(s.depth) for s in k.sites[:3]) + ("…" if len(k.sites) > 3 else ""), minutes(k.device_s),
         "—" if k.hold_hours is None else f"{k.hold_hours:.3g} h")
        for k in p.knobs
    )
    out.append(Table(("knob", "why", "precision σ (rad)", "sites", "depth n*", "device time", "holds for"),
                     rows, (False, False, True, True, True, True, True)))
    line = f"One round of all of these: {minutes(p.round_s)} of device time."
    if p.rounds_per_day:
        line += f" Drift asks for {p.rounds_per_day:.3g} rounds a day, {100 * p.day_share:.2g} % of the device's day."
    out.append(Para(line))
    for key, why in p.unplanned.items():
        out.append(Para(f"{key}: {why}", "note"))
    return out


def _model(data: ReportData) -> list[Block]:
    out: list[Block] = [Heading("Error model used", "model")]
    out.append(Para(f"From {short_name(data.model_source) or 'the given model'}. Angles in radians, times as labelled."))
    gates = [m for m in data.model_rows if m.kind == "gate"]
    qubits = [m for m in data.model_rows if m.kind == "qubit"]
    if gates:
        keys = tuple(gates[0].values)
        out.append(Table(("gate", "on") + keys, tuple((g.name, g.where) + tuple(g.values[k] for k in keys) for g in gates)))
    if qubits:
        keys = tuple(qubits[0].values)
        out.append(Table(("qubit", "") + keys, tuple((q.name, q.where) + tuple(q.values[k] for k in keys) for q in qubits)))
    context = [m for m in data.model_rows if m.kind == "context"]
    if context:
        out.append(Table(("context error", "on", "value"), tuple((c.name, c.where, c.values["value"]) for c in context)))
    ro = data.result.readout
    if ro.per_qubit and ro.any_error:
        assumed = " (the circuit measures no qubit: every qubit read once at the end)" if ro.assumed else ""
        out.append(Para(f"Readout is kept apart from gate errors: P(at least one misread){assumed} = {num(ro.any_error)}."))
    return out


def _thin(indices: list[int], count: int) -> list[int]:
    if len(indices) <= count:
        return indices
    step = (len(indices) - 1) / (count - 1)
    return sorted({indices[int(math.floor(i * step + 0.5))] for i in range(count)})
