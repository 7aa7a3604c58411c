"""Kernel symbols carry the precision: a host built against a header (or Fortran
interface) of one precision does not link with an object of the other, and the
native Fortran target holds the longest scheme name the front end allows.

That a call through a mismatched prototype would pass doubles where floats are
read is a fact of the C ABI (common practice, no source); the test shows the
build refuses instead of running it.
"""
from __future__ import annotations

import re
import shutil
import subprocess

import pytest
from conftest import EXAMPLES

from fluxloom.compiler import load_scheme, scheme_from_text
from fluxloom.compiler.check import FORTRAN_NAME_LIMIT, LONGEST_FORTRAN_SUFFIX
from fluxloom.compiler.emit import c_files
from fluxloom.compiler.emit.targets import target

HOST = """#include "upwind.h"
int main(void)
{
    double q[12] = {0}, out[12] = {0}, u[11] = {0}, work[64];
    upwind_step(10, q, out, u, 0.5, work);
    return (int)out[1];
}
"""
FORTRAN_HOST = """program host
  use, intrinsic :: iso_c_binding, only: c_size_t
  use upwind_mod
  implicit none
  real(upwind_real) :: q(0:11), next(0:11), u(0:10), work(64)
  q = 0
  u = 0
  call upwind_step(10_c_size_t, q, next, u, 0.5_upwind_real, work)
  print *, next(1)
end program host
"""


def tool(name: str) -> str:
    found = shutil.which(name)
    assert found, f"{name} is required (the project's set-up installs it: .ci/install)"
    return found


def write(directory, precision):
    directory.mkdir()
    for name, text in c_files(load_scheme(EXAMPLES / "upwind.loom"), precision).items():
        (directory / name).write_text(text)
    subprocess.run([tool("gcc"), "-std=c99", "-c", "upwind.c"], cwd=directory, check=True)
    return directory


@pytest.mark.parametrize("header, object_", [("double", "float"), ("float", "double")])
def test_a_c_host_does_not_link_with_an_object_of_the_other_precision(tmp_path, header, object_):
    built = {p: write(tmp_path / p, p) for p in ("double", "float")}
    (tmp_path / "host.c").write_text(HOST.replace("double", header))
    same = subprocess.run([tool("gcc"), "-std=c99", f"-I{built[header]}", "host.c",
                           str(built[header] / "upwind.o"), "-o", "same"], cwd=tmp_path,
                          capture_output=True, text=True)
    assert same.returncode == 0, same.stderr
    clash = subprocess.run([tool("gcc"), "-std=c99", f"-I{built[header]}", "host.c",
                            str(built[object_] / "upwind.o"), "-o", "clash"], cwd=tmp_path,
                           capture_output=True, text=True)
    tag = {"double": "f64", "float": "f32"}[header]
    assert clash.returncode != 0 and f"upwind_step_{tag}" in clash.stderr


def test_a_fortran_host_does_not_link_with_an_object_of_the_other_precision(tmp_path):
    built = {p: write(tmp_path / p, p) for p in ("double", "float")}
    for precision, directory in built.items():
        subprocess.run([tool("gfortran"), "-std=f2003", "-c", "upwind_mod.f90"], cwd=directory,
                       check=True)
    (tmp_path / "host.f90").write_text(FORTRAN_HOST)
    link = []
    for obj in ("double", "float"):
        done = subprocess.run([tool("gfortran"), f"-I{built['double']}", "host.f90",
                               str(built["double"] / "upwind_mod.o"), str(built[obj] / "upwind.o"),
                               "-o", f"host_{obj}"], cwd=tmp_path, capture_output=True, text=True)
        link.append(done)
    assert link[0].returncode == 0, link[0].stderr
    assert link[1].returncode != 0 and "upwind_step_f64" in link[1].stderr


@pytest.mark.parametrize("stem", ["lw_fct", "lw_vanleer", "kappa_rk3"])
def test_the_native_fortran_target_holds_the_longest_scheme_name(tmp_path, stem):
    # one scheme per path of the module's sweep: flux-corrected, single-stage, multi-stage
    # (edges and thicknesses through the stages); both precisions, with and without OpenMP
    name = "s" * (FORTRAN_NAME_LIMIT - len(LONGEST_FORTRAN_SUFFIX))
    text = re.sub(r"^scheme\s+\w+", f"scheme {name}",
                  (EXAMPLES / f"{stem}.loom").read_text(), flags=re.M)
    scheme = scheme_from_text(text, file="long.loom")
    for precision in ("double", "float"):
        (file_name, source), = target("fortran").files(scheme, precision).items()
        assert max(len(line) for line in source.splitlines()) <= 132
        assert f"function {name}_sweep(" in source   # 132 columns with the sweep too
        for suffix in ("_sweep_edges", "_halo_inflow", "_faces_wall"):
            assert f'bind(C, name="{name}{suffix}_' in source
        (tmp_path / file_name).write_text(source)
        for openmp in ((), ("-fopenmp",)):
            done = subprocess.run([tool("gfortran"), "-std=f2008", "-Wall", "-Wextra", "-Werror",
                                   *openmp, "-c", file_name], cwd=tmp_path, capture_output=True,
                                  text=True)
            assert done.returncode == 0 and not done.stderr, done.stderr


@pytest.mark.parametrize("precision, tag", [("double", "f64"), ("float", "f32")])
def test_every_function_the_c_object_exports_carries_the_precision(tmp_path, precision, tag):
    """nm lists the object's global functions: the step, the sweeps and every halo fill
    end in the precision tag, and none is left under its plain name."""
    from fluxloom.compiler.emit.plan import C_FUNCTIONS, exported_symbol

    built = write(tmp_path / precision, precision)
    listing = subprocess.run([tool("nm"), "--defined-only", "-g", "upwind.o"], cwd=built,
                             capture_output=True, text=True, check=True).stdout
    # T: a function; i: one the compiler dispatches per CPU (target_clones)
    defined = {line.split()[-1] for line in listing.splitlines()
               if line.split()[-2] in ("T", "i")}
    assert defined == {exported_symbol("upwind", f, precision) for f in C_FUNCTIONS}
    assert all(symbol.endswith(f"_{tag}") for symbol in defined)
