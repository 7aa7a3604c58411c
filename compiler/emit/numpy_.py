"""Scheme IR -> one importable numpy module per scheme (the numpy back end).

The module mirrors the C ABI (HALO, STAGES, workspace_size, fill_periodic,
stage, step) and is vectorised over cells: the only Python loops run over
blocks of cells and over Runge-Kutta stages. Working block by block keeps the
temporaries small (they stay in cache and peak memory does not grow with the
domain), and lets a block whose faces share one velocity sign read every
`q[k]` as a view instead of gathering it.
"""
from __future__ import annotations

import textwrap
from dataclasses import dataclass, replace

import sympy
from sympy.printing.numpy import NumPyPrinter
from sympy.printing.precedence import PRECEDENCE

from ..constants import nearest
from ..ir import Scheme
from ..symbols import C, R, LimiterApplication, limiter_name_of, offset_of
from ..time_methods.low_storage import StageUpdate
from ..upwind import both_cells
from . import environment
from .printing import PlanPrinting, break_after_commas, check_precision
from .limited import FLOOR_EXPONENT, LimiterFormCall, Quotient
from .fct_plan import FluxStep, element_of
from .plan import (REGISTERS, STAGE_BUFFERS, FaceProgram, banner_lines, plan_kernel,
                   workspace_layout)
from .workspace import Affine, print_affine

PRECISIONS = {"double": "np.float64", "float": "np.float32"}
WORDS = {"double": ("np.uint64", hex(0x7FF << 52), hex(2046 << 52)),
         "float": ("np.uint32", hex(0xFF << 23), hex(254 << 23))}
"""The unsigned integer of a real's width, the mask of its exponent field and the
word of 2^bias (the scale helpers' words, as in the C kernel)."""

BLOCK_BYTES = 256 * 1024
"""Bytes of one block-sized temporary: small enough to stay in L2 cache, large
enough for numpy to reuse temporaries in place (it does so from 256 KiB)."""
ITEM_BYTES = {"double": 8, "float": 4}
FLUX_SCRATCH = Affine()
"""Face fluxes the module keeps in workspace: none (a block's fluxes are temporaries)."""


