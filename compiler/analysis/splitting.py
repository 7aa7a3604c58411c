"""Split schemes in 2-D and 3-D: stability and order of a sequence of 1-D sweeps.

Stability (constant coefficients). A step is a product of 1-D steps, so its
amplification factor is the product of 1-D factors, one per sweep:
G(theta_x, theta_y) = prod G(f c_axis, theta_axis), f the sweep's share of dt. A
flux-form step keeps a constant, so G(c, 0) = 1 and the product stays within the
unit disc for every (theta_x, theta_y) exactly when every factor does: the split
scheme is stable when each direction's Courant number c_axis = |u_axis| dt/dx_axis
lies in the 1-D stable set divided by f (Strang's half sweeps: twice the 1-D set,
the half sweeps run as two sweeps, not fused). Islands carry over, scaled.

Order. With constant coefficients the sweeps commute and the error of the split
step is the sum of its 1-D errors: the 1-D order (`order.overall`). With
variable coefficients they do not commute; the splitting error, derived from
the table (split_error.py), makes Lie first order and keeps alternating Lie (over
a pair of steps) and Strang at second. A single-step (`time euler`) face also
sees only its own velocity, so where the velocity varies along a sweep the
time-averaged flux's -dt/2 u (du/dx) q part is missing and the 1-D step itself
is first order there; a method-of-lines face keeps its order (its time method
runs with the velocity frozen over the step). `order.variable_coefficients` is
the smaller of the two.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy

from ..splittings import AXIS_NAMES, splitting
from . import intervals
from .intervals import CourantSet, Span
from .split_error import SplitError, operator_names, split_error
from .stability import kind_of_interval

STABILITY_METHOD = (
    "product of the 1-D amplification factors, one per sweep: a flux-form step has "
    "G(c, 0) = 1, so the product stays within the unit disc for every wavenumber exactly "
    "when each factor does; each direction's Courant number must lie in the 1-D stable set "
    "divided by its sweeps' share of dt (half sweeps run as two sweeps, not fused)")
CONSTANT_FIELD = (
    "a sweep along x changes a constant field by -dt/dx (u(i+1/2) - u(i-1/2)) q, so split "
    "flux-form sweeps keep a constant field constant between sweeps only when the velocity "
    "is constant along every sweep; with a divergence-free field that varies in space the "
    "constant returns only up to the splitting error, and the 1-D monotone, TVD and bound "
    "verdicts hold sweep by sweep only for a velocity constant along the sweep (verify "
    "--dims 2 measures the overshoot)")
EULER_VARIABLE = (
    "a single-step (time euler) face sees only its own velocity: where the velocity varies "
    "along a sweep the time-averaged flux's -dt/2 u (du/dx) q part is missing, so the 1-D "
    "step is first order there")
LINES_VARIABLE = (
    "a method-of-lines face keeps its 1-D order with a velocity that varies in space; the "
    "kernel freezes the velocity over a step, so a velocity that varies in time is taken at "
    "mid-step (second order in time at most)")


@dataclass(frozen=True)
class Direction:
    axis: int
    fraction: sympy.Rational        # each sweep along this axis takes fraction * dt
    stable: CourantSet | None       # c_axis where every sweep along it is stable; None: undecided

    @property
    def name(self) -> str:
        return AXIS_NAMES[self.axis]

    @property
    def kind(self) -> str | None:
        return None if self.stable is None else kind_of_interval(self.stable.main)


@dataclass(frozen=True)
class SplitAnalysis:
    dims: int
    method: str
    description: str
    period: int
    sequence: tuple                 # per step of the period: ((axis, fraction), ...)
    directions: tuple[Direction, ...]
    stability_method: str
    stability_tolerance: float | None
    stability_basis: str
    order_constant: int | None      # the 1-D order: sweeps commute
    order_one_d_variable: int | None  # the 1-D step's order with a velocity varying along it
    order_variable: int | None
    order_note: str
    error: SplitError
    undecided: tuple[str, ...]

    @property
    def stability_kind(self) -> str | None:
        kinds = [d.kind for d in self.directions]
        if any(k is None for k in kinds):
            return None
        if "unstable" in kinds:
            return "unstable"
        return "unconditional" if all(k == "unconditional" for k in kinds) else "conditional"


def _scaled(span: Span, factor) -> Span:
    hi = span.hi if span.hi == sympy.oo else span.hi * factor
    return Span(span.lo * factor, hi, span.lo_closed, span.hi_closed)


def _one_d_set(analysis) -> CourantSet | None:
    """The 1-D stable set as the document states it: the interval every linear scheme
    standing for this one shares, and the islands of a single one."""
    if not analysis.stability:
        return None
    main = analysis.stable_interval
    islands = analysis.stability[0].stable.islands if len(analysis.stability) == 1 else ()
    every = [st.stable for st in analysis.stability]
    exact = all(cs.tolerance is None for cs in every)
    tolerance = None if exact else max(cs.tolerance for cs in every if cs.tolerance)
    parts = ((main,) if main is not None else ()) + tuple(islands)
    return CourantSet(parts, "; ".join(dict.fromkeys(cs.method for cs in every)), tolerance)


def _direction_set(one_d: CourantSet | None, fraction) -> CourantSet | None:
    if one_d is None:
        return None
    factor = 1 / sympy.Rational(fraction)
    tolerance = None if one_d.tolerance is None else one_d.tolerance * float(factor)
    return CourantSet(tuple(_scaled(p, factor) for p in one_d.parts), one_d.method, tolerance)


def _min(*values):
    return None if any(v is None for v in values) else min(values)


def analyse_splitting(analysis, dims: int, method: str) -> SplitAnalysis:
    """The split scheme of `analysis.scheme` in `dims` dimensions under `method`."""
    table = splitting(method)
    one_d = _one_d_set(analysis)
    directions = tuple(Direction(axis, sympy.Rational(table.fraction_of(dims, axis)),
                                 _direction_set(one_d, table.fraction_of(dims, axis)))
                       for axis in range(dims))
    error = split_error(method, dims)
    overall = analysis.order["overall"]
    euler = analysis.scheme.time == "euler"
    one_d_variable = _min(overall, 1) if euler else overall
    notes = [EULER_VARIABLE if euler else LINES_VARIABLE]
    over = "a pair of steps" if table.period == 2 else "each step"
    if error.order is not None:
        notes.insert(0, f"{method} splitting alone is order {error.order} with variable "
                        f"coefficients (its local error over {over} is O(dt^{error.power}))")
    lin = analysis.linearisation
    if not lin.exact and lin.source == "limiter":
        notes.append("orders in smooth monotone regions; at extrema the limiter lowers them")
    undecided = []
    if one_d is None:
        undecided.append("split stability: the 1-D stability is undecided")
    if overall is None:
        undecided.append("split order: the 1-D order is undecided")
    return SplitAnalysis(
        dims, method, table.description, table.period,
        tuple(tuple((s.axis, sympy.Rational(s.fraction)) for s in step)
              for step in table.sequence(dims)),
        directions, STABILITY_METHOD + (f"; 1-D sets: {one_d.method}" if one_d else ""),
        None if one_d is None else one_d.tolerance, lin.basis,
        overall, one_d_variable, _min(error.order, one_d_variable), "; ".join(notes), error,
        tuple(undecided))


# ---- the document ----------------------------------------------------------------------

def _num(value):
    if value is None or value in (sympy.oo, -sympy.oo):
        return None
    return float(sympy.N(value, 17))


def _span(span: Span | None) -> dict:
    if span is None:
        return {"courant_min": None, "courant_min_exact": None,
                "courant_max": None, "courant_max_exact": None}
    return {"courant_min": _num(span.lo), "courant_min_exact": intervals.exact_text(span.lo),
            "courant_max": _num(span.hi), "courant_max_exact": intervals.exact_text(span.hi)}


def _direction(d: Direction) -> dict:
    stable = d.stable
    main = None if stable is None else stable.main
    return {"axis": d.axis, "name": d.name, "courant": f"|u_{d.name}| dt/d{d.name}",
            "fraction": _num(d.fraction), "fraction_exact": sympy.sstr(d.fraction),
            "kind": d.kind, **_span(main),
            "islands": [] if stable is None else [_span(p) for p in stable.islands],
            "set": None if stable is None else stable.text()}


def split_json(split: SplitAnalysis) -> dict:
    """The `split` object of `check --json --dims D` (schema in README.md)."""
    error = split.error
    names = operator_names(split.dims)
    velocities = ("u", "v", "w")
    operators = ", ".join(f"{name} = -d/d{AXIS_NAMES[a]}({velocities[a]} .)"
                          for a, name in enumerate(names))
    per = "pair of steps" if split.period == 2 else "step"
    return {
        "dims": split.dims, "method": split.method, "description": split.description,
        "period_steps": split.period,
        "sweeps": [[{"axis": axis, "name": AXIS_NAMES[axis], "fraction": _num(f),
                     "fraction_exact": sympy.sstr(f)} for axis, f in step]
                   for step in split.sequence],
        "stability": {"kind": split.stability_kind,
                      "directions": [_direction(d) for d in split.directions],
                      "method": split.stability_method, "tolerance": split.stability_tolerance,
                      "basis": split.stability_basis, "source": "scheme"},
        "order": {"overall": split.order_constant,
                  "variable_coefficients": split.order_variable,
                  "one_d_variable_coefficients": split.order_one_d_variable,
                  "splitting": error.order, "note": split.order_note},
        "splitting_error": {
            "per": per, "power": error.power, "order": error.order,
            "terms": [{"coefficient": float(b.coefficient),
                       "coefficient_exact": sympy.sstr(b.coefficient), "commutator": b.text}
                      for b in error.brackets],
            "text": error.text(),
            "operators": f"{operators}; [P, Q] = PQ - QP",
            "statement": (f"local error of one {per}: {error.text()} q + O(dt^"
                          f"{(error.power or 0) + 1}), so O(dt^{error.order}) after a fixed "
                          "time; with constant coefficients every commutator vanishes"
                          if error.power is not None else error.text())},
        "constant_field": CONSTANT_FIELD,
        "undecided": list(split.undecided),
    }


def with_split(document: dict, split: SplitAnalysis) -> dict:
    """The analysis document with the split scheme added: `split`, and
    `order.variable_coefficients` beside `order.overall` (constant coefficients)."""
    doc = dict(document)
    doc["order"] = {**document["order"], "variable_coefficients": split.order_variable}
    doc["split"] = split_json(split)
    doc["undecided"] = list(dict.fromkeys(list(document["undecided"]) + list(split.undecided)))
    return doc


def split_document(analysis, dims: int, method: str) -> dict:
    """`check --json` for a split scheme: the 1-D document plus `split`."""
    document = analysis.to_json()
    if dims == 1:
        return document
    return with_split(document, analyse_splitting(analysis, dims, method))
