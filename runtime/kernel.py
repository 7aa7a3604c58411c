"""One kernel object for both back ends: `load_kernel(scheme, backend, precision)`.

`Kernel.step(q, u_face, dt_dx, out=None)` mirrors the generated `NAME_step`:
q holds n + 2*halo values (the caller fills the halos), u_face n + 1 face
velocities, and only the interior of `out` is written. Arguments are checked
before they reach generated code, with errors that say what was expected.
"""
from __future__ import annotations

import linecache
import math
import threading
import types

import numpy as np

from fluxloom.compiler import LoomError
from fluxloom.compiler.emit import targets
from fluxloom.compiler.emit.numpy_ import numpy_source
from fluxloom.compiler.emit.plan import exported_symbol, plan_kernel
from fluxloom.compiler.ir import Scheme
from fluxloom.compiler.keyed import fingerprint_cache

BACKENDS = targets.BACKENDS
"""The targets that run in-process (compiler/emit/targets.py: `runs`)."""
DTYPES = {"double": np.dtype(np.float64), "float": np.dtype(np.float32)}
C_TYPES = {"double": "double[]", "float": "float[]"}


class KernelError(LoomError):
    """A kernel called with arrays of the wrong type, shape or size."""

    def __init__(self, message: str):
        super().__init__(message, file="fluxloom kernel")


# ---- numpy modules, generated once per scheme fingerprint and precision ------

_MODULES_LOCK = threading.Lock()


def numpy_module(scheme: Scheme, precision: str = "double") -> types.ModuleType:
    """The generated numpy module, executed from its source once and cached."""
    with _MODULES_LOCK:  # one execution per key even when threads race
        return _numpy_module(scheme, precision)


@fingerprint_cache(maxsize=None)
def _numpy_module(scheme: Scheme, precision: str) -> types.ModuleType:
    # No verdicts in the docstring: they only matter in files written for people (`build`).
    source = numpy_source(scheme, precision)
    filename = f"<fluxloom {scheme.name} {precision} {scheme.fingerprint}>"
    # Tracebacks through generated code then show its lines.
    linecache.cache[filename] = (len(source), None, source.splitlines(True), filename)
    module = types.ModuleType(f"fluxloom_generated_{scheme.name}_{precision}")
    module.__file__ = filename
    exec(compile(source, filename, "exec"), module.__dict__)
    return module


# ---- the kernel object ----------------------------------------------------------

