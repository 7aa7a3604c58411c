"""runtime/build.py: cffi API-mode builds into a cache keyed by source and flags, safe
under concurrent builds, loading numpy arrays without copies."""
from __future__ import annotations

import subprocess
import sys
import textwrap
import uuid

import numpy as np
import pytest
from conftest import EXAMPLES

from fluxloom.compiler import LoomError, load_scheme, scheme_from_text
from fluxloom.runtime import build
from fluxloom.runtime.build import compile_c


def fresh_scheme(extra: str = "", param: str = "1/3"):
    """A scheme no earlier build has seen (its about text carries a random tag)."""
    return scheme_from_text(textwrap.dedent(f"""\
        scheme drift_{extra or 'k'} {{
          about "cache test {uuid.uuid4().hex}"
          param kappa = {param}
          time euler
          flux = u * (q[0] + kappa * (q[1] - q[0]))
        }}
        """))


@pytest.fixture
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("FLUXLOOM_CACHE", str(tmp_path / "cache"))
    return tmp_path / "cache"


def libraries(cache):
    """The cached libraries: one folder per build holding the library and its digest."""
    return sorted(p.name for p in cache.glob("_fluxloom_*/*.so"))


def leftovers(cache):
    """Temporary build folders and discarded entries still lying around."""
    return [p.name for p in cache.iterdir() if p.name.startswith(".")]


def test_build_lands_in_the_cache_and_is_reused(cache):
    scheme = fresh_scheme()
    ffi, lib = compile_c(scheme)
    built = libraries(cache)
    assert len(built) == 1 and built[0].startswith(f"_fluxloom_{scheme.name}_")
    (library,) = cache.glob("_fluxloom_*/*.so")
    mtime = library.stat().st_mtime_ns
    again = compile_c(scheme)
    assert again[1] is lib
    assert library.stat().st_mtime_ns == mtime
    assert leftovers(cache) == []


def test_source_and_flags_name_the_build(cache):
    scheme = fresh_scheme()
    compile_c(scheme, "double", "-O2")
    compile_c(scheme, "double", "-O3")
    compile_c(scheme, "float", "-O2")
    compile_c(scheme.with_params({"kappa": 0}), "double", "-O2")
    compile_c(scheme, "double", "-O2 -fno-tree-vectorize")  # several flags in one string
    assert len(libraries(cache)) == 5


def test_params_are_compiled_in(cache):
    scheme = fresh_scheme()
    results = []
    for kappa in (0, 1):
        ffi, lib = compile_c(scheme.with_params({"kappa": kappa}))
        n, h = 4, lib.drift_k_HALO
        q = np.array([0.0, 1.0, 2.0, 3.0, 5.0, 8.0], dtype=float)[: n + 2 * h]
        out = np.zeros_like(q)
        u = np.ones(n + 1)
        work = np.empty(lib.drift_k_workspace_size_f64(n))
        lib.drift_k_step_f64(n, ffi.from_buffer("double[]", q), ffi.from_buffer("double[]", out),
                         ffi.from_buffer("double[]", u), 0.5, ffi.from_buffer("double[]", work))
        results.append(out[h:h + n].copy())
    # kappa = 0 is upwind, kappa = 1 takes the downwind cell (centred differences of
    # the data; hand-computed): q_j - 1/2 (q_j - q_{j-1}) and q_j - 1/2 (q_{j+1} - q_j).
    q = np.array([0.0, 1.0, 2.0, 3.0, 5.0, 8.0])
    assert np.allclose(results[0], q[1:5] - 0.5 * (q[1:5] - q[0:4]))
    assert np.allclose(results[1], q[1:5] - 0.5 * (q[2:6] - q[1:5]))


def test_numpy_arrays_are_passed_without_copies(cache):
    ffi, lib = compile_c(load_scheme(EXAMPLES / "upwind.loom"))
    q = np.arange(10.0)
    pointer = ffi.from_buffer("double[]", q)
    assert int(ffi.cast("uintptr_t", pointer)) == q.ctypes.data
    lib.upwind_fill_periodic_f64(8, pointer)  # writes through to the array itself
    assert q[0] == 8.0 and q[9] == 1.0


def test_unknown_precision_is_a_clear_error(cache):
    with pytest.raises(LoomError, match="unknown precision 'half'"):
        compile_c(load_scheme(EXAMPLES / "upwind.loom"), "half")


BUILDER = """
import sys
import numpy as np
from fluxloom.compiler import scheme_from_text
from fluxloom.runtime.build import compile_c
scheme = scheme_from_text(open(sys.argv[1]).read())
ffi, lib = compile_c(scheme)
n = 50
q = np.sin(np.arange(n + 2.0)); out = np.zeros_like(q); u = np.linspace(-1, 1, n + 1)
work = np.empty(lib.race_workspace_size_f64(n))
lib.race_step_f64(n, ffi.from_buffer("double[]", q), ffi.from_buffer("double[]", out),
              ffi.from_buffer("double[]", u), 0.5, ffi.from_buffer("double[]", work))
print(repr(float(out.sum())))
"""


def test_two_processes_building_the_same_scheme_at_once(cache, tmp_path):
    spec = tmp_path / "race.loom"
    spec.write_text(f'scheme race {{\n  about "{uuid.uuid4().hex}"\n  flux = u * q[0]\n}}\n')
    env = {**__import__("os").environ, "FLUXLOOM_CACHE": str(cache)}
    runs = [subprocess.Popen([sys.executable, "-c", BUILDER, str(spec)], env=env,
                             stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
            for _ in range(2)]
    outputs = [run.communicate(timeout=120) for run in runs]
    assert [run.returncode for run in runs] == [0, 0], outputs
    assert outputs[0][0] == outputs[1][0] and outputs[0][0].strip()
    assert len(libraries(cache)) == 1
    assert leftovers(cache) == []


def test_module_name_is_a_hash_of_source_and_flags():
    scheme = load_scheme(EXAMPLES / "upwind.loom")
    a = build.module_name(scheme, "int x;", ("-O2",))
    assert a == build.module_name(scheme, "int x;", ("-O2",))
    assert a != build.module_name(scheme, "int x;", ("-O3",))
    assert a != build.module_name(scheme, "int y;", ("-O2",))
