"""Scheme IR -> C99 kernel (NAME.c) and header (NAME.h).

The printer is a sympy C99CodePrinter subclass with one `_print_<Class>` per
construct the IR uses; precision is a sympy type alias, so the same printer
writes `fabs`/`0.5` for double and `fabsf`/`0.5F` for float. Everything else
(loop structure, halos, stage updates) comes from the back-end neutral plan.
"""
from __future__ import annotations

import textwrap
from dataclasses import dataclass

import sympy
from sympy.codegen.ast import float32, float64, real
from sympy.printing.c import C99CodePrinter

from ..constants import nearest, shortest_text
from ..ir import Scheme
from ..symbols import C, R, LimiterApplication, limiter_name_of, offset_of, q
from ..upwind import both_cells
from .environment import render
from .printing import PlanPrinting, break_after_commas, check_precision
from .limited import FLOOR_EXPONENT, LimiterFormCall
from .fct_plan import CELLS, FluxStep, element_of
from .plan import (C_FUNCTIONS, EULER, REGISTERS, STAGE_BUFFERS, FaceProgram,
                   KernelPlan, StageStep, banner_lines, clamp, exported_symbols, plan_kernel,
                   print_stage_sum, stage_steps, step_calls, workspace_layout)
from .workspace import Affine, print_affine
from .sweep import c_sweep_context

PRECISIONS = {"double": float64, "float": float32}
FLUX_BLOCK = 128
"""Faces per block: fluxes of one block live in workspace (L1-sized) and are computed once.
Small blocks interleave the scan, flux and update loops finely enough that memory
traffic and arithmetic overlap: at 10^6-10^7 cells 128 ran about 1.5x faster than 512
(`fluxloom bench`), and no slower from cache."""
FLUX_SCRATCH = Affine(blocks=1, constant=1)
"""The face fluxes a stage keeps in workspace: one block's and its left face
(compiler/emit/plan.py: workspace_layout)."""