class Kernel:
    """A loaded kernel: `step` advances one whole step of one scheme.

    The object keeps one workspace per domain size for its steps, so one Kernel
    should not step from several threads at once (load one per thread).
    """

    def __init__(self, name, backend, precision, halo, face_halo, stages, workspace_size,
                 run_step, run_sweep=None, sweep_widths=False, sweep_thickness=False):
        self.name = name
        self.backend = backend
        self.precision = precision
        self.dtype = DTYPES[precision]
        self.halo = halo
        self.face_halo = face_halo
        self.stages = stages
        self._workspace_size = workspace_size
        self._run_step = run_step
        self._run_sweep = run_sweep
        self.sweep_widths = sweep_widths          # sweep() takes per-cell dt/dx
        self.sweep_thickness = sweep_thickness    # sweep() takes layer thicknesses
        self.threads = lambda: 1           # threads a sweep may use (C with OpenMP: more)
        self._work: dict[int, np.ndarray] = {}

    def __repr__(self) -> str:
        return f"<Kernel {self.name} {self.backend} {self.precision} halo={self.halo}>"

    def workspace_size(self, n: int) -> int:
        return int(self._workspace_size(int(n)))

    def step(self, q, u_face, dt_dx, out=None):
        """One step; returns `out` (a copy of q, halos included, when not given).

        u_face holds n + 1 + 2*face_halo velocities as in the C ABI; a kernel with
        face_halo > 0 (FCT) also takes just the n + 1 interior faces and then
        extends them periodically.
        """
        q = self._check_array("q", q)
        u_face = self._check_array("u_face", u_face)
        given_u_face = u_face
        n = len(q) - 2 * self.halo
        if n < 1:
            raise KernelError(f"{self.name}: q has {len(q)} values; it needs n + 2*halo with "
                              f"halo = {self.halo} and at least one interior cell")
        if self.face_halo and len(u_face) == n + 1:
            u_face = periodic_faces(u_face, self.face_halo)
        if len(u_face) != n + 1 + 2 * self.face_halo:
            extra = f" + 2*{self.face_halo}" if self.face_halo else ""
            raise KernelError(f"{self.name}: u_face has {len(u_face)} values; q has {n} interior "
                              f"cells, so it needs n + 1{extra} = {n + 1 + 2 * self.face_halo} "
                              "face velocities")
        dt_dx = self._check_dt_dx(dt_dx)
        self._check_velocities(u_face)
        if out is None:
            out = q.copy()
        else:
            out = self._check_array("out", out)
            if out.shape != q.shape:
                raise KernelError(f"{self.name}: out has {len(out)} values, q has {len(q)}; "
                                  "they must be the same size")
            if not out.flags.writeable:
                raise KernelError(f"{self.name}: out is read-only; pass a writable array "
                                  "(or none, and step returns a new one)")
            if np.shares_memory(out, q):
                raise KernelError(f"{self.name}: out must not overlap q (the step reads q's "
                                  "neighbours after writing out)")
            if np.shares_memory(out, given_u_face):
                raise KernelError(f"{self.name}: out must not overlap u_face (the step reads "
                                  "face velocities after writing out)")
        self._run_step(n, q, out, u_face, dt_dx, self._workspace(n))
        return out

    def sweep(self, q, u_face, dt_dx, axis, halo=None, out=None, h_old=None, h_new=None,
              edges=None, time=0.0):
        """Every line of an array of rank 1 to 3 along `axis`: the generated NAME_sweep
        (NAME_sweep_edges with `edges`, the low and high ends of the axis).

        See runtime/array_sweep.py for the arguments; returns `out` (a copy of q
        with the interior of every interior line advanced, when not given)."""
        from .array_sweep import run_sweep

        return run_sweep(self, q, u_face, dt_dx, axis, halo, out, h_old, h_new, edges, time)

    def _check_dt_dx(self, dt_dx) -> float:
        try:
            value = float(dt_dx)
        except (TypeError, ValueError):
            raise KernelError(f"{self.name}: dt_dx must be a real number, not {dt_dx!r}") from None
        if not math.isfinite(value):
            raise KernelError(f"{self.name}: dt_dx must be finite, not {value}")
        if value < 0:
            raise KernelError(f"{self.name}: dt_dx is dt/dx and cannot be negative, given "
                              f"{value} (the direction of flow is the sign of u_face)")
        return value

    def _check_velocities(self, u_face: np.ndarray) -> None:
        """NaN or infinite velocities are refused here (the generated kernels do not check)."""
        if len(u_face) and not (math.isfinite(u_face.min()) and math.isfinite(u_face.max())):
            bad = np.flatnonzero(~np.isfinite(u_face))[0]
            raise KernelError(f"{self.name}: u_face[{bad}] is {u_face[bad]}; face velocities "
                              "must be finite")

    def _workspace(self, n: int):
        size = self.workspace_size(n)
        if size == 0:
            return None
        work = self._work.get(n)
        if work is None:
            work = self._work[n] = np.empty(size, self.dtype)
        return work

    def _check_array(self, what: str, value):
        if not isinstance(value, np.ndarray):
            raise KernelError(f"{self.name}: {what} must be a numpy array of {self.dtype}, "
                              f"not {type(value).__name__}")
        if value.ndim != 1:
            raise KernelError(f"{self.name}: {what} must be one-dimensional, has shape {value.shape}")
        if value.dtype != self.dtype:
            raise KernelError(f"{self.name}: {what} has dtype {value.dtype}; this {self.precision} "
                              f"kernel takes {self.dtype} (convert with .astype(np.{self.dtype}))")
        if targets.target(self.backend).runs != "python" and not value.flags.c_contiguous:
            raise KernelError(f"{self.name}: {what} must be contiguous (use np.ascontiguousarray)")
        return value


