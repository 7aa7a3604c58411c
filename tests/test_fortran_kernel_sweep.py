"""The native Fortran target's sweep: compiled strictly, NAME_sweep_edges agrees with the C
sweep on every example (both precisions, rank 1-3, every axis, two tracers, every edge
kind, one or per-cell dt/dx, thicknesses through the Runge-Kutta stages), refuses what the
C sweep refuses, and hosts written for the Fortran interface run unchanged on it but for
their `use` line.

The C sweep is held against the reference line sweep and numpy elsewhere
(tests/test_sweep_kernels.py, tests/test_sweep_edges.py); here the native sweep is also
held against computations that share no code with it: the numpy back end's sweep (the
hosts), the stage-by-stage edge reference (runtime/edge_sweeps.py, numpy back end), and an
SSP-RK3 stepper of the thickness-weighted form written in this file, with the
conservation of sum(h dx q) and the constancy of a constant tracer when h changes by the
same mass fluxes (consistency with continuity, common practice, no source).
"""
from __future__ import annotations

import cffi
import numpy as np
import pytest
from conftest import EXAMPLES
from sweep_hosts import (EDGES_PROGRAM, PLAIN_PROGRAM, STRICT_FORTRAN, build_fortran_host,
                         expected_edges, expected_plain, printed_sweeps, run, tool)

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.emit.c import c_declarations
from fluxloom.compiler.emit.plan import exported_symbol
from fluxloom.compiler.emit.targets import target
from fluxloom.runtime.array_sweep import c_sweep_runner
from fluxloom.runtime.boundaries import Edge
from fluxloom.runtime.boundary_sweep import BoundarySweep
from fluxloom.runtime.edge_sweeps import EdgeSweep
from fluxloom.runtime.kernel import Kernel, load_kernel

ULPS = 4   # a few units in the last place (the sweeps follow the same operations; the
           # runs here measured 0 on every example, both precisions, with gcc and gfortran)
SHAPES = ((13,), (6, 9), (4, 5, 7))
PATHS = ("lw_vanleer", "kappa_rk3", "lw_fct")
"""One scheme per path of the sweep: single-stage, multi-stage, flux-corrected."""


def strict_library(tmp_path, scheme, precision: str = "double"):
    """The module built with -std=f2008 -Wall -Wextra -Werror (lines <= 132 columns), as
    (ffi, lib) with the C header's declarations."""
    (name, text), = target("fortran").files(scheme, precision).items()
    source = tmp_path / f"{precision}_{name}"
    source.write_text(text)
    assert max(len(line) for line in text.splitlines()) <= 132
    library = tmp_path / f"{precision}_{scheme.name}.so"
    run(tmp_path, tool("gfortran"), *STRICT_FORTRAN, "-O2", "-fPIC", "-shared",
        f"-J{tmp_path}", str(source), "-o", str(library))
    ffi = cffi.FFI()
    ffi.cdef(c_declarations(scheme, precision))
    return ffi, ffi.dlopen(str(library))


def strict_sweep_kernel(tmp_path, scheme, precision) -> Kernel:
    """The strictly built module's sweep as Kernel.sweep (as runtime/kernel.py loads it)."""
    ffi, lib = strict_library(tmp_path, scheme, precision)
    c_kernel = load_kernel(scheme, "c", precision)
    return Kernel(scheme.name, "fortran", precision, c_kernel.halo, c_kernel.face_halo,
                  c_kernel.stages, None, None, c_sweep_runner(ffi, lib, scheme.name, precision),
                  bool(getattr(lib, f"{scheme.name}_SWEEP_WIDTHS")),
                  bool(getattr(lib, f"{scheme.name}_SWEEP_THICKNESS")))


def ulps_apart(a, b) -> float:
    scale = np.spacing(np.maximum(np.abs(b), np.finfo(b.dtype).tiny))
    return float(np.max(np.abs(a - b) / scale))