class KernelPrinter(PlanPrinting, C99CodePrinter):
    """Prints IR expressions as C for one scheme at one precision.

    User names never print as themselves: params are the header's macros
    NAME_PARAM_p and limiters the functions NAME_limiter_f, found by class
    (ParamSymbol, LimiterApplication), so no name can take another's meaning.
    Every constant prints as one literal of the kernel's precision, rounded once
    (compiler/constants.py). User text reaches C only through `escape_text`.
    """

    printmethod = "_fluxloom_c"

    def __init__(self, plan: KernelPlan, precision: str = "double"):
        check_precision(precision)
        # order "none": terms as sympy holds them, as the numpy printer prints them, so
        # both back ends round in the same order
        super().__init__({"type_aliases": {real: PRECISIONS[precision]}, "strict": True,
                          "order": "none"})
        self.plan = plan
        self.precision = precision
        self.ctype = "float" if precision == "float" else "double"
        self.limiter_names = {lim.name for lim in plan.limiters}
        self.helpers_used: set[str] = set()
        self.renames: dict = {}
        self.loop_index = "j"   # the index an FCT step's loop runs over

    # -- user text ---------------------------------------------------------
    @staticmethod
    def escape_text(text: str) -> str:
        """Any string as text that is inert both inside a C comment and between the
        quotes of a C string literal (the literal's value is the text's UTF-8).

        Printable characters stay as they are, except that a backslash and a quote
        are escaped, '/' after '*' and '*' after '/' become octal escapes (no comment
        can end or begin), and a '?' after '?' is escaped (no trigraph). Everything
        else (control characters, NUL, line and paragraph separators, format
        characters, lone surrogates) becomes octal escapes of its UTF-8 bytes.
        """
        out: list[str] = []
        previous = ""
        for ch in text:
            if ch == "\\":
                piece = "\\\\"
            elif ch == '"':
                piece = '\\"'
            elif ch == "/" and previous == "*":
                piece = "\\057"
            elif ch == "*" and previous == "/":
                piece = "\\052"
            elif ch == "?" and previous == "?":
                piece = "\\?"
            elif " " <= ch <= "~" or (ord(ch) >= 0xA0 and ch.isprintable()):
                piece = ch
            else:
                piece = "".join(f"\\{b:03o}" for b in ch.encode("utf-8", "surrogatepass"))
            out.append(piece)
            previous = ch
        return "".join(out)

    # -- names and numbers -------------------------------------------------
    def _print(self, expr, **kwargs):
        if isinstance(expr, sympy.Expr) and expr.is_number:
            return self.real_literal(expr)
        # sympy dispatches a function subclass by its own name only: route these here
        if isinstance(expr, LimiterApplication):
            return self._print_LimiterApplication(expr)
        if isinstance(expr, LimiterFormCall):
            return self._print_LimiterFormCall(expr)
        return super()._print(expr, **kwargs)

    def real_literal(self, value: sympy.Expr) -> str:
        """The constant rounded once to the kernel's precision, as a C literal."""
        text = shortest_text(nearest(value, self.precision), self.precision)
        return text + "F" if self.precision == "float" else text

    def _print_ParamSymbol(self, expr):
        if expr in self.renames:
            return self._print(self.renames[expr])
        return f"{self.plan.name}_PARAM_{expr.name}"

    def _print_Symbol(self, expr):
        if expr in self.renames:
            return self._print(self.renames[expr])
        if expr == C:
            return "c"
        if expr == R:
            return "r"
        if offset_of(expr) is not None:
            return expr.name
        return super()._print_Symbol(expr)

    def helper(self, name: str) -> str:
        self.helpers_used.add(name)
        return f"{self.plan.name}_{name}"

    def _call(self, name: str, *args) -> str:
        return f"{self.helper(name)}({', '.join(self._print(a) for a in args)})"

    # -- constructs of the language ------------------------------------------
    def _print_Ratio(self, expr):
        return self._call("ratio", *expr.args)

    def _print_LimiterFormCall(self, expr) -> str:
        form = type(expr)
        return (f"{self.plan.name}_{form.kind}_{form.limiter_name}"
                f"({', '.join(self._print(a) for a in expr.args)})")

    def _print_Quotient(self, expr):
        return f"({self._print(expr.args[0])})/({self._print(expr.args[1])})"

    def _print_NonzeroOr(self, expr):
        b, x = expr.args
        return f"({self._print(b)} != 0 ? {self._print(x)} : {self.real_literal(sympy.Integer(0))})"

    def _print_UnitSign(self, expr):
        suffix = "f" if self.precision == "float" else ""
        return f"copysign{suffix}({self.real_literal(sympy.Integer(1))}, {self._print(expr.args[0])})"

    def _print_ParamBound(self, expr):
        return self.real_literal(sympy.Integer(2) ** expr.exponent(self.precision))

    def _print_ScaleDown(self, expr):
        return self._call("scale_down", *expr.args)

    def _print_ScaleUp(self, expr):
        return self._call("scale_up", *expr.args)

    def _print_RatioFloor(self, expr):
        return self.real_literal(sympy.Rational(1, 2 ** FLOOR_EXPONENT[self.precision]))

    def _print_LimiterApplication(self, expr):
        name = limiter_name_of(expr)
        if name not in self.limiter_names:
            raise AssertionError(f"limiter {name} is called but not in the plan")
        return f"{self.plan.name}_limiter_{name}({', '.join(self._print(a) for a in expr.args)})"

    def _print_Indexed(self, expr):
        """An FCT plan element: the array (a pointer at its index 0) at the loop's index."""
        array, shift = element_of(expr)
        return f"{array}[{offset_text(self.loop_index, shift)}]"

    def _print_Share(self, expr):
        return self._call("share", *expr.args)

    def _print_Piecewise(self, expr):
        """Nested selects on one line, c0 ? e0 : (c1 ? e1 : e2) (the plan's clamp)."""
        *pieces, (otherwise, _) = expr.args
        text = self._operand(otherwise)
        for depth, (value, condition) in enumerate(reversed(pieces)):
            rest = f"({text})" if depth else text
            text = (f"{self._operand(condition.lhs)} {condition.rel_op} "
                    f"{self._operand(condition.rhs)} ? {self._operand(value)} : {rest}")
        return text

    def _operand(self, expr) -> str:
        text = self._print(expr)
        return f"({text})" if text.startswith("-") else text

    def _print_Min(self, expr):
        return self._fold("min", expr.args)

    def _print_Max(self, expr):
        return self._fold("max", expr.args)

    def _fold(self, name: str, args) -> str:
        # Ternary helpers instead of fmin/fmax: those are library calls without
        # -ffinite-math-only and block vectorisation.
        return self.fold(self.helper(name), args)

    def _print_sign(self, expr):
        return self._call("sign", expr.args[0])

    def _print_Pow(self, expr):
        count = self.small_power(expr)
        if count:
            product = self.repeated_product(expr.base, count)
            if expr.exp > 0:
                return f"({product})"
            return f"{self._print(sympy.Integer(1))}/({product})"
        return super()._print_Pow(expr)