class NumpyKernelPrinter(PlanPrinting, NumPyPrinter):
    """Prints IR expressions as numpy code over whole arrays of faces.

    Strict like its parent: a construct with no `_print_` method raises
    instead of printing junk. Names of `q[k]`, params and limiters follow
    `q_name`, `param_name` and `limiter_name`; params and limiters are found by
    class, never by name. Every constant prints as the double that holds it
    rounded once to the kernel's precision; user text only through `escape_text`.
    """

    def __init__(self, limiter_names=(), param_names=(), precision: str = "double"):
        # order "none": terms as sympy holds them, which reads q_1 - q_0, not -q_0 + q_1.
        super().__init__({"fully_qualified_modules": True, "order": "none"})
        self._limiter_names = frozenset(limiter_names)
        self.precision = precision
        self.used_helpers: set[str] = set()
        self.renames: dict = {}
        self.window = None   # (span, origins) of the FCT step being printed

    @staticmethod
    def escape_text(text: str) -> str:
        """Any string as text that is inert between the quotes of a Python string or
        docstring and reads back as exactly that string: printable characters stay,
        a backslash and a double quote are escaped (generated strings are delimited by
        double quotes), every other character (control
        characters, NUL, line separators, lone surrogates) becomes \\xHH, \\uHHHH
        or \\UHHHHHHHH."""
        out = []
        for ch in text:
            code = ord(ch)
            if ch in "\\\"":
                out.append("\\" + ch)
            elif ch.isprintable():
                out.append(ch)
            elif code < 0x100:
                out.append(f"\\x{code:02x}")
            elif code < 0x10000:
                out.append(f"\\u{code:04x}")
            else:
                out.append(f"\\U{code:08x}")
        return "".join(out)

    def _print(self, expr, **kwargs):
        if isinstance(expr, sympy.Expr) and expr.is_number:
            return self.real_literal(expr)
        # sympy dispatches a function subclass by its own name only: route these here
        if isinstance(expr, LimiterApplication):
            return self._print_LimiterApplication(expr)
        if isinstance(expr, LimiterFormCall):
            form = type(expr)
            return (f"{form_name(form.kind, form.limiter_name)}"
                    f"({', '.join(self._print(a) for a in expr.args)})")
        return super()._print(expr, **kwargs)

    def real_literal(self, value: sympy.Expr) -> str:
        """repr of the double holding the constant rounded to the kernel's precision:
        Python reads it back exactly, and numpy keeps it at the arrays' precision."""
        return repr(nearest(value, self.precision))

    def _module_format(self, fqn, register=True):
        # `import numpy as np` in the generated module.
        return super()._module_format(fqn, register).replace("numpy.", "np.", 1)

    def _print_ParamSymbol(self, expr):
        if expr in self.renames:
            return self._print(self.renames[expr])
        return param_name(expr.name)

    def _print_Symbol(self, expr):
        if expr in self.renames:
            return self._print(self.renames[expr])
        k = offset_of(expr)
        if k is not None:
            return q_name(k)
        if expr == C:
            return "c"
        if expr == R:
            return "r"
        return super()._print_Symbol(expr)

    def _print_Quotient(self, expr):
        return f"({self._print(expr.args[0])})/({self._print(expr.args[1])})"

    def _print_Indexed(self, expr):
        """An FCT plan element: the slice of its array over the block's span."""
        array, shift = element_of(expr)
        span, origins = self.window
        return block_slice(array, origins[array], span, shift)

    def _print_Share(self, expr):
        self.used_helpers.add("share")
        return f"bounded_share({self._print(expr.args[0])}, {self._print(expr.args[1])})"

    def _print_Piecewise(self, expr):
        """Nested np.where, first condition outermost (the clamp, the FCT factor)."""
        *pieces, (otherwise, _) = expr.args
        text = self._print(otherwise)
        for value, condition in reversed(pieces):
            text = f"np.where({self._print(condition)}, {self._print(value)}, {text})"
        return text

    def _print_Relational(self, expr):
        return f"{self._print(expr.lhs)} {expr.rel_op} {self._print(expr.rhs)}"

    def _print_NonzeroOr(self, expr):
        b, x = expr.args
        return f"np.where({self._print(b)} != 0, {self._print(x)}, 0.0)"

    def _print_UnitSign(self, expr):
        return f"np.copysign(1.0, {self._print(expr.args[0])})"

    def _print_ParamBound(self, expr):
        return self.real_literal(sympy.Integer(2) ** expr.exponent(self.precision))

    def _print_ScaleDown(self, expr):
        self.used_helpers.add("scale")
        return f"scale_down({self._print(expr.args[0])})"

    def _print_ScaleUp(self, expr):
        self.used_helpers.add("scale")
        return f"scale_up({self._print(expr.args[0])})"

    def _print_RatioFloor(self, expr):
        return self.real_literal(sympy.Rational(1, 2 ** FLOOR_EXPONENT[self.precision]))

    def _print_Ratio(self, expr):
        self.used_helpers.add("ratio")
        a, b = expr.args
        return f"ratio({self._print(a)}, {self._print(b)})"

    def _print_LimiterApplication(self, expr):
        name = limiter_name_of(expr)
        if name not in self._limiter_names:
            raise AssertionError(f"limiter {name} is called but not in the plan")
        return f"{limiter_name(name)}({', '.join(self._print(a) for a in expr.args)})"

    def _print_Min(self, expr):
        return self._nested("np.minimum", expr.args)

    def _print_Max(self, expr):
        return self._nested("np.maximum", expr.args)

    def _nested(self, func, args):
        # Arrays first, constants last: min(0, r) -> np.minimum(r, 0).
        return self.fold(func, args, key=lambda a: (a.is_number, sympy.default_sort_key(a)))

    def _print_Abs(self, expr):
        return f"np.abs({self._print(expr.args[0])})"

    def _print_sign(self, expr):
        return f"np.sign({self._print(expr.args[0])})"

    def _print_Pow(self, expr, rational=False):
        base, exp = expr.args
        if exp == sympy.S.Half:
            return f"np.sqrt({self._print(base)})"
        count = self.small_power(expr)
        if count:
            # Repeated products, bracketed so that y/x**2 stays y/(x*x).
            product = self.repeated_product(base, count)
            return f"({product})" if exp > 0 else f"(1/({product}))"
        if exp == -1:
            return f"(1/{self.parenthesize(base, PRECEDENCE['Mul'])})"
        return super()._print_Pow(expr, rational=rational)


def q_name(k: int) -> str:
    return f"q_m{-k}" if k < 0 else f"q_{k}"


def param_name(name: str) -> str:
    return f"param_{name}"


