"""Back-end neutral lowering of a Scheme into what a kernel computes.

Every emitter (C, numpy) renders the same plan, so the kernels agree by
construction: the same common subexpressions, in the same order, the same
halo widths, the same stage updates.

Face programs. A face expression `g` (flux = u * g) becomes a list of
temporaries found by sympy.cse plus a result, in a deterministic order. The
symbols it reads are q(k) (symbols.q), c (symbols.C), params (as symbols; the
back end prints them as named constants) and limiter calls.

Zero velocity. Where u == 0 the flux is 0. When c appears in a denominator
(Lax-Friedrichs has 1/c), the program is evaluated with c replaced by 1 where
c == 0 (`guard_c`), so the finite g times u == 0 gives exactly 0.

FCT (`correct fct`, Zalesak 1979). For the interior faces 0..n the corrected
flux needs the limiter factors R+/R- of cells -1..n, which need the
antidiffusive flux A = F_high - F_low on faces -1..n+1 and the low-order
solution on cells -2..n+1, which needs F_low on faces -2..n+2. So an FCT
step evaluates FCT_EXTRA_FACES = 2 extra faces on each side, whose
velocities the caller passes (`face_halo`: u_face then holds n + 1 + 2*2
values, u_face[2 + i] is face i), and more ghost cells (`kernel_halo`).
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import sympy

from ..ir import Scheme
from ..symbols import C, R, Ratio, limiter_calls, offsets_in
from ..time_methods.low_storage import StageUpdate, low_storage_form
from .exchange import ExchangeSchedule

FCT_EXTRA_FACES = 2
"""Extra face velocities (and faces) per side an FCT step evaluates."""


@dataclass(frozen=True)
class FaceProgram:
    """g as ordered temporaries and a result; evaluate top to bottom."""

    offsets: tuple[int, ...]
    temporaries: tuple[tuple[sympy.Symbol, sympy.Expr], ...]
    result: sympy.Expr
    uses_c: bool
    guard_c: bool


@dataclass(frozen=True)
class LimiterProgram:
    name: str
    program: FaceProgram  # in symbols.R


@dataclass(frozen=True)
class KernelPlan:
    name: str
    about: str
    time: str
    halo: int
    face_halo: int
    stages: int
    params: tuple[tuple[str, sympy.Expr], ...]
    flux: FaceProgram
    low_flux: FaceProgram | None
    fct: bool
    clip: tuple[sympy.Expr, sympy.Expr] | None
    limiters: tuple[LimiterProgram, ...]
    stage_updates: tuple[StageUpdate, ...]   # derived from the time method's table
    registers: int      # arrays of n values kept in workspace from stage to stage
    uses_start: bool    # whether a stage reads q_start
    exchange: ExchangeSchedule  # what a decomposed host refreshes, how wide, when

    @property
    def offsets(self) -> tuple[int, ...]:
        found = set(self.flux.offsets)
        if self.low_flux is not None:
            found |= set(self.low_flux.offsets)
        return tuple(sorted(found))


def reach(offsets) -> int:
    """Ghost cells per side for both faces of every interior cell.

    Face j+1/2 reads cell j+k (u >= 0) or j+1-k (u < 0) for offset k.
    """
    return max((max(abs(k), abs(k - 1)) for k in offsets), default=1)


def kernel_halo(scheme: Scheme) -> int:
    """Ghost cells per side the caller fills.

    FCT bounds each cell by its neighbours' low-order solution, which reads
    FCT_EXTRA_FACES more cells on each side than the fluxes alone.
    """
    if scheme.correct == "fct":
        return scheme.halo + FCT_EXTRA_FACES
    return scheme.halo


def face_halo(scheme: Scheme) -> int:
    """Face velocities per side beyond the n + 1 interior faces the caller passes.

    u_face holds n + 1 + 2*face_halo velocities, u_face[face_halo + i] is face i
    (face_halo is 0 for every scheme without flux correction).
    """
    return FCT_EXTRA_FACES if scheme.correct == "fct" else 0


def c_in_denominator(expr: sympy.Expr) -> bool:
    """True when c sits under a negative power (g would divide by zero at c == 0)."""
    for node in sympy.preorder_traversal(expr):
        if isinstance(node, sympy.Pow) and C in node.base.free_symbols:
            if not (node.exp.is_integer and node.exp.is_nonnegative):
                return True
    return False


def face_program(expr: sympy.Expr, prefix: str = "t") -> FaceProgram:
    """Common subexpressions of expr as numbered temporaries (deterministic)."""
    names = sympy.numbered_symbols(prefix, real=True)
    temporaries, (result,) = sympy.cse([expr], symbols=names, order="canonical")
    return FaceProgram(
        offsets=offsets_in(expr),
        temporaries=tuple(temporaries),
        result=result,
        uses_c=C in expr.free_symbols,
        guard_c=c_in_denominator(expr),
    )


def fused_slope(psi: sympy.Expr, a: sympy.Expr, b: sympy.Expr) -> sympy.Expr | None:
    """psi(ratio(a, b)) * b as one guarded quotient, or None where that is not exact.

    A limited face multiplies the limiter of r = a/b by the slope b; a rational
    limiter then costs two divisions per face (the ratio and the limiter), the
    dearest operations in the loop. With b = +P and b = -P (P > 0) in turn, the
    product cancels to N+/D and N-/D. When both share one denominator D that is
    positive for P > 0, and N+ and N- vanish at P = 0, then
        psi(ratio(a, b)) * b = ratio(N, D),  N = (N+ + N-)/2 + sign(b) (N+ - N-)/2,
    for every a and b: for b != 0 by the cancellation, and for b = 0 both sides are
    0 (ratio gives r = 0, the slope is 0; N is 0, and ratio(0, D) is 0 even if
    D = 0). Van Leer becomes (a|b| + |a|b) / (|a| + |b|): one division.
    """
    top, size = sympy.Dummy("a", real=True), sympy.Dummy("P", positive=True)
    sides = []
    for slope in (size, -size):
        quotient = sympy.cancel(sympy.together(slope * psi.subs(R, top / slope)))
        numerator, denominator = sympy.fraction(quotient)
        if any(node.is_Pow and node.exp.is_negative for node in
               sympy.preorder_traversal(numerator)):
            return None
        sides.append((sympy.expand(numerator), sympy.expand(denominator)))
    (n_plus, d_plus), (n_minus, d_minus) = sides
    if sympy.expand(d_plus - d_minus) != 0 and sympy.expand(d_plus + d_minus) == 0:
        n_minus, d_minus = -n_minus, -d_minus
    if sympy.expand(d_plus - d_minus) != 0 or d_plus.is_positive is not True:
        return None
    if n_plus.subs(size, 0) != 0 or n_minus.subs(size, 0) != 0:
        return None
    slope = sympy.Dummy("b", real=True)
    numerator = ((n_plus + n_minus) / 2 + sympy.sign(slope) * (n_plus - n_minus) / 2)
    numerator = sympy.expand(numerator.subs(size, sympy.Abs(slope)))
    numerator = numerator.subs(sympy.sign(slope) * sympy.Abs(slope), slope)  # |b| sign(b) = b
    back = {top: a, slope: b}
    return Ratio(numerator.xreplace(back), d_plus.subs(size, sympy.Abs(slope)).xreplace(back))


def fuse_limited_slopes(scheme: Scheme, expr: sympy.Expr) -> sympy.Expr:
    """expr with every `psi(ratio(a, b)) * b` that fuses exactly in one division."""
    for call in limiter_calls(expr, scheme.limiter_names):
        argument = call.args[0]
        if not isinstance(argument, Ratio) or scheme.limiter(type(call).__name__).courant:
            continue  # limiters of (r, c) are called as they are
        a, b = argument.args
        fused = fused_slope(scheme.bound(scheme.limiter(type(call).__name__).body), a, b)
        if fused is None:
            continue
        candidate = expr.xreplace({call: fused / b})
        # keep it only where the slope b really cancelled (no division by b left)
        if not any(node.is_Pow and node.exp.is_negative and node.base == b
                   for node in sympy.preorder_traversal(candidate)):
            expr = candidate
    return expr


def limiters_used(scheme: Scheme, face: sympy.Expr) -> tuple[str, ...]:
    """Limiters the kernel still calls once slopes are fused (face: the emitted g)."""
    exprs = [face] + ([scheme.low_face] if scheme.low_face is not None else [])
    used = {type(call).__name__ for e in exprs for call in limiter_calls(e, scheme.limiter_names)}
    return tuple(name for name in scheme.limiter_names if name in used)


def plan_kernel(scheme: Scheme) -> KernelPlan:
    """The plan every back end renders for scheme."""
    fct = scheme.correct == "fct"
    stepping = low_storage_form(scheme.time)
    face = fuse_limited_slopes(scheme, scheme.face)
    limiters = tuple(LimiterProgram(name, face_program(scheme.limiter(name).body, "s"))
                     for name in limiters_used(scheme, face))
    low = face_program(scheme.low_face) if scheme.low_face is not None else None
    program = face_program(face)
    if any(c_in_denominator(scheme.limiter(lim.name).body) for lim in limiters):
        # a limiter of (r, c) dividing by c: evaluate it with c = 1 where u == 0, too
        program = replace(program, guard_c=True)
    if R in program.result.free_symbols:
        raise AssertionError("limiter argument symbol leaked into a face expression")
    return KernelPlan(
        name=scheme.name,
        about=scheme.about,
        time=scheme.time,
        halo=kernel_halo(scheme),
        face_halo=face_halo(scheme),
        stages=len(stepping.updates),
        params=tuple((p.name, p.value) for p in scheme.params),
        flux=program,
        low_flux=low if fct else None,
        fct=fct,
        clip=scheme.clip,
        limiters=limiters,
        stage_updates=stepping.updates,
        registers=stepping.registers,
        uses_start=stepping.uses_start,
        exchange=ExchangeSchedule(kernel_halo(scheme), face_halo(scheme), len(stepping.updates),
                                  fct),
    )


# ---- the descriptive comment every generated file starts with -------------

def fluxloom_version() -> str:
    from importlib.metadata import PackageNotFoundError, version
    try:
        return version("fluxloom")
    except PackageNotFoundError:
        return "unknown"


_ANALYSIS_LINES: dict[str, tuple[str, ...]] = {}


def analysis_lines(scheme: Scheme) -> tuple[str, ...]:
    """The analysis verdicts as short lines, or a note that no analysis is available."""
    key = scheme.fingerprint
    if key not in _ANALYSIS_LINES:
        _ANALYSIS_LINES[key] = _analysis_lines(scheme)
    return _ANALYSIS_LINES[key]


def _analysis_lines(scheme: Scheme) -> tuple[str, ...]:
    """The verdicts worded as in `check` and every report (compiler/analysis/wording.py)."""
    try:
        from ..analysis import analyse
        from ..analysis.claims import read_claims
        from ..analysis.wording import verdict_lines
    except ImportError:
        return ("analysis: not available in this installation",)
    try:
        claims = read_claims(analyse(scheme).to_json())
    except Exception as err:  # the kernel is still correct; say what happened
        return (f"analysis: failed ({type(err).__name__})",)
    return verdict_lines(claims)


def banner_lines(scheme: Scheme, precision: str, verdicts: bool = True) -> tuple[str, ...]:
    """Lines of the comment at the top of every generated file (no comment markers).

    verdicts=False leaves out the analysis (kernels built at run time, where
    nobody reads the comment and the analysis would only cost time).
    """
    lines = [f"{scheme.name}: {scheme.about}" if scheme.about else scheme.name,
             f"generated by fluxloom {fluxloom_version()} from {_file_name(scheme)}; do not edit",
             f"precision {precision}, time method {scheme.time}"]
    for p in scheme.params:
        lines.append(f"param {p.name} = {p.value}")
    if scheme.correct:
        lines.append(f"correct {scheme.correct}")
    if scheme.clip:
        lines.append(f"clip {scheme.clip[0]}, {scheme.clip[1]}")
    if verdicts:
        lines.extend(analysis_lines(scheme))
    return tuple(lines)


def _file_name(scheme: Scheme) -> str:
    from pathlib import PurePath
    return PurePath(scheme.file).name
