"""Decomposed runs through mpiexec on 2, 3 and 4 processes (oversubscribed on small
machines): the generated kernels on blocks, halos exchanged as the schedule says,
against the single-domain run bit for bit; and deliberate decomposition bugs caught.

The reference is the kernel's whole-domain step (`NAME_step`, periodic halos), a
different code path from the stage-by-stage decomposed run; bit-identity is the
fact of the trade that a correct decomposition changes no operation on any cell
(common practice, no source). Needs MPI (`pip install fluxloom[mpi]`; .ci/install
installs it, and test_decomposed_schedule.py fails in CI without it).
"""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from conftest import EXAMPLE_FILES, EXAMPLES, require_mpi_or_skip

from fluxloom.compiler import load_scheme
from fluxloom.compiler.emit.exchange import exchange_schedule
from fluxloom.runtime.cli import main
from fluxloom.runtime.decomposed.finding import FAULT_VARIABLE, verify_decomposed, verify_many
from fluxloom.runtime.decomposed.launch import find_mpiexec
from fluxloom.runtime.profiles import MIXED

require_mpi_or_skip()  # the only guard: MPI itself is absent (a failure under CI)

SWEEP_PROGRAM = Path(__file__).with_name("mpi_sweep_program.py")


def assert_all_agree(results, ranks):
    for r in results:
        assert r.agree, (r.scheme, r.finding().measured)
        assert r.identical and r.max_difference == 0.0
        s = exchange_schedule(load_scheme(EXAMPLES / f"{r.scheme}.loom"))
        assert r.exchanges_per_step == s.per_step
        uneven = r.layouts["uneven"].splits[0]
        assert len(uneven) == ranks and len(set(uneven)) == 2      # does not divide evenly
        narrow = r.layouts["narrowest"].splits[0]
        assert min(narrow) == max(s.halo, s.face_halo)             # as narrow as the halo allows


@pytest.mark.slow
def test_every_example_numpy_on_three_ranks():
    schemes = [load_scheme(p) for p in EXAMPLE_FILES]
    results = verify_many(schemes, "numpy", ranks=3, steps=20)
    assert {r.scheme for r in results} == {s.name for s in schemes}
    assert_all_agree(results, 3)


@pytest.mark.slow
def test_every_example_c_on_two_ranks():
    results = verify_many([load_scheme(p) for p in EXAMPLE_FILES], "c", ranks=2, steps=20)
    assert len(results) == len(EXAMPLE_FILES)
    assert_all_agree(results, 2)


@pytest.mark.slow
@pytest.mark.parametrize("backend", ["numpy", "c"])
def test_four_ranks_runge_kutta_fct_and_clip(backend):
    names = ("kappa_rk3", "lw_fct", "vanleer_clip")
    results = verify_many([load_scheme(EXAMPLES / f"{n}.loom") for n in names], backend, ranks=4,
                          velocity="-1", steps=20)
    assert_all_agree(results, 4)


def test_verify_ranks_reports_the_decomposed_finding(capsys):
    spec = str(EXAMPLES / "upwind_rk3.loom")
    status = main(["verify", spec, "--ranks", "2", "--backend", "c", "--json"])
    document = json.loads(capsys.readouterr().out)
    assert status == 0 and document["agree"]
    decomposed = document["decomposed"]
    assert decomposed["ranks"] == 2 and decomposed["dims"] == [2]
    assert decomposed["identical"] is True and decomposed["max_difference"] == 0.0
    assert main(["check", spec, "--json"]) == 0
    exchange = json.loads(capsys.readouterr().out)["exchange"]
    assert decomposed["exchanges_per_step"] == exchange["per_step"] == 3
    finding = [f for f in document["findings"] if f["check"] == "decomposed"]
    assert len(finding) == 1 and finding[0]["verdict"] == "agree"


