"""The analysis's verdicts as JSON objects for compare (and any other output that
carries them): the typed claims (compiler/analysis/claims.py) as structure, each
with the words `check` uses for it (compiler/analysis/wording.py) in `text`.

A verdict is never flattened to a string: `holds` (true, false or null for
undecided), the Courant numbers where it holds as parts with exact ends, the
reason and where it comes from, then the text.
"""
from __future__ import annotations

import math

from fluxloom.compiler.analysis.claims import Claims, Courants, Order, Stability, Verdict
from fluxloom.compiler.analysis.wording import (bounded_text, order_text, set_text,
                                                stability_text, verdict_text, yes_no)


def _end(value: float) -> float | None:
    return None if value == math.inf else value


def courants_json(courants: Courants) -> dict:
    """{parts: [{min, max, min_exact, max_exact}], set}; an unbounded end is null, 'oo'."""
    return {"parts": [{"min": _end(p.lo), "max": _end(p.hi), "min_exact": p.lo_exact,
                       "max_exact": p.hi_exact} for p in courants.parts],
            "set": set_text(courants),
            "method": courants.method, "tolerance": courants.tolerance}


def verdict_json(verdict: Verdict) -> dict:
    return {"holds": verdict.holds, "where": courants_json(verdict.where),
            "reason": verdict.reason, "source": verdict.source, "text": verdict_text(verdict)}


def stability_json(stability: Stability) -> dict:
    return {"kind": stability.kind,
            "stable": courants_json(stability.stable) if stability.decided else None,
            "method": stability.method, "tolerance": stability.tolerance,
            "basis": stability.basis,
            "standins": [{"label": s.label, "kind": s.kind, "stable": courants_json(s.stable)}
                         for s in stability.standins],
            "text": stability_text(stability)}


def order_json(order: Order, courant: float | None = None) -> dict:
    return {"space": order.space, "time": order.time, "overall": order.overall,
            "at_courant": order.at_courant, "note": order.note,
            "text": order_text(order, courant)}


def claims_json(claims: Claims) -> dict:
    """Every verdict compare reports, as structured objects."""
    return {
        "order": order_json(claims.order, claims.courant),
        "stability": stability_json(claims.stability),
        "conservative": {"holds": claims.conservative, "reason": claims.conservation_reason,
                         "text": yes_no(claims.conservative)},
        "monotone": verdict_json(claims.monotone),
        "tvd": verdict_json(claims.tvd),
        "bounded": {**verdict_json(claims.bounded),
                    "kind": claims.bounds.kind if claims.bounds else None,
                    "text": bounded_text(claims)},
    }