def compare_sweeps(fortran: Kernel, c_kernel: Kernel, rng) -> None:
    dtype, halo = c_kernel.dtype, c_kernel.halo
    for shape in SHAPES:
        for axis in range(len(shape)):
            halos = tuple(halo + (d % 2) for d in range(len(shape)))   # wider than needed
            extents = tuple(n + 2 * h for n, h in zip(shape, halos))
            q = rng.uniform(-1.0, 2.0, (2,) + extents).astype(dtype)   # two tracers
            faces = list(shape)
            faces[axis] += 1
            u = rng.uniform(-1.0, 1.0, faces).astype(dtype)
            u[rng.random(faces) < 0.15] = 0.0
            slab = list((2,) + extents)
            slab[1 + axis] = halos[axis]
            runs = [dict(dt_dx=0.45)]
            if c_kernel.sweep_widths:
                runs.append(dict(dt_dx=rng.uniform(0.2, 0.5, shape[axis] + 2).astype(dtype)))
            if c_kernel.sweep_thickness:
                h_old = rng.uniform(0.5, 1.5, extents).astype(dtype)
                runs.append(dict(dt_dx=runs[-1]["dt_dx"], h_old=h_old,
                                 h_new=(h_old * rng.uniform(0.9, 1.1, extents)).astype(dtype)))
            for edges in (None, (Edge("wall"), Edge("inflow", rng.uniform(0, 1, slab))),
                          (Edge("outflow"), Edge("wall")), (Edge("inflow", 0.3), Edge("outflow"))):
                for args in runs:
                    by_fortran = fortran.sweep(q, u, axis=axis, halo=halos, edges=edges, **args)
                    by_c = c_kernel.sweep(q, u, axis=axis, halo=halos, edges=edges, **args)
                    assert ulps_apart(by_fortran, by_c) <= ULPS, (shape, axis, edges, sorted(args))


@pytest.mark.slow
@pytest.mark.parametrize("precision", ["double", "float"])
def test_every_example_sweeps_like_the_c_kernel(tmp_path, precision):
    rng = np.random.default_rng(21)
    for path in sorted(EXAMPLES.glob("*.loom")):
        scheme = load_scheme(path)
        c_kernel = load_kernel(scheme, "c", precision)
        compare_sweeps(strict_sweep_kernel(tmp_path, scheme, precision), c_kernel, rng)


@pytest.mark.parametrize("stem", PATHS)
def test_the_loaded_fortran_target_sweeps_like_the_c_kernel(stem):
    """load_kernel(scheme, 'fortran') through the registry's loader."""
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    fortran, c_kernel = load_kernel(scheme, "fortran"), load_kernel(scheme, "c")
    assert (fortran.sweep_widths, fortran.sweep_thickness) == (c_kernel.sweep_widths,
                                                               c_kernel.sweep_thickness)
    compare_sweeps(fortran, c_kernel, np.random.default_rng(5))


def _argument_cases(n: int, halo: int):
    """(rank, per_cell, thickness, low, high, inflow_low, inflow_high, work_reals factor,
    halo) cases for both sweeps, legal and not."""
    cases = []
    for per_cell in (0, 1):
        for thickness in (False, True):
            cases.append((1, per_cell, thickness, 0, 0, False, False, 1, halo))
    for low, high in ((1, 2), (2, 3), (3, 1), (0, 2), (2, 0), (4, 1), (-1, 1)):
        for inflow in (False, True):
            cases.append((1, 0, False, low, high, inflow, inflow, 1, halo))
    cases += [(1, 1, True, 2, 2, False, False, 1, halo), (1, 0, False, 0, 0, False, False, 0, halo),
              (1, 0, False, 1, 1, False, False, 2, halo), (4, 0, False, 0, 0, False, False, 1, halo),
              (1, 0, False, 0, 0, False, False, 1, halo - 1)]
    return cases


