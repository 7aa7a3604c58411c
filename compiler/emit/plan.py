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

FCT (`correct fct`, Zalesak 1979). The algorithm is data: `fct_steps`
(compiler/emit/fct_plan.py) orders its steps, gives each its span of faces or
cells and its expressions, and sizes the work arrays; every target prints it.
For the interior faces 0..n the corrected flux needs the limiter factors of cells
-1..n, which need the low-order solution on cells -2..n+1 and so F_low on faces
-2..n+2: an FCT step evaluates FCT_EXTRA_FACES = 2 extra faces on each side, whose
velocities the caller passes (`face_halo`: u_face then holds n + 1 + 2*2 values,
u_face[2 + i] is face i), and more ghost cells (`kernel_halo`).

Workspace. `workspace_layout(plan, flux_scratch)` names the regions of the
caller's work array with their sizes affine in n (compiler/emit/workspace.py);
each target prints its workspace_size and its pointers into work from it.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

import sympy

from ..ir import Scheme
from ..symbols import C, R, limiter_calls, limiter_name_of, offsets_in
from ..time_methods.low_storage import StageUpdate, low_storage_form
from .exchange import ExchangeSchedule
from .fct_plan import FCT_EXTRA_FACES, FctPlan, fct_plan
from .workspace import Affine, Region, WorkspaceLayout
from .limited import LimiterForm, safe_limiters
from .boundaries import KINDS as BOUNDARY_KINDS
from .scaled_face import scaled_face

PRECISION_TAGS = {"double": "f64", "float": "f32"}
EXPORTED_FUNCTIONS = ("workspace_size", "fill_periodic", "stage", "step")
"""The functions every compiled target exports. Their link symbols carry the precision
(`exported_symbol`); the C header maps the plain names onto them, so a host compiled
with a double header and linked with a float object fails to link."""


def exported_symbol(name: str, function: str, precision: str) -> str:
    """The link symbol of a kernel function: NAME_step_f64, NAME_workspace_size_f32, ..."""
    return f"{name}_{function}_{PRECISION_TAGS[precision]}"


C_FUNCTIONS = (EXPORTED_FUNCTIONS + ("sweep_workspace_size", "sweep_threads", "sweep", "sweep_edges")
               + tuple(f"halo_{kind}" for kind in BOUNDARY_KINDS) + ("faces_wall",))
"""What the C kernel exports besides EXPORTED_FUNCTIONS: the sweep over arrays and the
halo fill helpers (compiler/emit/boundaries.py), under precision-carrying symbols too."""


def exported_symbols(name: str, precision: str,
                     functions: tuple[str, ...] = EXPORTED_FUNCTIONS) -> dict[str, str]:
    """{plain name: link symbol} of every exported function."""
    return {f"{name}_{f}": exported_symbol(name, f, precision) for f in functions}


@dataclass(frozen=True)
class FaceProgram:
    """g as ordered temporaries and a result; evaluate top to bottom.

    A scaled face (compiler/emit/scaled_face.py) first computes `scaling` (scaled
    copies of the cells and params); the temporaries and the result are then printed
    with each symbol of `renames` read as its scaled copy, so they are the very
    operations of the face as written."""

    offsets: tuple[int, ...]
    temporaries: tuple[tuple[sympy.Symbol, sympy.Expr], ...]
    result: sympy.Expr
    uses_c: bool
    guard_c: bool
    scaling: tuple[tuple[sympy.Symbol, sympy.Expr], ...] = ()
    renames: tuple[tuple[sympy.Symbol, sympy.Symbol], ...] = ()


@dataclass(frozen=True)
class LimiterProgram:
    name: str
    program: FaceProgram  # in symbols.R


@dataclass(frozen=True)
class LimiterFormProgram:
    """A limiter evaluated from (a, b), overflow-safe (compiler/emit/limited.py)."""

    name: str
    kind: str             # "slope": psi(ratio(a, b)) * b; "psi": psi(ratio(a, b))
    program: FaceProgram  # in limited.A_ARG, limited.B_ARG (and symbols.C when courant)
    courant: bool = False  # a limiter of (r, c): the form takes c too


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
    limiter_forms: tuple[LimiterFormProgram, ...]
    stage_updates: tuple[StageUpdate, ...]   # derived from the time method's table
    registers: int      # arrays of n values kept in workspace from stage to stage
    uses_start: bool    # whether a stage reads q_start
    exchange: ExchangeSchedule  # what a decomposed host refreshes, how wide, when
    fct_steps: FctPlan | None = None  # flux correction as steps (compiler/emit/fct_plan.py)

    @property
    def offsets(self) -> tuple[int, ...]:
        found = set(self.flux.offsets)
        if self.low_flux is not None:
            found |= set(self.low_flux.offsets)
        return tuple(sorted(found))


