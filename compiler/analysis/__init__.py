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
from .bounds import Bounds, analyse_bounds, check_low_flux, low_flux_scheme
from .conservation import Conservation, analyse_conservation
from .consistency import Consistency, analyse_consistency
from .dispersion import Dispersion, analyse_dispersion
from .intervals import CourantSet, Span
from .limiters import LimiterFacts, analyse_limiter
from .monotone import Monotone, analyse_monotone
from .stability import Stability, analyse_stability, kind_of_interval
from .symbol import LinearScheme, Linearisation, linearise
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
    stability: tuple[Stability, ...]           # smooth ones first, then bounding ones (and,
                                               # for FCT, the low flux alone)
    conservation: Conservation
    monotone: tuple[Monotone, ...]             # same order as stability
    limiters: tuple[LimiterFacts, ...]
    tvd: TVD
    dispersion: Dispersion | None
    bounds: Bounds | None
    order_cap_note: str
    courant_exact: sympy.Expr = sympy.Rational(1, 2)  # the same Courant number, exact

    # ---- summaries -------------------------------------------------------
    @property
    def consistent(self) -> bool | None:
        """None (undecided) when no linear scheme stands for the scheme in smooth regions."""
        if not self.consistency:
            return None
        return all(c.consistent for c in self.consistency)

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
        values = [c.order_at(self.courant_exact) for c in self.consistency]
        if any(v is None for v in values):
            return None
        value = min(values)
        return min(value, SMOOTH_ORDER_CAP) if self.order_cap_note else value

    # ---- stability: the scheme's verdict and its linear stand-ins -----------
    @property
    def stand_in_set(self) -> CourantSet | None:
        """Courant numbers where every linear scheme standing for this one is stable
        (isolated points such as c = 1 kept)."""
        return intervals.intersection(st.stable for st in self.stability)

    @property
    def stable_set(self) -> CourantSet | None:
        """The strongest stability statement proven for the scheme itself, or None.

        Linear schemes: von Neumann, exact (unstable outside). Flux-corrected transport:
        bounded where the low-order step is monotone. Other nonlinear schemes: bounded
        where one step is TVD. Outside a nonlinear scheme's set nothing is claimed."""
        s = self.scheme
        if s.correct == "fct":
            bounded = self.bounds.bounded_set if self.bounds is not None else None
            return bounded if bounded is not None and bounded.any_positive else None
        if self.linearisation.exact:
            return self.stability[0].stable if self.stability else None
        tvd = self.tvd.stable_set
        return tvd if tvd is not None and tvd.any_positive else None

    @property
    def stability_claim(self) -> str:
        """What the stable set means: 'exact' (linear: unstable outside it) or 'at least'
        (nonlinear: proven stable there, no claim outside)."""
        return "exact" if (self.linearisation.exact and self.scheme.correct != "fct") else "at least"

    @property
    def stable_interval(self) -> Span | None:
        """The interval nearest c = 0 of the stable set (islands aside)."""
        cset = self.stable_set
        return cset.main if cset is not None else None

    @property
    def stability_kind(self) -> str | None:
        """unconditional | conditional | unstable; None where a nonlinear scheme is proven
        stable on no interval (it may still be at isolated Courant numbers, its islands)."""
        cset = self.stable_set
        if self.stability_claim == "exact":
            return kind_of_interval(cset.main if cset is not None else None)
        if cset is None or cset.main is None:
            return None
        return kind_of_interval(cset.main)

    def stable_at(self, c_value) -> bool | None:
        """Stable at this Courant number (islands included); None where nothing is claimed."""
        cset = self.stable_set
        if cset is not None and cset.contains(float(c_value)):
            return True
        return False if self.stability_claim == "exact" and cset is not None else None

    def to_json(self) -> dict:
        from .document import analysis_document
        return analysis_document(self)


CACHE_SIZE = 256
_CACHE: dict[tuple[str, float], Analysis] = {}


def exact_courant(courant) -> sympy.Expr:
    """A Courant number as an exact positive rational: 3/5 stays 3/5, 0.1 is 1/10."""
    if isinstance(courant, sympy.Basic):
        value = sympy.nsimplify(courant, rational=True)
    elif isinstance(courant, float):
        value = sympy.Rational(repr(courant))
    else:
        value = sympy.Rational(courant)
    return value


def analyse(scheme, courant=sympy.Rational(1, 2)) -> Analysis:
    """Every analysis pass over one scheme; cached on (fingerprint, courant).

    courant: a number or an exact rational (sympy.Rational, fractions.Fraction, '3/5')."""
    check_low_flux(scheme)
    exact = exact_courant(courant)
    key = (scheme.fingerprint, exact)
    if key not in _CACHE:
        if len(_CACHE) >= CACHE_SIZE:
            _CACHE.pop(next(iter(_CACHE)))  # oldest first
        _CACHE[key] = _analyse(scheme, exact)
    return _CACHE[key]


def _analyse(scheme, exact_c) -> Analysis:
    courant = float(exact_c)
    lin = linearise(scheme)
    consistency = tuple(analyse_consistency(ls) for ls in lin.smooth)
    linear_schemes = lin.smooth + lin.bounding
    if scheme.correct == "fct":  # the corrected flux is the low flux wherever it must be
        low = low_flux_scheme(scheme)
        if low is not None:
            linear_schemes += (LinearScheme("low flux alone", low.time, low.face_coefficients),)
    stability = tuple(analyse_stability(ls) for ls in linear_schemes)
    monotone = tuple(analyse_monotone(ls) for ls in linear_schemes)
    limiters = tuple(analyse_limiter(lim.name, scheme.bound(lim.body), lim.courant)
                     for lim in scheme.limiters)
    whole_step = monotone[0].monotone if (lin.exact and monotone) else None
    tvd = analyse_tvd(scheme, whole_step)
    dispersion = analyse_dispersion(lin.smooth[0], courant) if lin.smooth and courant > 0 else None
    cap_note = ""
    if not lin.exact and lin.smooth and lin.curved:
        cap_note = (f"{', '.join(lin.curved)} is curved at r = 1, so the linearised order is "
                    f"claimed up to {SMOOTH_ORDER_CAP}")
    return Analysis(scheme, courant, lin, consistency, stability, analyse_conservation(scheme),
                    monotone, limiters, tvd, dispersion, analyse_bounds(scheme), cap_note,
                    exact_c)
