"""Scheme IR -> a native Fortran 2008 kernel module (NAME_kernel.f90): no C compiler needed.

The module `NAME_kernel` has the C kernel's contract (NAME_workspace_size,
NAME_fill_periodic, NAME_stage, NAME_step, the halos and params) as module
procedures that also carry the C header's symbols (bind(C)), so a Fortran model
uses the module and a C host or cffi can call the same library. NAME_sweep has
the Fortran interface's sweep contract (natural indexing; templates
fortran_kernel_sweep*.f90.j2) and is exported as the C NAME_sweep too. Reals are
real64 or real32 (iso_fortran_env). The expressions are printed from the same
plan as every other target by a sympy FCodePrinter subclass; the per-face loop
and the flux correction follow the C kernel operation by operation, so both
agree to a few units in the last place.

gfortran compiles it with -std=f2008 -Wall -Wextra -Werror, which forbids
comparing reals with == or /=: "x /= 0" is written `loom_nonzero(x)`,
.not. (x >= 0 .and. x <= 0), true for NaN as x /= 0 is.
"""
from __future__ import annotations

from dataclasses import dataclass

import sympy
from sympy.printing.fortran import FCodePrinter

from ..constants import nearest, shortest_text
from ..ir import Scheme
from ..symbols import C, R, LimiterApplication, limiter_name_of, q
from ..upwind import both_cells
from .c import FLUX_BLOCK
from .c import FLUX_SCRATCH as C_FLUX_SCRATCH
from .environment import render
from .fortran import ConstantPrinter, comment_lines, fortran_identifier
from .limited import FLOOR_EXPONENT, LimiterFormCall
from .printing import PlanPrinting, check_precision
from .fct_plan import CELLS, FluxStep, element_of
from .plan import (C_FUNCTIONS, EULER, FLUX_REGION, REGISTERS, STAGE_BUFFERS, FaceProgram,
                   StageSum, banner_lines, clamp, exported_symbols, plan_kernel,
                   print_stage_sum, stage_buffers, stage_steps, step_calls, workspace_layout)
from .sweep import SWEEP_LINES, sweep_direct
from .workspace import Affine, print_affine

KINDS = {"double": "real64", "float": "real32"}
C_KINDS = {"double": "c_double", "float": "c_float"}
COMPILE = ("gfortran", "-std=f2008", "-O2", "-fPIC", "-shared")
"""How the in-process loader builds the module (runtime/build.py: compile_shared)."""
SOURCE_SUFFIX = ".f90"
OPENMP = "-fopenmp"
"""Added to COMPILE when the loader is asked for OpenMP (load_kernel(..., openmp=True));
without it the module's !$omp lines are comments and its sweeps run on one thread."""
SWEEPS = True
"""The module exports NAME_sweep and NAME_sweep_edges under the C header's symbols too,
with the C sweep's features (runtime/kernel.py loads them as Kernel.sweep)."""
FLUX_SCRATCH = Affine(cells=1, constant=1)
"""The face fluxes a stage keeps in workspace: all n + 1 of the line
(compiler/emit/plan.py: workspace_layout)."""