def limiter_name(name: str) -> str:
    return f"limiter_{name}"


def form_name(kind: str, name: str) -> str:
    """slope_f(a, b) = psi(ratio(a, b)) * b; psi_f(a, b) = psi(ratio(a, b))."""
    return f"{kind}_{name}"


# ---- what the template receives ---------------------------------------------

@dataclass(frozen=True)
class Function:
    """A generated function: temporaries top to bottom, then the returned value."""

    name: str
    doc: str
    assignments: tuple[tuple[str, str], ...]
    result: str
    arguments: str = "r"   # limiters: "r", or "r, c" for a limiter of the Courant number
    quiet: bool = False    # a limiter with a division: numpy's divide warning silenced


@dataclass(frozen=True)
class Offset:
    """One q[k]: its argument name and where its cell lies relative to HALO + face
    index, for u >= 0 (cell j + k) and for u < 0 (cell j + 1 - k)."""

    name: str
    forward: str
    backward: str


@dataclass(frozen=True)
class Stage:
    """One Runge-Kutta stage on a block, as numpy over `start`, `current`, `rate`
    (= dt * L(current)) and the registers acc0, acc1, ... (compiler/time_methods/
    low_storage.py): copies of overwritten registers still read, q_out, the writes."""

    saves: tuple[str, ...]
    out: str
    writes: tuple[tuple[str, str], ...]


@dataclass(frozen=True)
class NumpyModule:
    """Everything numpy_kernel.py.j2 prints, already as strings (user text escaped)."""

    name: str
    name_literal: str
    banner: tuple[str, ...]
    real: str
    word: tuple[str, str, str]
    scale_low: str
    halo: int
    face_halo: int
    stages: tuple[Stage, ...]
    registers: tuple[tuple[str, str], ...]     # (name, its slice of work for the block)
    register_reals: str                        # "n", "2 * n" or "0"
    buffers: tuple[tuple[str, str], ...]       # (stage array, its start in work)
    block_cells: int
    params: tuple[tuple[str, str, str], ...]   # (python name, spec name escaped, value)
    limiters: tuple[Function, ...]
    forms: tuple[Function, ...]
    faces: tuple[Function, ...]
    helpers: tuple[str, ...]
    offsets: tuple[Offset, ...]
    frame_names: str                           # "q_m1, q_0, q_1"
    face_arguments: str                        # "q_m1, q_0, q_1, c"
    uses_c: bool
    guard_c: bool
    fct: bool
    clip: tuple[str, str] | None
    workspace: str
    workspace_regions: tuple[str, ...]         # "name: size reals, what it holds"
    fct_views: tuple[str, ...]                 # the FCT plan's work arrays of one step
    fct_lines: tuple[str, ...]                 # the FCT plan's steps on a block lo .. hi
    weighted: tuple[tuple[Stage, Stage], ...] = ()   # per stage: the mass's, the thickness's


def print_function(printer: NumpyKernelPrinter, name: str, doc: str,
                   program: FaceProgram, arguments: str = "r") -> Function:
    assignments = tuple((printer.doprint(sym), printer.doprint(value))
                        for sym, value in program.scaling)
    with printer.reading(dict(program.renames)):
        assignments += tuple((printer.doprint(sym), printer.doprint(value))
                             for sym, value in program.temporaries)
        return Function(name, doc, assignments, printer.doprint(program.result), arguments)


def stage_expression(printer: NumpyKernelPrinter, update: StageUpdate, prefix: str = "") -> Stage:
    """One stage update of the time method's low-storage form as numpy expressions; a
    prefix names another set of operands (the thickness-weighted sweep's mass "m_" and
    thickness "h_": start, current, rate and registers of their own)."""
    def register(k: int) -> str:
        return f"acc{k}_old" if k in update.saved else f"acc{k}"

    def combo(c):
        parts = []
        for coefficient, name in ([(c.start, "start"), (c.stage, "current")]
                                  + [(w, register(k)) for k, w in c.registers]
                                  + [(c.rate, "rate")]):
            if coefficient == 0:
                continue
            name = prefix + name
            parts.append(name if coefficient == 1 else f"({printer.doprint(coefficient)})*{name}")
        return " + ".join(parts) or "0"

    return Stage(tuple(f"{prefix}acc{k}_old = {prefix}acc{k}.copy()" for k in update.saved),
                 combo(update.out),
                 tuple((f"{prefix}acc{k}[...]", combo(c)) for k, c in update.writes))


