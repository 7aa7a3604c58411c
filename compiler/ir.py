"""AST -> Scheme IR: the single source of truth for analysis and every emitter.

The face flux is kept as `u * g` with `g` a sympy expression in the upwind frame
over the symbols of compiler/symbols.py. Lets are inlined (emitters recover
common subexpressions with sympy.cse); limiters stay as named undefined
functions, with their bodies kept separately, because analysis needs them apart.
"""
from __future__ import annotations

import hashlib
from dataclasses import dataclass, field, replace
from functools import cached_property

import sympy

from . import constants
from . import syntax as ast
from .check import integer_offset
from .diagnostics import LoomError, Span, did_you_mean
from .symbols import (C, R, U, Ratio, limiter_calls, limiter_function, limiter_name_of, offsets_in,
                      param_symbol, q)
from .upwind import stencil_reach

SMOOTH_BREAKERS = (sympy.Abs, sympy.Min, sympy.Max, sympy.sign, Ratio)


@dataclass(frozen=True)
class Param:
    name: str
    value: sympy.Expr  # exact (a Rational where the user wrote one)
    symbol: sympy.Symbol = field(compare=False)
    definition: sympy.Expr | None = field(default=None, compare=False)
    """The value as written, in earlier params: `--set` of those params carries through."""


@dataclass(frozen=True)
class Limiter:
    name: str
    body: sympy.Expr  # in terms of symbols.R (and symbols.C when courant)
    courant: bool = False  # `limiter NAME(r, c)`: the body may depend on the Courant number

    @property
    def arguments(self) -> tuple[sympy.Symbol, ...]:
        """The symbols a call passes, in order: (R,) or (R, C)."""
        return (R, C) if self.courant else (R,)

    def __call__(self, r, c=C):
        return self.body.xreplace({R: r, C: c}) if self.courant else self.body.subs(R, r)

    def lambdified(self):
        """psi(r) for numpy arrays, or psi(r, c) for a Courant-dependent limiter."""
        return sympy.lambdify(self.arguments, self.body, modules="numpy")


