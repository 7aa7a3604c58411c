"""Semantic checks on the AST: names, arity, allowed symbols, statement counts.

Runs before lowering so that every mistake is reported against the user's own
text. Raises LoomError on the first problem found, in source order.
"""
from __future__ import annotations

import keyword
import re
import sys

from . import syntax as ast
from .diagnostics import LoomError, Span, did_you_mean
from .limits import MAX_OFFSET
from .measure import Measurer
from .time_methods import NAMES as TIME_METHODS
CORRECTIONS = ("fct",)

# name -> (least, most) number of arguments; None means no upper bound.
BUILTINS = {
    "abs": (1, 1), "sign": (1, 1), "sqrt": (1, 1),
    "min": (2, None), "max": (2, None), "ratio": (2, 2),
}
RESERVED = {"q", "u", "c"} | set(BUILTINS)

C_KEYWORDS = frozenset("""
auto break case char const continue default do double else enum extern float for
goto if inline int long register restrict return short signed sizeof static struct
switch typedef union unsigned void volatile while _Bool _Complex _Imaginary
""".split())

FORTRAN_NAME_LIMIT = 63
"""Characters of a Fortran 2003 name; the interface module spells NAME_workspace_size
and NAME_param_P, so scheme and param names are bounded to fit."""
LONGEST_FORTRAN_SUFFIX = "_workspace_size"
PARAM_INFIX = "_param_"

# The numpy kernel is written as NAME.py: a file named like a module Python or the
# kernel itself imports would shadow that module for every script in its folder.
SHADOWED_MODULES = frozenset(sys.stdlib_module_names) | {"numpy", "fluxloom"}

_C_IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")
_SCHEME_HEAD = re.compile(r"^[ \t]*scheme[ \t]+([^ \t{\n]+)", re.MULTILINE)

ONCE = {ast.About: "about", ast.Time: "time", ast.Correct: "correct", ast.Clip: "clip"}


def check_scheme_name(text: str) -> None:
    """Catch a scheme name that is not a C identifier before the parser trips on it."""
    match = _SCHEME_HEAD.search(text)
    if match and not _C_IDENTIFIER.match(match.group(1)):
        line = text.count("\n", 0, match.start(1)) + 1
        col = match.start(1) - (text.rfind("\n", 0, match.start(1)) + 1) + 1
        raise LoomError(
            f"scheme name '{match.group(1)}' is not a C identifier "
            "(letters, digits and '_', not starting with a digit)",
            Span(line, col, line, col + len(match.group(1))))


class _Scope:
    """What a name means at one point of the spec."""

    def __init__(self, everywhere: dict[str, int] | None = None):
        self.everywhere = everywhere or {}  # every name the spec defines -> its line
        self.params: dict[str, ast.Param] = {}
        self.lets: dict[str, ast.Let] = {}
        self.limiters: dict[str, ast.LimiterDef] = {}
        self.names: dict[str, Span] = {}  # params, lets and limiters defined so far
        self.measure = Measurer()  # sizes once lets are written out (compiler/limits.py)

    def defined(self) -> dict[str, Span]:
        """Every param, let and limiter defined so far -> where (kept, not rebuilt: a
        spec of n statements is checked in time linear in n)."""
        return self.names

    def add(self, table: dict, stmt) -> None:
        table[stmt.name.id] = stmt
        self.names[stmt.name.id] = stmt.name.span


def check_kernel_name(name: ast.Name) -> None:
    """The rules a scheme name meets: it names files, C functions, a Fortran and a Python
    module (also applied to `build --name` and variant names)."""
    if name.id in C_KEYWORDS:
        raise LoomError(f"scheme name '{name.id}' is a C keyword; the kernel is named after it",
                        name.span)
    if not _C_IDENTIFIER.match(name.id):
        raise LoomError(f"scheme name '{name.id}' is not a C identifier", name.span)
    _check_scheme_name_targets(name)


