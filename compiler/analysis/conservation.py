"""Conservation: the update telescopes, so on a periodic domain the total is unchanged.

Shown by building the update of every cell of a small periodic grid from the
face expression itself (limiters and ratios left as they are) and letting sympy
sum the changes: each face flux enters once with + and once with -, so the sum
is identically 0 whatever the limiter does. Runge-Kutta stages are such updates
too, and their weights sum to one.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..symbols import offset_of
from ..upwind import upwind_cell


@dataclass(frozen=True)
class Conservation:
    conservative: bool
    reason: str
    source: str            # which property of the scheme the verdict comes from
    cells: int             # size of the periodic grid the telescoping was shown on


def _face_on_grid(g, values, face_left_cell: int, sign: int):
    """g at the face between cells j and j+1 (upwind frame by the sign of u)."""
    n = len(values)
    subs = {}
    for sym in g.free_symbols:
        k = offset_of(sym)
        if k is None:
            continue
        cell = face_left_cell + upwind_cell(k, sign > 0)
        subs[sym] = values[cell % n]
    with sympy.evaluate(False):  # min/max of a clamp need not re-sort their arguments here
        return g.xreplace(subs)


def total_change(g: sympy.Expr, cells: int, sign: int = 1, factors=None) -> sympy.Expr:
    """sum_j (F_{j+1/2} - F_{j-1/2}) over a periodic grid, per unit of dt u / dx."""
    values = sympy.symbols(f"Q0:{cells}", real=True)
    faces = []
    for j in range(cells):
        flux = _face_on_grid(g, values, j, sign)
        faces.append(flux if factors is None else flux * factors[j])
    return sympy.Add(*[faces[j] - faces[j - 1] for j in range(cells)])


def analyse_conservation(scheme) -> Conservation:
    cells = 2 * scheme.stencil_reach + 2
    face = scheme.bound(scheme.face)
    zero = all(total_change(face, cells, sign) == 0 for sign in (1, -1))
    if scheme.correct == "fct" and scheme.low_face is not None:
        # Corrected flux F_low + C_{j+1/2} (F_high - F_low), one factor per face.
        factors = sympy.symbols(f"C0:{cells}", nonnegative=True)
        low = scheme.bound(scheme.low_face)
        corrected = total_change(low, cells) + total_change(face - low, cells, 1, factors)
        zero = zero and sympy.expand(corrected) == 0
    if scheme.clip is not None:
        return Conservation(False, "post-step clamp: clamping to [{}, {}] changes cell values "
                            "without a matching flux, so the total is not kept".format(*scheme.clip),
                            "clip", cells)
    if not zero:
        return Conservation(False, "the face fluxes do not telescope", "scheme", cells)
    what = "corrected face fluxes (low flux plus a per-face factor times the antidiffusive flux)" \
        if scheme.correct == "fct" else "face fluxes"
    return Conservation(True, f"the {what} telescope: on a periodic grid of {cells} cells the sum "
                        "of the changes is identically 0 for both signs of u"
                        + ("" if scheme.time == "euler" else ", at every Runge-Kutta stage"),
                        "fct" if scheme.correct == "fct" else "scheme", cells)