class FortranKernelPrinter(PlanPrinting, FCodePrinter):
    """IR expressions as Fortran 2008 of kind rk, one scheme at one precision.

    Params print as the module's NAME_param_p, limiters as NAME_limiter_f, found by
    class; every constant as one literal of kind rk rounded once to the kernel's
    precision. User text reaches the file only through `escape_text`, the Fortran
    interface's (compiler/emit/fortran.py): both write Fortran comments.
    """

    printmethod = "_fluxloom_fortran_kernel"
    escape_text = staticmethod(ConstantPrinter.escape_text)

    def __init__(self, name: str, limiter_names, precision: str = "double"):
        check_precision(precision)
        super().__init__({"standard": 2008, "source_format": "free", "strict": True,
                          "order": "none"})
        self.name = name
        self.precision = precision
        self.limiter_names = frozenset(limiter_names)
        self.renames: dict = {}
        self.helpers_used: set[str] = set()
        self.loop_index = "j"   # the index an FCT step's loop runs over

    def helper(self, name: str) -> str:
        self.helpers_used.add(name)
        if name == "ratio":
            self.helpers_used.add("nonzero")
        return f"loom_{name}"

    def real_literal(self, value) -> str:
        text = f"{shortest_text(nearest(sympy.sympify(value), self.precision), self.precision)}_rk"
        return f"({text})" if text.startswith("-") else text

    def _print(self, expr, **kwargs):
        if isinstance(expr, sympy.Expr) and expr.is_number:
            return self.real_literal(expr)
        if isinstance(expr, LimiterApplication):
            return self._print_LimiterApplication(expr)
        if isinstance(expr, LimiterFormCall):
            form = type(expr)
            return (f"{form.kind}_{form.limiter_name}"
                    f"({', '.join(self._print(a) for a in expr.args)})")
        return super()._print(expr, **kwargs)

    def _print_ParamSymbol(self, expr):
        if expr in self.renames:
            return self._print(self.renames[expr])
        return f"{self.name}_param_{expr.name}"

    def _print_Symbol(self, expr):
        if expr in self.renames:
            return self._print(self.renames[expr])
        if expr == C:
            return "c"
        if expr == R:
            return "r"
        return expr.name

    def _print_LimiterApplication(self, expr):
        name = limiter_name_of(expr)
        if name not in self.limiter_names:
            raise AssertionError(f"limiter {name} is called but not in the plan")
        return f"limiter_{name}({', '.join(self._print(a) for a in expr.args)})"

    def _print_Indexed(self, expr):
        """An FCT plan element at the loop's index: the caller's q arrays hold interior cell
        j at q(j + 1); every other array is declared with the plan's own bounds."""
        array, shift = element_of(expr)
        shift += 1 if array in ("q", "q_out") else 0
        return f"{array}({index_text(self.loop_index, shift)})"

    def _print_Share(self, expr):
        return f"{self.helper('share')}({self._print(expr.args[0])}, {self._print(expr.args[1])})"

    def _print_Ratio(self, expr):
        return f"{self.helper('ratio')}({self._print(expr.args[0])}, {self._print(expr.args[1])})"

    def _print_Quotient(self, expr):
        return f"({self._print(expr.args[0])})/({self._print(expr.args[1])})"

    def _print_NonzeroOr(self, expr):
        b, x = expr.args
        return (f"merge({self._print(x)}, {self.real_literal(0)}, "
                f"{self.helper('nonzero')}({self._print(b)}))")

    def _print_UnitSign(self, expr):
        return f"sign({self.real_literal(1)}, {self._print(expr.args[0])})"

    def _print_ParamBound(self, expr):
        return self.real_literal(sympy.Integer(2) ** expr.exponent(self.precision))

    def _print_ScaleDown(self, expr):
        return f"{self.helper('scale_down')}({self._print(expr.args[0])})"

    def _print_ScaleUp(self, expr):
        return f"{self.helper('scale_up')}({self._print(expr.args[0])})"

    def _print_RatioFloor(self, expr):
        return self.real_literal(sympy.Rational(1, 2 ** FLOOR_EXPONENT[self.precision]))

    def _print_Min(self, expr):
        return self._fold("min", expr.args)

    def _print_Max(self, expr):
        return self._fold("max", expr.args)

    def _fold(self, name: str, args) -> str:
        return self.fold(name, args)  # nested pairs in the C kernel's order

    def _print_Abs(self, expr):
        return f"abs({self._print(expr.args[0])})"

    def _print_sign(self, expr):
        return f"{self.helper('sign')}({self._print(expr.args[0])})"

    def _print_Pow(self, expr, rational=False):
        base, exp = expr.base, expr.exp
        if exp == sympy.S.Half:
            return f"sqrt({self._print(base)})"
        count = self.small_power(expr)
        if count:
            product = self.repeated_product(base, count)
            return f"({product})" if exp > 0 else f"{self.real_literal(1)}/({product})"
        return super()._print_Pow(expr)

    def wrap(self, line: str) -> tuple[str, ...]:
        """A statement broken into free-form lines (continued with &) of at most 72 columns."""
        return tuple(self._wrap_fortran([line]))


