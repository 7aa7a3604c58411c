"""Scheme IR -> one importable numpy module per scheme (the numpy back end).

The module mirrors the C ABI (HALO, STAGES, workspace_size, fill_periodic,
stage, step) and is vectorised over cells: the only Python loops run over
blocks of cells and over Runge-Kutta stages. Working block by block keeps the
temporaries small (they stay in cache and peak memory does not grow with the
domain), and lets a block whose faces share one velocity sign read every
`q[k]` as a view instead of gathering it.
"""
from __future__ import annotations

from dataclasses import dataclass
from importlib import metadata

import sympy
from sympy.printing.numpy import NumPyPrinter

from ..ir import Scheme
from ..symbols import C, offset_of
from . import environment

PRECISIONS = {"double": "np.float64", "float": "np.float32"}

BLOCK_CELLS = 1 << 15
"""Cells per block: 256 KiB of doubles, so temporaries stay in L2 cache while
numpy can still reuse them in place (it only does so above 256 KiB)."""


class NumpyKernelPrinter(NumPyPrinter):
    """Prints IR expressions as numpy code over whole arrays of faces.

    Strict like its parent: a construct with no `_print_` method raises
    instead of printing junk. Names of `q[k]`, params and limiters follow
    `q_name`, `param_name` and `limiter_name`.
    """

    def __init__(self, limiter_names=(), param_names=()):
        super().__init__({"fully_qualified_modules": True})
        self._limiter_names = frozenset(limiter_names)
        self._param_names = frozenset(param_names)
        self.used_helpers: set[str] = set()

    def _module_format(self, fqn, register=True):
        # `import numpy as np` in the generated module.
        return super()._module_format(fqn, register).replace("numpy.", "np.", 1)

    def _print_Symbol(self, expr):
        k = offset_of(expr)
        if k is not None:
            return q_name(k)
        if expr == C:
            return "c"
        if expr.name in self._param_names:
            return param_name(expr.name)
        return super()._print_Symbol(expr)

    def _print_Ratio(self, expr):
        self.used_helpers.add("ratio")
        a, b = expr.args
        return f"ratio({self._print(a)}, {self._print(b)})"

    def _print_Function(self, expr):
        name = type(expr).__name__
        if name in self._limiter_names:
            return f"{limiter_name(name)}({self._print(expr.args[0])})"
        return super()._print_Function(expr)

    def _print_Min(self, expr):
        return self._nested("np.minimum", expr.args)

    def _print_Max(self, expr):
        return self._nested("np.maximum", expr.args)

    def _nested(self, func, args):
        # Arrays first, constants last: min(0, r) -> np.minimum(r, 0).
        args = sorted(args, key=lambda a: (a.is_number, sympy.default_sort_key(a)))
        text = self._print(args[-1])
        for arg in reversed(args[:-1]):
            text = f"{func}({self._print(arg)}, {text})"
        return text

    def _print_Abs(self, expr):
        return f"np.abs({self._print(expr.args[0])})"

    def _print_sign(self, expr):
        return f"np.sign({self._print(expr.args[0])})"

    def _print_Pow(self, expr, rational=False):
        base, exp = expr.args
        if exp == sympy.S.Half:
            return f"np.sqrt({self._print(base)})"
        if exp.is_Integer and 1 < abs(int(exp)) <= 3:
            # Repeated products: cheaper than np.power and exact in the same way as C.
            factor = self.parenthesize(base, sympy.printing.precedence.PRECEDENCE["Mul"])
            product = "*".join([factor] * abs(int(exp)))
            return product if exp > 0 else f"1/({product})"
        if exp == -1:
            return f"1/{self.parenthesize(base, sympy.printing.precedence.PRECEDENCE['Mul'])}"
        return super()._print_Pow(expr, rational=rational)


def q_name(k: int) -> str:
    return f"q_m{-k}" if k < 0 else f"q_{k}"


def param_name(name: str) -> str:
    return f"param_{name}"


def limiter_name(name: str) -> str:
    return f"limiter_{name}"


# ---- what the template receives ---------------------------------------------

@dataclass(frozen=True)
class FaceFunction:
    """A generated function of (q_k..., c) returning g: temporaries, then g."""

    name: str
    doc: str
    assignments: tuple[tuple[str, str], ...]
    result: str


@dataclass(frozen=True)
class Offset:
    """One q[k]: its argument name and how far its cell is from the face's
    left cell (u >= 0 frame) or right cell (u < 0 frame)."""

    name: str
    positive_shift: str
    negative_shift: str


@dataclass(frozen=True)
class NumpyModule:
    """Everything numpy_kernel.py.j2 prints, already as strings."""

    name: str
    about: str
    version: str
    fingerprint: str
    source_file: str
    time: str
    precision: str
    real: str
    halo: int
    base_halo: int
    stages: int
    block_cells: int
    verdicts: tuple[str, ...]
    params: tuple[tuple[str, str, str], ...]      # (python name, spec name, value text)
    limiters: tuple[tuple[str, str], ...]         # (function name, body text)
    helpers: tuple[str, ...]
    offsets: tuple[Offset, ...]
    uses_c: bool
    frame_names: str        # "q_m1, q_0, q_1"
    face_arguments: str     # "q_m1, q_0, q_1, c"
    guard_c: bool
    faces: tuple[FaceFunction, ...]
    fct: bool
    clip: tuple[str, str] | None
    stage_updates: tuple[StageUpdate, ...]
    workspace: str