def test_a_missed_exchange_between_stages_makes_verify_disagree(monkeypatch, capsys):
    monkeypatch.setenv(FAULT_VARIABLE, "skip-stage-exchange")
    status = main(["verify", str(EXAMPLES / "kappa_rk3.loom"), "--ranks", "2", "--json"])
    document = json.loads(capsys.readouterr().out)
    assert status == 1 and not document["agree"]
    decomposed = document["decomposed"]
    assert decomposed["identical"] is False and decomposed["max_difference"] > 1e-3
    assert decomposed["fault"] == "skip-stage-exchange"
    assert decomposed["exchanges_per_step"] == 1 != decomposed["schedule"]["per_step"]
    where = decomposed["where"]
    assert where["block"][0] <= where["cell"] < where["block"][1]
    (finding,) = [f for f in document["findings"] if f["check"] == "decomposed"]
    assert finding["verdict"] == "disagree" and "fault injected" in finding["context"]


def test_a_halo_one_cell_too_narrow_is_caught():
    """Euler (limited), flux correction and a Runge-Kutta method, numpy and C. Flux
    correction reads its outermost ghost cell only through the local bounds, which
    rarely decide: the default 40 steps on four profiles and two flows still catch it."""
    schemes = [load_scheme(EXAMPLES / f"{n}.loom") for n in ("lw_vanleer", "lw_fct", "kappa_rk2")]
    for backend in ("numpy", "c"):
        for r in verify_many(schemes, backend, ranks=2, fault="narrow-halo"):
            assert not r.agree and not r.identical, (r.scheme, backend)
            assert r.finding().verdict == "disagree" and r.max_difference > 0


def test_one_rank_is_its_own_periodic_neighbour():
    r = verify_decomposed(load_scheme(EXAMPLES / "lw_fct.loom"), "c", ranks=1, steps=10)
    assert r.agree and list(r.layouts) == ["uneven"]


@pytest.mark.parametrize("spec, backend, splits, ranks", [
    ("kappa_rk3", "numpy", [[7, 6], [5, 6]], 4),          # 2-D, 2 x 2 uneven blocks
    ("lw_fct", "c", [[3, 5], [3, 8]], 4),                  # 2-D, blocks as narrow as the halo
    ("centred_rk4", "c", [[2, 5], [5], [3]], 2),           # 3-D, RK4's register per line
])
def test_multidimensional_blocks_with_a_sweep_hook(spec, backend, splits, ranks):
    """The N-D decomposition and exchanges, with a hook that applies the 1-D kernel to
    each line of a block, against whole-domain Lie-split sweeps on one process."""
    done = subprocess.run([find_mpiexec(), "-n", str(ranks), sys.executable, str(SWEEP_PROGRAM),
                           str(EXAMPLES / f"{spec}.loom"), backend, json.dumps(splits), "3"],
                          capture_output=True, text=True, stdin=subprocess.DEVNULL, timeout=600)
    assert done.returncode == 0, done.stderr[-3000:]
    result = json.loads(done.stdout.strip().splitlines()[-1])
    assert result["identical"], result


# ---- 2-D and 3-D: the splitting's sweeps on MPI's process grid ------------------------


def assert_grid_layouts(r, ranks):
    """Prime cells per axis on the process grid: uneven wherever an axis is split, and
    blocks as narrow as the halo allows (numpy.array_split is the independent split)."""
    s = exchange_schedule(load_scheme(EXAMPLES / f"{r.scheme}.loom"))
    width = max(s.halo, s.face_halo)
    uneven, narrow, walls = r.layouts["uneven"], r.layouts["narrowest"], r.layouts["walls"]
    assert uneven.ranks == narrow.ranks == ranks and uneven.dims == narrow.dims
    assert walls.splits == uneven.splits and walls.periodic == (False,) + (True,) * (r.dims - 1)
    for sizes, n, parts in zip(uneven.splits, uneven.cells, uneven.dims):
        assert list(sizes) == [len(a) for a in np.array_split(np.arange(n), parts)]
        assert parts == 1 or len(set(sizes)) == 2
    for sizes in narrow.splits:
        assert len(sizes) == 1 or min(sizes) == width


def assert_grid_agrees(results, ranks, dims):
    for r in results:
        assert r.agree, (r.scheme, r.finding().measured)
        assert r.identical and r.max_difference == 0.0 and r.dims == dims
        assert r.exchanges_per_step == r.expected_exchanges
        assert_grid_layouts(r, ranks)