@pytest.mark.parametrize("stem", PATHS + ("vanleer_rk3",))
def test_the_fortran_sweep_refuses_what_the_c_sweep_refuses(tmp_path, stem):
    """The same arguments through NAME_sweep_edges of both: the same status (0, bad
    arguments 1, unsupported 2), and where both accept, the same values."""
    from fluxloom.runtime.build import compile_c

    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    name, n = scheme.name, 6
    libraries = [strict_library(tmp_path, scheme), compile_c(scheme, "double")]
    halo = int(getattr(libraries[0][1], f"{name}_HALO"))
    face_halo = int(getattr(libraries[0][1], f"{name}_FACE_HALO"))
    rng = np.random.default_rng(3)
    q = rng.uniform(1, 2, n + 2 * halo)
    u = rng.uniform(-0.5, 0.5, n + 1 + 2 * face_halo)
    dt_dx = np.full(n + 2, 0.3)
    h = rng.uniform(1, 2, n + 2 * halo)
    values = rng.uniform(0, 1, halo)
    statuses = []
    for rank, per_cell, thickness, low, high, with_low, with_high, factor, width in \
            _argument_cases(n, halo):
        results = []
        for ffi, lib in libraries:
            buf = lambda a: ffi.from_buffer("double[]", a)   # noqa: E731
            sweep = getattr(lib, exported_symbol(name, "sweep_edges", "double"))
            size = int(getattr(lib, exported_symbol(name, "sweep_workspace_size", "double"))(n))
            work = np.zeros(max(size * max(factor, 1), 1))
            out = np.zeros_like(q)
            thick = (buf(h), buf(h)) if thickness else (ffi.NULL, ffi.NULL)
            status = sweep(rank, ffi.new("size_t[]", [n]), ffi.new("size_t[]", [max(width, 0)]),
                           0, 1, buf(q), buf(out), buf(u), buf(dt_dx), per_cell, *thick, low,
                           high, buf(values) if with_low else ffi.NULL,
                           buf(values) if with_high else ffi.NULL, buf(work), size * factor)
            results.append((status, out))
        (native, native_out), (c, c_out) = results
        assert native == c, (rank, per_cell, thickness, low, high, with_low, factor, width)
        if native == 0:
            assert ulps_apart(native_out, c_out) <= ULPS
        statuses.append(native)
    assert 0 in statuses and 1 in statuses           # the cases reach both answers
    assert (2 in statuses) == (stem == "lw_fct")     # only flux correction refuses


@pytest.mark.parametrize("stem", PATHS + ("vanleer_rk3",))
def test_the_workspace_is_counted_as_the_c_sweep_counts_it(stem):
    from fluxloom.runtime.build import compile_c
    from fluxloom.runtime.kernel import shared_library

    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    counts, steps = [], []
    for ffi, lib in (shared_library(scheme, "fortran", "float"), compile_c(scheme, "float")):
        size = getattr(lib, exported_symbol(scheme.name, "sweep_workspace_size", "float"))
        step = getattr(lib, exported_symbol(scheme.name, "workspace_size", "float"))
        counts.append([int(size(n)) for n in (1, 7, 1000)])
        steps.append([int(step(n)) for n in (1, 7, 1000)])
    assert counts[0] == counts[1]
    # a line's slice holds what the module's own step needs (its sweep hands it over)
    assert all(count == 0 or step <= count for step, count in zip(steps[0], counts[0]))


def test_hosts_written_for_the_interface_run_on_the_native_module(tmp_path):
    """The interface tests' host programs with only their `use` line changed: no C
    compiler, and the numbers of the numpy back end's sweep (periodic, per-cell dt/dx;
    and a Runge-Kutta sweep with walls, an inflow, an outflow and work for two threads)."""
    plain = load_scheme(EXAMPLES / "lw_vanleer.loom")
    (tmp_path / "plain").mkdir()
    host = build_fortran_host(tmp_path / "plain", plain, PLAIN_PROGRAM, native=True,
                              flags=STRICT_FORTRAN[:1] + ("-O2",))
    got_x, got_y = printed_sweeps(run(tmp_path, str(host)), 7, 5)
    want_x, want_y = expected_plain(load_kernel(plain, "numpy"))
    np.testing.assert_allclose(got_x, want_x, rtol=1e-15, atol=1e-15)
    np.testing.assert_allclose(got_y, want_y, rtol=1e-15, atol=1e-15)
    stages = load_scheme(EXAMPLES / "vanleer_rk3.loom")
    (tmp_path / "edges").mkdir()
    host = build_fortran_host(tmp_path / "edges", stages, EDGES_PROGRAM, native=True,
                              flags=("-O2", "-fopenmp"))
    got_x, got_y = printed_sweeps(run(tmp_path, str(host)), 9, 6)
    want_x, want_y, periodic_x = expected_edges(load_kernel(stages, "numpy"))
    np.testing.assert_allclose(got_x, want_x, rtol=1e-13, atol=1e-14)
    np.testing.assert_allclose(got_y, want_y, rtol=1e-13, atol=1e-14)
    assert np.max(np.abs(periodic_x - got_x)) > 1e-6   # the edges matter


