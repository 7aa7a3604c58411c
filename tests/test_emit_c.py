"""The C back end: generated C99 that compiles without a warning, keeps the C contract
(header constants, extern "C", no allocation, reentrancy), is deterministic, and runs
clean under the address and undefined-behaviour sanitizers.

Numerical agreement with the numpy back end and the slow reference on small grids is
in test_agreement.py; here the C-specific paths are checked: the blocked flux loop
across block boundaries, the constant-sign fast paths, the stage-by-stage entry
point, zero velocity, FCT and clip.
"""
from __future__ import annotations

import hashlib
import os
import re
import shutil
import subprocess
import zlib
from importlib.metadata import version

import numpy as np
import pytest
import sympy
from conftest import EXAMPLE_FILES, outputs_under_hash_seeds

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.emit import c_files
from fluxloom.compiler.outputs import target_files
from fluxloom.compiler.emit.c import FLUX_BLOCK, c_sources
from fluxloom.compiler.emit.plan import exported_symbol, plan_kernel
from fluxloom.compiler.analysis.timemethods import stability_polynomial
from fluxloom.runtime.build import compile_c
from fluxloom.runtime.kernel import fill_periodic, load_kernel, run_periodic

STRICT = ["-std=c99", "-O2", "-Wall", "-Wextra", "-Wpedantic", "-Wshadow", "-Wconversion",
          "-Werror"]
PRECISIONS = ("double", "float")
ALL_SCHEMES = {path.stem: load_scheme(path) for path in EXAMPLE_FILES}


def need(tool: str) -> str:
    """The path of a compiler the tests need; its absence is a failure, not a skip."""
    found = shutil.which(tool)
    assert found, f"{tool} is required (the project's set-up installs it: .ci/install)"
    return found


def write_sources(directory, precision, verdicts=()):
    for scheme in ALL_SCHEMES.values():
        for name, text in c_sources(scheme, precision, verdicts).items():
            (directory / name).write_text(text)


# ---- compiling -------------------------------------------------------------------

@pytest.mark.slow
@pytest.mark.parametrize("precision", PRECISIONS)
def test_every_example_compiles_without_a_warning(tmp_path, precision):
    write_sources(tmp_path, precision)
    sources = sorted(p.name for p in tmp_path.glob("*.c"))
    assert len(sources) == len(EXAMPLE_FILES)
    done = subprocess.run([need("gcc"), *STRICT, "-c", *sources], cwd=tmp_path,
                          capture_output=True, text=True)
    assert done.returncode == 0 and done.stderr == "", done.stderr


