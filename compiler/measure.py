"""How big an expression is once its lets and limiters are written out.

Lowering writes lets out in full, and analysis and emitters work on the result, so
the front end bounds it (compiler/limits.py): the number of nodes, the nesting
depth, and the degree (of the expression as a rational function of q, c and a
limiter's argument; piecewise parts count as their largest piece). One pass over
the AST, memoised per let and limiter, so the cost is linear in the spec even when
chains of lets double what they stand for.
"""
from __future__ import annotations

from dataclasses import dataclass
from fractions import Fraction
from math import ceil

from . import syntax as ast
from .diagnostics import LoomError
from .limits import MAX_DEGREE, MAX_DEPTH, MAX_EXPONENT, MAX_EXPRESSION_NODES


@dataclass(frozen=True)
class Measure:
    nodes: int
    depth: int
    num: int  # degree bound of the numerator
    den: int  # degree bound of the denominator

    @property
    def degree(self) -> int:
        return max(self.num, self.den)


CONSTANT = Measure(1, 0, 0, 0)
VARIABLE = Measure(1, 0, 1, 0)


class Measurer:
    """Measures each let, limiter and flux of one spec, in order, and enforces the limits."""

    def __init__(self):
        self.lets: dict[str, Measure] = {}
        # each limiter's body (its arguments of degree 1) and how often it uses each argument
        self.limiters: dict[str, tuple[Measure, tuple[int, ...]]] = {}

    def let(self, name: str, value: ast.Expr) -> None:
        self.lets[name] = self.check(value, f"let '{name}'")

    def limiter(self, name: str, args: list[str], body: ast.Expr) -> None:
        self.limiters[name] = (self.check(body, f"limiter '{name}'", tuple(args)),
                               tuple(_uses(body, a) for a in args))

    def check(self, expr: ast.Expr, what: str, args: tuple[str, ...] = ()) -> Measure:
        m = self.measure(expr, args)
        if m.nodes > MAX_EXPRESSION_NODES:
            raise LoomError(f"{what} is too large: {m.nodes} operators and operands once the "
                            f"lets and limiters it uses are written out (at most "
                            f"{MAX_EXPRESSION_NODES})", expr.span)
        if m.depth > MAX_DEPTH:
            raise LoomError(f"{what} nests {m.depth} levels deep once the lets and limiters it "
                            f"uses are written out (at most {MAX_DEPTH}); use fewer lets in a "
                            "chain", expr.span)
        if m.degree > MAX_DEGREE:
            raise LoomError(f"{what} has degree up to {m.degree} in the cell values once its "
                            f"lets and limiters are written out (at most {MAX_DEGREE}; powers "
                            "multiply it, a quotient adds its parts)", expr.span)
        return m

    def measure(self, expr: ast.Expr, args: tuple[str, ...] = ()) -> Measure:
        if isinstance(expr, ast.Number):
            return CONSTANT
        if isinstance(expr, ast.Name):
            if expr.id in args or expr.id == "c":
                return VARIABLE
            return self.lets.get(expr.id, CONSTANT)  # params, u and unknown names
        if isinstance(expr, ast.Index):
            return Measure(1, 1, 1, 0)
        if isinstance(expr, ast.Unary):
            m = self.measure(expr.operand, args)
            return Measure(m.nodes + 1, m.depth + 1, m.num, m.den)
        if isinstance(expr, ast.Binary):
            return _binary(expr, self.measure(expr.left, args), self.measure(expr.right, args))
        if isinstance(expr, ast.Call):
            return self._call(expr, [self.measure(a, args) for a in expr.args])
        raise AssertionError(f"unhandled node {type(expr).__name__}")  # a fluxloom bug

    def _call(self, expr: ast.Call, args: list[Measure]) -> Measure:
        nodes = 1 + sum(a.nodes for a in args)
        depth = 1 + max((a.depth for a in args), default=0)
        name = expr.func.id
        if name in self.limiters and len(args) == len(self.limiters[name][1]):
            body, uses = self.limiters[name]
            # psi = P/Q of degrees p, q with each argument N/D of degree at most `widest`
            # (denominators at most `den`): cleared, P(N/D) D^p has degree p widest.
            widest = max(max(a.num, a.den) for a in args)
            den = max(a.den for a in args)
            return Measure(1 + body.nodes + sum(k * (a.nodes - 1) for k, a in zip(uses, args)),
                           1 + body.depth + max(a.depth for a in args),
                           body.num * widest + body.den * den, body.den * widest + body.num * den)
        if name == "ratio" and len(args) == 2:
            return Measure(nodes, depth, args[0].num + args[1].den, args[0].den + args[1].num)
        if name == "sign":
            return Measure(nodes, depth, 0, 0)
        if name == "sqrt" and len(args) == 1:
            return Measure(nodes, depth, ceil(args[0].num / 2), ceil(args[0].den / 2))
        # abs, min, max: piecewise, each piece one of the arguments
        return Measure(nodes, depth, max((a.num for a in args), default=0),
                       max((a.den for a in args), default=0))


def _binary(expr: ast.Binary, a: Measure, b: Measure) -> Measure:
    nodes, depth = 1 + a.nodes + b.nodes, 1 + max(a.depth, b.depth)
    if expr.op in "+-":
        return Measure(nodes, depth, max(a.num + b.den, b.num + a.den), a.den + b.den)
    if expr.op == "*":
        return Measure(nodes, depth, a.num + b.num, a.den + b.den)
    if expr.op == "/":
        return Measure(nodes, depth, a.num + b.den, a.den + b.num)
    if a.degree == 0:
        return Measure(nodes, depth, 0, 0)  # a constant to any power is a constant
    exponent = _literal(expr.right)
    times = MAX_EXPONENT if exponent is None else ceil(abs(exponent))
    if exponent is not None and exponent < 0:
        return Measure(nodes, depth, times * a.den, times * a.num)
    return Measure(nodes, depth, times * a.num, times * a.den)


def _literal(expr: ast.Expr) -> Fraction | None:
    """The value of an exponent written with numbers only (short ones), else None."""
    if isinstance(expr, ast.Number):
        return Fraction(expr.text) if len(expr.text) <= 24 and "e" not in expr.text.lower() \
            else None
    if isinstance(expr, ast.Unary):
        inner = _literal(expr.operand)
        return None if inner is None else (-inner if expr.op == "-" else inner)
    if isinstance(expr, ast.Binary) and expr.op in "+-*/":
        a, b = _literal(expr.left), _literal(expr.right)
        if a is None or b is None or (expr.op == "/" and b == 0):
            return None
        return {"+": a + b, "-": a - b, "*": a * b}[expr.op] if expr.op != "/" else a / b
    return None


def _uses(expr: ast.Expr, name: str) -> int:
    """How often `name` occurs in expr."""
    if isinstance(expr, ast.Name):
        return int(expr.id == name)
    if isinstance(expr, ast.Unary):
        return _uses(expr.operand, name)
    if isinstance(expr, ast.Binary):
        return _uses(expr.left, name) + _uses(expr.right, name)
    if isinstance(expr, ast.Call):
        return sum(_uses(a, name) for a in expr.args)
    return 0