def test_the_2d_basin_host_runs_on_the_native_module(tmp_path):
    """examples/embed/tidal_basin_2d.f90 (halo helpers, wall faces, per-cell dt/dx, three
    tracers, Strang steps) with only its `use` line changed, against the numpy rebuild of
    its model (tests/test_embed.py)."""
    from conftest import ROOT
    from test_embed import basin_2d_reference, run_basin_2d

    scheme = load_scheme(EXAMPLES / "tidewater.loom")
    program = (ROOT / "examples" / "embed" / "tidal_basin_2d.f90").read_text()
    host = build_fortran_host(tmp_path, scheme, program, native=True)
    steps = 12
    got = run_basin_2d(host, steps)
    assert got["scheme"] == "tidewater" and got["steps"] == steps
    assert np.max(np.abs(got["field"] - basin_2d_reference(steps))) < 1e-12


# ---- against computations that share no code with the sweep ------------------------------

@pytest.mark.parametrize("stem", ["vanleer_rk3", "lw_fct"])
def test_verify_boundary_path_matches_the_stage_by_stage_reference(stem):
    """BoundarySweep on the native module (its halo helpers, then NAME_sweep_edges) against
    EdgeSweep on the numpy back end (the numpy stage per line, numpy fills before every
    stage) in 2-D: walls, an inflow and an outflow."""
    scheme = load_scheme(EXAMPLES / f"{stem}.loom")
    native, reference = BoundarySweep(scheme, "fortran"), EdgeSweep(scheme, "numpy")
    rng = np.random.default_rng(8)
    interior = rng.uniform(0.2, 1.0, (11, 9))
    edges = ((Edge("inflow", 0.7), Edge("outflow")), (Edge("wall"), Edge("wall")))
    q_native, q_reference = native.padded(interior), reference.padded(interior)
    face_halo = native.face_halo
    for axis, shape in ((0, (12 + 2 * face_halo, 9)), (1, (11, 10 + 2 * face_halo))):
        u = rng.uniform(0.1, 0.6, shape)
        if axis == 1:   # walls: no flow through the end faces (and mirrored beyond)
            native.fills.faces_wall(u, 1, face_halo, 0)
            native.fills.faces_wall(u, 1, face_halo, 1)
        native(axis, q_native, u, 0.4, edges)
        reference(axis, q_reference, u, 0.4, edges)
    np.testing.assert_allclose(native.interior(q_native), reference.interior(q_reference),
                               rtol=1e-13, atol=1e-14)


def _random_linear_rk3(rng):
    """A scheme nobody has seen: a random consistent linear face of three cells (weights
    summing to 1) stepped by SSP-RK3; and its weights."""
    b, c = rng.uniform(0.1, 0.35), rng.uniform(0.0, 0.2)
    a = 1.0 - b - c
    text = (f"scheme random_face_rk3 {{\n  time ssp_rk3\n"
            f"  flux = u * ({a!r} * q[0] + {b!r} * q[1] + {c!r} * q[-1])\n}}\n")
    return scheme_from_text(text, file="random_face_rk3.loom"), (a, b, c)


def _ghosts(line, halo, ends, values):
    """A line's interior with `halo` ghost cells per side by the edge rules: periodic
    (wrap), outflow (edge), wall (mirror about the face) by np.pad, inflow from values."""
    modes = {"periodic": "wrap", "outflow": "edge", "wall": "symmetric"}
    full = np.empty(len(line) + 2 * halo)
    full[halo:halo + len(line)] = line
    for side, kind in enumerate(ends):
        if kind == "inflow":
            if side == 0:
                full[:halo] = values[0]
            else:
                full[halo + len(line):] = values[1]
        else:
            padded = np.pad(line, halo, mode=modes[kind])
            if side == 0:
                full[:halo] = padded[:halo]
            else:
                full[halo + len(line):] = padded[halo + len(line):]
    return full


