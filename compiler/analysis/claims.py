"""What the analysis claims, read strictly from its document into typed objects.

`read_claims(doc)` turns the document of `fluxloom check --json` (schema in
README.md) into frozen dataclasses. Every key a claim rests on must be there
with the right type: a renamed or missing verdict raises `DocumentError`
instead of quietly weakening a check. `verify` builds its predictions from
these claims, and every output (check text, compare, demo, generated-file
banners, reports) words them through `wording.py`, so one fact reads the
same everywhere.

Sets of Courant numbers are unions of closed intervals and points (every
property analysed here is a set of non-strict inequalities in c); an
unbounded end is `math.inf`. Exact forms travel beside the numbers.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

SCHEMA_VERSION = 1


class DocumentError(Exception):
    """The analysis document lacks a verdict, or holds one of the wrong type (a fluxloom bug)."""


# ---- strict access ---------------------------------------------------------------

_MISSING = object()


def _get(d: dict, key: str, types, path: str):
    if not isinstance(d, dict):
        raise DocumentError(f"analysis document: '{path}' is not an object")
    value = d.get(key, _MISSING)
    where = f"{path}.{key}" if path else key
    if value is _MISSING:
        raise DocumentError(f"analysis document: verdict '{where}' is missing")
    if not isinstance(value, types) or (isinstance(value, bool) and bool not in _tuple(types)):
        raise DocumentError(f"analysis document: '{where}' is {type(value).__name__}, "
                            f"expected {_names(types)}")
    return value


def _tuple(types) -> tuple:
    return types if isinstance(types, tuple) else (types,)


def _names(types) -> str:
    return " or ".join("null" if t is type(None) else t.__name__ for t in _tuple(types))


NUMBER = (int, float)
MAYBE_NUMBER = (int, float, type(None))
MAYBE_TEXT = (str, type(None))
MAYBE_BOOL = (bool, type(None))


# ---- sets of Courant numbers ---------------------------------------------------------

@dataclass(frozen=True)
class Part:
    """The closed interval [lo, hi] (hi may be inf, then open there); lo == hi is a point."""

    lo: float
    hi: float
    lo_exact: str | None = None
    hi_exact: str | None = None

    @property
    def is_point(self) -> bool:
        return self.lo == self.hi

    def contains(self, c: float, tol: float = 1e-9) -> bool:
        return self.lo - tol <= c <= self.hi + tol


@dataclass(frozen=True)
class Courants:
    """A set of Courant numbers c >= 0: the interval nearest 0 first, then islands."""

    parts: tuple[Part, ...] = ()
    method: str | None = None
    tolerance: float | None = None   # None: exact

    @property
    def empty(self) -> bool:
        return not self.parts

    @property
    def everything(self) -> bool:
        return any(p.lo <= 0 and p.hi == math.inf for p in self.parts)

    def contains(self, c: float, tol: float = 1e-9) -> bool:
        return any(p.contains(c, tol) for p in self.parts)

    def edges(self) -> tuple[float, ...]:
        """Every finite end of every part (a point counts once), 0 left out."""
        ends = {e for p in self.parts for e in (p.lo, p.hi) if math.isfinite(e) and e > 0}
        return tuple(sorted(ends))

    def distance_to_edge(self, c: float) -> float:
        return min((abs(c - e) for e in self.edges()), default=math.inf)

    def largest(self) -> float | None:
        """The largest Courant number in the set (inf when unbounded), None when empty."""
        return max((p.hi for p in self.parts), default=None)


WHOLE_LINE = Courants((Part(0.0, math.inf, "0", "oo"),), "every c")


def _end(d: dict, side: str, path: str) -> tuple[float | None, str | None]:
    value = _get(d, f"courant_{side}", MAYBE_NUMBER, path)
    exact = _get(d, f"courant_{side}_exact", MAYBE_TEXT, path)
    if value is None and exact == "oo":
        return math.inf, exact
    return (None if value is None else float(value)), exact


def _part(d: dict, path: str) -> Part | None:
    lo, lo_exact = _end(d, "min", path)
    hi, hi_exact = _end(d, "max", path)
    if lo is None and hi is None:
        return None
    if lo is None or hi is None:
        raise DocumentError(f"analysis document: '{path}' has one end of an interval only")
    return Part(lo, hi, lo_exact, hi_exact)


def _islands(d: dict, path: str) -> tuple[Part, ...]:
    found = _get(d, "islands", list, path)
    parts = []
    for i, island in enumerate(found):
        part = _part(island, f"{path}.islands[{i}]")
        if part is None:
            raise DocumentError(f"analysis document: '{path}.islands[{i}]' is empty")
        parts.append(part)
    return tuple(parts)


def _courants(d: dict, path: str, main: bool, method=None, tolerance=None) -> Courants:
    """The main interval (when `main`) and the islands of one verdict."""
    parts = []
    if main:
        part = _part(d, path)
        if part is not None:
            parts.append(part)
    parts.extend(_islands(d, path))
    return Courants(tuple(parts), method, tolerance)


# ---- the claims --------------------------------------------------------------------

@dataclass(frozen=True)
class Order:
    space: int | None
    time: int | None
    overall: int | None           # at a fixed Courant number
    at_courant: int | None        # at the document's Courant number
    note: str
    variable_coefficients: int | None = None   # split schemes (--dims 2, 3) only


@dataclass(frozen=True)
class StandIn:
    """One linear scheme standing for the scheme (itself, a linearisation, a frozen limiter)."""

    label: str
    kind: str | None
    stable: Courants


@dataclass(frozen=True)
class Stability:
    kind: str | None              # unconditional | conditional | unstable | None (undecided)
    stable: Courants              # where every stand-in is stable: main interval and islands
    standins: tuple[StandIn, ...]
    method: str | None
    tolerance: float | None
    basis: str
    outside: str | None           # "unstable" (proven to grow outside `stable`) | "no claim"

    @property
    def decided(self) -> bool:
        return self.kind is not None

    @property
    def claims_growth_outside(self) -> bool:
        return self.outside == "unstable"


@dataclass(frozen=True)
class Verdict:
    """A property that holds on a set of Courant numbers, fails elsewhere, or is undecided."""

    holds: bool | None            # some interval of positive length (None: undecided)
    where: Courants               # every c where it holds (islands included)
    reason: str
    source: str

    @property
    def decided(self) -> bool:
        return self.holds is not None

    def at(self, c: float) -> bool | None:
        """True where it is claimed to hold, False where claimed not to, None: no claim."""
        if self.holds is None:
            return None
        return self.where.contains(c)


@dataclass(frozen=True)
class Bounds:
    kind: str                     # clip | fct
    bounded: bool | None
    low: float | None             # clip range
    high: float | None
    low_exact: str | None
    high_exact: str | None


@dataclass(frozen=True)
class LimiterFailure:
    """Where a limiter leaves a region: the property, the range of r, what goes wrong."""

    property: str                 # sweby_tvd | second_order_region | symmetric
    r: str                        # the range of r, readable ("(0, 1/3)")
    r_min: float | None           # numeric ends (None: unbounded)
    r_max: float | None
    detail: str


@dataclass(frozen=True)
class Limiter:
    name: str
    psi: str
    psi_at_1: str | None
    sweby_tvd: bool | None
    second_order_region: bool | None
    symmetric: bool | None
    failures: tuple[LimiterFailure, ...]
    method: str


@dataclass(frozen=True)
class Claims:
    scheme: str
    about: str
    time: str
    courant: float
    linear: bool
    linearisation: str
    linearised_at: str | None     # nonlinear faces without a limiter: "a constant state", ...
    consistent: bool | None
    order: Order
    stability: Stability
    conservative: bool | None
    conservation_reason: str
    convergent: Verdict
    monotone: Verdict
    tvd: Verdict
    bounded: Verdict
    bounds: Bounds | None
    limiters: tuple[Limiter, ...]
    undecided: tuple[str, ...]
    split: "Split | None" = None  # only in documents of a split scheme (check --dims 2, 3)

    @property
    def clip(self) -> tuple[float, float] | None:
        if self.bounds is None or self.bounds.kind != "clip":
            return None
        return (self.bounds.low, self.bounds.high)

    @property
    def fct(self) -> bool:
        return self.bounds is not None and self.bounds.kind == "fct"


def _int_or_none(d: dict, key: str, path: str) -> int | None:
    value = _get(d, key, MAYBE_NUMBER, path)
    if value is None:
        return None
    if float(value) != int(value):
        raise DocumentError(f"analysis document: '{path}.{key}' is not a whole number")
    return int(value)


def _order(doc: dict) -> Order:
    d = _get(doc, "order", dict, "")
    variable = _int_or_none(d, "variable_coefficients", "order") if "split" in doc else None
    return Order(_int_or_none(d, "space", "order"), _int_or_none(d, "time", "order"),
                 _int_or_none(d, "overall", "order"), _int_or_none(d, "at_courant", "order"),
                 _get(d, "note", str, "order"), variable)


def _stability(doc: dict) -> Stability:
    d = _get(doc, "stability", dict, "")
    kind = _get(d, "kind", MAYBE_TEXT, "stability")
    if kind not in (None, "unconditional", "conditional", "unstable"):
        raise DocumentError(f"analysis document: unknown stability kind '{kind}'")
    method = _get(d, "method", MAYBE_TEXT, "stability")
    tolerance = _get(d, "tolerance", MAYBE_NUMBER, "stability")
    stable = _courants(d, "stability", main=kind in ("unconditional", "conditional"),
                       method=method, tolerance=tolerance)
    if kind is None:
        stable = Courants((), method, tolerance)
    standins = []
    for i, s in enumerate(_get(d, "schemes", list, "stability")):
        path = f"stability.schemes[{i}]"
        skind = _get(s, "kind", MAYBE_TEXT, path)
        standins.append(StandIn(
            _get(s, "label", str, path), skind,
            _courants(s, path, main=skind in ("unconditional", "conditional"),
                      method=_get(s, "method", MAYBE_TEXT, path),
                      tolerance=_get(s, "tolerance", MAYBE_NUMBER, path))))
    outside = _get(d, "outside", MAYBE_TEXT, "stability")
    if outside not in (None, "unstable", "no claim"):
        raise DocumentError(f"analysis document: unknown stability.outside '{outside}'")
    return Stability(kind, stable, tuple(standins), method, tolerance,
                     _get(d, "basis", str, "stability"), outside)


def _verdict(d: dict, path: str, islands: bool = True) -> Verdict:
    holds = _get(d, "holds", MAYBE_BOOL, path)
    reason = _get(d, "reason", str, path)
    source = _get(d, "source", str, path)
    main = _part(d, path)                      # every key is read, whatever the verdict
    others = _islands(d, path) if islands else ()
    if holds is None:
        return Verdict(None, Courants(), reason, source)
    parts = ([main] if main is not None and holds else []) + list(others)
    return Verdict(holds, Courants(tuple(parts)), reason, source)


def _bounds(doc: dict) -> tuple[Bounds | None, Verdict]:
    b = _get(doc, "bounds", (dict, type(None)), "")
    d = _get(doc, "bounded", dict, "")
    holds = _get(d, "holds", MAYBE_BOOL, "bounded")
    reason, source = _get(d, "reason", str, "bounded"), _get(d, "source", str, "bounded")
    if b is None:
        return None, Verdict(holds, Courants(), reason, source) if holds is None else \
            _verdict(d, "bounded", islands=False)
    kind = _get(b, "kind", str, "bounds")
    bounds = Bounds(kind, _get(b, "bounded", MAYBE_BOOL, "bounds"),
                    _get(b, "low", MAYBE_NUMBER, "bounds"), _get(b, "high", MAYBE_NUMBER, "bounds"),
                    _get(b, "low_exact", MAYBE_TEXT, "bounds"),
                    _get(b, "high_exact", MAYBE_TEXT, "bounds"))
    if kind == "clip":
        if holds is not True:
            raise DocumentError("analysis document: a clamp's 'bounded.holds' must be true")
        return bounds, Verdict(True, WHOLE_LINE, reason, source)
    if kind != "fct":
        raise DocumentError(f"analysis document: unknown bounds kind '{kind}'")
    if holds is None:
        return bounds, Verdict(None, Courants(), reason, source)
    where = _courants(_get(b, "bounded_for", dict, "bounds"), "bounds.bounded_for", main=True) \
        if holds else Courants()
    return bounds, Verdict(holds, where, reason, source)


def _limiters(doc: dict) -> tuple[Limiter, ...]:
    found = _get(doc, "limiters", dict, "")
    out = []
    for name, d in found.items():
        path = f"limiters.{name}"
        failures = []
        for i, f in enumerate(_get(d, "failures", list, path)):
            fpath = f"{path}.failures[{i}]"
            failures.append(LimiterFailure(
                _get(f, "property", str, fpath), _get(f, "r", str, fpath),
                _get(f, "r_min", MAYBE_NUMBER, fpath), _get(f, "r_max", MAYBE_NUMBER, fpath),
                _get(f, "detail", str, fpath)))
        out.append(Limiter(name, _get(d, "psi", str, path), _get(d, "psi_at_1_exact", MAYBE_TEXT, path),
                           _get(d, "sweby_tvd", MAYBE_BOOL, path),
                           _get(d, "second_order_region", MAYBE_BOOL, path),
                           _get(d, "symmetric", MAYBE_BOOL, path), tuple(failures),
                           _get(d, "method", str, path)))
    return tuple(out)


def read_claims(doc: dict) -> Claims:
    """The claims of one analysis document; DocumentError when a verdict is missing."""
    schema = _get(doc, "schema", int, "")
    if schema != SCHEMA_VERSION:
        raise DocumentError(f"analysis document: schema {schema}, expected {SCHEMA_VERSION}")
    mono = _get(doc, "monotone", dict, "")
    tvd = _get(doc, "tvd", dict, "")
    bounds, bounded = _bounds(doc)
    return Claims(
        scheme=_get(doc, "scheme", str, ""),
        about=_get(doc, "about", str, ""),
        time=_get(doc, "time", str, ""),
        courant=float(_get(doc, "courant", NUMBER, "")),
        linear=_get(doc, "linear", bool, ""),
        linearisation=_get(doc, "linearisation", str, ""),
        linearised_at=_get(doc, "linearised_at", MAYBE_TEXT, ""),
        consistent=_get(doc, "consistent", MAYBE_BOOL, ""),
        order=_order(doc),
        stability=_stability(doc),
        conservative=_get(doc, "conservative", MAYBE_BOOL, ""),
        conservation_reason=_get(_get(doc, "conservation", dict, ""), "reason", str, "conservation"),
        convergent=_verdict(_get(doc, "convergent", dict, ""), "convergent", islands=False),
        monotone=_verdict(mono, "monotone"),
        tvd=_verdict(tvd, "tvd"),
        bounded=bounded,
        bounds=bounds,
        limiters=_limiters(doc),
        undecided=tuple(_get(doc, "undecided", list, "")),
        split=_split(doc) if "split" in doc else None,
    )


# ---- split schemes (check --dims 2 or 3) ------------------------------------------------

SPLIT_KINDS = (None, "unconditional", "conditional", "unstable")


@dataclass(frozen=True)
class SplitDirection:
    """One axis of a split scheme: where its Courant number |u| dt/dx keeps every sweep stable."""

    axis: int
    name: str                     # x, y, z
    fraction: float               # each sweep along this axis takes fraction * dt
    fraction_exact: str
    kind: str | None
    stable: Courants


@dataclass(frozen=True)
class Split:
    dims: int
    method: str                   # lie | alternating | strang
    description: str
    period: int                   # steps per period of the sweep sequence
    sweeps: tuple[tuple[tuple[int, float], ...], ...]   # per step: (axis, fraction), in order
    kind: str | None              # stability of the split scheme (None: undecided)
    directions: tuple[SplitDirection, ...]
    stability_method: str
    tolerance: float | None
    order_overall: int | None     # constant coefficients
    order_variable: int | None    # variable coefficients
    order_one_d_variable: int | None
    splitting_order: int | None
    order_note: str
    error_text: str               # "dt^2 (-1/2 [A_x, A_y])"
    error_statement: str
    operators: str
    constant_field: str

    @property
    def decided(self) -> bool:
        return self.kind is not None

    def stable_at(self, courants) -> bool | None:
        """Claimed stable (True) or not (False) at per-axis Courant numbers; None: no claim."""
        if not self.decided:
            return None
        return all(d.stable.contains(c) for d, c in zip(self.directions, courants))


def _split(doc: dict) -> Split:
    d = _get(doc, "split", dict, "")
    st = _get(d, "stability", dict, "split")
    kind = _get(st, "kind", MAYBE_TEXT, "split.stability")
    if kind not in SPLIT_KINDS:
        raise DocumentError(f"analysis document: unknown split stability kind '{kind}'")
    tolerance = _get(st, "tolerance", MAYBE_NUMBER, "split.stability")
    directions = []
    for i, item in enumerate(_get(st, "directions", list, "split.stability")):
        path = f"split.stability.directions[{i}]"
        dkind = _get(item, "kind", MAYBE_TEXT, path)
        directions.append(SplitDirection(
            _get(item, "axis", int, path), _get(item, "name", str, path),
            float(_get(item, "fraction", NUMBER, path)), _get(item, "fraction_exact", str, path),
            dkind, _courants(item, path, main=dkind in ("unconditional", "conditional"),
                             tolerance=tolerance)))
    sweeps = []
    for i, step in enumerate(_get(d, "sweeps", list, "split")):
        sweeps.append(tuple((_get(s, "axis", int, f"split.sweeps[{i}]"),
                             float(_get(s, "fraction", NUMBER, f"split.sweeps[{i}]")))
                            for s in step))
    order = _get(d, "order", dict, "split")
    error = _get(d, "splitting_error", dict, "split")
    return Split(
        dims=_get(d, "dims", int, "split"), method=_get(d, "method", str, "split"),
        description=_get(d, "description", str, "split"),
        period=_get(d, "period_steps", int, "split"), sweeps=tuple(sweeps), kind=kind,
        directions=tuple(directions), stability_method=_get(st, "method", str, "split.stability"),
        tolerance=tolerance,
        order_overall=_int_or_none(order, "overall", "split.order"),
        order_variable=_int_or_none(order, "variable_coefficients", "split.order"),
        order_one_d_variable=_int_or_none(order, "one_d_variable_coefficients", "split.order"),
        splitting_order=_int_or_none(order, "splitting", "split.order"),
        order_note=_get(order, "note", str, "split.order"),
        error_text=_get(error, "text", str, "split.splitting_error"),
        error_statement=_get(error, "statement", str, "split.splitting_error"),
        operators=_get(error, "operators", str, "split.splitting_error"),
        constant_field=_get(d, "constant_field", str, "split"))