# ---- source assembly -------------------------------------------------------

def print_program(printer: KernelPrinter, program: FaceProgram) -> tuple[tuple[str, ...], str]:
    def line(sym, value):
        return f"const {printer.ctype} {printer._print(sym)} = {printer._print(value)};"

    lines = tuple(line(sym, value) for sym, value in program.scaling)
    with printer.reading(dict(program.renames)):
        lines += tuple(line(sym, value) for sym, value in program.temporaries)
        return lines, printer._print(program.result)


@dataclass(frozen=True)
class FluxFunction:
    """One face function (high or low order) and its block loop, ready for the template."""

    suffix: str
    parameters: str               # C parameter list of the face function
    statements: tuple[str, ...]
    result: str
    guard_c: bool
    uses_c: bool
    loads: tuple[tuple[str, int, int], ...]   # (variable, offset if u >= 0, offset if u < 0)


def flux_function(printer: KernelPrinter, program: FaceProgram, suffix: str) -> FluxFunction:
    statements, result = print_program(printer, program)
    names = [printer._print(q(k)) for k in program.offsets]
    params = [f"{printer.ctype} {n}" for n in names]
    if program.uses_c:
        params.append(f"{printer.ctype} c")
    loads = tuple((n, *both_cells(k)) for n, k in zip(names, program.offsets))
    return FluxFunction(suffix, ", ".join(params) or "void", statements, result,
                        program.guard_c, program.uses_c, loads)


def real_literal(printer: KernelPrinter, value: sympy.Expr) -> str:
    """A real constant as a C literal of the kernel's precision (1.0, 0.33333334F)."""
    text = printer.real_literal(value)
    return f"({text})" if text.startswith("-") else text


def _coefficient(printer: KernelPrinter, value: sympy.Expr) -> str:
    return real_literal(printer, value)


def register_name(k: int) -> str:
    """The C name of time-stepping register k (compiler/time_methods/low_storage.py)."""
    return f"acc{k}"


@dataclass(frozen=True)
class StageCode:
    """One stage update in C: copies of registers it overwrites but still reads,
    the expression for q_out[j], and the register writes after it."""

    saves: tuple[str, ...]
    out: str
    writes: tuple[tuple[str, str], ...]


def stage_expression(printer: KernelPrinter, step: StageStep) -> StageCode:
    """C for one stage update (out, then register writes, as the plan orders them)."""
    def operand(name) -> str:
        if name == EULER:
            return "(state[j] - dq)"
        if isinstance(name, tuple):
            kind, k = name
            return f"{register_name(k)}_old" if kind == "saved" else f"{register_name(k)}[j]"
        return {"start": "start[j]", "state": "state[j]"}[name]

    def combo(total) -> str:
        return print_stage_sum(total, operand, lambda value: _coefficient(printer, value))

    saves = tuple(f"const {printer.ctype} {register_name(k)}_old = {register_name(k)}[j];"
                  for k in step.saved)
    writes = tuple((f"{register_name(k)}[j]", combo(c)) for k, c in step.writes)
    return StageCode(saves, combo(step.out), writes)