def _weighted_ssp_rk3(q, mass_fluxes, d, h_old, h_new, halo, weights, ends, values):
    """One SSP-RK3 step (Shu and Osher 1988, the three-stage form q1 = q + dt L(q),
    q2 = 3/4 q + 1/4 (q1 + dt L(q1)), q3 = 1/3 q + 2/3 (q2 + dt L(q2)) [mem]) of one line
    in the thickness-weighted form: the mass m = h q and the thickness h advance by the
    same stages; stage tracers are m / h with ghost cells by the edge rules."""
    a, b, c = weights
    n = len(q)
    U = mass_fluxes                                  # faces 0 .. n, face f left of cell f

    def dm(stage):
        full = _ghosts(stage, halo, ends, values)
        f = np.arange(n + 1)
        forward = a * full[halo + f - 1] + b * full[halo + f] + c * full[halo + f - 2]
        backward = a * full[halo + f] + b * full[halo + f - 1] + c * full[halo + f + 1]
        flux = U * np.where(U >= 0, forward, backward)
        return d * np.diff(flux)

    dh = d * np.diff(U)
    m0, h0 = h_old * q, h_old
    m1, h1 = m0 - dm(q), h0 - dh
    m2, h2 = 0.75 * m0 + 0.25 * (m1 - dm(m1 / h1)), 0.75 * h0 + 0.25 * (h1 - dh)
    m3 = m0 / 3 + 2 / 3 * (m2 - dm(m2 / h2))
    return m3 / h_new


@pytest.mark.parametrize("ends", [("periodic", "periodic"), ("wall", "inflow"),
                                  ("inflow", "outflow"), ("outflow", "wall")])
def test_thickness_through_stages_matches_an_own_ssp_rk3_stepper(ends):
    """Per-cell widths, a random face and random thicknesses along both axes of a 2-D
    array (two tracers), every stage's ghost cells by the ends: the native sweep against
    the stepper above; and the facts it must keep whatever the stepper: sum(h dx q)
    conserved on a periodic line, a constant tracer kept constant when h changes by the
    same mass fluxes (h_new = h_old - dt/dx (U(j+1/2) - U(j-1/2)))."""
    rng = np.random.default_rng(sum(map(ord, "".join(ends))))
    scheme, weights = _random_linear_rk3(rng)
    kernel = load_kernel(scheme, "fortran")
    assert kernel.stages == 3 and kernel.sweep_thickness
    halo = kernel.halo
    shape = (9, 12)
    extents = tuple(s + 2 * halo for s in shape)
    for axis in (0, 1):
        n = shape[axis]
        dx = rng.uniform(0.5, 1.5, n + 2)                       # cells -1 .. n
        d = 0.3 * dx.min() / dx                                 # dt/dx per cell
        faces = list(shape)
        faces[axis] += 1
        U = rng.uniform(-0.4, 0.6, faces)
        if ends[0] == "periodic":
            np.moveaxis(U, axis, -1)[..., -1] = np.moveaxis(U, axis, -1)[..., 0]
        h_old = rng.uniform(1.0, 2.0, extents)
        rows = slice(halo, halo + shape[1 - axis])               # interior lines
        h_new = h_old.copy()
        np.moveaxis(h_new, axis, -1)[rows, halo:halo + n] = (
            np.moveaxis(h_old, axis, -1)[rows, halo:halo + n]
            - d[1:-1] * np.diff(np.moveaxis(U, axis, -1), axis=-1))
        q = rng.uniform(0.5, 1.5, (2,) + extents)
        slab = list((2,) + extents)
        slab[1 + axis] = halo
        inflow = rng.uniform(0.0, 1.0, slab)
        edges = tuple(Edge(kind, inflow) if kind == "inflow" else Edge(kind) for kind in ends)
        for t in range(2):   # the caller fills the start's ghost cells by the same rules
            moved_q = np.moveaxis(q[t], axis, -1)
            slab_lines = np.moveaxis(inflow[t], axis, -1)
            for index in np.ndindex(moved_q.shape[:-1]):
                moved_q[index] = _ghosts(moved_q[index][halo:halo + n], halo, ends,
                                         (slab_lines[index], slab_lines[index]))
        got = kernel.sweep(q, U, d, axis, h_old=h_old, h_new=h_new, edges=edges)
        inside = tuple(slice(halo, halo + s) for s in shape)
        for t in range(2):
            moved_q = np.moveaxis(q[t][inside], axis, -1)
            moved_got = np.moveaxis(got[t][inside], axis, -1)
            moved_U = np.moveaxis(U, axis, -1)
            old = np.moveaxis(h_old[inside], axis, -1)
            new = np.moveaxis(h_new[inside], axis, -1)
            slab_lines = np.moveaxis(inflow[t][tuple(
                slice(halo, halo + s) if e != axis else slice(None)
                for e, s in enumerate(shape))], axis, -1)
            for i in range(moved_q.shape[0]):
                want = _weighted_ssp_rk3(moved_q[i], moved_U[i], d[1:-1], old[i], new[i],
                                         halo, weights, ends, (slab_lines[i], slab_lines[i]))
                np.testing.assert_allclose(moved_got[i], want, rtol=1e-12, atol=1e-13)
                if ends[0] == "periodic":
                    before = np.sum(old[i] * dx[1:-1] * moved_q[i])
                    after = np.sum(new[i] * dx[1:-1] * moved_got[i])
                    assert abs(after - before) <= 1e-13 * abs(before)
        constant = np.full_like(q, 0.7)
        level = Edge("inflow", 0.7)
        kept = kernel.sweep(constant, U, d, axis, h_old=h_old, h_new=h_new,
                            edges=tuple(level if kind == "inflow" else Edge(kind)
                                        for kind in ends))
        np.testing.assert_allclose(kept[(slice(None),) + inside], 0.7, rtol=1e-13, atol=0)