def kernel_halo(scheme: Scheme) -> int:
    """Ghost cells per side the caller fills.

    FCT bounds each cell by its neighbours' low-order solution, which reads
    FCT_EXTRA_FACES more cells on each side than the fluxes alone.
    """
    if scheme.correct == "fct":
        return scheme.stencil_reach + FCT_EXTRA_FACES
    return scheme.stencil_reach


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


def scaled_program(scheme: Scheme, face: sympy.Expr) -> FaceProgram:
    """face_program, evaluated on scaled cell values where the face squares its data
    (compiler/emit/scaled_face.py); as written everywhere else."""
    found = scaled_face(face, offsets_in(face), scheme.param_values)
    if found is None:
        return face_program(face)
    steps, up, renames = found
    plain = face_program(face)
    scaled = sympy.Symbol("scaled_g", real=True)
    return FaceProgram(offsets=plain.offsets,
                       temporaries=plain.temporaries + ((scaled, plain.result),),
                       result=up * scaled, uses_c=plain.uses_c, guard_c=plain.guard_c,
                       scaling=steps, renames=tuple(renames.items()))


def limiters_used(scheme: Scheme, faces) -> tuple[str, ...]:
    """Limiters the kernel still calls in the plain form psi(r) (faces: the emitted g's)."""
    used = {limiter_name_of(call) for e in faces if e is not None
            for call in limiter_calls(e, scheme.limiter_names)}
    return tuple(name for name in scheme.limiter_names if name in used)


def form_program(form: LimiterForm) -> FaceProgram:
    """A limiter's (a, b) form as temporaries (its named steps, then sympy.cse) and a result."""
    names = sympy.numbered_symbols("s", real=True)
    temporaries, (result,) = sympy.cse([form.result], symbols=names, order="canonical")
    return FaceProgram(offsets=(), temporaries=tuple(form.steps) + tuple(temporaries),
                       result=result, uses_c=False, guard_c=False)


def plan_kernel(scheme: Scheme) -> KernelPlan:
    """The plan every back end renders for scheme."""
    fct = scheme.correct == "fct"
    stepping = low_storage_form(scheme.time)
    face, forms = safe_limiters(scheme, scheme.face)
    low_face = None
    if scheme.low_face is not None:
        low_face, low_forms = safe_limiters(scheme, scheme.low_face)
        forms = {**forms, **low_forms}
    limiters = tuple(LimiterProgram(name, face_program(scheme.limiter(name).body, "s"))
                     for name in limiters_used(scheme, (face, low_face)))
    limiter_forms = tuple(LimiterFormProgram(name, kind, form_program(forms[(name, kind)]),
                                             scheme.limiter(name).courant)
                          for name, kind in sorted(forms))
    low = scaled_program(scheme, low_face) if low_face is not None else None
    program = scaled_program(scheme, face)
    called = {lim.name for lim in limiters} | {name for name, _ in forms}
    if any(c_in_denominator(scheme.limiter(name).body) for name in sorted(called)):
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
        limiter_forms=limiter_forms,
        stage_updates=stepping.updates,
        registers=stepping.registers,
        uses_start=stepping.uses_start,
        exchange=ExchangeSchedule(kernel_halo(scheme), face_halo(scheme), len(stepping.updates),
                                  fct),
        fct_steps=fct_plan(None if scheme.clip is None else lambda value: clamp(scheme.clip, value))
        if fct else None,
    )


# ---- the clip step ---------------------------------------------------------------

CLIPPED = sympy.Symbol("value", real=True)
"""The value the clip step holds in [LO, HI] (each target names it `value`)."""


def clamp(clip, value: sympy.Expr = CLIPPED) -> sympy.Expr:
    """The clip step as one expression every target prints: LO where value < LO, HI where
    value > HI, else value (a NaN stays NaN)."""
    low, high = clip
    return sympy.Piecewise((low, value < low), (high, value > high), (value, True))


# ---- stage updates as sums the compiled kernels print -------------------------

EULER = "euler"
"""The operand state - dq: one forward-Euler step from the stage state."""


@dataclass(frozen=True)
class StageSum:
    """One combination of a stage update in the order compiled kernels evaluate it:
    sum of weight * operand, left to right, then `- rate * dq` where dq is
    dt/dx (F(j+1/2) - F(j-1/2)), so dt L(q) = -dq. Operands: "start", "state",
    EULER (state - dq, when the state's weight equals the rate's), ("register", k)
    and ("saved", k) (register k as it was before this stage overwrote it)."""

    terms: tuple[tuple[sympy.Expr, object], ...]
    rate: sympy.Expr


@dataclass(frozen=True)
class StageStep:
    """One stage: the registers to copy first, q_out's sum, then register writes."""

    saved: tuple[int, ...]
    out: StageSum
    writes: tuple[tuple[int, StageSum], ...]