# ---- what the template receives ---------------------------------------------------

@dataclass(frozen=True)
class Function:
    """An elemental function: its name, dummy arguments, locals, statements, result."""

    name: str
    arguments: str
    locals: tuple[str, ...]
    statements: tuple[str, ...]
    comment: str


@dataclass(frozen=True)
class FluxLoop:
    """The flux of every face first..last of one face function (high or low order)."""

    suffix: str
    uses_c: bool
    forward: tuple[str, ...]     # the call, u >= 0 (lines)
    backward: tuple[str, ...]    # the call, u < 0 (lines)


def _function(printer: FortranKernelPrinter, name: str, arguments, program: FaceProgram,
              comment: str) -> Function:
    names = [printer._print(sym) for sym, _ in program.scaling]
    statements = [f"{printer._print(sym)} = {printer._print(value)}"
                  for sym, value in program.scaling]
    with printer.reading(dict(program.renames)):
        names += [printer._print(sym) for sym, _ in program.temporaries]
        statements += [f"{printer._print(sym)} = {printer._print(value)}"
                       for sym, value in program.temporaries]
        statements.append(f"y = {printer._print(program.result)}")
    locals_ = printer.wrap(f"real(rk) :: {', '.join(names)}") if names else ()
    lines = tuple(line for s in statements for line in printer.wrap(s))
    return Function(name, ", ".join(arguments), locals_, lines, comment)


def _flux_loop(printer: FortranKernelPrinter, name: str, program: FaceProgram,
               suffix: str) -> tuple[Function, FluxLoop]:
    names = [printer._print(q(k)) for k in program.offsets]
    arguments = names + (["c"] if program.uses_c else [])
    function = _function(printer, f"face{suffix}", arguments, program,
                         f"g{suffix} of the face flux u * g in the upwind frame: q_0 the upwind "
                         "cell, q_1 the downwind cell" + (", c = |u| dt/dx" if program.uses_c
                                                          else ""))
    c_argument = ([f"merge(c, 1.0_rk, {printer.helper('nonzero')}(c))" if program.guard_c else "c"]
                  if program.uses_c else [])

    def call(forward: bool) -> tuple[str, ...]:
        cells = [both_cells(k)[0 if forward else 1] for k in program.offsets]
        loads = [f"q(i + {cell})" if cell > 0 else (f"q(i - {-cell})" if cell < 0 else "q(i)")
                 for cell in cells]
        return printer.wrap(f"flux(i) = u * face{suffix}({', '.join(loads + c_argument)})")

    return function, FluxLoop(suffix, program.uses_c, call(True), call(False))


def index_text(base: str, shift: int) -> str:
    """base + shift as Fortran: `j`, `j + 1`, `f - 1`."""
    if shift == 0:
        return base
    return f"{base} + {shift}" if shift > 0 else f"{base} - {-shift}"


def fortran_size(value: Affine) -> str:
    """A workspace size or offset as Fortran (nh the module's ghost cells)."""
    return print_affine(value, "n", "nh", "block")


def work_section(layout, name: str) -> str:
    """The section of work holding region `name` (work is work(1:...))."""
    start = layout.offset(name)
    return (f"work({fortran_size(start + Affine(constant=1))}:"
            f"{fortran_size(start + layout.region(name).total)})")


def _comment(text: str) -> tuple[str, ...]:
    import textwrap
    return tuple(textwrap.wrap(text, 80, break_long_words=False, break_on_hyphens=False))


def _first(value: int) -> str:
    return f"{value}_c_size_t" if value >= 0 else f"({value}_c_size_t)"