def _cse(expr: sympy.Expr, printer: NumpyKernelPrinter, prefix: str):
    temps = sympy.numbered_symbols(prefix)
    replacements, (reduced,) = sympy.cse(expr, symbols=temps, order="canonical")
    assignments = tuple((str(sym), printer.doprint(value)) for sym, value in replacements)
    return assignments, printer.doprint(reduced)


def divides_by_c(expr: sympy.Expr) -> bool:
    """True when expr has c in a denominator (Lax-Friedrichs' 1/c): it needs a c = 0 guard."""
    return any(p.exp.is_negative and p.base.has(C) for p in expr.atoms(sympy.Pow))


def fluxloom_version() -> str:
    try:
        return metadata.version("fluxloom")
    except metadata.PackageNotFoundError:  # a source tree that was never installed
        return "0+unknown"


@dataclass(frozen=True)
class StageUpdate:
    """One Runge-Kutta stage on a block: `out` becomes the stage value; `accumulate`,
    if any, updates the running sum kept in the workspace (classical RK4 only).

    Names: `start` is the step's initial value, `current` the stage input,
    `rate` = dt * L(current) = -dt/dx * (F(j+1/2) - F(j-1/2)), `acc` the sum.
    """

    out: str
    accumulate: str | None = None


# Shu-Osher form of the SSP methods (Shu and Osher 1988) and the classical RK4
# weights 1/6, 1/3, 1/3, 1/6 folded into a running sum.
STAGE_UPDATES = {
    "euler": (StageUpdate("start + rate"),),
    "ssp_rk2": (StageUpdate("start + rate"),
                StageUpdate("(1/2)*start + (1/2)*(current + rate)")),
    "ssp_rk3": (StageUpdate("start + rate"),
                StageUpdate("(3/4)*start + (1/4)*(current + rate)"),
                StageUpdate("(1/3)*start + (2/3)*(current + rate)")),
    "rk4": (StageUpdate("start + (1/2)*rate", "start + (1/6)*rate"),
            StageUpdate("start + (1/2)*rate", "acc + (1/3)*rate"),
            StageUpdate("start + rate", "acc + (1/3)*rate"),
            StageUpdate("acc + (1/6)*rate")),
}


def stage_updates(time: str) -> tuple[StageUpdate, ...]:
    return STAGE_UPDATES[time]


def numpy_module(scheme: Scheme, precision: str = "double", verdicts=()) -> NumpyModule:
    """Lower a scheme to the template's data (printed strings and small records)."""
    if precision not in PRECISIONS:
        raise ValueError(f"precision must be one of {sorted(PRECISIONS)}, not {precision!r}")
    printer = NumpyKernelPrinter(scheme.limiter_names, [p.name for p in scheme.params])
    fct = scheme.correct == "fct"
    faces = [FaceFunction("face_values", "g of the flux (u * g)",
                          *_cse(scheme.face, printer, "t"))]
    if fct:
        faces.append(FaceFunction("low_face_values", "g of the monotone low-order flux",
                                  *_cse(scheme.low_face, printer, "t")))
    limiters = tuple((limiter_name(lim.name), printer.doprint(lim.body))
                     for lim in scheme.limiters)
    offsets = tuple(Offset(q_name(k), _shift("HALO", k - 1), _shift("HALO", -k))
                    for k in scheme.offsets)
    exprs = [scheme.face] + ([scheme.low_face] if fct else [])
    # FCT reads the low-order solution one cell beyond each neighbour it bounds.
    halo = scheme.halo + 2 if fct else scheme.halo
    clip = None
    if scheme.clip is not None:
        clip = tuple(printer.doprint(v) for v in scheme.clip)
    updates = stage_updates(scheme.time)
    return NumpyModule(
        name=scheme.name, about=scheme.about, version=fluxloom_version(),
        fingerprint=scheme.fingerprint, source_file=_basename(scheme.file),
        time=scheme.time, precision=precision, real=PRECISIONS[precision],
        halo=halo, base_halo=scheme.halo, stages=len(updates), block_cells=BLOCK_CELLS,
        verdicts=tuple(verdicts),
        params=tuple((param_name(p.name), p.name, printer.doprint(p.value)) for p in scheme.params),
        limiters=limiters, helpers=tuple(sorted(printer.used_helpers)), offsets=offsets,
        uses_c=scheme.uses_c, frame_names=", ".join(o.name for o in offsets),
        face_arguments=", ".join([o.name for o in offsets] + (["c"] if scheme.uses_c else [])),
        guard_c=any(divides_by_c(e) for e in exprs),
        faces=tuple(faces), fct=fct, clip=clip, stage_updates=updates,
        workspace=_workspace_formula(scheme.time))


def _shift(base: str, k: int) -> str:
    if k == 0:
        return base
    return f"{base} + {k}" if k > 0 else f"{base} - {-k}"


def _basename(path: str) -> str:
    return path.replace("\\", "/").rsplit("/", 1)[-1]


def _workspace_formula(time: str) -> str:
    """Reals `step` keeps between stages: stage arrays (with halos) and an accumulator."""
    return {"euler": "0",
            "ssp_rk2": "n + 2 * HALO",
            "ssp_rk3": "2 * (n + 2 * HALO)",
            "rk4": "2 * (n + 2 * HALO) + n"}[time]


def numpy_source(scheme: Scheme, precision: str = "double", verdicts=()) -> str:
    """The generated module's text: same scheme and precision, same bytes."""
    module = numpy_module(scheme, precision, verdicts)
    return environment.render("numpy_kernel.py.j2", m=module)