def weighted_stage_expression(printer: KernelPrinter, step: StageStep, prefix: str) -> StageCode:
    """One stage update of a thickness-weighted sweep: the same combination applied to
    the mass h q (prefix "m_", increment m_dq) or to the thickness (prefix "h_",
    increment h_dq, the mass fluxes' own), each with its own start, state and registers."""
    def operand(name) -> str:
        if name == EULER:
            return f"({prefix}state[j] - {prefix}dq)"
        if isinstance(name, tuple):
            kind, k = name
            register = f"{prefix}{register_name(k)}"
            return f"{register}_old" if kind == "saved" else f"{register}[j]"
        return f"{prefix}{name}[j]"

    def combo(total) -> str:
        return print_stage_sum(total, operand, lambda value: _coefficient(printer, value),
                               f"{prefix}dq")

    saves = tuple(f"const {printer.ctype} {prefix}{register_name(k)}_old = "
                  f"{prefix}{register_name(k)}[j];" for k in step.saved)
    writes = tuple((f"{prefix}{register_name(k)}[j]", combo(c)) for k, c in step.writes)
    return StageCode(saves, combo(step.out), writes)


def block_signature(ctype: str, plan: KernelPlan, uses_start: bool):
    """Parameter list of the per-block function and the matching call (m as '@M')."""
    entries = []
    if plan.stages > 1:
        entries.append(("int stage", "stage"))
    entries.append(("size_t m", "@M"))
    if uses_start:
        entries.append((f"const {ctype} *restrict start", "q_start + halo + b"))
    entries.append((f"const {ctype} *restrict state", "q_stage + halo + b"))
    entries.append((f"{ctype} *restrict out", "q_out + halo + b"))
    for k in range(plan.registers):
        entries.append((f"{ctype} *restrict {register_name(k)}",
                        "registers + b" if k == 0 else f"registers + {k} * n + b"))
    entries.append((f"const {ctype} *restrict u", "u_face + b + 1"))
    entries.append((f"{ctype} dt_dx", "dt_dx"))
    entries.append((f"{ctype} *restrict flux", "flux"))
    return [p for p, _ in entries], [a for _, a in entries]


def wrap_list(items, first_column: int, indent: int, width: int = 96) -> str:
    """Comma-separated items, broken onto lines indented by `indent` past `width`."""
    lines, current, column = [], [], first_column
    for item in items:
        piece = item + ", "
        if current and column + len(piece) > width:
            lines.append(", ".join(current) + ",")
            current, column = [], indent
        current.append(item)
        column += len(piece)
    lines.append(", ".join(current))
    return ("\n" + " " * indent).join(lines)


def scale_words(printer: KernelPrinter) -> dict[str, str]:
    """Constants of the scale helpers: the least normal real 2^(1 - bias), the
    exponent field's mask, and the word of 2^bias whose difference with an exponent
    field e is the word of 2^(bias - e)."""
    mantissa, bias = (23, 127) if printer.precision == "float" else (52, 1023)
    return {
        "half": printer.real_literal(sympy.Rational(1, 2)),
        "scale_low": printer.real_literal(sympy.Rational(1, 2 ** (bias - 1))),
        "exponent_mask": f"0x{((2 * bias + 1) << mantissa):x}u",
        "scale_down_word": f"0x{((2 * bias) << mantissa):x}u",
    }


def offset_text(base: str, shift: int) -> str:
    """base + shift as C: `j`, `j + 1`, `q - 3`."""
    if shift == 0:
        return base
    return f"{base} + {shift}" if shift > 0 else f"{base} - {-shift}"


def comment(text: str, width: int = 88) -> list[str]:
    """A comment's text as lines (the template adds the markers)."""
    return textwrap.wrap(text, width, break_long_words=False, break_on_hyphens=False)


def c_size(value: Affine, name: str) -> str:
    """A workspace size or offset as a C size_t expression."""
    return print_affine(value, "n", f"(size_t){name}_HALO", f"{name}_FLUX_BLOCK")


