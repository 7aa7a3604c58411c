"""fluxloom.compiler: spec text -> AST -> checked -> Scheme IR -> analysis and kernels."""
from __future__ import annotations

from pathlib import Path

from .check import check, check_scheme_name
from .diagnostics import LoomError, Span
from .ir import Scheme, apply_overrides, lower, parse_override
from .parse import parse_text, read_spec_text

__all__ = ["LoomError", "Scheme", "Span", "load_scheme", "scheme_from_text", "parse_overrides"]


def scheme_from_text(text: str, file: str = "<spec>", overrides=None) -> Scheme:
    """Spec text -> Scheme IR, raising LoomError (with location) on bad input."""
    try:
        check_scheme_name(text)
        spec = parse_text(text, file)
        check(spec)
        scheme = lower(spec)
        _check_limiters_defined(spec, scheme)
        if scheme.correct == "fct":
            _check_fct_low_flux(spec, scheme)
    except LoomError as err:
        raise err.located(file, text) from None
    except RecursionError:
        raise LoomError("expression nested too deeply", Span(1, 1)).located(file, text) from None
    return apply_overrides(scheme, dict(overrides or {}))


def _check_fct_low_flux(spec, scheme: Scheme) -> None:
    """`correct fct` needs a low flux that is monotone somewhere: decided by analysis."""
    from . import syntax
    from .analysis.bounds import check_low_flux

    low = next(s for s in spec.statements if isinstance(s, syntax.Flux) and s.kind == "low_flux")
    check_low_flux(scheme, low.value.span)


def _check_limiters_defined(spec, scheme: Scheme) -> None:
    """A limiter must have a finite value at every r (and every c > 0): 0/0 is refused.

    Located at the first division in the body whose divisor vanishes there.
    """
    from . import syntax
    from .analysis.singular import limiter_problems

    for stmt in spec.statements:
        if not isinstance(stmt, syntax.LimiterDef):
            continue
        limiter = scheme.limiter(stmt.name.id)
        problems = limiter_problems(scheme.bound(limiter.body), limiter.courant)
        if problems:
            raise LoomError(problems[0].message(limiter.name),
                            _division_span(spec, stmt, scheme, problems[0]))


def _division_span(spec, stmt, scheme: Scheme, problem) -> Span:
    """The span of the first division in a limiter's body whose divisor vanishes at problem."""
    from . import syntax
    from .analysis.singular import ieee_values
    from .ir import _Lowerer
    from .symbols import C, R, param_symbol

    lowerer = _Lowerer(spec)
    for other in spec.statements:
        if isinstance(other, syntax.Param):
            lowerer.env[other.name.id] = param_symbol(other.name.id)
    point = {k: v for k, v in ((R, problem.r), (C, problem.c)) if v is not None}

    def walk(node):
        if isinstance(node, syntax.Binary):
            if node.op == "/" and point:
                divisor = scheme.bound(lowerer.expr(node.right, {stmt.args[0].id: R}))
                values = ieee_values(divisor, point)
                if values is not None and any(v == 0 for v in values):
                    return node.right.span
            return walk(node.left) or walk(node.right)
        if isinstance(node, syntax.Unary):
            return walk(node.operand)
        if isinstance(node, syntax.Call):
            return next((found for a in node.args if (found := walk(a))), None)
        return None

    return walk(stmt.body) or stmt.body.span


def load_scheme(path: str | Path, overrides=None) -> Scheme:
    """Read and compile one .loom file."""
    return scheme_from_text(read_spec_text(path), str(path), overrides)


def parse_overrides(items) -> dict:
    """['kappa=1/3', ...] -> {'kappa': Rational(1, 3)} (single values only)."""
    out = {}
    for item in items or ():
        name, values = parse_override(item)
        if len(values) != 1:
            raise LoomError(f"--set {name}: give one value here (lists are for 'compare')",
                            file="--set")
        out[name] = values[0]
    return out