def check(spec: ast.Spec) -> None:
    """Raise LoomError for the first semantic problem in spec."""
    name = spec.name
    check_kernel_name(name)

    seen: dict[str, ast.Statement] = {}
    time_method = "euler"
    for stmt in spec.statements:
        key = ONCE.get(type(stmt)) or (stmt.kind if isinstance(stmt, ast.Flux) else None)
        if key:
            if key in seen:
                raise LoomError(f"'{key}' is given twice (first on line {seen[key].span.line})",
                                stmt.span)
            seen[key] = stmt
        if isinstance(stmt, ast.Time):
            time_method = stmt.method.id
            if time_method not in TIME_METHODS:
                raise LoomError(f"unknown time method '{time_method}'"
                                f"{did_you_mean(time_method, TIME_METHODS)}; "
                                f"choose one of {', '.join(TIME_METHODS)}", stmt.method.span)
        if isinstance(stmt, ast.Correct) and stmt.method.id not in CORRECTIONS:
            raise LoomError(f"unknown correction '{stmt.method.id}'"
                            f"{did_you_mean(stmt.method.id, CORRECTIONS)}; "
                            f"choose one of {', '.join(CORRECTIONS)}", stmt.method.span)

    if "flux" not in seen:
        raise LoomError("the scheme has no 'flux = ...' statement; exactly one is required",
                        name.span)
    if "correct" in seen:
        if time_method != "euler":
            raise LoomError("'correct fct' needs 'time euler': the correction works on one "
                            "forward-Euler step", seen["correct"].span)
        if "low_flux" not in seen:
            raise LoomError("'correct fct' needs a monotone 'low_flux = ...' to correct from",
                            seen["correct"].span)

    scope = _Scope({s.name.id: s.name.span.line for s in spec.statements
                    if isinstance(s, (ast.Param, ast.Let, ast.LimiterDef))})
    params_anywhere = {s.name.id: s.name.span.line for s in spec.statements
                       if isinstance(s, ast.Param)}
    for stmt in spec.statements:
        if isinstance(stmt, (ast.Param, ast.Let, ast.LimiterDef)):
            _define(scope, stmt)
        if isinstance(stmt, ast.Param):
            _check_param_name(spec.name, stmt, scope.params)
            _check_expr(stmt.value, scope, "param", time_method)
            scope.add(scope.params, stmt)
        elif isinstance(stmt, ast.Let):
            _check_expr(stmt.value, scope, "let", time_method)
            scope.measure.let(stmt.name.id, stmt.value)
            scope.add(scope.lets, stmt)
        elif isinstance(stmt, ast.LimiterDef):
            _check_limiter_arguments(stmt, time_method)
            arg = stmt.args[0]
            if arg.id in params_anywhere:
                raise LoomError(f"the limiter's argument '{arg.id}' has the name of the param on "
                                f"line {params_anywhere[arg.id]}; inside the limiter it would hide "
                                "that param: rename one of them", arg.span)
            _check_expr(stmt.body, scope, "limiter", time_method, arg=arg.id,
                        courant=len(stmt.args) == 2)
            scope.measure.limiter(stmt.name.id, [a.id for a in stmt.args], stmt.body)
            scope.add(scope.limiters, stmt)
        elif isinstance(stmt, ast.Flux):
            _check_expr(stmt.value, scope, stmt.kind, time_method)
            scope.measure.check(stmt.value, f"the {stmt.kind}")
        elif isinstance(stmt, ast.Clip):
            _check_expr(stmt.low, scope, "clip", time_method)
            _check_expr(stmt.high, scope, "clip", time_method)


def _check_scheme_name_targets(name: ast.Name) -> None:
    """The scheme name names files, C functions, a Fortran module and a Python module."""
    if not name.id[:1].isalpha():
        raise LoomError(f"scheme name '{name.id}' must start with a letter: Fortran names "
                        "must, and C reserves names starting with '_'", name.span)
    most = FORTRAN_NAME_LIMIT - len(LONGEST_FORTRAN_SUFFIX)
    if len(name.id) > most:
        raise LoomError(f"scheme name '{name.id[:20]}...' has {len(name.id)} characters; at most "
                        f"{most} fit the Fortran interface's names ({name.id[:8]}..."
                        f"{LONGEST_FORTRAN_SUFFIX} may have {FORTRAN_NAME_LIMIT})", name.span)
    if keyword.iskeyword(name.id) or keyword.issoftkeyword(name.id):
        raise LoomError(f"scheme name '{name.id}' is a Python keyword; the numpy kernel "
                        f"{name.id}.py could not be imported by name", name.span)
    if name.id in SHADOWED_MODULES:
        raise LoomError(f"scheme name '{name.id}' is the name of a Python module; the numpy "
                        f"kernel {name.id}.py would shadow it for every script in its folder",
                        name.span)