@dataclass(frozen=True)
class Scheme:
    name: str
    about: str
    time: str                      # a name in the time-method registry
    face: sympy.Expr               # g in flux = u * g; params kept as symbols
    low_face: sympy.Expr | None    # g of low_flux, if given
    correct: str | None            # "fct" or None
    clip: tuple[sympy.Expr, sympy.Expr] | None
    params: tuple[Param, ...]
    limiters: tuple[Limiter, ...]
    file: str = field(default="<spec>", compare=False)
    clip_definition: tuple[sympy.Expr, sympy.Expr] | None = field(default=None, compare=False)
    """The clip bounds as written, in params (clip holds their values)."""
    param_powers: tuple[tuple[sympy.Expr, sympy.Expr], ...] = field(default=(), compare=False)
    """(base, exponent) of every power whose exponent is made of params: their values
    must keep it bounded (constants.check_power) whatever `--set` gives."""

    # ---- derived facts -------------------------------------------------
    @cached_property  # the IR is frozen, so derived facts are computed once
    def offsets(self) -> tuple[int, ...]:
        found = set(offsets_in(self.face))
        if self.low_face is not None:
            found |= set(offsets_in(self.low_face))
        return tuple(sorted(found))

    @property
    def stencil_reach(self) -> int:
        """Cells each side of a cell that one flux evaluation of its two faces reads
        (compiler/upwind.py). Not the kernels' ghost cells: those are the plan's `halo`
        (the header's NAME_HALO), wider for FCT."""
        return stencil_reach(self.offsets)

    @property
    def uses_c(self) -> bool:
        exprs = [self.face] + ([self.low_face] if self.low_face is not None else [])
        return any(C in e.free_symbols for e in exprs)

    @property
    def limited(self) -> bool:
        """True when the face expression is nonlinear in q (limiters, abs, min, ..., or
        products, powers and quotients of q as in weighted reconstructions)."""
        return bool(limiter_calls(self.face, self.limiter_names)) or \
            self.face.has(*SMOOTH_BREAKERS) or not _affine_in_q(self.face)

    @property
    def limiter_names(self) -> tuple[str, ...]:
        return tuple(lim.name for lim in self.limiters)

    @property
    def param_values(self) -> dict[sympy.Symbol, sympy.Expr]:
        return {p.symbol: p.value for p in self.params}

    def bound(self, expr: sympy.Expr) -> sympy.Expr:
        """expr with every param replaced by its value."""
        return expr.subs(self.param_values) if self.params else expr

    @property
    def bound_face(self) -> sympy.Expr:
        return self.bound(self.face)

    def limiter(self, name: str) -> Limiter:
        return next(lim for lim in self.limiters if lim.name == name)

    def expand_limiters(self, expr: sympy.Expr) -> sympy.Expr:
        """expr with each limiter call replaced by the limiter's body."""
        subs = {}
        for call in limiter_calls(expr, self.limiter_names):
            lim = self.limiter(limiter_name_of(call))
            subs[call] = self.bound(lim(*call.args))
        return expr.xreplace(subs) if subs else expr

    @cached_property
    def fingerprint(self) -> str:
        """A stable hash of everything that decides analysis and generated code."""
        parts = [self.name, self.about, self.time, sympy.srepr(self.face),
                 sympy.srepr(self.low_face), str(self.correct),
                 sympy.srepr(self.clip) if self.clip else "None"]
        parts += [f"{p.name}={sympy.srepr(p.value)}" for p in self.params]
        parts += [f"{lim.name}{'(r, c)' if lim.courant else ''}:{sympy.srepr(lim.body)}"
                  for lim in self.limiters]
        # surrogatepass: any str hashes, even one no file could hold
        return hashlib.sha256("\n".join(parts).encode("utf-8", "surrogatepass")).hexdigest()[:16]

    def with_params(self, overrides: dict[str, sympy.Expr]) -> "Scheme":
        """A copy with param defaults replaced (names already validated).

        Params defined from other params and the clip bounds follow the new values;
        every value is checked as the front end checks a constant (errors: `--set`).
        """
        if not overrides:
            return self
        values: dict[sympy.Symbol, sympy.Expr] = {}
        params = []
        for p in self.params:
            if p.name in overrides:
                value = sympy.sympify(overrides[p.name])
            elif p.definition is not None:
                value = p.definition.xreplace(values)
            else:
                value = p.value
            constants.check_range(value, None, "--set", what=f"value of param '{p.name}'")
            values[p.symbol] = value
            params.append(replace(p, value=value))
        exprs = [("the flux", self.face), ("the low_flux", self.low_face)]
        exprs += [(f"limiter '{lim.name}'", lim.body) for lim in self.limiters]
        for what, expr in exprs:
            if expr is not None:
                _check_defined(expr, values, what, None, "--set")
        for base, exponent in self.param_powers:
            try:
                constants.check_power(base.xreplace(values), exponent.xreplace(values), None,
                                      exponent)
            except LoomError as err:
                raise LoomError(err.message, file="--set") from None
        clip = self.clip
        if self.clip_definition is not None:
            clip = tuple(v.xreplace(values) for v in self.clip_definition)
            for v in clip:
                constants.check_range(v, None, "--set", what="clip bound")
            if not clip[0] < clip[1]:
                raise LoomError(f"clip needs LO < HI, and now has {clip[0]} and {clip[1]}",
                                file="--set")
        return replace(self, params=tuple(params), clip=clip)


def _affine_in_q(expr: sympy.Expr) -> bool:
    """Whether expr is written as an affine function of the q(k) (structurally: sums,
    and products with at most one factor that involves q)."""
    if not offsets_in(expr):
        return True
    if expr.is_Symbol:
        return True
    if isinstance(expr, sympy.Add):
        return all(_affine_in_q(a) for a in expr.args)
    if isinstance(expr, sympy.Mul):
        with_q = [a for a in expr.args if offsets_in(a)]
        return len(with_q) == 1 and _affine_in_q(with_q[0])
    return False


# ---- lowering ------------------------------------------------------------

_FUNCS = {"abs": sympy.Abs, "sign": sympy.sign, "sqrt": sympy.sqrt,
          "min": sympy.Min, "max": sympy.Max, "ratio": Ratio}