def load_kernel(scheme: Scheme, backend: str = "numpy", precision: str = "double",
                opt: str | None = None, openmp: bool = False) -> Kernel:
    """The scheme's kernel for one back end and precision (generated and cached on first use).

    opt (C only) is the optimisation flag, e.g. "-O2" or "-O3"; None keeps the build default.
    openmp (C and native Fortran): build with OpenMP where the compiler supports it, so
    sweeps share their lines among OMP_NUM_THREADS threads (`kernel.threads()` says how
    many).
    """
    if backend not in BACKENDS:
        raise KernelError(f"unknown back end '{backend}'; choose one of {', '.join(BACKENDS)}")
    if precision not in DTYPES:
        raise KernelError(f"unknown precision '{precision}'; choose double or float")
    return LOADERS[targets.target(backend).runs](scheme, backend, precision, opt, openmp)


def _python_kernel(scheme: Scheme, backend: str, precision: str, opt: str | None,
                   openmp: bool = False) -> Kernel:
    module = numpy_module(scheme, precision)
    return Kernel(scheme.name, backend, precision, module.HALO, module.FACE_HALO,
                  module.STAGES, module.workspace_size, module.step, module.sweep,
                  module.SWEEP_WIDTHS, module.SWEEP_THICKNESS)


def _cffi_kernel(scheme: Scheme, backend: str, precision: str, opt: str | None,
                 openmp: bool = False) -> Kernel:
    from .build import compile_c, openmp_supported

    if openmp and not openmp_supported():
        import warnings
        warnings.warn("the C compiler does not build with -fopenmp; the kernel's sweeps "
                      "run on one thread", RuntimeWarning, stacklevel=3)
        openmp = False
    flags = {} if opt is None else {"opt": opt}
    ffi, lib = compile_c(scheme, precision, openmp=openmp, **flags)
    return _sweeping_kernel(scheme, backend, precision, ffi, lib)


def _sweeping_kernel(scheme: Scheme, backend: str, precision: str, ffi, lib) -> Kernel:
    """A Kernel over a library exporting the C header's functions with its sweep
    (NAME_sweep_edges, the SWEEP_* features and NAME_sweep_threads)."""
    from .array_sweep import c_sweep_runner

    kernel = _abi_kernel(scheme, backend, precision, ffi, lib,
                         c_sweep_runner(ffi, lib, scheme.name, precision),
                         bool(getattr(lib, f"{scheme.name}_SWEEP_WIDTHS")),
                         bool(getattr(lib, f"{scheme.name}_SWEEP_THICKNESS")))
    kernel.threads = getattr(lib, exported_symbol(scheme.name, "sweep_threads", precision))
    return kernel


def _abi_kernel(scheme: Scheme, backend: str, precision: str, ffi, lib, *sweep) -> Kernel:
    """A Kernel over a library exporting the C header's functions (any compiler); sweep:
    (run_sweep, widths, thickness) where the library has the sweep kernel."""
    name = scheme.name
    c_step = getattr(lib, exported_symbol(name, "step", precision))
    c_workspace = getattr(lib, exported_symbol(name, "workspace_size", precision))
    plan = plan_kernel(scheme)  # the same plan the C source was rendered from
    halo = int(getattr(lib, f"{name}_HALO", plan.halo))
    face_halo = int(getattr(lib, f"{name}_FACE_HALO", plan.face_halo))
    stages = int(getattr(lib, f"{name}_STAGES", plan.stages))
    ctype = C_TYPES[precision]
    null = ffi.NULL

    def run_step(n, q, out, u_face, dt_dx, work):
        c_step(n, ffi.from_buffer(ctype, q), ffi.from_buffer(ctype, out, require_writable=True),
               ffi.from_buffer(ctype, u_face), dt_dx,
               null if work is None else ffi.from_buffer(ctype, work, require_writable=True))

    return Kernel(name, backend, precision, halo, face_halo, stages, c_workspace, run_step,
                  *sweep)


def _shared_kernel(scheme: Scheme, backend: str, precision: str, opt: str | None,
                   openmp: bool = False) -> Kernel:
    """A target that builds its own shared library with the C header's functions; with
    its sweep where the emitter says it exports one (`SWEEPS`: NAME_sweep_edges and the
    header's SWEEP_* features, as the C kernel), else `Kernel.sweep` is unavailable.
    openmp: built with the compiler's OpenMP flag too, where the emitter names one."""
    emitter = targets.target(backend).emitter()
    sweeps = getattr(emitter, "SWEEPS", False)
    ffi, lib = shared_library(scheme, backend, precision, openmp)
    if not sweeps:
        return _abi_kernel(scheme, backend, precision, ffi, lib)
    return _sweeping_kernel(scheme, backend, precision, ffi, lib)


