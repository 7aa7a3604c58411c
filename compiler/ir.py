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
from fractions import Fraction

import sympy

from . import syntax as ast
from .check import integer_offset
from .diagnostics import LoomError, did_you_mean
from .symbols import C, R, U, Ratio, limiter_calls, limiter_function, offsets_in, param_symbol, q

MAX_EXPONENT = 64  # keeps exact arithmetic on constants from running away
SMOOTH_BREAKERS = (sympy.Abs, sympy.Min, sympy.Max, sympy.sign, Ratio)


@dataclass(frozen=True)
class Param:
    name: str
    value: sympy.Expr  # exact (a Rational where the user wrote one)
    symbol: sympy.Symbol = field(compare=False)


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

    # ---- derived facts -------------------------------------------------
    @cached_property  # the IR is frozen, so derived facts are computed once
    def offsets(self) -> tuple[int, ...]:
        found = set(offsets_in(self.face))
        if self.low_face is not None:
            found |= set(offsets_in(self.low_face))
        return tuple(sorted(found))

    @property
    def halo(self) -> int:
        """Ghost cells each side for one flux evaluation of every cell's two faces.

        Face j+1/2 reads cells j+k (u >= 0) or j+1-k (u < 0); face j-1/2 one
        cell to the left. So offset k reaches max(|k|, |k - 1|) cells from j.
        """
        return max((max(abs(k), abs(k - 1)) for k in self.offsets), default=1)

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
            lim = self.limiter(type(call).__name__)
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
        return hashlib.sha256("\n".join(parts).encode()).hexdigest()[:16]

    def with_params(self, overrides: dict[str, sympy.Expr]) -> "Scheme":
        """A copy with param defaults replaced (names already validated)."""
        if not overrides:
            return self
        params = tuple(replace(p, value=overrides.get(p.name, p.value)) for p in self.params)
        return replace(self, params=params)


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


def number(text: str) -> sympy.Rational:
    """Decimal text kept exact: 0.1 -> 1/10."""
    frac = Fraction(text)
    return sympy.Rational(frac.numerator, frac.denominator)


class _Lowerer:
    def __init__(self, spec: ast.Spec):
        self.spec = spec
        self.env: dict[str, sympy.Expr] = {"u": U, "c": C}
        self.limiters: dict[str, sympy.FunctionClass] = {}

    def expr(self, node: ast.Expr, local: dict[str, sympy.Expr] | None = None) -> sympy.Expr:
        if isinstance(node, ast.Number):
            return number(node.text)
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
            if node.op == "^" and b.is_number and abs(b) > MAX_EXPONENT:
                raise LoomError(f"exponent {b} is too large (at most {MAX_EXPONENT} here)",
                                node.right.span)
            return {"+": lambda: a + b, "-": lambda: a - b, "*": lambda: a * b,
                    "/": lambda: a / b, "^": lambda: a ** b}[node.op]()
        if isinstance(node, ast.Call):
            args = [self.expr(a, local) for a in node.args]
            if node.func.id in self.limiters:
                return self.limiters[node.func.id](*args)  # (r) or (r, c)
            return _FUNCS[node.func.id](*args)
        raise AssertionError(f"unhandled node {type(node).__name__}")

    def constant(self, node: ast.Expr, what: str) -> sympy.Expr:
        value = self.expr(node)
        if not (value.is_number and value.is_real):
            raise LoomError(f"{what} must be a real constant", node.span)
        return value


def lower(spec: ast.Spec) -> Scheme:
    """Build the IR from a checked AST."""
    low = _Lowerer(spec)
    about, time, correct, clip = "", "euler", None, None
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
            params.append(Param(stmt.name.id, low.constant(stmt.value, "a param value"), sym))
            low.env[stmt.name.id] = sym
        elif isinstance(stmt, ast.Let):
            low.env[stmt.name.id] = low.expr(stmt.value)
        elif isinstance(stmt, ast.LimiterDef):
            body = low.expr(stmt.body, {stmt.args[0].id: R})  # 'c' is C from the environment
            limiters.append(Limiter(stmt.name.id, body, courant=len(stmt.args) == 2))
            low.limiters[stmt.name.id] = limiter_function(stmt.name.id)
        elif isinstance(stmt, ast.Flux):
            g = _face_of(low.expr(stmt.value), stmt)
            if stmt.kind == "flux":
                face = g
            else:
                low_face = g
        elif isinstance(stmt, ast.Correct):
            correct = stmt.method.id
        elif isinstance(stmt, ast.Clip):
            values = dict((p.symbol, p.value) for p in params)
            lo = low.constant(stmt.low, "a clip bound").subs(values)
            hi = low.constant(stmt.high, "a clip bound").subs(values)
            if not lo < hi:
                raise LoomError(f"clip needs LO < HI, given {lo} and {hi}", stmt.span)
            clip = (lo, hi)
    return Scheme(spec.name.id, about, time, face, low_face, correct, clip,
                  tuple(params), tuple(limiters), spec.file)


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
    if rest != 0 and sympy.expand(rest) != 0:
        raise LoomError(f"{why}; this one has a part without u", stmt.value.span)
    # Prefer the user's own grouping when the flux is literally u * (...).
    if isinstance(flux, sympy.Mul) and U in flux.args:
        g = sympy.Mul(*[a for a in flux.args if a != U])
    return g


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
        try:
            num, _, den = item.partition("/")
            frac = Fraction(num.strip()) / (Fraction(den.strip()) if den else 1)
        except (ValueError, ZeroDivisionError):
            raise LoomError(f"--set {name}: '{item}' is not a number "
                            "(use an integer, a decimal or a fraction such as 1/3)",
                            file="--set") from None
        values.append(sympy.Rational(frac.numerator, frac.denominator))
    return name, values


def apply_overrides(scheme: Scheme, overrides: dict[str, sympy.Expr]) -> Scheme:
    known = [p.name for p in scheme.params]
    for name in overrides:
        if name not in known:
            have = f"; it has {', '.join(known)}" if known else "; it has no params"
            raise LoomError(f"--set {name}: scheme '{scheme.name}' has no param '{name}'"
                            f"{did_you_mean(name, known)}{have}", file="--set")
    return scheme.with_params(overrides)