def number(text: str, span: Span | None = None) -> sympy.Rational:
    """Decimal text kept exact: 0.1 -> 1/10 (size bounded: constants.literal)."""
    return constants.literal(text, span)


class _Lowerer:
    def __init__(self, spec: ast.Spec):
        self.spec = spec
        self.env: dict[str, sympy.Expr] = {"u": U, "c": C}
        self.limiters: dict[str, sympy.FunctionClass] = {}
        self.param_values: dict[sympy.Symbol, sympy.Expr] = {}
        self.param_powers: list[tuple[sympy.Expr, sympy.Expr]] = []

    def expr(self, node: ast.Expr, local: dict[str, sympy.Expr] | None = None) -> sympy.Expr:
        value = self._expr(node, local)
        if value.is_number:
            constants.check_exact(value, node.span)
        return value

    def _mixed(self, node_values) -> None:
        """Constants that meet the kernel's variables must fit every precision."""
        if any(not v.is_number for _, v in node_values):
            for node, v in node_values:
                if v.is_number:
                    constants.check_range(v, node.span)

    def _expr(self, node: ast.Expr, local: dict[str, sympy.Expr] | None) -> sympy.Expr:
        if isinstance(node, ast.Number):
            return number(node.text, node.span)
        if isinstance(node, ast.Name):
            if local and node.id in local:
                return local[node.id]
            return self.env[node.id]
        if isinstance(node, ast.Index):
            return q(integer_offset(node.offset))
        if isinstance(node, ast.Unary):
            inner = self.expr(node.operand, local)
            return -inner if node.op == "-" else inner
        if isinstance(node, ast.Binary):
            a, b = self.expr(node.left, local), self.expr(node.right, local)
            if node.op == "/" and b.is_zero:
                raise LoomError("division by zero", node.right.span)
            if node.op == "^":
                self._power(a, b, node)
            self._mixed([(node.left, a), (node.right, b)])
            return {"+": lambda: a + b, "-": lambda: a - b, "*": lambda: a * b,
                    "/": lambda: a / b, "^": lambda: a ** b}[node.op]()
        if isinstance(node, ast.Call):
            args = [self.expr(a, local) for a in node.args]
            self._mixed(list(zip(node.args, args)))
            if node.func.id in self.limiters:
                return self.limiters[node.func.id](*args)  # (r) or (r, c)
            if node.func.id == "sqrt" and args[0].is_number and args[0].is_negative:
                raise LoomError(f"sqrt of the negative constant {args[0]} is not a real number",
                                node.span)
            return _FUNCS[node.func.id](*args)
        raise AssertionError(f"unhandled node {type(node).__name__}")

    def _power(self, base: sympy.Expr, exponent: sympy.Expr, node: ast.Binary) -> None:
        """Bound a power before sympy computes it; params in an exponent count with
        their values (and again whenever `--set` changes them)."""
        if exponent.is_number:
            constants.check_power(base, exponent, node.right.span)
            return
        if exponent.free_symbols and exponent.free_symbols <= set(self.param_values):
            constants.check_power(base.xreplace(self.param_values),
                                  exponent.xreplace(self.param_values), node.right.span, exponent)
            self.param_powers.append((base, exponent))

    def constant(self, node: ast.Expr, what: str) -> tuple[sympy.Expr, sympy.Expr]:
        """(value, definition): a constant made of numbers and earlier params."""
        definition = self.expr(node)
        try:
            value = definition.xreplace(self.param_values)
        except (ValueError, TypeError, ZeroDivisionError):
            value = sympy.nan  # min/max of an infinity (a division by a param that is 0)
        if value.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo):
            raise LoomError(f"{what} is not a finite number with the params' values "
                            "(a division by a param that is 0?)", node.span)
        if not value.is_number:
            raise LoomError(f"{what} must be a real constant", node.span)
        constants.check_range(value, node.span, what=what)
        return value, definition

    def check_kernel_constants(self, expr: sympy.Expr, node: ast.Expr) -> None:
        """Constants sympy combined across the user's terms (1e30 * q[0] * 1e30) must
        fit every precision too; located at the expression."""
        for sub in sympy.preorder_traversal(expr):
            if isinstance(sub, sympy.Expr) and sub.is_number:
                try:
                    constants.check_range(sub, node.span)
                except LoomError as err:
                    raise LoomError(f"{err.message} (constants of this expression combine "
                                    "into it)", node.span) from None