def test_the_native_module_is_generated_deterministically():
    """Same spec, same bytes: two interpreters with different hash seeds agree, one scheme
    per path of the sweep, both precisions."""
    from conftest import outputs_under_hash_seeds

    script = ("import hashlib, sys\n"
              "from fluxloom.compiler import load_scheme\n"
              "from fluxloom.compiler.emit.targets import target\n"
              "digest = hashlib.sha256()\n"
              "for path in sys.argv[1:]:\n"
              "    for precision in ('double', 'float'):\n"
              "        for name, text in target('fortran').files(load_scheme(path), precision).items():\n"
              "            digest.update(name.encode() + text.encode())\n"
              "print(digest.hexdigest())\n")
    paths = [str(EXAMPLES / f"{stem}.loom") for stem in PATHS + ("vanleer_rk3",)]
    assert len(outputs_under_hash_seeds(script, paths, ("1", "12345"))) == 1


# ---- verify --boundary on the native module ---------------------------------------------

def _verify_native(capsys, stem: str, *args):
    import json

    from fluxloom.runtime.cli import main

    status = main(["verify", str(EXAMPLES / f"{stem}.loom"), "--backend", "fortran", "--json",
                   *args])
    return status, json.loads(capsys.readouterr().out)


def test_verify_boundary_runs_the_native_sweep(capsys):
    # a Runge-Kutta scheme: the walls hold at every stage inside NAME_sweep_edges, so no
    # mass crosses them and the basin is the mirrored periodic run to round-off
    status, doc = _verify_native(capsys, "vanleer_rk3", "--boundary", "wall")
    assert status == 0 and doc["agree"] is True
    assert doc["boundary"]["backend"] == "fortran"
    assert "generated sweep with edges" in doc["boundary"]["path"]
    (run,) = doc["boundary"]["runs"]
    assert run["mass_drift"] <= 1e-12 and run["image_mismatch"] <= 1e-12


def test_verify_boundary_on_the_native_module_disagrees_with_a_leaking_wall(capsys, monkeypatch):
    """Fed a wrong wall (its boundary face left open), verify must disagree."""
    from fluxloom.runtime.boundaries import FAULT_VARIABLE

    monkeypatch.setenv(FAULT_VARIABLE, "wall-leak")
    status, doc = _verify_native(capsys, "lax_wendroff", "--boundary", "wall")
    assert status == 1 and doc["agree"] is False
    assert doc["boundary"]["injected_fault"] == "wall-leak"
    verdicts = {f["check"]: f["verdict"] for f in doc["findings"] if f.get("case") == "basin"}
    assert verdicts["conservation"] == "disagree"
