"""Bounds: post-step clipping and flux-corrected transport.

clip keeps values in [LO, HI] by clamping after each step: bounded, but not
conservative, and new extrema can still appear inside the bounds. The other
verdicts are the scheme's own (clamping is pointwise, non-decreasing and
1-Lipschitz, so it keeps a monotone or TVD scheme monotone or TVD).

correct fct blends each face flux from low_flux toward flux (Zalesak 1979):
corrected fluxes telescope, and the result stays within the local bounds of the
old and low-order solutions wherever the low-order step is monotone, i.e. for
the Courant numbers where the low flux's update coefficients are all >= 0.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..diagnostics import LoomError, Span
from .intervals import CourantSet
from .monotone import analyse_monotone
from .symbol import LinearScheme, linear_coefficients


@dataclass(frozen=True)
class Bounds:
    kind: str                         # "clip" | "fct"
    bounded: bool
    low: sympy.Expr | None            # clip bounds
    high: sympy.Expr | None
    bounded_set: CourantSet | None    # fct: where the low-order step is monotone
    new_extrema: str                  # plain statement
    order: str                        # plain statement about accuracy
    reason: str
    low_flux_coefficients: tuple[tuple[int, sympy.Expr], ...] = ()


def low_flux_scheme(scheme) -> LinearScheme | None:
    if scheme.low_face is None:
        return None
    coefficients = linear_coefficients(scheme.bound(scheme.low_face))
    if coefficients is None:
        return None
    return LinearScheme("low flux", "euler", coefficients)


def _low_flux_error(scheme, message: str, span: Span | None) -> LoomError:
    """A LoomError at the low_flux statement (the front end passes its span)."""
    return LoomError(message, span, file=scheme.file)


def check_low_flux(scheme, span: Span | None = None) -> None:
    """Raise a LoomError when `correct fct` has no usable monotone low_flux.

    Runs in the front end (compiler.scheme_from_text), so every command refuses
    such a spec; `span` is where the low_flux statement stands.
    """
    if scheme.correct != "fct":
        return
    if scheme.low_face is None:
        raise LoomError("'correct fct' needs a 'low_flux = ...' statement "
                        "(the monotone flux the correction falls back to)", file=scheme.file)
    low = low_flux_scheme(scheme)
    if low is None:
        raise _low_flux_error(scheme, "the low_flux must be linear in q so that its "
                              "monotonicity can be shown (for example low_flux = u * q[0])", span)
    result = analyse_monotone(low)
    if not result.holds:
        coefficients = ", ".join(f"q[j{m:+d}]: {sympy.sstr(v)}" for m, v in result.coefficients)
        raise _low_flux_error(scheme, "the low_flux is monotone at no Courant number (its "
                              f"update coefficients {coefficients} are never all >= 0 on an "
                              "interval of c), so 'correct fct' cannot keep the solution "
                              "within bounds", span)


def analyse_bounds(scheme) -> Bounds | None:
    if scheme.correct == "fct":
        low = low_flux_scheme(scheme)
        result = analyse_monotone(low)
        return Bounds(
            "fct", not result.monotone.empty, None, None, result.monotone,
            "none: each cell stays within the old and low-order values of its neighbours "
            f"(for {result.monotone.text()}, where the low-order step is monotone)",
            "the order of the flux in smooth regions; it drops toward the low flux's first "
            "order where the correction bites (near extrema and steep fronts)",
            "the low-order step is monotone where its update coefficients are all >= 0, and the "
            "corrected flux only moves each cell within the local bounds (Zalesak 1979)",
            result.coefficients)
    if scheme.clip is not None:
        lo, hi = scheme.clip
        return Bounds(
            "clip", True, lo, hi, None,
            "possible: clamping only acts at the bounds, so over- and undershoots inside "
            f"[{lo}, {hi}] remain",
            "the scheme's own where the clamp is inactive; first order at most where it acts",
            f"post-step clamp: every value is set into [{lo}, {hi}] after each step")
    return None