@pytest.mark.parametrize("backend, ranks", [("c", 4), ("numpy", 2)])
def test_two_dimensional_runs_are_bit_identical(backend, ranks):
    names = ("kappa_rk3", "lw_fct", "centred_rk4", "vanleer_clip")
    results = verify_many([load_scheme(EXAMPLES / f"{n}.loom") for n in names], backend,
                          ranks=ranks, dims=2, steps=8, velocity="-1")
    assert_grid_agrees(results, ranks, 2)
    assert results[0].grid == ((2, 2) if ranks == 4 else (2, 1))
    # Strang in 2-D: x/2, y, x/2 per step, each sweep the 1-D schedule
    assert results[0].exchanges_per_step == 3 * 3 and results[1].exchanges_per_step == 3 * 2


def test_three_dimensional_runs_are_bit_identical():
    names = ("upwind_rk3", "lw_fct")
    results = verify_many([load_scheme(EXAMPLES / f"{n}.loom") for n in names], "c", ranks=4,
                          dims=3, steps=3, method="lie")
    assert_grid_agrees(results, 4, 3)
    assert results[0].grid == (2, 2, 1) and results[0].exchanges_per_step == 3 * 3


def test_verify_ranks_dims_2_json(capsys):
    spec = str(EXAMPLES / "upwind_rk3.loom")
    status = main(["verify", spec, "--ranks", "2", "--dims", "2", "--split", "lie",
                   "--backend", "c", "--json"])
    document = json.loads(capsys.readouterr().out)
    decomposed = document["decomposed"]
    assert status == 0 and document["agree"], decomposed
    assert decomposed["ranks"] == 2 and decomposed["dims"] == [2, 1]
    assert decomposed["identical"] is True and decomposed["max_difference"] == 0.0
    assert decomposed["exchanges_per_step"] == 2 * decomposed["schedule"]["per_step"] == 6
    (finding,) = [f for f in document["findings"] if f["check"] == "decomposed"]
    assert finding["verdict"] == "agree" and "2 x 1 process grid" in finding["context"]


def test_two_dimensional_decomposition_bugs_are_caught():
    """A missed exchange between Runge-Kutta stages, and a halo one cell too narrow for
    a one-stage scheme (the generated sweep on the block), flux correction and a
    Runge-Kutta scheme, on 4 oversubscribed processes (a 2 x 2 grid)."""
    (skipped,) = verify_many([load_scheme(EXAMPLES / "kappa_rk3.loom")], "c", ranks=4, dims=2,
                             steps=10, fault="skip-stage-exchange")
    document = skipped.to_json()
    assert not skipped.agree and document["identical"] is False and document["dims"] == [2, 2]
    assert document["max_difference"] > 1e-3 and document["fault"] == "skip-stage-exchange"
    assert document["exchanges_per_step"] == 3 != document["expected_exchanges_per_step"] == 9
    where = document["where"]
    assert all(lo <= i < hi for i, (lo, hi) in zip(where["cell"], where["block"]))
    assert skipped.finding().verdict == "disagree"
    schemes = [load_scheme(EXAMPLES / f"{n}.loom") for n in ("lw_vanleer", "lw_fct", "kappa_rk2")]
    for r in verify_many(schemes, "numpy", ranks=4, dims=2, steps=10, fault="narrow-halo"):
        assert not r.agree and not r.identical and r.max_difference > 0, r.scheme
        assert r.finding().verdict == "disagree"


@pytest.mark.slow
@pytest.mark.parametrize("backend", ["numpy", "c"])
def test_every_example_two_dimensional_on_four_ranks(backend):
    """One profile (the mixed one: smooth part and jumps) under both velocity fields on
    all three layouts keeps the sweep over every example lean."""
    schemes = [load_scheme(p) for p in EXAMPLE_FILES]
    results = verify_many(schemes, backend, ranks=4, dims=2, steps=6, profiles=(MIXED,))
    assert {r.scheme for r in results} == {s.name for s in schemes}
    assert_grid_agrees(results, 4, 2)


@pytest.mark.slow
def test_every_example_three_dimensional_on_two_ranks():
    results = verify_many([load_scheme(p) for p in EXAMPLE_FILES], "c", ranks=2, dims=3,
                          steps=2, method="lie", profiles=(MIXED,))
    assert_grid_agrees(results, 2, 3)