def header_library(scheme: Scheme, backend: str, precision: str):
    """(ffi, lib) of a compiled target exporting the C header's functions: the C kernel,
    or a shared target's library (the native Fortran module)."""
    if backend == "c":
        from .build import compile_c
        return compile_c(scheme, precision)
    return shared_library(scheme, backend, precision)


def shared_library(scheme: Scheme, backend: str, precision: str, openmp: bool = False):
    """(ffi, lib) of a "shared" target's library (built once, then cached): the C header's
    declarations over it, the sweep's and halo fills' where the emitter exports them."""
    from fluxloom.compiler.emit.c import c_declarations

    from .build import compile_shared

    emitter = targets.target(backend).emitter()
    (source,) = emitter.files(scheme, precision).values()
    declarations = (c_declarations(scheme, precision) if getattr(emitter, "SWEEPS", False)
                    else step_declarations(scheme, precision))
    command = tuple(emitter.COMPILE)
    if openmp and getattr(emitter, "OPENMP", None):
        command += (emitter.OPENMP,)
    return compile_shared(f"{scheme.name}_{backend}", source, emitter.SOURCE_SUFFIX, command,
                          declarations)


def step_declarations(scheme: Scheme, precision: str) -> str:
    """The C header's declarations without the sweep kernel's (for targets without it)."""
    from fluxloom.compiler.emit.c import c_declarations

    name = scheme.name
    sweep = (f"{name}_sweep", f"{name}_SWEEP_", f"{name}_EDGE_")   # suffixed or not
    text = c_declarations(scheme, precision)
    return "\n".join(line for line in text.splitlines()
                      if not any(mark in line for mark in sweep)) + "\n"


LOADERS = {"python": _python_kernel, "cffi": _cffi_kernel, "shared": _shared_kernel}
"""How each kind of target (compiler/emit/targets.py: `runs`) is loaded."""


# ---- periodic domains -------------------------------------------------------------

def fill_periodic(q: np.ndarray, halo: int) -> np.ndarray:
    """Fill the halo ghost cells on each side of q in place, periodically from the interior."""
    n = len(q) - 2 * halo
    if halo > 0 and n > 0:
        q[:halo] = q[halo + np.arange(-halo, 0) % n]
        q[halo + n:] = q[halo + np.arange(halo) % n]
    return q


def periodic_faces(u_face: np.ndarray, face_halo: int) -> np.ndarray:
    """n + 1 interior face velocities extended by face_halo faces on each side, periodically."""
    n = len(u_face) - 1
    if face_halo == 0:
        return u_face
    left = u_face[np.arange(-face_halo, 0) % n]
    right = u_face[np.arange(1, face_halo + 1) % n]
    return np.concatenate((left, u_face, right))


def run_periodic(kernel: Kernel, q_interior, u_face, dt_dx, steps: int) -> np.ndarray:
    """Advance an interior array `steps` times on a periodic domain; returns a new array.

    u_face has n + 1 entries with u_face[n] == u_face[0].
    """
    interior = np.asarray(q_interior)
    u_face = np.ascontiguousarray(u_face, dtype=kernel.dtype)
    if interior.ndim != 1:
        raise KernelError(f"{kernel.name}: q_interior must be one-dimensional, has shape {interior.shape}")
    n = len(interior)
    if u_face.ndim != 1 or len(u_face) != n + 1:
        raise KernelError(f"{kernel.name}: u_face must hold n + 1 = {n + 1} face velocities, "
                          f"has shape {u_face.shape}")
    if u_face[0] != u_face[-1]:
        raise KernelError(f"{kernel.name}: on a periodic domain u_face[n] must equal u_face[0] "
                          f"(given {u_face[-1]} and {u_face[0]})")
    u_face = periodic_faces(u_face, kernel.face_halo)
    h = kernel.halo
    current = np.empty(n + 2 * h, kernel.dtype)
    current[h:h + n] = interior
    following = current.copy()
    for _ in range(int(steps)):
        fill_periodic(current, h)
        kernel.step(current, u_face, dt_dx, out=following)
        current, following = following, current
    return current[h:h + n].copy()