def fct_code(printer: KernelPrinter, plan: KernelPlan, fluxes) -> dict:
    """The FCT plan's steps as C: pointers at each work array's index 0, then one loop
    (signed index) or one call of the flux function per step."""
    fct = plan.fct_steps
    layout = workspace_layout(plan, FLUX_SCRATCH)
    pointers = []
    for array in fct.work:
        start = layout.offset(array.name) + Affine(constant=-array.span.first)
        pointers.append({"name": array.name, "offset": c_size(start, plan.name),
                         "about": comment(f"{array.name}: {array.about}, {array.span.kind} "
                                          f"{array.span.first} .. "
                                          f"{print_affine(Affine(cells=1, constant=array.span.last))}")})
    steps = []
    for step in fct.steps:
        first, last = step.span.first, step.span.last
        if isinstance(step, FluxStep):
            flux = fluxes[1] if step.low_order else fluxes[0]
            arguments = [print_affine(step.span.count), offset_text("q", first - 1),
                         offset_text("u_face", first)]
            if flux.uses_c:
                arguments.append("dt_dx")
            arguments.append(offset_text(step.target, first))
            steps.append({"about": comment(step.about),
                          "call": f"{plan.name}_fluxes{flux.suffix}({', '.join(arguments)});"})
            continue
        index = "j" if step.span.kind == CELLS else "f"
        printer.loop_index = index
        body = [f"const {printer.ctype} {printer._print(sym)} = {printer._print(value)};"
                for sym, value in step.temporaries]
        body += [f"{target}[{index}] = {printer._print(value)};" for target, value in step.writes]
        body = [line for statement in body for line in break_after_commas(statement)]
        steps.append({"about": comment(step.about), "call": None, "index": index, "first": str(first),
                      "last": offset_text("(ptrdiff_t)n", last), "body": body})
    printer.loop_index = "j"
    printer.helpers_used.update(("min", "max"))
    return {"pointers": pointers, "steps": steps}


def workspace_code(plan: KernelPlan) -> dict:
    """workspace_size and the pointers a whole step takes from the work array."""
    layout = workspace_layout(plan, FLUX_SCRATCH)
    buffers = [{"name": b, "offset": c_size(layout.offset(b), plan.name)}
               for b in STAGE_BUFFERS if layout.has(b)]
    return {"size": c_size(layout.size, plan.name),
            "uses_n": layout.size.cells != 0,
            "regions": [{"name": r.name, "about": r.about,
                         "size": (f"{r.count} * " if r.count > 1 else "")
                         + c_size(r.size, plan.name)} for r in layout.regions],
            "registers": (c_size(layout.offset(REGISTERS), plan.name)
                          if layout.has(REGISTERS) else None),
            "buffers": buffers}


