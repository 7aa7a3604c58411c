"""Flux-corrected transport (Zalesak 1979) as data: the steps every target prints.

One forward-Euler step, in one frame for every target: cell j (interior 0 .. n - 1)
lies between face j (its left face) and face j + 1; face f lies between cells f - 1
and f. Each step runs over a `Span` of faces or cells, first .. n + last, and writes
element 0 of its arrays from elements of earlier arrays at fixed shifts (sympy
`Indexed`: `low[1]` is the low-order flux one face to the right of the loop's index).

1. F_low on faces -2 .. n + 2 (the low-order face),
2. F_high on faces -1 .. n + 1, into `anti`,
3. A = F_high - F_low on those faces (in place),
4. the low-order solution q_td on cells -2 .. n + 1,
5. the limiter factors R+ and R- on cells -1 .. n: the bounds of q and q_td over a
   cell and its two neighbours, the antidiffusive inflow P+ and outflow P-, and
   R = `Share(room, P)` = min(1, room / P) where P > 0, else 0,
6. the corrected flux F_low + C A on faces 0 .. n, C = min(R+ of the cell the face
   feeds, R- of the cell it drains) (in place of A),
7. q_out on the interior cells, held in [LO, HI] by the plan's clamp when the scheme
   clips.

Targets print the loops (C: signed indices on pointers at each array's index 0;
Fortran: arrays declared with these bounds; numpy: slices of a block) and the
expressions with their own printers; the spans give the workspace regions
(`regions`). A step never reads the array it writes at another index than its own,
so a vectorised target (numpy slices) computes what a sequential loop does.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from .workspace import Affine, Region

FCT_EXTRA_FACES = 2
"""Extra face velocities (and faces) per side an FCT step evaluates (step 1's span)."""

DT_DX = sympy.Symbol("dt_dx", real=True)
CELLS, FACES = "cells", "faces"


class Share(sympy.Function):
    """Zalesak's R: min(1, room / inflow) where inflow > 0, else 0. Every target prints it
    as a helper that divides only where inflow > 0 (its `share` helper)."""

    nargs = 2
    is_real = True


@dataclass(frozen=True)
class Span:
    """Indices first .. n + last (inclusive) of faces or cells."""

    kind: str
    first: int
    last: int

    @property
    def count(self) -> Affine:
        return Affine(cells=1, constant=self.last - self.first + 1)


@dataclass(frozen=True)
class Array:
    """An array a step reads or writes: the caller's (`q`, `q_out`, `u_face`) or a region
    of workspace (`span` its extent)."""

    name: str
    kind: str
    span: Span | None = None
    about: str = ""


@dataclass(frozen=True)
class FluxStep:
    """target[f] = u * g on the faces of span (g the high- or the low-order face)."""

    target: str
    span: Span
    low_order: bool
    about: str


@dataclass(frozen=True)
class LoopStep:
    """For every index of span: the temporaries top to bottom, then the writes
    (array, expression), each array written at the loop's own index."""

    span: Span
    temporaries: tuple[tuple[sympy.Symbol, sympy.Expr], ...]
    writes: tuple[tuple[str, sympy.Expr], ...]
    about: str


@dataclass(frozen=True)
class FctPlan:
    arrays: tuple[Array, ...]      # caller's arrays first, then workspace regions in order
    steps: tuple[FluxStep | LoopStep, ...]

    @property
    def work(self) -> tuple[Array, ...]:
        return tuple(a for a in self.arrays if a.span is not None)

    def array(self, name: str) -> Array:
        return next(a for a in self.arrays if a.name == name)

    def regions(self) -> tuple[Region, ...]:
        """The workspace regions, one per work array, sized by its span."""
        return tuple(Region(a.name, a.span.count, 1, a.about) for a in self.work)


def element(array: str, shift: int = 0) -> sympy.Indexed:
    """array at the loop's index + shift."""
    return sympy.IndexedBase(array, real=True)[shift]


def element_of(expr: sympy.Indexed) -> tuple[str, int]:
    """(array name, shift) of an element."""
    return expr.base.label.name, int(expr.indices[0])


def minus(a, b) -> sympy.Expr:
    """a - b, kept as written (printers print it in this order)."""
    return sympy.Add(a, sympy.Mul(-1, b, evaluate=False), evaluate=False)


def times(a, b) -> sympy.Expr:
    return sympy.Mul(a, b, evaluate=False)


def plus(a, b) -> sympy.Expr:
    return sympy.Add(a, b, evaluate=False)


def symbol(name: str) -> sympy.Symbol:
    return sympy.Symbol(name, real=True)


def _pairwise(function, values):
    """function(function(v0, v1), v2) ... nested as written (min/max are exact, so the
    nesting never changes a value)."""
    result = values[0]
    for value in values[1:]:
        result = function(result, value, evaluate=False)
    return result


def fct_plan(clamp=None) -> FctPlan:
    """The steps of one FCT step; clamp(value) -> the clip expression of `value`, or None."""
    extra = FCT_EXTRA_FACES
    arrays = (
        Array("q", CELLS, about="the state the step starts from"),
        Array("q_out", CELLS, about="the new state"),
        Array("u_face", FACES, about="face velocities"),
        Array("low", FACES, Span(FACES, -extra, extra), "low-order fluxes"),
        Array("anti", FACES, Span(FACES, 1 - extra, extra - 1),
              "antidiffusive fluxes A = F_high - F_low, then the corrected fluxes"),
        Array("low_solution", CELLS, Span(CELLS, -extra, extra - 1),
              "the low-order solution"),
        Array("r_plus", CELLS, Span(CELLS, 1 - extra, extra - 2), "limiter factors R+"),
        Array("r_minus", CELLS, Span(CELLS, 1 - extra, extra - 2), "limiter factors R-"),
    )
    q, low, anti, td = (lambda s=0: element("q", s)), (lambda s=0: element("low", s)), \
        (lambda s=0: element("anti", s)), (lambda s=0: element("low_solution", s))
    r_plus, r_minus = (lambda s=0: element("r_plus", s)), (lambda s=0: element("r_minus", s))
    most, least = symbol("most"), symbol("least")
    p_plus, p_minus, factor, value = (symbol("p_plus"), symbol("p_minus"), symbol("factor"),
                                      symbol("value"))
    zero = sympy.Integer(0)
    neighbourhood = [v for s in (-1, 0, 1) for v in (q(s), td(s))]
    bounds = LoopStep(
        Span(CELLS, 1 - extra, extra - 2),
        ((most, _pairwise(sympy.Max, neighbourhood)),
         (least, _pairwise(sympy.Min, neighbourhood)),
         (p_plus, times(DT_DX, minus(sympy.Max(anti(0), zero), sympy.Min(anti(1), zero)))),
         (p_minus, times(DT_DX, minus(sympy.Max(anti(1), zero), sympy.Min(anti(0), zero))))),
        (("r_plus", Share(minus(most, td()), p_plus)),
         ("r_minus", Share(minus(td(), least), p_minus))),
        "bounds of q and q_td over the cell and its neighbours, antidiffusive inflow P+ "
        "and outflow P-, limiter factors R+ and R-")
    update = minus(q(), times(DT_DX, minus(anti(1), anti(0))))
    last = (LoopStep(Span(CELLS, 0, -1), ((value, update),), (("q_out", clamp(value)),),
                     "the corrected update, clipped")
            if clamp is not None else
            LoopStep(Span(CELLS, 0, -1), (), (("q_out", update),), "the corrected update"))
    steps = (
        FluxStep("low", Span(FACES, -extra, extra), True, "low-order fluxes F_low"),
        FluxStep("anti", Span(FACES, 1 - extra, extra - 1), False, "high-order fluxes F_high"),
        LoopStep(Span(FACES, 1 - extra, extra - 1), (), (("anti", minus(anti(), low())),),
                 "antidiffusive fluxes A = F_high - F_low"),
        LoopStep(Span(CELLS, -extra, extra - 1), (),
                 (("low_solution", minus(q(), times(DT_DX, minus(low(1), low())))),),
                 "the low-order solution q_td"),
        bounds,
        LoopStep(Span(FACES, 0, 0),
                 ((factor, sympy.Piecewise(
                     (sympy.Min(r_plus(0), r_minus(-1), evaluate=False), anti() >= 0),
                     (sympy.Min(r_plus(-1), r_minus(0), evaluate=False), True))),),
                 (("anti", plus(low(), times(factor, anti()))),),
                 "corrected fluxes F_low + C A, C the smaller share of the cell the face "
                 "feeds and the cell it drains"),
        last,
    )
    plan = FctPlan(arrays, steps)
    _check(plan)
    return plan


def _check(plan: FctPlan) -> None:
    """Every read lies inside its array's span and no step reads the array it writes at
    another index (so slices and sequential loops agree)."""
    spans = {a.name: a.span for a in plan.arrays}
    for step in plan.steps:
        if isinstance(step, FluxStep):
            _inside(spans[step.target], step.span, 0, step.target)
            continue
        written = {name for name, _ in step.writes}
        for name, expr in step.writes:
            _inside(spans[name], step.span, 0, name)
        for expr in [e for _, e in step.temporaries] + [e for _, e in step.writes]:
            for node in expr.atoms(sympy.Indexed):
                name, shift = element_of(node)
                _inside(spans[name], step.span, shift, name)
                if name in written and shift != 0:
                    raise AssertionError(f"FCT step reads {name} it writes at shift {shift}")


def _inside(extent: Span | None, span: Span, shift: int, name: str) -> None:
    if extent is None:
        return  # the caller's arrays: their halos are sized by kernel_halo / face_halo
    # an element of a cell array read from a face loop: face f's cells are f - 1 and f,
    # written in the frame as shifts; here the frames agree (cell j, face j its left)
    if span.first + shift < extent.first or span.last + shift > extent.last:
        raise AssertionError(f"FCT step reads {name} outside its extent")
