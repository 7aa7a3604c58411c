"""Halo fill helpers (boundaries) in every target, held against independent numpy
computations: numpy's own padding modes (np.pad 'wrap' = periodic, 'edge' = zero-gradient
outflow, 'symmetric' = a mirror about the cell face, i.e. a wall's halo), plain slicing
for prescribed values, and a hand-built mirror for a wall's face velocities."""
from __future__ import annotations

import shutil
import subprocess

import numpy as np
import pytest
from conftest import EXAMPLES

from sweep_hosts import build_fortran_host, run

from fluxloom.compiler import load_scheme
from fluxloom.compiler.check import LONGEST_FORTRAN_SUFFIX
from fluxloom.compiler.emit import c_files
from fluxloom.compiler.emit.boundaries import FORTRAN_SUFFIXES
from fluxloom.runtime.boundaries import (BoundaryError, Edge, RuntimeFills, generated_fills,
                                         line_fill)
from fluxloom.runtime.edge_sweeps import EdgeSweep, extend_faces
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.sweeps import LineSweep

PAD_MODES = {"periodic": "wrap", "outflow": "edge", "wall": "symmetric"}
SCHEME = EXAMPLES / "lw_fct.loom"     # FACE_HALO 2: the faces helper mirrors faces beyond


def _cases(rng, count_per_rank: int = 6):
    """(shape, axis, halo, n) with random extents, including lines shorter than the halo."""
    out = []
    for rank in (1, 2, 3):
        for axis in range(rank):
            for _ in range(count_per_rank):
                halo = int(rng.integers(0, 5))
                n = int(rng.integers(1, 8))
                shape = [int(s) for s in rng.integers(1, 5, rank)]
                shape[axis] = n + 2 * halo
                out.append((tuple(shape), axis, halo, n))
    return out


def _padded_reference(q: np.ndarray, axis: int, halo: int, n: int, kind: str, sides) -> np.ndarray:
    """q with the sides in `sides` filled by np.pad's mode for `kind`."""
    interior = np.take(q, np.arange(halo, halo + n), axis=axis)
    pad = [(0, 0)] * q.ndim
    pad[axis] = (halo, halo)
    padded = np.pad(interior, pad, mode=PAD_MODES[kind])
    expected = q.copy()
    for side in sides:
        index = np.arange(halo) if side == 0 else np.arange(halo + n, n + 2 * halo)
        taken = np.take(padded, index, axis=axis)
        view = np.moveaxis(expected, axis, 0)
        view[index] = np.moveaxis(taken, axis, 0)
    return expected


@pytest.fixture(scope="module")
def all_fills():
    scheme = load_scheme(SCHEME)
    return {"numpy": generated_fills(scheme, "numpy"), "c": generated_fills(scheme, "c"),
            "c float": generated_fills(scheme, "c", "float"), "runtime": RuntimeFills(),
            "fortran": generated_fills(scheme, "fortran"),
            "fortran float": generated_fills(scheme, "fortran", "float")}


@pytest.mark.parametrize("target", ["numpy", "c", "c float", "runtime", "fortran",
                                    "fortran float"])
def test_copy_fills_agree_with_numpy_padding(all_fills, target):
    fills = all_fills[target]
    dtype = np.float32 if target.endswith("float") else np.float64
    rng = np.random.default_rng(7)
    for shape, axis, halo, n in _cases(rng):
        for kind in PAD_MODES:
            for sides in ((0,), (1,), (0, 1)):
                q = rng.standard_normal(shape).astype(dtype)
                expected = _padded_reference(q, axis, halo, n, kind, sides)
                for side in sides:
                    getattr(fills, kind)(q, axis, halo, side)
                assert np.array_equal(q, expected), (target, kind, shape, axis, halo, sides)


@pytest.mark.parametrize("target", ["numpy", "c", "runtime", "fortran"])
def test_inflow_agrees_with_slicing(all_fills, target):
    fills = all_fills[target]
    rng = np.random.default_rng(11)
    for shape, axis, halo, n in _cases(rng, 3):
        for side in (0, 1):
            q = rng.standard_normal(shape)
            slab_shape = list(shape)
            slab_shape[axis] = halo
            values = rng.standard_normal(slab_shape)
            expected = q.copy()
            first = 0 if side == 0 else halo + n
            index = [slice(None)] * len(shape)
            index[axis] = slice(first, first + halo)
            expected[tuple(index)] = values
            fills.inflow(q, axis, halo, side, values)
            assert np.array_equal(q, expected)

