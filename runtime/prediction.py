"""What `verify` expects to measure, built from the analysis's typed claims.

`Prediction` wraps `compiler.analysis.claims.Claims` (read strictly from the
analysis document: a missing verdict fails loudly) and answers the questions
the measurements ask: is the scheme claimed stable at this Courant number,
monotone, TVD, bounded, conservative, of which order. Each answer is True,
False, or None where the analysis claims nothing (a finding then says "no
claim").
"""
from __future__ import annotations

import math
from dataclasses import dataclass

from fluxloom.compiler.analysis.claims import Claims, Courants, read_claims

STABILITY_TOL = 0.02       # a measured edge within 0.02 of the predicted one agrees
SMOOTH_MONOTONE = "smooth monotone data"   # the linearisation of a limiter or a clamp
CONSTANT_STATE = "a constant state"        # the Jacobian of a differentiable face
SMALL_DATA = 1e-30         # random data this small see a face linearised at a constant state
                           # act as its linearisation (differences far below any weight's scale)


@dataclass(frozen=True)
class Prediction:
    """The analysis's claims, in the form the measurements need."""

    claims: Claims

    @classmethod
    def from_document(cls, doc: dict) -> "Prediction":
        """From the document of `fluxloom check --json`; DocumentError when a verdict is missing."""
        return cls(read_claims(doc))

    @classmethod
    def from_analysis(cls, analysis, scheme=None) -> "Prediction":
        """From an `Analysis`, or from its document (read strictly either way); `scheme`
        is accepted for older callers and not used: every claim comes from the analysis."""
        doc = analysis if isinstance(analysis, dict) else analysis.to_json()
        return cls.from_document(doc)

    # ---- plain facts ---------------------------------------------------------------
    @property
    def scheme(self) -> str:
        return self.claims.scheme

    @property
    def order(self) -> int | None:
        """The order at the analysed Courant number (the generic one where not higher)."""
        order = self.claims.order
        return order.at_courant if order.at_courant is not None else order.overall

    @property
    def clip(self) -> tuple[float, float] | None:
        return self.claims.clip

    @property
    def fct(self) -> bool:
        return self.claims.fct

    @property
    def linear(self) -> bool:
        """Linear in q (a clamp aside): stability can be measured mode by mode."""
        return self.claims.linear and not self.claims.fct

    @property
    def linearised_at_constant_state(self) -> bool:
        """A nonlinear face without a limiter, linearised by its Jacobian at a constant
        state: on small enough data it is its linearisation, so it is probed spectrally."""
        return (self.claims.linearised_at or "").startswith(CONSTANT_STATE)

    @property
    def linearised_on_smooth_data(self) -> bool:
        """A nonlinear face without a limiter, linearised on smooth monotone data (a clamp
        between neighbours): the stability claim is the linearisation's there, and random
        data exercise the face elsewhere, so they are reported, not judged."""
        return self.claims.linearised_at == SMOOTH_MONOTONE

    @property
    def spectral(self) -> bool:
        """Stability is measured mode by mode (on small data for a Jacobian linearisation)."""
        return self.linear or self.linearised_at_constant_state

    @property
    def probe_amplitude(self) -> float | None:
        return SMALL_DATA if self.linearised_at_constant_state else None

    @property
    def clips_extrema(self) -> bool:
        """A limiter, a clamp between neighbours or FCT flattens smooth extrema, so its
        order shows only in smooth monotone regions (the analysis linearised it there)."""
        return bool(self.claims.limiters) or self.claims.fct or self.linearised_on_smooth_data

    @property
    def conservative(self) -> bool | None:
        return self.claims.conservative

    # ---- stability -----------------------------------------------------------------
    @property
    def stability_decided(self) -> bool:
        return self.claims.stability.decided

    def stability_margin(self) -> float:
        tolerance = self.claims.stability.tolerance or 0.0
        return STABILITY_TOL + tolerance

    def _edges(self) -> tuple[float, ...]:
        sets = [self.claims.stability.stable] + [s.stable for s in self.claims.stability.standins]
        return tuple(sorted({e for cs in sets for e in cs.edges()}))

    def stable_at(self, c: float) -> bool | None:
        """True: claimed stable at c; False: claimed to grow at c; None: no claim.

        A linear scheme is claimed stable on its stable set (islands included, to the
        analysis's own tolerance) and to grow elsewhere, except within STABILITY_TOL of an
        edge, where growth may be too weak to see. A nonlinear one is claimed stable on the
        set the analysis proves (where one step is TVD, say); outside it the analysis claims
        nothing (`stability.outside` is "no claim"), and neither does verify."""
        stability = self.claims.stability
        if not stability.decided or self.linearised_on_smooth_data:
            return None
        tolerance = stability.tolerance or 0.0
        if self.spectral and stability.stable.contains(c, 1e-9) and (
                not tolerance or stability.stable.distance_to_edge(c) > tolerance):
            return True     # inside, islands included (a numeric edge: beyond its tolerance)
        if any(abs(c - e) < self.stability_margin() for e in self._edges()):
            return None
        if stability.stable.contains(c):
            return True
        if self.spectral and stability.claims_growth_outside:
            return False
        return None     # the analysis proves nothing outside its set (stand-ins are not claims)

    def stable_anywhere_at(self, c: float) -> bool:
        """Some stand-in is stable at c (without tolerance): runs there are meaningful."""
        stability = self.claims.stability
        return stability.stable.contains(c) or any(s.stable.contains(c) for s in stability.standins)

    def probe_courants(self, spectral: bool) -> tuple[float, ...]:
        """Courant numbers to probe: a grid from near 0 past every predicted edge, each
        island, points either side of every edge, and the middle of every part, so that
        growth inside the predicted set and stability outside it are both looked for."""
        step = 1 / 16 if spectral else 1 / 4
        edges = [e for e in self._edges() if math.isfinite(e)]
        top = min(max(2.0, 1.25 * max(edges, default=0.0) + 0.5), 16.0)
        points = {step * k for k in range(1, int(round(top / step)) + 1)}
        points |= {1 / 64, 1 / 32} if spectral else {1 / 16}
        margin = 2 * self.stability_margin()
        for e in edges:
            points |= {e, e - margin, e + margin}
        sets = [self.claims.stability.stable] + [s.stable for s in self.claims.stability.standins]
        for cs in sets:
            for part in cs.parts:
                hi = min(part.hi, top)
                points.add((part.lo + hi) / 2)
        return tuple(sorted(c for c in points if 0 < c <= top + margin))

    # ---- shape ---------------------------------------------------------------------
    def monotone_at(self, c: float) -> bool | None:
        return self.claims.monotone.at(c)

    def tvd_at(self, c: float) -> bool | None:
        """TVD is implied where monotone; None where the analysis is undecided on both."""
        if self.monotone_at(c):
            return True
        return self.claims.tvd.at(c)

    def bounded_at(self, c: float) -> str | None:
        """Why the solution must stay within its initial bounds at c, or None."""
        if self.clip is not None:
            return "post-step clamp"
        return self.no_new_extrema_at(c)

    def no_new_extrema_at(self, c: float) -> str | None:
        """Why no step may create a new extremum at c, or None (a clamp is no reason)."""
        if self.fct and self.claims.bounded.at(c):
            return "flux-corrected transport"
        if self.monotone_at(c):
            return "monotone"
        if self.tvd_at(c):
            return "TVD"
        return None

    @property
    def stable_set(self) -> Courants:
        return self.claims.stability.stable


# ---- the analysis documents verify reads ---------------------------------------------

def analysis_document(scheme, courant: float) -> dict:
    """The analysis document (`fluxloom check --json`) that findings are judged against."""
    from fluxloom.compiler.analysis import analyse

    return analyse(scheme, courant).to_json()


def split_analysis_document(scheme, courant: float, dims: int, method: str) -> dict:
    """The analysis document with the split scheme (`check --json --dims D --split M`)."""
    from fluxloom.compiler.analysis import analyse
    from fluxloom.compiler.analysis.splitting import split_document

    return split_document(analyse(scheme, courant), dims, method)


def predict(scheme, courant: float) -> Prediction:
    """The prediction verify holds a kernel against, read strictly from the analysis."""
    return Prediction.from_document(analysis_document(scheme, courant))