def test_headers_are_usable_from_cpp(tmp_path):
    """extern "C" guard: a C++ program links against the C objects and calls them."""
    write_sources(tmp_path, "double")
    includes = "".join(f'#include "{p.stem}.h"\n' for p in EXAMPLE_FILES)
    (tmp_path / "host.cpp").write_text(includes + """
#include <cstdio>
#include <vector>
int main() {
    const std::size_t n = 8;
    std::vector<double> q(n + 2 * upwind_HALO), out(q.size()), u(n + 1, 1.0);
    std::vector<double> work(upwind_workspace_size(n));
    for (std::size_t i = 0; i < n; ++i) q[upwind_HALO + i] = double(i);
    upwind_fill_periodic(n, q.data());
    upwind_step(n, q.data(), out.data(), u.data(), 1.0, work.data());
    std::printf("%g %g\\n", out[upwind_HALO], out[upwind_HALO + 1]);
    return 0;
}
""")
    subprocess.run([need("gcc"), "-std=c99", "-O1", "-c", "upwind.c"], cwd=tmp_path, check=True)
    done = subprocess.run([need("g++"), "-std=c++11", "-Wall", "-Werror", "host.cpp", "upwind.o",
                           "-o", "host"], cwd=tmp_path, capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    run = subprocess.run([str(tmp_path / "host")], capture_output=True, text=True, check=True)
    # Upwind at c = 1 moves every value one cell on (common practice, no source):
    # cell 0 takes the periodic neighbour 7, cell 1 takes 0.
    assert run.stdout.split() == ["7", "0"]


# ---- the text ----------------------------------------------------------------------

@pytest.mark.slow
def test_generation_is_deterministic_across_processes():
    """Same spec, same bytes: two interpreters with different hash seeds agree."""
    script = ("import hashlib, sys\n"
              "from fluxloom.compiler import load_scheme\n"
              "from fluxloom.compiler.emit import c_files\n"
              "digest = hashlib.sha256()\n"
              "for path in sys.argv[1:]:\n"
              "    for precision in ('double', 'float'):\n"
              "        for name, text in sorted(c_files(load_scheme(path), precision).items()):\n"
              "            digest.update(name.encode() + text.encode())\n"
              "print(digest.hexdigest())\n")
    paths = [str(p) for p in EXAMPLE_FILES]
    digests = outputs_under_hash_seeds(script, paths, ("1", "12345"))
    here = hashlib.sha256()
    for path in paths:
        for precision in PRECISIONS:
            for name, text in sorted(c_files(load_scheme(path), precision).items()):
                here.update(name.encode() + text.encode())
    assert digests == {here.hexdigest()}


def halo_from_offsets(offsets):
    """Ghost cells per side, from the upwind frame directly: face j+1/2 reads j+k or
    j+1-k, face j-1/2 one cell further left (common practice, no source)."""
    cells = set()
    for k in offsets:
        for face_left in (-1, 0):  # the cell's left and right faces
            cells |= {face_left + k, face_left + 1 - k}
    return max(max(-min(cells), 0), max(cells))


def test_header_exports_the_contract():
    scheme = ALL_SCHEMES["kappa_rk3"]
    header = target_files(scheme, "c", "double")["kappa_rk3.h"]
    assert f"generated by fluxloom {version('fluxloom')}" in header
    assert scheme.about in header
    assert '#ifdef __cplusplus\nextern "C" {' in header
    assert f"#define kappa_rk3_HALO {halo_from_offsets(scheme.offsets)}\n" in header
    assert "#define kappa_rk3_STAGES 3\n" in header
    assert "#define kappa_rk3_FACE_HALO 0\n" in header
    # every constant is the real nearest its exact value; Python's 1/3 is that double
    assert f"#define kappa_rk3_PARAM_kappa ({1 / 3!r})\n" in header
    for function in ("size_t kappa_rk3_workspace_size(size_t n);",
                     "void kappa_rk3_fill_periodic(size_t n, double *q);",
                     "void kappa_rk3_stage(int stage, size_t n,",
                     "void kappa_rk3_step(size_t n, const double *q_in, double *q_out,"):
        assert function in header


def test_header_carries_the_analysis_verdicts():
    from fluxloom.compiler.analysis import analyse

    scheme = ALL_SCHEMES["lw_vanleer"]
    document = analyse(scheme).to_json()
    header = target_files(scheme, "c", "double")["lw_vanleer.h"]
    assert f" * order: {document['order']['overall']} " in header
    assert " * TVD: yes" in header if document["tvd"]["holds"] else " * TVD: " in header
    module = target_files(scheme, "c", "double")["lw_vanleer_mod.f90"]
    assert f"! order: {document['order']['overall']} " in module


def test_kernel_source_keeps_the_contract():
    """No allocation, no globals, every external name prefixed by the scheme name."""
    for scheme in ALL_SCHEMES.values():
        text = c_sources(scheme, "double")[f"{scheme.name}.c"]
        code = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
        assert not re.search(r"\b(malloc|calloc|realloc|free|alloca|static\s+(double|float|int|size_t)\s+\w+\s*[=;\[])",
                             code)
        for line in code.splitlines():
            if line and not line[0].isspace() and "(" in line and not line.startswith(("#", "}")):
                function = re.search(r"(\w+)\(", line).group(1)
                assert function.startswith(scheme.name + "_"), line


def test_float_kernels_compute_in_float():
    for scheme in ALL_SCHEMES.values():
        text = c_sources(scheme, "float")[f"{scheme.name}.c"]
        code = re.sub(r"/\*.*?\*/", "", text, flags=re.S)
        assert "double" not in code
        assert not re.search(r"\d\.\d+(?:[eE][-+]?\d+)?(?![\deE\dF])", code), \
            "a double literal in a float kernel"
        assert not re.search(r"\b(fabs|sqrt|pow)\(", code)


def test_min_and_max_are_inline_selects_not_library_calls():
    text = c_sources(ALL_SCHEMES["lw_superbee"], "double")["lw_superbee.c"]
    assert "fmin" not in text and "fmax" not in text
    assert "lw_superbee_max(" in text and "lw_superbee_min(" in text


# ---- running: the paths only C has ------------------------------------------------------

def c_kernel(scheme, precision="double"):
    ffi, lib = compile_c(scheme, precision)
    return ffi, lib


def pointer(ffi, array):
    ctype = "float[]" if array.dtype == np.float32 else "double[]"
    return ffi.from_buffer(ctype, array)


def velocity_runs(rng, count):
    """Long runs of one sign (fast paths), a mixed stretch and exact zeros."""
    u = np.empty(count)
    third = count // 3
    u[:third] = rng.uniform(0.1, 1.0, third)
    u[third:2 * third] = -rng.uniform(0.1, 1.0, third)
    u[2 * third:] = rng.uniform(-1.0, 1.0, count - 2 * third)
    u[rng.random(count) < 0.05] = 0.0
    return u


@pytest.mark.parametrize("name", sorted(ALL_SCHEMES))
def test_blocked_fast_paths_agree_with_the_numpy_back_end(name):
    """n spans several flux blocks; velocity runs hit all three face loops."""
    scheme = ALL_SCHEMES[name]
    rng = np.random.default_rng(zlib.crc32(name.encode()))
    n = 3 * FLUX_BLOCK + 37
    c, reference = load_kernel(scheme, "c"), load_kernel(scheme, "numpy")
    q = rng.uniform(-1.0, 2.0, n + 2 * c.halo)
    u = velocity_runs(rng, n + 1 + 2 * c.face_halo)
    got, want = c.step(q, u, 0.45), reference.step(q, u, 0.45)
    assert np.max(np.abs(got - want)) <= 1e-13 * np.max(np.abs(want))


@pytest.mark.parametrize("name", sorted(ALL_SCHEMES))
def test_zero_velocity_leaves_every_value_exactly(name):
    """Where u == 0 the flux is exactly 0, even with 1/c in g (Lax-Friedrichs)."""
    scheme = ALL_SCHEMES[name]
    ffi, lib = c_kernel(scheme)
    plan = plan_kernel(scheme)
    n = 40
    q = np.random.default_rng(3).uniform(0.0, 1.0, n + 2 * plan.halo)
    out = np.full_like(q, np.nan)
    u = np.zeros(n + 1 + 2 * plan.face_halo)
    work = np.empty(getattr(lib, exported_symbol(name, "workspace_size", "double"))(n))
    step = getattr(lib, exported_symbol(name, "step", "double"))
    step(n, pointer(ffi, q), pointer(ffi, out), pointer(ffi, u), 0.5, pointer(ffi, work))
    inside, given = out[plan.halo:plan.halo + n], q[plan.halo:plan.halo + n]
    if plan.stages == 1:
        assert np.array_equal(inside, given)
    else:  # the Shu-Osher weights (3/4 q + 1/4 q ...) round to within an ulp or two
        assert np.allclose(inside, given, rtol=4e-16, atol=0)
    assert np.all(np.isnan(out[:plan.halo])) and np.all(np.isnan(out[plan.halo + n:]))


@pytest.mark.parametrize("name", ["kappa_rk2", "kappa_rk3", "centred_rk4", "vanleer_rk3", "kappa_ws3",
                                  "centred4_ssp10"])
def test_stage_by_stage_with_host_halo_exchange_equals_the_step(name):
    """A host calling NAME_stage around its own (here periodic) halo refresh gets the
    same bits as the periodic convenience NAME_step."""
    scheme = ALL_SCHEMES[name]
    ffi, lib = c_kernel(scheme)
    stage = getattr(lib, exported_symbol(name, "stage", "double"))
    step = getattr(lib, exported_symbol(name, "step", "double"))
    plan = plan_kernel(scheme)
    h, n = plan.halo, 700
    rng = np.random.default_rng(5)
    q = rng.uniform(0.0, 1.0, n + 2 * h)
    fill_periodic(q, h)
    u = np.sin(np.linspace(0, 4 * np.pi, n + 1))
    work = np.empty(getattr(lib, exported_symbol(name, "workspace_size", "double"))(n))
    whole = np.zeros_like(q)
    step(n, pointer(ffi, q), pointer(ffi, whole), pointer(ffi, u), 0.3, pointer(ffi, work))
    current = q
    for s in range(plan.stages):
        target = np.zeros_like(q)
        stage(s, n, pointer(ffi, q), pointer(ffi, current), pointer(ffi, target), pointer(ffi, u),
              0.3, pointer(ffi, work))
        fill_periodic(target, h)
        current = target
    assert np.array_equal(current[h:h + n], whole[h:h + n])


@pytest.mark.parametrize("name, method", [("upwind_rk3", "ssp_rk3"), ("centred_rk4", "rk4"),
                                          ("kappa_rk2", "ssp_rk2"), ("kappa_ws3", "ws_rk3"),
                                          ("centred4_ssp10", "ssp_rk10_4")])
def test_c_runge_kutta_step_multiplies_a_fourier_mode_by_R(name, method):
    """On a periodic grid a linear scheme maps exp(i k x) to R(lambda dt) exp(i k x), with
    lambda from the semi-discrete symbol (von Neumann analysis, common practice, no
    source); the C step must reproduce it to round-off."""
    scheme = ALL_SCHEMES[name]
    kernel = load_kernel(scheme, "c")
    n, mode, dt_dx = 64, 3, 0.4
    theta = 2 * np.pi * mode / n
    g = sympy.lambdify([sympy.Symbol(s.name) for s in sorted(scheme.bound_face.free_symbols,
                                                              key=lambda s: s.name)],
                       scheme.bound_face)
    # g at q(k) = exp(i k theta) (the face j+1/2 of cell j = 0)
    symbols = sorted(scheme.bound_face.free_symbols, key=lambda s: s.name)
    from fluxloom.compiler.symbols import offset_of
    face = g(*[np.exp(1j * offset_of(s) * theta) for s in symbols])
    lam = -(face - face * np.exp(-1j * theta))  # per unit u/dx
    z = sympy.Symbol("z")
    R = complex(stability_polynomial(method).subs(z, sympy.nsimplify(0) + lam * dt_dx))
    x = np.arange(n)
    for part in (np.cos, np.sin):
        q = part(theta * x)
        got = run_periodic(kernel, q, np.ones(n + 1), dt_dx, 1)
        want = (R * np.exp(1j * theta * x))
        want = want.real if part is np.cos else want.imag
        assert np.max(np.abs(got - want)) < 1e-13


def test_c_fct_square_wave_is_bounded_conservative_and_sharper_than_upwind():
    """Zalesak (1979, J. Comput. Phys. 31:335) 1-D square wave: the corrected solution
    has no overshoot or undershoot and is sharper than the low-order (upwind) one."""
    n = 100
    square = ((np.arange(n) >= 20) & (np.arange(n) < 40)).astype(float)
    u, steps = np.ones(n + 1), 2 * n
    fct = run_periodic(load_kernel(ALL_SCHEMES["lw_fct"], "c"), square, u, 0.5, steps)
    low = run_periodic(load_kernel(ALL_SCHEMES["upwind"], "c"), square, u, 0.5, steps)
    assert fct.min() >= -1e-12 and fct.max() <= 1 + 1e-12
    assert np.abs(fct - square).sum() < 0.7 * np.abs(low - square).sum()
    assert fct.sum() == pytest.approx(square.sum(), rel=1e-12)


def test_c_fct_uses_the_face_velocities_it_is_given_beyond_the_interior():
    """The wide u_face of an FCT kernel is read: outer faces change the result near the
    ends (they decide the neighbours' low-order solution), never the total change
    inside beyond what the two boundary fluxes carry."""
    kernel = load_kernel(ALL_SCHEMES["lw_fct"], "c")
    assert kernel.face_halo == 2
    n, h = 30, kernel.halo
    q = np.zeros(n + 2 * h)
    q[h + 2:h + 8] = 1.0
    q[:h] = 1.0  # a front entering from the left halo
    u = np.full(n + 5, 0.8)
    a = kernel.step(q, u, 0.5)
    u[0] = u[1] = 0.0  # outer faces only
    b = kernel.step(q, u, 0.5)
    assert not np.array_equal(a[h:h + n], b[h:h + n])
    assert np.array_equal(a[h + 5:h + n], b[h + 5:h + n])


@pytest.mark.parametrize("name", ["ftcs_clip", "lw_clip", "vanleer_clip"])
def test_clip_bounds_the_c_result(name):
    kernel = load_kernel(ALL_SCHEMES[name], "c")
    square = (np.arange(60) % 25 < 10).astype(float)
    got = run_periodic(kernel, square, np.ones(61), 0.8, 30)
    assert got.min() >= 0.0 and got.max() <= 1.0


def test_kernels_are_reentrant_across_threads():
    """No globals: eight threads stepping different data give the serial results."""
    from concurrent.futures import ThreadPoolExecutor

    scheme = ALL_SCHEMES["lw_vanleer"]
    ffi, lib = c_kernel(scheme)
    n, h = 5000, plan_kernel(scheme).halo
    rng = np.random.default_rng(9)
    inputs = [rng.uniform(0, 1, n + 2 * h) for _ in range(8)]
    u = rng.uniform(-1, 1, n + 1)

    def run(q):
        out, work = np.zeros_like(q), np.empty(lib.lw_vanleer_workspace_size_f64(n))
        for _ in range(20):
            lib.lw_vanleer_step_f64(n, pointer(ffi, q), pointer(ffi, out), pointer(ffi, u), 0.4,
                                    pointer(ffi, work))
            q = out.copy()
            fill_periodic(q, h)
        return q

    serial = [run(q) for q in inputs]
    with ThreadPoolExecutor(8) as pool:
        parallel = list(pool.map(run, inputs))
    assert all(np.array_equal(a, b) for a, b in zip(serial, parallel))


# ---- sanitizers -------------------------------------------------------------------------

DRIVER = r"""
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
%(includes)s

static unsigned long long state = 88172645463325252ULL;
static double uniform(void) /* xorshift64: deterministic data, no library state */
{
    state ^= state << 13; state ^= state >> 7; state ^= state << 17;
    return (double)(state >> 11) / 9007199254740992.0;
}

/* Arrays of exactly the documented sizes, so any read or write past them is caught. */
#define EXERCISE(NAME)                                                                  \
    do {                                                                                \
        static const size_t sizes[] = {1, 2, 3, 7, 127, 128, 129, 511, 512, 513, 1100};  \
        for (size_t s = 0; s < sizeof sizes / sizeof sizes[0]; ++s) {                   \
            const size_t n = sizes[s], cells = n + 2 * NAME##_HALO;                     \
            const size_t faces = n + 1 + 2 * NAME##_FACE_HALO;                          \
            REAL *q = malloc(cells * sizeof *q), *out = malloc(cells * sizeof *out);     \
            REAL *u = malloc(faces * sizeof *u);                                        \
            REAL *work = malloc(NAME##_workspace_size(n) * sizeof *work);               \
            for (size_t i = 0; i < cells; ++i) { q[i] = (REAL)uniform(); out[i] = 0; }  \
            for (size_t i = 0; i < faces; ++i) {                                        \
                const double r = uniform();                                             \
                u[i] = (REAL)(r < 0.1 ? 0.0 : (s %% 2 ? 2.0 * r - 1.0 : r));            \
            }                                                                           \
            NAME##_fill_periodic(n, q);                                                 \
            NAME##_step(n, q, out, u, (REAL)0.45, work);                                \
            for (int k = 0; k < NAME##_STAGES; ++k)                                     \
                NAME##_stage(k, n, q, q, out, u, (REAL)0.45, work);                     \
            for (size_t i = 0; i < n; ++i)                                              \
                if (!isfinite(out[NAME##_HALO + i])) { printf("%%s: not finite\n", #NAME); return 1; } \
            free(q); free(out); free(u); free(work);                                    \
        }                                                                               \
        printf("%%s ok\n", #NAME);                                                      \
    } while (0)

int main(void)
{
%(calls)s
    return 0;
}
"""


@pytest.mark.slow
@pytest.mark.parametrize("precision", PRECISIONS)
def test_every_example_runs_clean_under_the_sanitizers(tmp_path, precision):
    write_sources(tmp_path, precision)
    names = sorted(ALL_SCHEMES)
    real = "float" if precision == "float" else "double"
    driver = DRIVER % {
        "includes": f"#define REAL {real}\n" + "".join(f'#include "{n}.h"\n' for n in names),
        "calls": "".join(f"    EXERCISE({n});\n" for n in names),
    }
    (tmp_path / "driver.c").write_text(driver)
    sources = [f"{n}.c" for n in names] + ["driver.c"]
    # -O0: the sanitizers check the same accesses; -O1 took four times as long to build
    build = subprocess.run([need("gcc"), "-std=c99", "-O0", "-g", "-fno-omit-frame-pointer",
                            "-fsanitize=address,undefined", "-fno-sanitize-recover=all",
                            *sources, "-lm", "-o", "driver"], cwd=tmp_path,
                           capture_output=True, text=True)
    assert build.returncode == 0, build.stderr
    env = dict(os.environ, ASAN_OPTIONS="detect_leaks=1:abort_on_error=0",
               UBSAN_OPTIONS="print_stacktrace=1:halt_on_error=1")
    env.pop("LD_PRELOAD", None)
    run = subprocess.run([str(tmp_path / "driver")], capture_output=True, text=True, env=env,
                         timeout=300)
    assert run.returncode == 0, run.stdout + run.stderr
    assert run.stderr == ""
    assert run.stdout.split("\n")[:-1] == [f"{n} ok" for n in names]


@pytest.mark.parametrize("name", ["lw_vanleer", "lw_minmod", "lw_superbee", "lw_koren"])
def test_ratio_on_flat_data_is_zero_as_defined(name):
    """Plateaus make ratio's denominator exactly 0 (ratio = 0 there) and steps make its
    numerator 0; the C kernel agrees with the face-by-face reference (which applies
    the definition literally) on such data."""
    from fluxloom.runtime.reference import reference_run

    scheme = ALL_SCHEMES[name]
    plateaus = np.repeat([0.0, 1.0, 1.0, 0.25, 0.25, 0.75, 0.0, 0.5], 6)
    n = len(plateaus)
    u = np.where(np.arange(n + 1) % 9 < 5, 0.7, -0.6)
    u[::11] = 0.0
    u[-1] = u[0]
    got = run_periodic(load_kernel(scheme, "c"), plateaus, u, 0.5, 3)
    want = reference_run(scheme, plateaus, u, 0.5, 3)
    assert np.max(np.abs(got - want)) < 1e-14


@pytest.mark.slow
@pytest.mark.parametrize("precision", PRECISIONS)
def test_every_fortran_module_compiles_as_fortran_2003(tmp_path, precision):
    names = []
    for scheme in ALL_SCHEMES.values():
        for name, text in c_files(scheme, precision).items():
            if name.endswith(".f90"):
                (tmp_path / name).write_text(text)
                names.append(name)
    done = subprocess.run([need("gfortran"), "-std=f2003", "-Wall", "-Wextra", "-Werror", "-c",
                           *names], cwd=tmp_path, capture_output=True, text=True)
    assert done.returncode == 0 and done.stderr == "", done.stderr
    module = (tmp_path / "kappa_rk3_mod.f90").read_text()
    kind = "c_float" if precision == "float" else "c_double"
    assert f"integer, parameter, public :: kappa_rk3_halo = {plan_kernel(ALL_SCHEMES['kappa_rk3']).halo}" in module
    assert f"real({kind}), value, intent(in) :: dt_dx" in module
    # the C symbol carries the precision (a float object cannot satisfy a double module)
    assert f'bind(C, name="{exported_symbol("kappa_rk3", "step", precision)}")' in module
    third = repr(1 / 3) if precision == "double" else str(np.float32(1) / np.float32(3))
    assert f"kappa_rk3_param_kappa = {third}_{kind}" in module


def test_fortran_calls_a_float_kernel_through_its_module(tmp_path):
    """The c_float interface: a Fortran program steps a float upwind kernel at c = 1,
    which moves every value exactly one cell on (common practice, no source)."""
    for name, text in c_files(ALL_SCHEMES["upwind"], "float").items():
        (tmp_path / name).write_text(text)
    (tmp_path / "shift.f90").write_text("""\
program shift
  use, intrinsic :: iso_c_binding, only: c_size_t, c_float
  use upwind_mod
  implicit none
  integer, parameter :: n = 6
  real(c_float) :: q(1 - upwind_halo:n + upwind_halo), next(1 - upwind_halo:n + upwind_halo)
  real(c_float) :: u(0:n)
  real(c_float), allocatable :: work(:)
  integer :: i
  allocate (work(upwind_workspace_size(int(n, c_size_t))))
  q = 0
  do i = 1, n
    q(i) = real(i, c_float) / 4
  end do
  u = -1.0_c_float
  call upwind_fill_periodic(int(n, c_size_t), q)
  call upwind_step(int(n, c_size_t), q, next, u, 1.0_c_float, work)
  print '(6f6.2)', next(1:n)
end program shift
""")
    subprocess.run([need("gcc"), "-std=c99", "-c", "upwind.c"], cwd=tmp_path, check=True)
    done = subprocess.run([need("gfortran"), "-std=f2003", "-Wall", "-Werror", "upwind_mod.f90",
                           "shift.f90", "upwind.o", "-o", "shift"], cwd=tmp_path,
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    run = subprocess.run([str(tmp_path / "shift")], capture_output=True, text=True, check=True)
    # u < 0: values move one cell to the left, the first wraps round to the end.
    assert [float(v) for v in run.stdout.split()] == [0.5, 0.75, 1.0, 1.25, 1.5, 0.25]


# ---- the printer ------------------------------------------------------------------------

def printed_cases():
    from fluxloom.compiler.symbols import R, Ratio, param_symbol, q

    a, b, kappa = q(0), q(1), param_symbol("kappa")
    return [
        Ratio(a - b, b),
        Ratio(a, b),
        sympy.Max(0, sympy.Min(2 * R, 1), sympy.Min(R, 2)),
        sympy.Min(a, b, R),
        sympy.Abs(R) * sympy.sign(a) + sympy.sign(b),
        (R + sympy.Abs(R)) / (1 + sympy.Abs(R)),
        sympy.sqrt(R**2 + 1) + R**3 - R**-2 + R**5,
        sympy.Rational(1, 3) * R - sympy.Rational(5, 7) + kappa * a,
    ]


POINTS = [(0.75, -1.5, 2.0), (-2.5, 0.0, 0.5), (3.0, 3.0, -0.25), (0.0, 1.0, 1.0)]


@pytest.mark.parametrize("precision", PRECISIONS)
def test_printed_expressions_evaluate_like_sympy(tmp_path, precision):
    """Each printed expression, compiled by gcc with the scheme's helpers, gives the
    value sympy computes from the definitions (ratio = a/b where b != 0, else 0)."""
    from fluxloom.compiler.emit.c import KernelPrinter
    from fluxloom.compiler.symbols import R, Ratio, param_symbol, q

    scheme = ALL_SCHEMES["kappa_rk3"]
    printer = KernelPrinter(plan_kernel(scheme), precision)
    printer.helpers_used.update(("min", "max", "ratio", "sign"))
    real = printer.ctype
    cases = printed_cases()
    functions = "".join(f"static {real} case{i}({real} q_0, {real} q_1, {real} r) "
                        f"{{ (void)q_0; (void)q_1; (void)r; return {printer.doprint(e)}; }}\n"
                        for i, e in enumerate(cases))
    calls = "".join(f'    printf("%.17g\\n", (double)case{i}(({real}){x}, ({real}){y}, ({real}){z}));\n'
                    for i in range(len(cases)) for x, y, z in POINTS)
    # The kernel source supplies the helpers (min, max, ratio, sign) the printer names.
    kernel = c_sources(scheme, precision)
    (tmp_path / "kappa_rk3.h").write_text(kernel["kappa_rk3.h"])
    helpers = kernel["kappa_rk3.c"].split("/* The upwind-frame value")[0]
    extra = "".join(f"static inline {real} kappa_rk3_{name}({real} a, {real} b) "
                    f"{{ return a {op} b ? a : b; }}\n"
                    for name, op in (("min", "<"), ("max", ">")) if f"kappa_rk3_{name}(" not in helpers)
    extra += (f"static inline {real} kappa_rk3_ratio({real} a, {real} b) "
              f"{{ return a / (b != 0 ? b : {'HUGE_VALF' if precision == 'float' else 'HUGE_VAL'}); }}\n"
              if "kappa_rk3_ratio(" not in helpers else "")
    extra += (f"static inline {real} kappa_rk3_sign({real} x) {{ return ({real})((x > 0) - (x < 0)); }}\n"
              if "kappa_rk3_sign(" not in helpers else "")
    (tmp_path / "cases.c").write_text(helpers + extra + "#include <stdio.h>\n" + functions
                                       + "int main(void)\n{\n" + calls + "    return 0;\n}\n")
    build = subprocess.run([need("gcc"), "-std=c99", "-O2", "-Wall", "-Wextra", "-Wpedantic",
                            "-Wconversion", "-Werror", "cases.c", "-lm", "-o", "cases"],
                           cwd=tmp_path, capture_output=True, text=True)
    assert build.returncode == 0, build.stderr
    got = [float(v) for v in subprocess.run([str(tmp_path / "cases")], capture_output=True,
                                            text=True, check=True).stdout.split()]
    ratio_rule = lambda x, y: sympy.Piecewise((x / y, sympy.Ne(y, 0)), (0, True))
    want = []
    for e in cases:
        e = e.replace(Ratio, ratio_rule).subs(param_symbol("kappa"), sympy.Rational(1, 3))
        for x, y, z in POINTS:
            want.append(float(e.subs({q(0): sympy.nsimplify(x), q(1): sympy.nsimplify(y),
                                      R: sympy.nsimplify(z)}).evalf(30)))
    tolerance = 1e-6 if precision == "float" else 1e-15
    assert np.allclose(got, want, rtol=tolerance, atol=tolerance)


def test_the_printer_is_strict():
    from fluxloom.compiler.emit.c import KernelPrinter
    from sympy.printing.codeprinter import PrintMethodNotImplementedError

    printer = KernelPrinter(plan_kernel(ALL_SCHEMES["upwind"]))
    with pytest.raises(PrintMethodNotImplementedError):
        printer.doprint(sympy.Function("unknown_function")(sympy.Symbol("x")))


@pytest.mark.parametrize("name, message", [("_odd", "must start with a letter"),
                                           ("a" * 60, "at most 48 fit")])
def test_names_fortran_cannot_spell_are_refused_where_they_are_written(name, message):
    """Fortran 2003 names start with a letter and have at most 63 characters (the
    standard's rule, common practice); the interface spells NAME_workspace_size."""
    from fluxloom.compiler import LoomError

    with pytest.raises(LoomError, match=message) as caught:
        scheme_from_text(f"scheme {name} {{\n  flux = u * q[0]\n}}\n")
    assert (caught.value.span.line, caught.value.span.col) == (1, 8)


# ---- constructs the examples do not combine -------------------------------------------

UNUSUAL = {  # specs of our own, combining what no example does
    "fct_clip": """scheme fct_clip {
  time euler
  low_flux = u * q[0]
  flux = u * (q[0] + (1 - c) / 4 * (q[1] - q[-1]))
  correct fct
  clip 0, 1
}""",
    "rk4_clip_param": """scheme rk4_clip_param {
  param beta = 0.25
  param gamma = 2
  time rk4
  let r = ratio(q[0] - q[-1], q[1] - q[0])
  limiter smooth(r) = max(0, r) * sqrt(1 + r^2) / (1 + abs(r)^3) + sign(r) * beta
  flux = u * (q[0] + smooth(r) / gamma * (q[1] - q[0]) - beta / 8 * (q[2] - 2 * q[1] + q[0]))
  clip -1/2, 3/2
}""",
    "wide_guard": """scheme wide_guard {
  time euler
  flux = u * ((q[0] + q[1]) / 2 - (q[1] - q[0]) / (2 * c) + c^2 * min(q[-2], q[3], q[0]) / 7)
}""",
}


@pytest.mark.parametrize("precision", PRECISIONS)
def test_unusual_combinations_compile_without_a_warning(tmp_path, precision):
    for text in UNUSUAL.values():
        for name, source in c_sources(scheme_from_text(text), precision).items():
            (tmp_path / name).write_text(source)
    done = subprocess.run([need("gcc"), *STRICT, "-c", *[f"{n}.c" for n in UNUSUAL]],
                          cwd=tmp_path, capture_output=True, text=True)
    assert done.returncode == 0 and done.stderr == "", done.stderr


@pytest.mark.parametrize("name", sorted(UNUSUAL))
def test_unusual_combinations_agree_with_the_reference(name):
    """FCT with a clamp, RK4 with a clamp, params inside a limiter with sign and sqrt,
    a 1/c guard with a wide stencil: the C kernel against the face-by-face reference."""
    from fluxloom.runtime.reference import reference_run

    scheme = scheme_from_text(UNUSUAL[name])
    rng = np.random.default_rng(zlib.crc32(name.encode()))
    n = 40
    q = rng.uniform(0.0, 1.0, n)
    u = rng.uniform(-1.0, 1.0, n + 1)
    u[::5] = 0.0
    u[-1] = u[0]
    got = run_periodic(load_kernel(scheme, "c"), q, u, 0.4, 3)
    want = reference_run(scheme, q, u, 0.4, 3)
    assert np.max(np.abs(got - want)) < 1e-13