@pytest.mark.parametrize("stem, face_halo", [("lw_fct", 2), ("upwind", 0)])
@pytest.mark.parametrize("backend", ["numpy", "c", "runtime", "fortran"])
def test_wall_faces_agree_with_a_hand_built_mirror(stem, face_halo, backend):
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    fills = RuntimeFills() if backend == "runtime" else generated_fills(scheme, backend)
    rng = np.random.default_rng(13)
    for shape, axis, _, n in _cases(rng, 3):
        shape = list(shape)
        shape[axis] = n + 1 + 2 * face_halo
        for side in (0, 1):
            u = rng.standard_normal(shape)
            got = u.copy()
            fills.faces_wall(got, axis, face_halo, side)
            moved = np.moveaxis(u.copy(), axis, 0)
            b = face_halo if side == 0 else face_halo + n
            moved[b] = 0.0
            step = -1 if side == 0 else 1
            for k in range(1, face_halo + 1):
                moved[b + step * k] = -moved[b - step * k]
            assert np.array_equal(got, np.moveaxis(moved, 0, axis))
            untouched = [i for i in range(len(moved)) if abs(i - b) > face_halo]
            assert np.array_equal(np.take(got, untouched, axis=axis),
                                  np.take(u, untouched, axis=axis))


def test_out_of_range_arguments(all_fills):
    """C (and the native Fortran module under C's symbols): the documented no-op; numpy
    and the runtime: an error saying what is wrong."""
    q = np.arange(10.0)
    for compiled in (all_fills["c"], all_fills["fortran"]):
        for axis, halo, side in ((1, 2, 0), (0, 5, 0), (0, 2, 2)):
            before = q.copy()
            compiled._copy("wall", q, axis, halo, side)
            assert np.array_equal(q, before)
    module_fills = all_fills["numpy"]
    with pytest.raises(ValueError, match="axis must be"):
        module_fills.wall(q, 1, 2, 0)
    with pytest.raises(ValueError, match="hold no interior"):
        module_fills.wall(q, 0, 5, 0)
    with pytest.raises(Exception, match="side must be"):
        all_fills["runtime"].wall(q, 0, 2, 3)


FORTRAN_DRIVER = """
program fills
  use {name}_mod
  implicit none
  integer :: unit_in, unit_out
{declarations}
  open (newunit=unit_in, file="in.bin", access="stream", form="unformatted", status="old")
  open (newunit=unit_out, file="out.bin", access="stream", form="unformatted", status="replace")
{body}
  close (unit_in)
  close (unit_out)
end program fills
"""


def _fortran_case(index: int, rank: int, shape, call: str, extra_shape=None) -> tuple[str, str]:
    dims = ", ".join(":" for _ in range(rank))
    decl = f"  real(c_double), allocatable :: a{index}({dims})\n"
    body = f"  allocate (a{index}({', '.join(map(str, shape))}))\n  read (unit_in) a{index}\n"
    if extra_shape is not None:
        decl += f"  real(c_double), allocatable :: v{index}({dims})\n"
        body += (f"  allocate (v{index}({', '.join(map(str, extra_shape))}))\n"
                 f"  read (unit_in) v{index}\n")
    body += f"  {call}\n  write (unit_out) a{index}\n"
    return decl, body


def _halo_list(rank: int, axis: int, halo: int) -> str:
    """A Fortran array constructor of ghost widths per axis: `halo` along axis, 1 elsewhere
    (the other axes' widths are not used by a fill along axis)."""
    return "(/ " + ", ".join(str(halo) if a == axis else "1" for a in range(rank)) + " /)"