def fct_code(printer: FortranKernelPrinter, plan, loops) -> dict:
    """The FCT plan as Fortran: the work arrays (dummies with the plan's bounds), the
    temporaries, and each step as a call of the flux loop or a do loop."""
    fct = plan.fct_steps
    layout = workspace_layout(plan, FLUX_SCRATCH)
    arrays = [{"name": a.name, "about": a.about,
               "bounds": f"{a.span.first}:{index_text('n', a.span.last)}",
               "section": work_section(layout, a.name)} for a in fct.work]
    temporaries = []
    steps = []
    for step in fct.steps:
        first, last = step.span.first, index_text("n", step.span.last)
        if isinstance(step, FluxStep):
            loop = loops[1] if step.low_order else loops[0]
            dt = "dt_dx, " if loop.uses_c else ""
            call = (f"call fluxes{loop.suffix}({_first(first)}, {last}, n, q, u_face, {dt}"
                    f"{step.target}({first}:{last}))")
            steps.append({"about": _comment(step.about), "lines": printer.wrap(call),
                          "index": None})
            continue
        index = "j" if step.span.kind == CELLS else "f"
        printer.loop_index = index
        body = [f"{printer._print(sym)} = {printer._print(value)}"
                for sym, value in step.temporaries]
        temporaries += [printer._print(sym) for sym, _ in step.temporaries]
        body += [f"{target}({index_text(index, 1 if target == 'q_out' else 0)}) = "
                 f"{printer._print(value)}" for target, value in step.writes]
        steps.append({"about": _comment(step.about), "index": index, "first": str(first), "last": last,
                      "lines": tuple(line for statement in body
                                     for line in printer.wrap(statement))})
    printer.loop_index = "j"
    return {"arrays": arrays, "steps": steps,
            "temporaries": printer.wrap(f"real(rk) :: {', '.join(dict.fromkeys(temporaries))}")
            if temporaries else ()}


def _stage_text(printer: FortranKernelPrinter, total: StageSum) -> str:
    def operand(name) -> str:
        if name == EULER:
            return "(q_stage(j) - dq)"
        if isinstance(name, tuple):
            kind, k = name
            return f"acc{k}_old" if kind == "saved" else f"acc(j, {k + 1})"
        return {"start": "q_start(j)", "state": "q_stage(j)"}[name]

    return print_stage_sum(total, operand, printer.real_literal)


def fortran_kernel_context(scheme: Scheme, precision: str = "double", verdicts=()) -> dict:
    check_precision(precision)
    plan = plan_kernel(scheme)
    name = plan.name
    for suffix in ("_workspace_size", "_fill_periodic", "_stage", "_step", "_kernel",
                   "_sweep_work", "_sweep_badarg", "_sweep_refuse"):
        fortran_identifier(name + suffix)
    printer = FortranKernelPrinter(name, [lim.name for lim in plan.limiters], precision)
    functions = []
    for form in plan.limiter_forms:
        functions.append(_function(
            printer, f"{form.kind}_{form.name}", ("a", "b", "c") if form.courant
            else ("a", "b"), form.program,
            f"limiter {printer.escape_text(form.name)}: psi(ratio(a, b))"
            + (" * b" if form.kind == "slope" else "") + ", finite for all finite a and b"))
    for lim in plan.limiters:
        arguments = ("r", "c") if scheme.limiter(lim.name).courant else ("r",)
        functions.append(_function(printer, f"limiter_{lim.name}", arguments,
                                   lim.program, f"limiter {printer.escape_text(lim.name)}"
                                                f"({', '.join(arguments)})"))
    loops = []
    face, loop = _flux_loop(printer, name, plan.flux, "")
    functions.append(face)
    loops.append(loop)
    if plan.low_flux is not None:
        face, loop = _flux_loop(printer, name, plan.low_flux, "_low")
        functions.append(face)
        loops.append(loop)
    steps = stage_steps(plan)
    stages = [{"index": s, "saves": tuple(f"acc{k}_old = acc(j, {k + 1})" for k in step.saved),
               "out": printer.wrap(f"value = {_stage_text(printer, step.out)}"),
               "writes": tuple(line for k, c in step.writes
                               for line in printer.wrap(f"acc(j, {k + 1}) = "
                                                        f"{_stage_text(printer, c)}")),
               "clip": plan.clip is not None and s == plan.stages - 1}
              for s, step in enumerate(steps)]
    saved = sorted({k for step in steps for k in step.saved})
    clip = None if plan.clip is None else tuple(printer.real_literal(v) for v in plan.clip)
    params = [{"name": fortran_identifier(f"{name}_param_{p}"), "value": printer.real_literal(v)}
              for p, v in plan.params]
    buffers = stage_buffers(plan)
    banner = comment_lines(banner_lines(scheme, precision, verdicts))
    layout = workspace_layout(plan, FLUX_SCRATCH)
    workspace = {
        "size": fortran_size(layout.size),
        "regions": [f"{r.name}: {(str(r.count) + ' * ') if r.count > 1 else ''}"
                    f"{fortran_size(r.size)} reals, {r.about}" for r in layout.regions],
        "flux": work_section(layout, FLUX_REGION) if layout.has(FLUX_REGION) else None,
        "registers": work_section(layout, REGISTERS) if layout.has(REGISTERS) else None,
        "base": fortran_size(layout.offset(STAGE_BUFFERS[0])) if buffers else None,
    }
    fct = fct_code(printer, plan, loops) if plan.fct else None
    return {
        "name": name, "plan": plan, "symbols": exported_symbols(name, precision, C_FUNCTIONS), "kind": KINDS[precision], "c_kind": C_KINDS[precision], "banner": banner,
        "exchange": plan.exchange.lines, "params": params, "functions": functions,
        "loops": loops, "stages": stages, "saved": saved, "clip": clip,
        "clamped": None if plan.clip is None else printer._print(clamp(plan.clip)),
        "registers": plan.registers, "uses_start": plan.uses_start,
        "stage_buffers": buffers, "stage_calls": step_calls(plan),
        "workspace": workspace, "fct": fct,
        "helpers": sorted(printer.helpers_used),
        "sweep": fortran_sweep_context(plan, printer),
    }


