"""Symbolic analysis of a Scheme: consistency, order, stability, conservation,
monotonicity, limiters, TVD, dispersion and bounds.

`analyse(scheme, courant)` runs every pass over the IR and returns one frozen
`Analysis`; `Analysis.to_json()` is the document `fluxloom check --json` prints
and the harness reads. Results are cached on the scheme's fingerprint.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..keyed import fingerprint_cache
from . import budget, intervals
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
from .tvd import undecided as tvd_undecided

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
    order_cap: int | None = None          # orders are claimed up to this (0: none claimed)
    budget_seconds: float = budget.DEFAULT_SECONDS
    over_budget: tuple[tuple[str, str, str], ...] = ()   # (pass, "fallback"|"undecided", note)
    courant_exact: sympy.Expr = sympy.Rational(1, 2)      # the same Courant number, exact

    # ---- summaries -------------------------------------------------------
    def exceeded(self, what: str) -> str | None:
        """How the pass `what` ended when it went past its budget ("fallback" or "undecided")."""
        return next((how for name, how, _ in self.over_budget if name == what), None)

    @property
    def consistent(self) -> bool | None:
        """None (undecided) when no linear scheme stands for the scheme in smooth regions or
        the pass ran out of budget; never False for want of an answer."""
        if not self.consistency:
            return None
        return all(c.consistent for c in self.consistency)

    def _capped(self, value: int | None) -> int | None:
        if value is None or self.order_cap is None:
            return value
        return None if self.order_cap == 0 else min(value, self.order_cap)

    def _order(self, attr: str) -> int | None:
        values = [getattr(c, attr) for c in self.consistency]
        if not values or any(v is None for v in values):
            return None
        return self._capped(min(values))

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
        return self._capped(min(values))

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
        if self.small_data:
            return self.stand_in_set
        tvd = self.tvd.stable_set
        return tvd if tvd is not None and tvd.any_positive else None

    @property
    def small_data(self) -> bool:
        """A nonlinear face differentiable at a constant state: for data close enough to a
        constant state it is its Jacobian linearisation, whose von Neumann verdict is then
        exact for those data (and says nothing about larger data)."""
        lin = self.linearisation
        return (not lin.exact and lin.source == "linearisation"
                and (lin.where or "").startswith("a constant state") and bool(self.stability))

    @property
    def stability_claim(self) -> str:
        """What the stable set means: 'exact' (linear, or small perturbations of a constant
        state: unstable outside it) or 'at least' (nonlinear: proven stable there, no claim
        outside)."""
        if self.scheme.correct == "fct":
            return "at least"
        return "exact" if (self.linearisation.exact or self.small_data) else "at least"

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


def exact_courant(courant) -> sympy.Expr:
    """A Courant number as an exact rational: 3/5 stays 3/5, 0.1 is 1/10."""
    if isinstance(courant, sympy.Basic):
        return sympy.nsimplify(courant, rational=True)
    if isinstance(courant, float):
        return sympy.Rational(repr(courant))
    return sympy.Rational(courant)


def analyse(scheme, courant=sympy.Rational(1, 2),
            budget_seconds: float = budget.DEFAULT_SECONDS) -> Analysis:
    """Every analysis pass over one scheme, each within `budget_seconds` of CPU time;
    cached on (fingerprint, courant, budget). courant: a number or an exact rational
    (sympy.Rational, fractions.Fraction, '3/5'), kept exact."""
    check_low_flux(scheme)
    exact = exact_courant(courant)
    return _cached_analysis(scheme, exact, float(budget_seconds))


@fingerprint_cache(maxsize=CACHE_SIZE)
def _cached_analysis(scheme, exact_c, seconds: float) -> Analysis:
    return _analyse(scheme, exact_c, seconds)


class _Passes:
    """Runs each pass under the budget and keeps what went past it."""

    def __init__(self, seconds: float):
        import time

        self.seconds = seconds
        self.clock = time.process_time
        self.end = self.clock() + budget.WHOLE_FACTOR * seconds  # all passes together
        self.over: list[tuple[str, str, str]] = []

    def run(self, what: str, exact, fallback=None, how: str = "", undecided=None):
        seconds = self._left()
        outcome = budget.attempt(seconds, exact, fallback, how, undecided, self._left)
        if outcome.how != "exact" and seconds < self.seconds:
            outcome = budget.Outcome(outcome.value, outcome.how, outcome.note + (
                f"; the passes before it had used the analysis's whole budget "
                f"({budget.WHOLE_FACTOR:g} x {self.seconds:g} s)"))
        if outcome.how != "exact":
            self.over.append((what, outcome.how, outcome.note))
        return outcome.value

    def _left(self) -> float:
        """This pass's budget: its own, or what is left of the whole analysis's."""
        return max(min(self.seconds, self.end - self.clock()), budget.FLOOR_SECONDS)

    def reason(self, what: str) -> str:
        return next((note for name, _, note in self.over if name == what), "budget exceeded")


def _numeric_stability(ls) -> Stability:
    from .stability import numeric_set

    stable = numeric_set(ls, ls.numeric_direct(), why="the exact step went past the budget")
    return Stability(ls.label, "(not formed: the exact step went past the budget)",
                     "(not formed)", None, stable)


def _analyse(scheme, exact_c, seconds: float) -> Analysis:
    from .stability import NUMERIC_TOLERANCE
    from .symbol import linearise_numerically

    courant = float(exact_c)
    passes = _Passes(seconds)
    run = passes.run
    lin = run("linearisation", lambda: linearise(scheme),
              lambda: linearise_numerically(scheme),
              "numeric Jacobian at a constant state instead (tolerance stated in the note)",
              lambda: Linearisation((), (), False, "budget exceeded: no linear scheme stands "
                                    "for this one", source="linearisation"))
    if not lin.smooth and passes.over:
        lin = Linearisation((), (), False, "linearisation: " + passes.reason("linearisation"),
                            source=lin.source)
    consistency = run("consistency", lambda: tuple(analyse_consistency(ls) for ls in lin.smooth),
                      undecided=tuple)
    linear_schemes = lin.smooth + lin.bounding
    if scheme.correct == "fct":  # the corrected flux is the low flux wherever it must be
        low = low_flux_scheme(scheme)
        if low is not None:
            linear_schemes += (LinearScheme("low flux alone", low.time, low.face_coefficients),)
    stability = run("stability", lambda: tuple(analyse_stability(ls) for ls in linear_schemes),
                    lambda: tuple(_numeric_stability(ls) for ls in linear_schemes),
                    f"numeric scan of |G| instead (tolerance {NUMERIC_TOLERANCE:g})", tuple)
    monotone = run("monotone", lambda: tuple(analyse_monotone(ls) for ls in linear_schemes),
                   undecided=tuple)
    limiters = tuple(_limiter(run, lim.name, scheme.bound(lim.body), lim.courant)
                     for lim in scheme.limiters)
    whole_step = monotone[0].monotone if (lin.exact and monotone) else None
    tvd = run("tvd", lambda: analyse_tvd(scheme, whole_step),
              undecided=lambda: tvd_undecided(passes.reason("tvd")))
    dispersion = None
    if lin.smooth and courant > 0:
        dispersion = run("dispersion", lambda: analyse_dispersion(lin.smooth[0], courant))
    conservation = run("conservation", lambda: analyse_conservation(scheme),
                       undecided=lambda: Conservation(None, passes.reason("conservation"),
                                                      "scheme", 0))
    bounds = run("bounds", lambda: analyse_bounds(scheme),
                 undecided=lambda: _bounds_undecided(scheme, passes.reason("bounds")))
    cap, cap_note = lin.order_cap, lin.cap_note
    if cap is None and not lin.exact and lin.smooth and lin.curved:
        cap = SMOOTH_ORDER_CAP
        cap_note = (f"{', '.join(lin.curved)} is curved at r = 1, so the linearised order is "
                    f"claimed up to {SMOOTH_ORDER_CAP}")
    return Analysis(scheme, courant, lin, consistency, stability, conservation, monotone,
                    limiters, tvd, dispersion, bounds, cap_note, cap, seconds, tuple(passes.over),
                    exact_c)


def _limiter(run, name: str, body, courant: bool = False) -> LimiterFacts:
    from .limiters import _sampled, _sampled_courant

    def undecided():
        return LimiterFacts(name, sympy.sstr(body), None, None, None, None, None, None, None,
                            None, "undecided: budget exceeded", courant=courant)
    sampled = _sampled_courant if courant else _sampled
    return run(f"limiter {name}", lambda: analyse_limiter(name, body, courant),
               lambda: sampled(name, body, None, None, None),
               "sampled on a grid instead (tolerance stated in the method)", undecided)


def _bounds_undecided(scheme, reason: str) -> Bounds | None:
    if scheme.correct != "fct" and scheme.clip is None:
        return None
    kind = "fct" if scheme.correct == "fct" else "clip"
    return Bounds(kind, None, *(scheme.clip or (None, None)), None, "undecided", "undecided", reason)