def lower(spec: ast.Spec) -> Scheme:
    """Build the IR from a checked AST."""
    low = _Lowerer(spec)
    about, time, correct, clip, clip_definition = "", "euler", None, None, None
    face = low_face = None
    params: list[Param] = []
    limiters: list[Limiter] = []
    for stmt in spec.statements:
        if isinstance(stmt, ast.About):
            about = stmt.text
        elif isinstance(stmt, ast.Time):
            time = stmt.method.id
        elif isinstance(stmt, ast.Param):
            sym = param_symbol(stmt.name.id)
            value, definition = low.constant(stmt.value, "param value")
            params.append(Param(stmt.name.id, value, sym,
                                definition if definition.free_symbols else None))
            low.env[stmt.name.id] = sym
            low.param_values[sym] = value
        elif isinstance(stmt, ast.Let):
            low.env[stmt.name.id] = low.expr(stmt.value)
        elif isinstance(stmt, ast.LimiterDef):
            body = low.expr(stmt.body, {stmt.args[0].id: R})  # 'c' is C from the environment
            low.check_kernel_constants(body, stmt.body)
            _check_defined(body, low.param_values, f"limiter '{stmt.name.id}'", stmt.body.span)
            limiters.append(Limiter(stmt.name.id, body, courant=len(stmt.args) == 2))
            low.limiters[stmt.name.id] = limiter_function(stmt.name.id)
        elif isinstance(stmt, ast.Flux):
            flux = low.expr(stmt.value)
            low.check_kernel_constants(flux, stmt.value)
            _check_defined(flux, low.param_values, f"the {stmt.kind}", stmt.value.span)
            g = _face_of(flux, stmt)
            if stmt.kind == "flux":
                face = g
            else:
                low_face = g
        elif isinstance(stmt, ast.Correct):
            correct = stmt.method.id
        elif isinstance(stmt, ast.Clip):
            lo, lo_definition = low.constant(stmt.low, "clip bound")
            hi, hi_definition = low.constant(stmt.high, "clip bound")
            if not lo < hi:
                raise LoomError(f"clip needs LO < HI, given {lo} and {hi}", stmt.span)
            clip = (lo, hi)
            clip_definition = (lo_definition, hi_definition)
    return Scheme(spec.name.id, about, time, face, low_face, correct, clip,
                  tuple(params), tuple(limiters), spec.file,
                  clip_definition if clip is not None else None, tuple(low.param_powers))


def _check_defined(expr: sympy.Expr, values: dict, what: str, span: Span | None,
                   file: str | None = None) -> None:
    """Params with their values must leave expr finite: a division by a param that is 0
    would put an infinity (or NaN) into every kernel."""
    if not values or not expr.free_symbols & set(values):
        return
    try:
        value = expr.subs(values)
        undefined = value.has(sympy.zoo, sympy.nan, sympy.oo, -sympy.oo)
    except (ValueError, TypeError, ZeroDivisionError):
        undefined = True  # sympy refuses min/max of an infinity
    if undefined:
        given = ", ".join(f"{s} = {v}" for s, v in sorted(values.items(), key=lambda kv: str(kv[0]))
                          if s in expr.free_symbols)
        raise LoomError(f"{what} has no finite value with {given} (a division by a param "
                        "that is 0?)", span, **({"file": file} if file else {}))