@pytest.mark.parametrize("native", [False, True], ids=["interface", "native"])
def test_fortran_module_fills_agree_with_numpy_padding(tmp_path, native):
    """The Fortran module's procedures, natural indexing (axis 1 = the first index, arrays in
    Fortran order), against np.pad on the same logical arrays; compiled with gfortran: the
    interface module (with the C kernel) and the native module (its own helpers)."""
    scheme = load_scheme(SCHEME)
    rng = np.random.default_rng(5)
    declarations, body, inputs, expected = [], [], [], []
    name = scheme.name
    index = 0
    for shape, axis, halo, n in _cases(rng, 2):
        for kind in (*PAD_MODES, "inflow"):
            for side in (0, 1):
                q = rng.standard_normal(shape)
                call_name = f"{name}_halo_{kind}"
                side_name = f"{name}_side_{'low' if side == 0 else 'high'}"
                if kind == "inflow":
                    slab_shape = list(shape)
                    slab_shape[axis] = halo
                    if halo == 0:
                        continue
                    values = rng.standard_normal(slab_shape)
                    want = q.copy()
                    first = 0 if side == 0 else halo + n
                    cut = [slice(None)] * len(shape)
                    cut[axis] = slice(first, first + halo)
                    want[tuple(cut)] = values
                    call = (f"call {call_name}(a{index}, {_halo_list(len(shape), axis, halo)}, "
                            f"{axis + 1}, {side_name}, v{index})")
                    decl, code = _fortran_case(index, len(shape), shape, call, slab_shape)
                    inputs += [q, values]
                else:
                    want = _padded_reference(q, axis, halo, n, kind, (side,))
                    call = (f"call {call_name}(a{index}, {_halo_list(len(shape), axis, halo)}, "
                            f"{axis + 1}, {side_name})")
                    decl, code = _fortran_case(index, len(shape), shape, call)
                    inputs.append(q)
                declarations.append(decl)
                body.append(code)
                expected.append(want)
                index += 1
    # faces: a wall's boundary face zeroed and the faces beyond mirrored (face_halo 2)
    for rank, axis in ((1, 0), (2, 1), (3, 0)):
        for side in (0, 1):
            shape = [3] * rank
            shape[axis] = 9
            u = rng.standard_normal(shape)
            moved = np.moveaxis(u.copy(), axis, 0)
            b = 2 if side == 0 else 6
            moved[b] = 0.0
            step = -1 if side == 0 else 1
            for k in (1, 2):
                moved[b + step * k] = -moved[b - step * k]
            side_name = f"{name}_side_{'low' if side == 0 else 'high'}"
            call = f"call {name}_faces_wall(a{index}, {axis + 1}, {side_name})"
            decl, code = _fortran_case(index, rank, shape, call)
            declarations.append(decl)
            body.append(code)
            inputs.append(u)
            expected.append(np.moveaxis(moved, 0, axis))
            index += 1
    program = FORTRAN_DRIVER.format(name=name, declarations="".join(declarations),
                                    body="".join(body)).replace(
        "  implicit none", "  use, intrinsic :: iso_c_binding, only: c_double\n  implicit none")
    driver = build_fortran_host(tmp_path, scheme, program, native=native,
                                flags=("-std=f2008", "-Wall", "-Werror", "-O1"))
    (tmp_path / "in.bin").write_bytes(b"".join(a.ravel(order="F").tobytes() for a in inputs))
    run(tmp_path, str(driver))
    data = np.frombuffer((tmp_path / "out.bin").read_bytes(), np.float64)
    offset = 0
    for want in expected:
        got = data[offset:offset + want.size].reshape(want.shape, order="F")
        offset += want.size
        assert np.array_equal(got, want)
    assert offset == len(data)


def test_generated_c_with_fills_compiles_warning_free(tmp_path):
    """The header and kernel with the fills, C99 under the strict flags the README names."""
    gcc = shutil.which("gcc")
    assert gcc
    for precision in ("double", "float"):
        scheme = load_scheme(SCHEME)
        for file, text in c_files(scheme, precision).items():
            (tmp_path / file).write_text(text)
        subprocess.run([gcc, "-std=c99", "-O2", "-Wall", "-Wextra", "-Wpedantic", "-Wshadow",
                        "-Wconversion", "-Werror", "-c", f"{scheme.name}.c"], cwd=tmp_path,
                       check=True, capture_output=True, text=True)


def test_fortran_names_fit_every_scheme_name_the_front_end_accepts():
    assert all(len(suffix) <= len(LONGEST_FORTRAN_SUFFIX) for suffix in FORTRAN_SUFFIXES)


def test_fortran_module_compiles_in_single_precision(tmp_path):
    scheme = load_scheme(SCHEME)
    (tmp_path / "mod.f90").write_text(c_files(scheme, "float")[f"{scheme.name}_mod.f90"])
    subprocess.run([shutil.which("gfortran"), "-std=f2003", "-Wall", "-Werror", "-c", "mod.f90"],
                   cwd=tmp_path, check=True, capture_output=True, text=True)


def test_line_fill_gives_line_sweep_the_same_edges():
    """LineSweep with the runtime's wall/inflow/outflow fill equals EdgeSweep with the
    generated ones (a single-stage kernel: LineSweep's fill then holds at every stage)."""
    scheme = load_scheme(EXAMPLES / "lw_vanleer.loom")
    edges = ((Edge("inflow", 0.5), Edge("outflow")), (Edge("wall"), Edge("wall")))
    rng = np.random.default_rng(3)
    interior = rng.random((12, 9))
    u = np.full((13, 9), 0.7)
    v = rng.uniform(-0.5, 0.5, (12, 10))
    edge_sweep = EdgeSweep(scheme, "numpy")
    v_walled = extend_faces(edge_sweep.fills, v, 1, 0, edges)
    line_sweep = LineSweep(load_kernel(scheme, "numpy"), line_fill(lambda axis: edges[axis]))
    expected = line_sweep(1, line_sweep(0, interior, u, 0.6), v_walled, 0.6)
    q = edge_sweep.padded(interior)
    edge_sweep(0, q, u, 0.6, edges)
    edge_sweep(1, q, v_walled, 0.6, edges)
    assert np.array_equal(edge_sweep.interior(q), expected)
    assert v_walled[:, 0].max() == 0 == v_walled[:, -1].min()
    with pytest.raises(BoundaryError, match="periodic partner"):
        edge_sweep(0, q, u, 0.6, ((Edge("periodic"), Edge("wall")), edges[1]))