def _bound(origin, var: str, k: int) -> str:
    """origin + var + k as Python: `HALO + lo - 2`, `hi + 5`, `lo`."""
    parts = [origin] if isinstance(origin, str) else []
    k += origin if isinstance(origin, int) else 0
    parts.append(var)
    text = " + ".join(parts)
    return text if k == 0 else (f"{text} + {k}" if k > 0 else f"{text} - {-k}")


def block_slice(array: str, origin, span, shift: int) -> str:
    """array over the span of a block lo .. hi (cells lo .. hi - 1, faces lo .. hi): an
    index i of the plan's frame lies at origin + i of the array."""
    return (f"{array}[{_bound(origin, 'lo', span.first + shift)}:"
            f"{_bound(origin, 'hi', span.last + shift + 1)}]")


FCT_NAMES = {"q": "q", "q_out": "q_out", "u_face": "u_face"}


def fct_code(printer: NumpyKernelPrinter, plan) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """The FCT plan as numpy: the work views (name = work[start:end]) and the lines of one
    block lo .. hi."""
    fct = plan.fct_steps
    layout = workspace_layout(plan, FLUX_SCRATCH)
    views = tuple(line for a in fct.work for line in (
        f"# {a.about}, {a.span.kind} {a.span.first} .. "
        f"{print_affine(Affine(cells=1, constant=a.span.last))}",
        f"{a.name} = work[{_py_size(layout.offset(a.name))}:"
        f"{_py_size(layout.offset(a.name) + a.span.count)}]"))
    origins = {"q": "HALO", "q_out": "HALO", "u_face": "FACE_HALO",
               **{a.name: -a.span.first for a in fct.work}}
    lines = []
    for step in fct.steps:
        lines += [f"# {line}" for line in textwrap.wrap(step.about, 84)]
        if isinstance(step, FluxStep):
            face = "low_face_values" if step.low_order else "face_values"
            lines += break_after_commas(
                f"{block_slice(step.target, origins[step.target], step.span, 0)} = "
                f"face_fluxes({face}, q, {block_slice('u_face', 'FACE_HALO', step.span, 0)}, "
                f"dt_dx, {_bound(0, 'lo', step.span.first)})")
            continue
        printer.window = (step.span, origins)
        statements = [f"{printer.doprint(sym)} = {printer.doprint(value)}"
                      for sym, value in step.temporaries]
        statements += [f"{block_slice(target, origins[target], step.span, 0)} = "
                       f"{printer.doprint(value)}" for target, value in step.writes]
        lines += [line for statement in statements for line in break_after_commas(statement)]
        printer.window = None
    return views, tuple(lines)


def _py_size(value: Affine) -> str:
    return print_affine(value, "n", "HALO", "BLOCK")


def _shift(k: int) -> str:
    if k == 0:
        return "HALO"
    return f"HALO + {k}" if k > 0 else f"HALO - {-k}"


def _register_slices(layout) -> tuple[tuple[str, str], ...]:
    """Register k of a block lo:hi is work[start + k n + lo:start + k n + hi]."""
    if not layout.has(REGISTERS):
        return ()
    start = layout.offset(REGISTERS)
    return tuple((f"acc{k}", f"work[{_py_size(start + Affine(cells=k))} + lo:"
                             f"{_py_size(start + Affine(cells=k))} + hi]"
                  if not (start + Affine(cells=k)).zero else "work[lo:hi]")
                 for k in range(layout.region(REGISTERS).count))


def _divides(body: sympy.Expr) -> bool:
    """A limiter with a division: the front end let it through only where min/max absorb
    the infinity of a zero divisor (2/r at r = 0, 2/(1 - c) at c = 1), so numpy's
    divide-by-zero warning there is noise."""
    return any(isinstance(node, sympy.Pow) and node.exp.is_negative
               for node in sympy.preorder_traversal(body))


