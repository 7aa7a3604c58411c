"""A comparison as text and Markdown tables, sentences and the JSON of `compare --json`.

Three tables: the analysis beside the errors (compare's original columns), the
modellers' measures with the cost, and accuracy against cost (every grid of the
ladder). A cell whose run stopped says "diverged at step k"; a measured cell
whose finding disagrees with the analysis carries DISAGREE_MARK, and the last
column of the measures table names the checks that disagree.
"""
from __future__ import annotations

from fluxloom.compiler.analysis.wording import stability_text, verdict_text
from fluxloom.compiler.variants import variant_name

from .comparison import Comparison, Compared, family_best, value_text
from .findings import NO_CLAIM
from .modeller_measures import UNITS
from .report import json_safe, num, table
from .verdict_json import claims_json

DISAGREE_MARK = " (!)"
LEGEND = (f"{DISAGREE_MARK.strip()}: the measurement disagrees with the analysis "
          "(`fluxloom verify` shows the finding)")

# the checks of verify whose disagreement marks a column
CHECK_COLUMNS = {"convergence": ("l1", "l2", "linf"), "bounds": ("bounded", "overshoot",
                                                                   "undershoot"),
                 "extrema": ("new extrema",), "conservation": ("mass drift",),
                 "stability": ("stable to",)}
FAMILY_LABELS = {"l1": "l1 error", "linf": "linf error", "peak_retained": "peak retained",
                 "front_width": "front width", "overshoot": "overshoot",
                 "undershoot": "undershoot", "stability_measured": "measured stability limit",
                 "cost": "cost per cell-update"}


def _marked(row: Compared, column: str, text: str) -> str:
    for check in row.disagreeing_checks:
        if column in CHECK_COLUMNS.get(check, ()):
            return text + DISAGREE_MARK
    return text


def _cell(value, stopped: str | None = None):
    """A number, or why there is none ("diverged at step k")."""
    if value is None:
        return stopped or "-"
    return value


def _cost_ns(x: float | None) -> str:
    return "-" if x is None else f"{x * 1e9:.3g}"


# ---- the original table: analysis beside errors ------------------------------------------

HEADERS = ("scheme", "order", "stability", "TVD", "l1", "l2", "linf", "l1 square",
           "new extrema", "bounded", "mass drift", "Mcell/s")


def main_rows(comparison: Comparison):
    out = []
    for r in comparison.rows:
        claims = r.prediction.claims
        g = r.error_at(r.cells)
        m = r.measures
        errs = [_marked(r, norm, num(_cell(g.get(norm), g.stopped_text)))
                for norm in ("l1", "l2", "linf")]
        out.append([r.label, "undecided" if r.order is None else str(r.order),
                    stability_text(claims.stability), verdict_text(claims.tvd), *errs,
                    num(_cell(m.square_l1, m.stopped.get("square_l1"))),
                    _marked(r, "new extrema", num(m.new_extrema)),
                    _marked(r, "bounded", "yes" if m.bounded else "no"),
                    _marked(r, "mass drift", num(_cell(m.mass_drift, m.stopped.get("mass_drift")))),
                    num(r.speed)])
    return out


# ---- the measures ------------------------------------------------------------------------

MEASURE_HEADERS = ("scheme", "peak retained", "front width (cells)", "overshoot", "undershoot",
                   "stable to (measured)", "stages", "halo", "mass drift",
                   "ns/cell-update", "range", "vs analysis")


def verify_summary(row: Compared) -> str:
    findings = row.verification.findings
    bad = row.disagreeing_checks
    if bad:
        faults = [f.check for f in row.verification.faults]
        words = []
        if faults:
            words.append("FAULT: " + ", ".join(dict.fromkeys(faults)))
        wrong = [c for c in bad if c not in faults]
        if wrong:
            words.append("DISAGREE: " + ", ".join(wrong))
        return "; ".join(words)
    unclaimed = sum(f.verdict == NO_CLAIM for f in findings)
    return f"{len(findings) - unclaimed} agree, {unclaimed} no claim"