def _check_param_name(scheme: ast.Name, stmt: ast.Param, params: dict[str, ast.Param]) -> None:
    """Param names reach the C header (case-sensitive) and Fortran (case-insensitive)."""
    name = stmt.name
    folded = {p.lower(): p for p in params}
    other = folded.get(name.id.lower())
    if other is not None and other != name.id:
        raise LoomError(f"params '{other}' (line {params[other].name.span.line}) and '{name.id}' "
                        "differ only in letter case; Fortran, which ignores case, could not "
                        "tell them apart", name.span)
    spelled = f"{scheme.id}{PARAM_INFIX}{name.id}"
    if len(spelled) > FORTRAN_NAME_LIMIT:
        raise LoomError(f"param name '{name.id}' is too long: the Fortran interface names it "
                        f"{scheme.id}{PARAM_INFIX}..., {len(spelled)} characters, and a Fortran "
                        f"name may have {FORTRAN_NAME_LIMIT}", name.span)


def _check_limiter_arguments(stmt: ast.LimiterDef, time_method: str) -> None:
    """`limiter NAME(r)`, or `limiter NAME(r, c)` for a Courant-dependent limiter."""
    args = stmt.args
    if len(args) > 2:
        raise LoomError(f"a limiter takes its ratio and at most 'c', the Courant number "
                        f"(limiter {stmt.name.id}(r) or limiter {stmt.name.id}(r, c)); "
                        f"'{stmt.name.id}' has {len(args)} arguments", args[2].span)
    if args[0].id in RESERVED:
        raise LoomError(f"'{args[0].id}' cannot name a limiter's ratio argument", args[0].span)
    if len(args) == 2:
        second = args[1]
        if second.id != "c":
            raise LoomError(f"a limiter's second argument can only be 'c', the Courant number "
                            f"(limiter {stmt.name.id}(r, c)); '{second.id}' is not 'c'"
                            f"{did_you_mean(second.id, ['c'])}", second.span)
        if time_method != "euler":
            raise LoomError(f"a limiter of 'c' (the Courant number) needs 'time euler'; a "
                            f"'{time_method}' scheme is a method of lines whose flux cannot "
                            "depend on the time step", second.span)


def _define(scope: _Scope, stmt) -> None:
    name = stmt.name
    if name.id in RESERVED:
        raise LoomError(f"'{name.id}' is a built-in name and cannot be redefined", name.span)
    earlier = scope.defined().get(name.id)
    if earlier is not None:
        raise LoomError(f"'{name.id}' is defined twice (first on line {earlier.line})", name.span)


def _check_expr(expr: ast.Expr, scope: _Scope, where: str, time_method: str,
                arg: str | None = None, courant: bool = False) -> None:
    """courant: inside the body of a limiter of (r, c), where 'c' is its argument."""
    constant = where in ("param", "clip")
    if isinstance(expr, ast.Number):
        return
    if isinstance(expr, (ast.Unary,)):
        return _check_expr(expr.operand, scope, where, time_method, arg, courant)
    if isinstance(expr, ast.Binary):
        _check_expr(expr.left, scope, where, time_method, arg, courant)
        _check_expr(expr.right, scope, where, time_method, arg, courant)
        return
    if isinstance(expr, ast.Index):
        base = expr.base
        if base.id != "q":
            raise LoomError(f"only 'q' can be indexed; '{base.id}[...]' is not allowed", base.span)
        if constant or where == "limiter":
            raise LoomError(f"'q[...]' is not allowed in a {where}", expr.span)
        offset = integer_offset(expr.offset)
        if offset is None:
            raise LoomError("the offset in q[...] must be an integer such as 0, 1 or -1",
                            expr.offset.span)
        if abs(offset) > MAX_OFFSET:
            raise LoomError(f"stencil offset too wide: q[k] needs -{MAX_OFFSET} <= k <= "
                            f"{MAX_OFFSET} (the widest stencil fluxloom analyses)",
                            expr.offset.span)
        return
    if isinstance(expr, ast.Name):
        return _check_name(expr, scope, where, time_method, arg, courant)
    if isinstance(expr, ast.Call):
        func = expr.func
        for a in expr.args:
            _check_expr(a, scope, where, time_method, arg, courant)
        if func.id in BUILTINS:
            least, most = BUILTINS[func.id]
            n = len(expr.args)
            if n < least or (most is not None and n > most):
                want = (f"{least}" if least == most else
                        f"at least {least}" if most is None else f"{least} to {most}")
                raise LoomError(f"'{func.id}' takes {want} argument{'s' if want != '1' else ''}, "
                                f"given {n}", func.span)
            return
        if func.id in scope.limiters:
            if where == "limiter":
                raise LoomError("a limiter cannot call another limiter", func.span)
            wanted = len(scope.limiters[func.id].args)
            if len(expr.args) != wanted:
                form = f" ({func.id}(r, c))" if wanted == 2 else ""
                raise LoomError(f"limiter '{func.id}' takes {wanted} argument"
                                f"{'s' if wanted > 1 else ''}{form}, given {len(expr.args)}",
                                func.span)
            if wanted == 2 and not (isinstance(expr.args[1], ast.Name) and expr.args[1].id == "c"):
                raise LoomError(f"the second argument of limiter '{func.id}' must be 'c', the "
                                f"Courant number of the face ({func.id}(r, c))",
                                expr.args[1].span)
            return
        if func.id in scope.defined() or func.id in RESERVED:
            raise LoomError(f"'{func.id}' is not a function", func.span)
        known = list(BUILTINS) + list(scope.limiters)
        raise LoomError(f"unknown function '{func.id}'{did_you_mean(func.id, known)}", func.span)
    raise AssertionError(f"unhandled node {type(expr).__name__}")  # a fluxloom bug