def numpy_module(scheme: Scheme, precision: str = "double", verdicts=()) -> NumpyModule:
    """Lower a scheme (through the shared kernel plan) to the template's data."""
    check_precision(precision)
    plan = plan_kernel(scheme)
    printer = NumpyKernelPrinter([lim.name for lim in plan.limiters],
                                 [name for name, _ in plan.params], precision)
    faces = [print_function(printer, "face_values", "g of the flux (u * g)", plan.flux)]
    if plan.low_flux is not None:
        faces.append(print_function(printer, "low_face_values",
                                    "g of the monotone low-order flux", plan.low_flux))
    arguments = {lim.name: "r, c" if lim.courant else "r" for lim in scheme.limiters}
    limiters = tuple(replace(print_function(printer, limiter_name(lim.name),
                                            f"The limiter {printer.escape_text(lim.name)}"
                                            f"({arguments[lim.name]}).",
                                            lim.program, arguments[lim.name]),
                             quiet=_divides(scheme.limiter(lim.name).body))
                     for lim in plan.limiters)
    forms = tuple(replace(print_function(
        printer, form_name(form.kind, form.name),
        (f"psi(ratio(a, b)) * b for the limiter {printer.escape_text(form.name)}"
         if form.kind == "slope" else
         f"psi(ratio(a, b)) for the limiter {printer.escape_text(form.name)}")
        + ", from a and b without forming the ratio (finite for finite a and b).",
        form.program, "a, b, c" if form.courant else "a, b"),
        quiet=any(_divides(v) or v.has(Quotient) for v in
                  (form.program.result, *(value for _, value in form.program.temporaries))))
        for form in plan.limiter_forms)
    # face i of a block lies between array cells HALO + i - 1 and HALO + i
    offsets = tuple(Offset(q_name(k), *(_shift(cell - 1) for cell in both_cells(k)))
                    for k in plan.offsets)
    programs = [plan.flux] + ([plan.low_flux] if plan.low_flux is not None else [])
    uses_c = any(p.uses_c for p in programs)
    names = [o.name for o in offsets]
    layout = workspace_layout(plan, FLUX_SCRATCH)
    fct_views, fct_lines = fct_code(printer, plan) if plan.fct else ((), ())
    banner = banner_lines(scheme, precision, verdicts)
    return NumpyModule(
        name=plan.name,
        name_literal=printer.escape_text(plan.name),
        banner=tuple(printer.escape_text(line) for line in banner),
        real=PRECISIONS[precision],
        word=WORDS[precision],
        scale_low=printer.real_literal(sympy.Rational(1, 2 ** (1022 if precision == "double"
                                                               else 126))),
        halo=plan.halo,
        face_halo=plan.face_halo,
        stages=tuple(stage_expression(printer, u) for u in plan.stage_updates),
        registers=_register_slices(layout),
        register_reals=(_py_size(layout.region(REGISTERS).total) if layout.has(REGISTERS)
                        else "0"),
        buffers=tuple((b, _py_size(layout.offset(b))) for b in STAGE_BUFFERS if layout.has(b)),
        block_cells=BLOCK_BYTES // ITEM_BYTES[precision],
        params=tuple((param_name(name), printer.escape_text(name),
                      f"REAL({printer.real_literal(value)})") for name, value in plan.params),
        limiters=limiters,
        forms=forms,
        faces=tuple(faces),
        helpers=tuple(sorted(printer.used_helpers)),
        offsets=offsets,
        frame_names=", ".join(names),
        face_arguments=", ".join(names + (["c"] if uses_c else [])),
        uses_c=uses_c,
        guard_c=any(p.guard_c for p in programs),
        fct=plan.fct,
        clip=None if plan.clip is None else tuple(printer.doprint(v) for v in plan.clip),
        workspace=_py_size(layout.size),
        workspace_regions=tuple(f"{r.name}: {(str(r.count) + ' * ') if r.count > 1 else ''}"
                                f"{_py_size(r.size)} reals, {r.about}" for r in layout.regions),
        fct_views=fct_views,
        fct_lines=fct_lines,
        weighted=tuple((stage_expression(printer, u, "m_"), stage_expression(printer, u, "h_"))
                       for u in plan.stage_updates),
    )


def numpy_source(scheme: Scheme, precision: str = "double", verdicts=()) -> str:
    """The generated module's text: same scheme and precision, same bytes.

    verdicts: the analysis verdicts as lines for the docstring (given by the caller;
    the run-time loader passes none).
    """
    return environment.render("numpy_kernel.py.j2", m=numpy_module(scheme, precision, verdicts))


def files(scheme: Scheme, precision: str = "double", verdicts=()) -> dict[str, str]:
    """{'NAME.py': the module} (the target registry's entry point)."""
    return {f"{scheme.name}.py": numpy_source(scheme, precision, verdicts)}


PRINTER = NumpyKernelPrinter
"""The target's printer (the registry reads it: compiler/emit/targets.py)."""