def measure_rows(comparison: Comparison):
    out = []
    for r in comparison.rows:
        m = r.measures
        st = m.stability
        stable = "not measured" if st is None else (
            st.text if st.max is None else f"{st.max:.3f}")
        cost = r.cost
        out.append([r.label,
                    num(_cell(m.peak_retained, m.stopped.get("peak_retained")), 4),
                    num(_cell(m.front_width, m.stopped.get("front_width"))),
                    _marked(r, "overshoot", num(_cell(m.overshoot, m.stopped.get("overshoot")))),
                    _marked(r, "undershoot",
                            num(_cell(m.undershoot, m.stopped.get("undershoot")))),
                    _marked(r, "stable to", stable), str(m.stages), str(m.halo),
                    _marked(r, "mass drift", num(_cell(m.mass_drift, m.stopped.get("mass_drift")))),
                    _cost_ns(cost.median if cost else None),
                    f"{_cost_ns(cost.min)}-{_cost_ns(cost.max)}" if cost else "-",
                    verify_summary(r)])
    return out


# ---- accuracy against cost ------------------------------------------------------------------

ACCURACY_HEADERS = ("scheme", "N", "steps", "l1", "linf", "seconds (one revolution)")


def accuracy_rows(comparison: Comparison):
    out = []
    for r in comparison.rows:
        for g in r.errors:
            seconds = r.cost.scaled(g.work).median if r.cost else None
            out.append([r.label, str(g.n), str(g.steps),
                        _marked(r, "l1", num(_cell(g.l1, g.stopped_text))),
                        _marked(r, "linf", num(_cell(g.linf, g.stopped_text))),
                        "-" if seconds is None else f"{seconds:.3g}"])
    return out


def tables(comparison: Comparison, markdown: bool = False) -> dict[str, str]:
    return {"main": table(HEADERS, main_rows(comparison), markdown=markdown),
            "measures": table(MEASURE_HEADERS, measure_rows(comparison), markdown=markdown),
            "accuracy": table(ACCURACY_HEADERS, accuracy_rows(comparison), markdown=markdown)}


# ---- sentences ----------------------------------------------------------------------------

def target_lines(comparison: Comparison) -> list[str]:
    s = comparison.settings
    if s.target_error is None:
        return []
    lines = [f"target {s.target_norm} error {s.target_error:g} (read off each convergence line "
             "in log-log, one revolution of the smooth bell):"]
    for r in comparison.rows:
        t = r.reach
        if t.reached:
            lines.append(f"  {r.label}: N = {t.n} ({t.note}), {t.cost.median:.3g} s per "
                         f"revolution (range {t.cost.min:.3g}-{t.cost.max:.3g})")
        else:
            lines.append(f"  {r.label}: {t.note}")
    best = comparison.cheapest
    if best is None:
        lines.append("cheapest: none of the schemes reaches it on the grids measured")
    else:
        row = comparison.rows[best.index]
        lines.append(f"cheapest: {row.label} on N = {best.reach.n}, "
                     f"{best.reach.cost.median:.3g} s per revolution")
        if best.noise:
            lines.append(best.noise)
    return lines


def family_lines(comparison: Comparison) -> list[str]:
    lines = []
    for fam in comparison.families:
        parts = []
        for measure, label in FAMILY_LABELS.items():
            best, note = family_best(comparison, fam, measure)
            if best:
                values = " and ".join(f"{value_text(v)}" for v in best)
                parts.append(f"{label} {values}" + (f" ({note})" if note else ""))
        lines.append(f"family {fam.title}: best {fam.param} by "
                     + "; ".join(parts))
    return lines


def notes(comparison: Comparison) -> list[str]:
    """The target, the families' best values, noise warnings and the legend (if marked)."""
    lines = target_lines(comparison) + family_lines(comparison) + list(comparison.noise)
    if any(r.disagreeing_checks for r in comparison.rows):
        lines.append(LEGEND)
    return lines