def c_context(scheme: Scheme, precision: str = "double", verdicts=(),
              openmp: bool = False) -> dict:
    """Everything the C templates need, printed."""
    plan = plan_kernel(scheme)
    printer = KernelPrinter(plan, precision)
    fluxes = [flux_function(printer, plan.flux, "")]
    if plan.low_flux is not None:
        fluxes.append(flux_function(printer, plan.low_flux, "_low"))
    limiters = []
    for lim in plan.limiters:
        statements, result = print_program(printer, lim.program)
        arguments = ("r", "c") if scheme.limiter(lim.name).courant else ("r",)
        limiters.append({"name": lim.name, "label": printer.escape_text(lim.name),
                         "statements": statements, "result": result,
                         "arguments": ", ".join(arguments),
                         "parameters": ", ".join(f"{printer.ctype} {a}" for a in arguments)})
    forms = []
    for form in plan.limiter_forms:
        statements, result = print_program(printer, form.program)
        arguments = ("a", "b", "c") if form.courant else ("a", "b")
        forms.append({"function": f"{plan.name}_{form.kind}_{form.name}", "kind": form.kind,
                      "label": printer.escape_text(form.name), "statements": statements,
                      "result": result,
                      "parameters": ", ".join(f"{printer.ctype} {a}" for a in arguments)})
    stages = []
    for s, step in enumerate(stage_steps(plan)):
        code = stage_expression(printer, step)
        weighted = [weighted_stage_expression(printer, step, prefix) for prefix in ("m_", "h_")]
        stages.append({"index": s, "out": code.out, "saves": code.saves, "writes": code.writes,
                       "clip": plan.clip is not None and s == plan.stages - 1,
                       "weighted": [{"out": w.out, "saves": w.saves, "writes": w.writes}
                                    for w in weighted]})
    uses_start = plan.uses_start
    parameters, arguments = block_signature(printer.ctype, plan, uses_start)
    block_parameters = wrap_list(parameters, len(f"{plan.name}_INLINE void {plan.name}_block("), 8)
    block_full = wrap_list([a.replace("@M", f"{plan.name}_FLUX_BLOCK") for a in arguments],
                           12 + len(f"{plan.name}_block("), 16)
    block_last = wrap_list([a.replace("@M", "n - b") for a in arguments],
                           12 + len(f"{plan.name}_block("), 16)
    clip = None
    if plan.clip is not None:
        clip = tuple(real_literal(printer, v) for v in plan.clip)
    params = [{"name": name, "value": printer.real_literal(value)} for name, value in plan.params]
    fct = fct_code(printer, plan, fluxes) if plan.fct else None
    helpers = sorted(printer.helpers_used)
    return {
        "plan": plan,
        "name": plan.name,
        "real": printer.ctype,
        "precision": precision,
        "fabs": "fabsf" if precision == "float" else "fabs",
        "huge": "HUGE_VALF" if precision == "float" else "HUGE_VAL",
        "bits": "uint32_t" if precision == "float" else "uint64_t",
        "sign_shift": 31 if precision == "float" else 63,
        "one": printer.real_literal(sympy.Integer(1)),
        "zero": printer.real_literal(sympy.Integer(0)),
        "banner": tuple(printer.escape_text(line) for line in banner_lines(scheme, precision,
                                                                          verdicts)),
        "scheme_literal": printer.escape_text(plan.name),
        "symbols": exported_symbols(plan.name, precision, C_FUNCTIONS),
        "params": params,
        "helpers": helpers,
        "limiters": limiters,
        "forms": forms,
        "fluxes": fluxes,
        **scale_words(printer),
        "stages": stages,
        "uses_start": uses_start,
        "block_parameters": block_parameters,
        "block_full_block": block_full,
        "block_last_block": block_last,
        "registers": plan.registers,
        # reals the registers take in workspace, as C
        "register_reals": "" if not plan.registers else ("n" if plan.registers == 1
                                                         else f"{plan.registers} * n"),
        "stage_calls": step_calls(plan),
        "workspace": workspace_code(plan),
        "fct": fct,
        "clip": clip,
        "clamped": None if plan.clip is None else printer._print(clamp(plan.clip)),
        "block": FLUX_BLOCK,
        # continuation lines of the two long prototypes line up under "("
        "stage_indent": " " * len(f"void {plan.name}_stage("),
        "step_indent": " " * len(f"void {plan.name}_step("),
        **c_sweep_context(plan, fluxes, openmp, FLUX_BLOCK),
    }


def c_sources(scheme: Scheme, precision: str = "double", verdicts=(),
              openmp: bool = False) -> dict[str, str]:
    """{'NAME.h': header text, 'NAME.c': kernel text} for scheme at precision.

    verdicts: the analysis verdicts as lines for the header comment (given by the caller);
    openmp=True makes the C file require OpenMP (its sweeps are threaded).
    """
    context = c_context(scheme, precision, verdicts, openmp)
    return {
        f"{scheme.name}.h": render("c_header.h.j2", **context),
        f"{scheme.name}.c": render("c_kernel.c.j2", **context),
    }


def files(scheme: Scheme, precision: str = "double", verdicts=(),
          openmp: bool = False) -> dict[str, str]:
    """{'NAME.h', 'NAME.c'} (the target registry's entry point)."""
    return c_sources(scheme, precision, verdicts, openmp)


def c_declarations(scheme: Scheme, precision: str = "double") -> str:
    """The header's declarations in the form cffi's cdef accepts."""
    context = c_context(scheme, precision)
    return render("c_cdef.h.j2", **context)


PRINTER = KernelPrinter
"""The target's printer (the registry reads it: compiler/emit/targets.py)."""
