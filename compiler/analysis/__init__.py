"""Symbolic analysis of a Scheme: consistency, order, stability, conservation,
monotonicity, limiters, TVD, dispersion and bounds.

`analyse(scheme, courant)` runs every pass over the IR and returns one frozen
`Analysis`; `Analysis.to_json()` is the document `fluxloom check --json` prints
and the harness reads. Results are cached on the scheme's fingerprint.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from . import intervals
from .bounds import Bounds, analyse_bounds, check_low_flux
from .conservation import Conservation, analyse_conservation
from .consistency import Consistency, analyse_consistency
from .dispersion import Dispersion, analyse_dispersion
from .intervals import Span
from .limiters import LimiterFacts, analyse_limiter
from .monotone import Monotone, analyse_monotone
from .stability import Stability, analyse_stability, kind_of_interval
from .symbol import Linearisation, linearise
from .tvd import TVD, analyse_tvd

__all__ = ["Analysis", "analyse", "check_low_flux"]

SMOOTH_ORDER_CAP = 3
"""With psi(r) - psi(1) - psi'(1)(r - 1) = O((r - 1)^2) = O(dx^2), the limited face
differs from its linearisation by O(dx^3): the linearised order holds up to 3."""


@dataclass(frozen=True)
class Analysis:
    scheme: object
    courant: float
    linearisation: Linearisation
    consistency: tuple[Consistency, ...]       # one per smooth linear scheme
    stability: tuple[Stability, ...]           # smooth ones first, then bounding ones
    conservation: Conservation
    monotone: tuple[Monotone, ...]             # same order as stability
    limiters: tuple[LimiterFacts, ...]
    tvd: TVD
    dispersion: Dispersion | None
    bounds: Bounds | None
    order_cap_note: str

    # ---- summaries -------------------------------------------------------
    @property
    def consistent(self) -> bool:
        return bool(self.consistency) and all(c.consistent for c in self.consistency)

    def _order(self, attr: str) -> int | None:
        values = [getattr(c, attr) for c in self.consistency]
        if not values or any(v is None for v in values):
            return None
        value = min(values)
        return min(value, SMOOTH_ORDER_CAP) if self.order_cap_note else value

    @property
    def order(self) -> dict:
        return {"space": self._order("order_space"), "time": self._order("order_time"),
                "overall": self._order("order_overall"), "at_courant": self.order_at_courant}

    @property
    def order_at_courant(self) -> int | None:
        """The overall order at this analysis's Courant number (can exceed the generic one)."""
        if not self.consistency or self.courant <= 0 or not self.linearisation.exact:
            # a limited scheme's linearisation says nothing finer than its generic order
            return self._order("order_overall")
        values = [c.order_at(self.courant) for c in self.consistency]
        if any(v is None for v in values):
            return None
        value = min(values)
        return min(value, SMOOTH_ORDER_CAP) if self.order_cap_note else value

    @property
    def stable_interval(self) -> Span | None:
        """The interval nearest c = 0 where every linear scheme standing for this one is stable."""
        mains = [s.stable.main for s in self.stability]
        if not mains or any(m is None for m in mains):
            return None
        lo = max((m.lo for m in mains), key=intervals.number)
        hi = min((m.hi for m in mains), key=intervals.number)
        if intervals.number(lo) >= intervals.number(hi):
            return None
        return Span(lo, hi, True, hi != sympy.oo)

    @property
    def stability_kind(self) -> str:
        return kind_of_interval(self.stable_interval)

    def to_json(self) -> dict:
        from .document import analysis_document
        return analysis_document(self)


CACHE_SIZE = 256
_CACHE: dict[tuple[str, float], Analysis] = {}


def analyse(scheme, courant: float = 0.5) -> Analysis:
    """Every analysis pass over one scheme; cached on (fingerprint, courant)."""
    check_low_flux(scheme)
    key = (scheme.fingerprint, float(courant))
    if key not in _CACHE:
        if len(_CACHE) >= CACHE_SIZE:
            _CACHE.pop(next(iter(_CACHE)))  # oldest first
        _CACHE[key] = _analyse(scheme, float(courant))
    return _CACHE[key]


def _analyse(scheme, courant: float) -> Analysis:
    lin = linearise(scheme)
    consistency = tuple(analyse_consistency(ls) for ls in lin.smooth)
    linear_schemes = lin.smooth + lin.bounding
    stability = tuple(analyse_stability(ls) for ls in linear_schemes)
    monotone = tuple(analyse_monotone(ls) for ls in linear_schemes)
    limiters = tuple(analyse_limiter(lim.name, scheme.bound(lim.body)) for lim in scheme.limiters)
    whole_step = monotone[0].monotone if (lin.exact and monotone) else None
    tvd = analyse_tvd(scheme, whole_step)
    dispersion = analyse_dispersion(lin.smooth[0], courant) if lin.smooth and courant > 0 else None
    cap_note = ""
    if not lin.exact and lin.smooth and lin.curved:
        cap_note = (f"{', '.join(lin.curved)} is curved at r = 1, so the linearised order is "
                    f"claimed up to {SMOOTH_ORDER_CAP}")
    return Analysis(scheme, courant, lin, consistency, stability, analyse_conservation(scheme),
                    monotone, limiters, tvd, dispersion, analyse_bounds(scheme), cap_note)