def heading(comparison: Comparison) -> str:
    s = comparison.settings
    return (f"compare at c = {s.courant:g}, N = {s.cells} (errors after one revolution: "
            f"l1/l2/linf on the smooth bell, l1 on the square wave; mass drift: the larger of "
            f"a steady and a sign-changing flow; speed and cost on {s.backend} {s.precision}, "
            f"median of {s.timing.repeats} timings on {s.timing.cells} cells)")


def comparison_text(comparison: Comparison) -> str:
    t = tables(comparison)
    parts = [heading(comparison), t["main"], "",
             "measures (peak retained: bell; front width: square wave; overshoot/undershoot: "
             "fraction of the initial range, any step; cost: nanoseconds per cell-update, "
             "median and range)", t["measures"], "",
             "accuracy against cost (smooth bell; seconds: cost per cell-update x cells x steps)",
             t["accuracy"]]
    extra = notes(comparison)
    if extra:
        parts += [""] + extra
    return "\n".join(parts) + "\n"


# ---- JSON ---------------------------------------------------------------------------------

def row_json(r: Compared) -> dict:
    g = r.error_at(r.cells)
    doc = {
        "scheme": r.variant.scheme.name,
        "label": r.label,
        # the kernel name `build --set` gives this variant (lw_sweby_beta_3_2): stable, distinct
        "variant": variant_name(r.variant.scheme, dict(r.variant.settings)),
        "params": r.document["params"],
        "time": r.document["time"],
        "analysis": claims_json(r.prediction.claims),
        "predicted_order": r.order,
        "cost": r.cost.to_json() if r.cost else None,
        "speed": r.speed,
        "errors": [e.to_json(r.cost) for e in r.errors],
        "l1": g.l1, "l2": g.l2, "linf": g.linf,
        **r.measures.to_json(),
        "findings": [f.to_json() for f in r.verification.findings],
        "disagree": list(r.disagreeing_checks),
        "agree": r.verification.agree,
        "units": UNITS,
    }
    if g.stopped_text:
        doc["stopped"] = {**doc["stopped"], "errors": g.stopped_text}
    if r.reach is not None:
        doc["target"] = r.reach.to_json()
    return doc


def comparison_json(comparison: Comparison) -> dict:
    s = comparison.settings
    doc = {"courant": s.courant, "cells": s.cells, "grids": list(s.ladder),
           "backend": s.backend, "precision": s.precision,
           "timing": {"cells": s.timing.cells, "repeats": s.timing.repeats},
           "rows": [row_json(r) for r in comparison.rows],
           "noise": list(comparison.noise),
           "families": [family_json(comparison, f) for f in comparison.families],
           "units": {**UNITS, "cheapest.cost": "seconds for one revolution on n cells"}}
    if s.target_error is not None:
        best = comparison.cheapest
        doc["target_error"] = {"value": s.target_error, "norm": s.target_norm}
        doc["cheapest"] = None if best is None else {
            "scheme": comparison.rows[best.index].variant.scheme.name,
            "label": comparison.rows[best.index].label,
            "params": comparison.rows[best.index].document["params"],
            "n": best.reach.n, "cost": best.reach.cost.to_json(), "noise": best.noise}
    return json_safe(doc)


def family_json(comparison: Comparison, fam) -> dict:
    from .comparison import FAMILY_MEASURES, family_values

    out = {"scheme": fam.scheme, "param": fam.param,
           "fixed": {k: {"value": float(v), "exact": value_text(v)} for k, v in fam.fixed},
           "values": [{"value": float(v), "exact": value_text(v)} for v in fam.values],
           "labels": [comparison.rows[i].label for i in fam.members],
           "measures": {}, "best": {}}
    for measure in FAMILY_MEASURES:
        out["measures"][measure] = family_values(comparison, fam, measure)
        best, note = family_best(comparison, fam, measure)
        out["best"][measure] = {"exact": [value_text(v) for v in best], "note": note}
    return out