def _check_name(expr: ast.Name, scope: _Scope, where: str, time_method: str,
                arg: str | None, courant: bool = False) -> None:
    name = expr.id
    constant = where in ("param", "clip")
    if where == "limiter":
        if name == arg or name in scope.params or (courant and name == "c"):
            return
        if name == "c":
            raise LoomError(f"a limiter is a function of its argument '{arg}' only; to depend "
                            f"on the Courant number declare it as limiter NAME({arg}, c)",
                            expr.span)
        if name in ("q", "u") or name in scope.lets:
            args = f"arguments '{arg}' and 'c'" if courant else f"argument '{arg}'"
            raise LoomError(f"a limiter is a function of its {args} only; "
                            f"'{name}' is not allowed here", expr.span)
    elif constant:
        if name in scope.params:
            return
        if name in ("q", "u", "c") or name in scope.lets:
            raise LoomError(f"a {where} value must be a constant; '{name}' is not", expr.span)
    else:
        if name == "q":
            raise LoomError("'q' needs an offset: write q[0], q[1], q[-1], ...", expr.span)
        if name == "u":
            return
        if name == "c":
            if time_method != "euler":
                raise LoomError(f"'c' (the Courant number) is only defined for 'time euler'; "
                                f"a '{time_method}' scheme is a method of lines whose flux "
                                "cannot depend on the time step", expr.span)
            return
        if name in scope.params or name in scope.lets:
            return
    if name in scope.limiters or name in BUILTINS:
        raise LoomError(f"'{name}' is a function; call it with arguments", expr.span)
    later = scope.everywhere.get(name)
    if later is not None and later >= expr.span.line and name not in scope.defined():
        raise LoomError(f"'{name}' is used before it is defined (on line {later}); "
                        "define names above the statements that use them", expr.span)
    known = list(scope.params) + ([arg] if arg else []) + (["c"] if courant else [])
    if where not in ("limiter",) and not constant:
        known += list(scope.lets) + ["u", "c"] + list(scope.everywhere)
    raise LoomError(f"unknown name '{name}'{did_you_mean(name, known)}", expr.span)


def integer_offset(expr: ast.Expr) -> int | None:
    """The integer value of a q[...] offset, or None if it is not an integer literal.

    Offsets of more than six digits come back as +-10**6 (far past MAX_OFFSET, which
    check refuses) rather than being converted digit by digit.
    """
    sign = 1
    while isinstance(expr, ast.Unary):
        sign = -sign if expr.op == "-" else sign
        expr = expr.operand
    if isinstance(expr, ast.Number) and re.fullmatch(r"\d+", expr.text):
        digits = expr.text.lstrip("0") or "0"
        return sign * (int(digits) if len(digits) <= 6 else 10 ** 6)
    return None