def _face_of(flux: sympy.Expr, stmt: ast.Flux) -> sympy.Expr:
    """g with flux = u * g, or a located error when the flux is not of that form."""
    why = (f"the {stmt.kind} must be u times an expression free of u "
           "(write it as u * (...)) so that one expression serves both signs of u")
    if U not in flux.free_symbols:
        raise LoomError(f"{why}; this one does not contain u", stmt.value.span)
    g = sympy.diff(flux, U)
    if U in g.free_symbols or g.has(sympy.Derivative, sympy.Subs):
        raise LoomError(f"{why}; this one is not linear in u", stmt.value.span)
    rest = flux.subs(U, 0)
    if rest != 0 and not _vanishes(rest):
        raise LoomError(f"{why}; this one has a part without u", stmt.value.span)
    # Prefer the user's own grouping when the flux is literally u * (...).
    if isinstance(flux, sympy.Mul) and U in flux.args:
        g = sympy.Mul(*[a for a in flux.args if a != U])
    return g


def _vanishes(expr: sympy.Expr) -> bool:
    """Whether expr is zero as a rational function of the q(k), c, params and its
    non-rational parts (abs, min, max, sign, ratio, limiter calls, roots, powers with a
    symbolic exponent), each taken as an opaque atom, as expansion would take them.

    Decided without expanding (which can build millions of terms): expr is evaluated
    exactly at random rational points, with a random rational for each atom. A nonzero
    rational function of degree d vanishes at such a point with probability at most
    d / 2^62 (polynomial identity testing), so zero at every point means zero.
    """
    import random

    atoms = {a for a in expr.atoms(sympy.Function, sympy.Min, sympy.Max, sympy.Pow)
             if not isinstance(a, sympy.Pow) or not (a.exp.is_Integer and abs(a.exp) <= 4096)}
    # innermost first, so that replacing an atom never leaves one inside another stale
    opaque = sorted(atoms, key=lambda a: (sympy.count_ops(a), sympy.default_sort_key(a)))
    rng = random.Random(sympy.srepr(expr)[:4000])
    tried = 0
    for _ in range(16):
        values = {a: _random_rational(rng) for a in opaque}
        value = expr.xreplace({a: values[a] for a in reversed(opaque)})
        value = value.xreplace({s: _random_rational(rng)
                                for s in sorted(value.free_symbols, key=str)})
        if value.has(sympy.nan, sympy.zoo) or not value.is_Rational:
            continue  # a random point on a pole: another one
        if value != 0:
            return False
        tried += 1
        if tried == 4:
            return True
    return False  # no usable point: not shown to vanish


def _random_rational(rng) -> sympy.Rational:
    return sympy.Rational(rng.randrange(-2 ** 62, 2 ** 62), rng.randrange(1, 2 ** 62))


# ---- param overrides (--set NAME=VALUE) ------------------------------------

def parse_override(text: str) -> tuple[str, list[sympy.Expr]]:
    """'kappa=1/3' -> ('kappa', [1/3]); 'kappa=0,1/3' -> ('kappa', [0, 1/3])."""
    name, eq, value = text.partition("=")
    name = name.strip()
    if not eq or not name or not value.strip():
        raise LoomError(f"--set expects NAME=VALUE, given '{text}'", file="--set")
    values = []
    for item in value.split(","):
        item = item.strip()
        num, _, den = item.partition("/")
        sign = -1 if num.strip().startswith("-") else 1
        try:
            top = constants.literal(num.strip().lstrip("+-"), where=f"--set {name}")
            bottom = constants.literal(den.strip(), where=f"--set {name}") if den else 1
        except LoomError as err:
            if "not a number" not in err.message:
                raise
            raise LoomError(f"--set {name}: '{item}' is not a number "
                            "(use an integer, a decimal or a fraction such as 1/3)",
                            file="--set") from None
        if bottom == 0:
            raise LoomError(f"--set {name}: '{item}' is not a number (it divides by zero)",
                            file="--set")
        value = sign * top / bottom
        constants.check_range(value, None, f"--set {name}")
        values.append(value)
    return name, values


def apply_overrides(scheme: Scheme, overrides: dict[str, sympy.Expr]) -> Scheme:
    known = [p.name for p in scheme.params]
    for name in overrides:
        if name not in known:
            have = f"; it has {', '.join(known)}" if known else "; it has no params"
            raise LoomError(f"--set {name}: scheme '{scheme.name}' has no param '{name}'"
                            f"{did_you_mean(name, known)}{have}", file="--set")
    return scheme.with_params(overrides)