def _weighted_text(printer: FortranKernelPrinter, total: StageSum, prefix: str) -> str:
    """A stage combination applied to the mass (prefix m_) or the thickness (h_) of a
    thickness-weighted sweep, each with its own start, state, registers and increment."""
    def operand(name) -> str:
        if name == EULER:
            return f"({prefix}stage(j) - {prefix}dq)"
        if isinstance(name, tuple):
            kind, k = name
            return f"{prefix}acc{k}_old" if kind == "saved" else f"{prefix}acc(j, {k + 1})"
        return {"start": f"{prefix}start(j)", "state": f"{prefix}stage(j)"}[name]

    return print_stage_sum(total, operand, printer.real_literal, f"{prefix}dq")


def _weighted_stage(printer: FortranKernelPrinter, plan, s: int, step) -> dict:
    """One stage of sweep_weighted_stage in the C sweep's order: saves, the mass, then
    (not last) the thickness, the next state and the tracer, or (last) the tracer over
    h_new; then the register writes."""
    last = s == plan.stages - 1
    statements = [f"{prefix}acc{k}_old = {prefix}acc(j, {k + 1})"
                  for prefix in ("m_", "h_") for k in step.saved]
    statements.append(f"m_value = {_weighted_text(printer, step.out, 'm_')}")
    if last:
        statements.append("value = m_value / h_new(j)")
        statements.append(f"q_out(j) = {printer._print(clamp(plan.clip)) if plan.clip else 'value'}")
    else:
        statements += [f"h_value = {_weighted_text(printer, step.out, 'h_')}",
                       "m_next(j) = m_value", "h_next(j) = h_value", "q_out(j) = m_value / h_value"]
    statements += [f"{prefix}acc(j, {k + 1}) = {_weighted_text(printer, c, prefix)}"
                   for prefix in ("m_", "h_") for k, c in step.writes]
    return {"index": s, "lines": tuple(line for statement in statements
                                       for line in printer.wrap(statement))}