def stage_sum(update: StageUpdate, combination) -> StageSum:
    def register(k: int):
        return ("saved", k) if k in update.saved else ("register", k)

    terms = [(coef, operand) for coef, operand in
             [(combination.start, "start"), (combination.stage, "state")] +
             [(w, register(k)) for k, w in combination.registers] if coef != 0]
    rate = combination.rate
    if rate != 0 and any(coef == rate and operand == "state" for coef, operand in terms):
        # stage + rate*dL with equal weights: one forward-Euler step, weighted
        terms = [(coef, EULER if operand == "state" else operand) for coef, operand in terms]
        rate = sympy.Integer(0)
    return StageSum(tuple(terms), rate)


def stage_steps(plan) -> tuple[StageStep, ...]:
    """Every stage of the plan's time method as sums (compiler/time_methods/low_storage.py)."""
    return tuple(StageStep(u.saved, stage_sum(u, u.out),
                           tuple((k, stage_sum(u, c)) for k, c in u.writes))
                 for u in plan.stage_updates)


def print_stage_sum(total: StageSum, operand_text, coefficient_text, rate_text: str = "dq") -> str:
    """A StageSum as text in any target's syntax (operand_text: operand -> text; rate_text
    names dq, e.g. the thickness's own increment in a thickness-weighted sweep)."""
    parts = [operand_text(operand) if coef == 1 else f"{coefficient_text(coef)}*{operand_text(operand)}"
             for coef, operand in total.terms]
    text = " + ".join(parts)
    if len(parts) == 1 and text.startswith("(") and text.endswith(")"):
        text = text[1:-1]
    if total.rate != 0:
        term = rate_text if total.rate == 1 else f"{coefficient_text(total.rate)}*{rate_text}"
        text = f"{text} - {term}" if text else f"-{term}"
    return text


def stage_buffers(plan) -> int:
    """Stage arrays (with halos) a whole step keeps in workspace: 0, 1 or 2."""
    return min(plan.stages - 1, 2)


# ---- the workspace ---------------------------------------------------------------

FLUX_REGION = "flux"
REGISTERS = "registers"
STAGE_BUFFERS = ("stage_a", "stage_b")


def workspace_layout(plan, flux_scratch: Affine) -> WorkspaceLayout:
    """The caller's work array of one step (compiler/emit/workspace.py).

    With flux correction: the FCT plan's arrays (compiler/emit/fct_plan.py). Otherwise
    the face fluxes a target keeps while it updates cells (`flux_scratch`: the C kernel
    one block of faces and its left face, FLUX_BLOCK + 1; the native Fortran kernel the
    n + 1 faces of the line; numpy none, its block temporaries are its own), then the
    time method's registers (n reals each), then the stage arrays with halos a whole
    step passes from stage to stage.
    """
    if plan.fct_steps is not None:
        return WorkspaceLayout(plan.fct_steps.regions())
    regions = []
    if not flux_scratch.zero:
        regions.append(Region(FLUX_REGION, flux_scratch, 1, "face fluxes"))
    if plan.registers:
        regions.append(Region(REGISTERS, Affine(cells=1), plan.registers,
                              "what the time method keeps from stage to stage"))
    for buffer in STAGE_BUFFERS[:stage_buffers(plan)]:
        regions.append(Region(buffer, Affine(cells=1, halos=2), 1, "a stage state with halos"))
    return WorkspaceLayout(tuple(regions))


@dataclass(frozen=True)
class StageCall:
    """A whole step's call of one stage: which array it reads and writes, and whether the
    output's halo is refreshed (periodically) for the next stage."""

    stage: int
    source: str
    target: str
    refresh: bool


def step_calls(plan) -> tuple[StageCall, ...]:
    """Which arrays each stage reads and writes in the periodic whole-step function."""
    buffers = ("stage_a", "stage_b")
    calls = []
    for s in range(plan.stages):
        source = "q_in" if s == 0 else buffers[(s - 1) % 2]
        last = s == plan.stages - 1
        target = "q_out" if last else buffers[s % 2]
        calls.append(StageCall(s, source, target, not last))
    return tuple(calls)


# ---- the descriptive comment every generated file starts with -------------

def fluxloom_version() -> str:
    from importlib.metadata import PackageNotFoundError, version
    try:
        return version("fluxloom")
    except PackageNotFoundError:
        return "unknown"


def banner_lines(scheme: Scheme, precision: str, verdicts=()) -> tuple[str, ...]:
    """Lines of the comment at the top of every generated file (no comment markers).

    verdicts: the analysis verdicts as lines, worded by the caller
    (`compiler.outputs.verdict_lines`); the emitters never run the analysis, and
    kernels built at run time, where nobody reads the comment, pass none.
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
    lines.extend(verdicts)
    return tuple(lines)


def _file_name(scheme: Scheme) -> str:
    from pathlib import PurePath
    return PurePath(scheme.file).name