def _weighted_calls(plan) -> list[dict]:
    """sweep_stages' calls of sweep_weighted_stage: the whole step's stage arrays (q) and
    the mass and thickness arrays beside them; the last stage, which writes no next
    mass or thickness, is handed the pair its state does not use."""
    pairs = {"q_in": ("m_start", "h_line(1:n)"), "stage_a": ("m_a", "h_a"),
             "stage_b": ("m_b", "h_b")}
    calls = []
    for call in step_calls(plan):
        m_state, h_state = pairs[call.source]
        spare = "stage_b" if call.source == "stage_a" else "stage_a"
        m_next, h_next = pairs[call.target if call.refresh else spare]
        calls.append({"stage": call.stage, "source": call.source, "target": call.target,
                      "refresh": call.refresh, "m_state": m_state, "h_state": h_state,
                      "m_next": m_next, "h_next": h_next})
    return calls


def _sweep_work(plan, printer: FortranKernelPrinter) -> tuple[str, ...]:
    """NAME_sweep_workspace_size as the C sweep counts it (compiler/emit/templates/
    c_sweep.c.j2; tests hold the two equal), so one array serves both: SWEEP_LINES lines
    (C copies that many neighbours of a strided axis together; this module takes one at
    a time) with their results, faces and thicknesses, a line's dt/dx, the inflow values,
    then the larger of the C
    step's workspace and the stages' own arrays (thickness weighted: mass and thickness of
    two stages and their registers). The stages' part holds this module's step workspace
    (n + 1 fluxes, the registers, two stage lines), which the sweep hands its step."""
    registers = plan.registers
    step = print_affine(workspace_layout(plan, C_FLUX_SCRATCH).size, "n", "nh", str(FLUX_BLOCK))
    stages = ("0_c_size_t" if plan.fct else
              f"2 * (n + 2 * nh) + 2 * (n + 1) + n + 2 + {registers} * n"
              f" + (5 + 2 * {registers}) * n")
    return printer.wrap(f"reals = {SWEEP_LINES} * (2 * (n + 2 * nh) + n + 1 + 2 * nfh + 2 * n + 2)"
                        f" + n + 2 + 2 * nh + max(int({step}, c_size_t), {stages})")


def fortran_sweep_context(plan, printer: FortranKernelPrinter) -> dict:
    """What fortran_kernel_sweep.f90.j2 needs beyond the kernel's context: the C sweep's
    choice of path (compiler/emit/sweep.py), its workspace count and, for multi-stage
    schemes, the thickness-weighted stages. `edges`: the path whose intermediate stages
    read the ends (multi-stage without flux correction); the argument lists the sweep's
    inner procedures pass along differ by path."""
    direct = sweep_direct(plan)
    edges = not direct and not plan.fct
    if direct:
        lines = call = ("thick, h_old, h_new", "thick, thick_old, thick_new")
        line, line_work = "thick, h_old, h_new", ""
    elif plan.fct:
        lines = call = ("work, reals", "work, reals")
        line, line_work = "", "work"
    else:
        lines = ("thick, h_old, h_new, kinds, inflow_low, inflow_high, work, reals",
                 "thick, thick_old, thick_new, kinds, values_low, values_high, work, reals")
        line, line_work = "thick, h_old, h_new, kinds, inflow_low, inflow_high, ", "work"
    weighted = ([_weighted_stage(printer, plan, s, step) for s, step in enumerate(stage_steps(plan))]
                if edges else [])
    return {"direct": direct, "edges": edges, "uses_c": plan.flux.uses_c,
            "stage_buffers": stage_buffers(plan),
            "work": () if direct else _sweep_work(plan, printer),
            "lines_arguments": lines[0], "lines_call": lines[1],
            "line_arguments": line, "line_work": line_work,
            "weighted_stages": weighted, "weighted_calls": _weighted_calls(plan) if edges else []}


def files(scheme: Scheme, precision: str = "double", verdicts=()) -> dict[str, str]:
    """{'NAME_kernel.f90': the module} (the target registry's entry point)."""
    context = fortran_kernel_context(scheme, precision, verdicts)
    return {f"{scheme.name}_kernel.f90": render("fortran_kernel.f90.j2", **context)}


PRINTER = FortranKernelPrinter
"""The target's printer (the registry reads it: compiler/emit/targets.py)."""
