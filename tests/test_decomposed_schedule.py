"""Decomposition without MPI: block layouts, and the exchange schedule every output states.

The schedule's claims (halo width, one exchange of q before every stage, the face
halo of flux correction) are checked on one process against a brute-force
computation: a block cut out of a periodic domain, advanced stage by stage by the
generated kernel with its halo taken from the whole-domain stage states, must give
the whole domain's values; with the outermost ghost cell wrong, or with the halo
left stale between stages, it must not (for random data). Specs nobody has seen
(random stencils and time methods) are held to the same test.
"""
from __future__ import annotations

import json
import os
import re
from fractions import Fraction

import numpy as np
import pytest
from conftest import EXAMPLE_FILES, EXAMPLES

from fluxloom.compiler import LoomError, load_scheme, scheme_from_text
from fluxloom.compiler.emit import c_files
from fluxloom.compiler.emit.exchange import exchange_schedule
from fluxloom.compiler.time_methods import NAMES, method
from fluxloom.runtime.cli import main
from fluxloom.runtime.decomposed.blocks import Layout, even_split, narrowest_split
from fluxloom.runtime.decomposed.launch import missing_mpi
from fluxloom.runtime.decomposed.stages import load_stage_kernel
from fluxloom.runtime.kernel import fill_periodic, periodic_faces

def test_ci_has_mpi_so_the_decomposed_tests_run():
    """The MPI tests skip only where MPI is absent; CI installs it (.ci/install), so
    there they must run."""
    reason = missing_mpi()
    if os.environ.get("CI") == "true":
        assert reason is None, reason
    else:
        assert reason is None or "pip install 'fluxloom[mpi]'" in reason


# ---- layouts -----------------------------------------------------------------------


@pytest.mark.parametrize("cells, parts", [(61, 3), (61, 4), (100, 7), (5, 5), (9, 1)])
def test_even_split_matches_numpy_array_split(cells, parts):
    """numpy's array_split makes the first cells % parts pieces one longer, as MPI
    codes usually do (common practice, no source)."""
    expected = tuple(len(piece) for piece in np.array_split(np.arange(cells), parts))
    assert even_split(cells, parts) == expected


def test_owner_and_coordinates_by_brute_force():
    layout = Layout((even_split(13, 3), narrowest_split(11, 2, 3)), (True, False))
    assert layout.cells == (13, 11) and layout.dims == (3, 2) and layout.ranks == 6
    seen = {}
    for rank in range(layout.ranks):
        # MPI numbers Cartesian ranks in row-major order [mem]: numpy's C-order unravel
        coords = layout.coords(rank)
        assert coords == tuple(int(c) for c in np.unravel_index(rank, layout.dims))
        block = layout.block(coords)
        for i in range(block.size[0]):
            for j in range(block.size[1]):
                seen[(block.start[0] + i, block.start[1] + j)] = (rank, (i, j))
    assert len(seen) == 13 * 11                      # the blocks tile the grid exactly once
    for index, owner in seen.items():
        assert layout.owner(index) == owner


def test_blocks_narrower_than_the_halo_are_refused():
    layout = Layout((narrowest_split(20, 3, 2),), (True,))
    layout.check_widths(halo=2)
    with pytest.raises(LoomError, match="narrower than the halo"):
        layout.check_widths(halo=3)
    with pytest.raises(LoomError, match="cannot split"):
        even_split(3, 4)


# ---- the schedule in every output ------------------------------------------------------

def test_schedule_counts_one_q_exchange_per_stage_and_one_for_fct_faces():
    for path in EXAMPLE_FILES:
        scheme = load_scheme(path)
        s = exchange_schedule(scheme)
        stages = method(scheme.time).stages          # the registry's own count
        fct = scheme.correct == "fct"
        assert s.per_step == stages + (1 if fct else 0), path.stem
        assert s.face_halo == (2 if fct else 0)
        assert len(s.to_json()["q_exchanges"]) == stages


@pytest.mark.parametrize("name", ["kappa_rk3", "lw_fct", "centred_rk4"])
def test_check_json_header_and_fortran_state_the_same_schedule(name, capsys):
    scheme = load_scheme(EXAMPLES / f"{name}.loom")
    assert main(["check", str(EXAMPLES / f"{name}.loom"), "--json"]) == 0
    exchange = json.loads(capsys.readouterr().out)["exchange"]
    files = c_files(scheme)
    header, module = files[f"{name}.h"], files[f"{name}_mod.f90"]
    per_step = int(re.search(rf"#define {name}_EXCHANGES_PER_STEP (\d+)", header).group(1))
    assert per_step == exchange["per_step"]
    assert int(re.search(rf"#define {name}_HALO (\d+)", header).group(1)) == exchange["halo"]
    assert main(["check", str(EXAMPLES / f"{name}.loom")]) == 0
    text_report = capsys.readouterr().out
    assert f"kernel halo {exchange['halo']} cells per side" in text_report
    assert f"{exchange['per_step']} exchanges per step" in text_report
    for text in (header, module):
        flat = " ".join(re.sub(r"^\s*(\*|!)", "", line).strip() for line in text.splitlines())
        assert f"exchanges per step: {per_step} " in flat
        assert f"q: {exchange['halo']} ghost cells per side" in flat
        if exchange["face_halo"]:
            assert f"u_face: {exchange['face_halo']} velocities per side" in flat
        for k in range(1, method(scheme.time).stages):
            assert f"{k - 1} and {k}" in flat


# ---- the schedule against a brute-force block computation ------------------------------

def random_spec(rng: np.random.Generator, index: int) -> str:
    """A linear upwind-frame flux on random offsets with random coefficients, and a
    random time method (a spec of our own, in no textbook)."""
    offsets = sorted(rng.choice(np.arange(-2, 4), size=int(rng.integers(2, 4)), replace=False))
    terms = " + ".join(f"{Fraction(int(rng.integers(-3, 7)), int(rng.integers(2, 9)))} * q[{k}]"
                       for k in offsets)
    time = NAMES[int(rng.integers(len(NAMES)))]
    return (f"scheme random_{index} {{\n  time {time}\n  flux = u * (q[0] + {terms})\n}}\n")


def block_stages(kernel, q0, u, dt_dx, lo, hi, corrupt=None):
    """One step of the block [lo, hi) of a periodic domain, stage by stage, its halo
    copied from the whole-domain stage states; returns (block result, whole result).

    corrupt: None; "outer" puts NaN in the outermost ghost cell (and ghost face) on
    each side before every stage (a value the kernel reads reaches the result, even
    where a bound or a limiter would hide a wrong number); "stale" copies the halo
    before stage 0 only."""
    n, h, f = q0.size, kernel.halo, kernel.face_halo
    m = hi - lo
    whole_u = periodic_faces(u, f)
    block_u = whole_u[lo:hi + 1 + 2 * f].copy()
    if corrupt == "outer" and f:
        block_u[0] = block_u[-1] = np.nan
    whole = [np.zeros(n + 2 * h) for _ in range(3)]
    block = [np.zeros(m + 2 * h) for _ in range(3)]
    whole[0][h:h + n] = q0
    work_whole, work_block = kernel.workspace(n), kernel.workspace(m)
    source = 0
    for stage in range(kernel.stages):
        target = 1 + stage % 2
        fill_periodic(whole[source], h)
        if stage == 0 or corrupt != "stale":
            block[source][:] = whole[source][np.arange(lo - h, hi + h) % n + h]
        if corrupt == "outer":
            block[source][0] = block[source][-1] = np.nan
        kernel.stage(stage, n, whole[0], whole[source], whole[target], whole_u, dt_dx, work_whole)
        kernel.stage(stage, m, block[0], block[source], block[target], block_u, dt_dx, work_block)
        source = target
    return block[source][h:h + m], whole[source][h + lo:h + hi]


def schemes_for_brute_force():
    rng = np.random.default_rng(20261203)
    found = [scheme_from_text(random_spec(rng, i), f"<random {i}>") for i in range(3)]
    found += [load_scheme(EXAMPLES / f"{name}.loom") for name in ("lw_fct", "kappa_rk3")]
    return found


@pytest.mark.parametrize("scheme", schemes_for_brute_force(), ids=lambda s: s.name)
def test_the_schedule_is_what_a_block_needs(scheme):
    kernel = load_stage_kernel(scheme, "numpy")
    schedule = exchange_schedule(scheme)
    assert (kernel.halo, kernel.face_halo, kernel.stages) == (
        schedule.halo, schedule.face_halo, schedule.q_exchanges)
    rng = np.random.default_rng(7)
    n, lo, hi = 40, 11, 11 + max(schedule.halo, 3)
    q0 = rng.random(n)
    u = rng.uniform(-1, 1, n + 1)
    u[n] = u[0]
    dt_dx = 0.2
    for flow in (u, -u):
        got, expected = block_stages(kernel, q0, flow, dt_dx, lo, hi)
        assert np.array_equal(got, expected)          # halo and face halo are enough
    # and every ghost is needed: the outermost one is read upwind of one edge face
    # or the other, so one of the two flow directions sees it
    with np.errstate(invalid="ignore"):
        assert any(np.isnan(block_stages(kernel, q0, flow, dt_dx, lo, hi, "outer")[0]).any()
                   for flow in (u, -u))
    if schedule.q_exchanges > 1:                      # an exchange between stages is needed
        got, expected = block_stages(kernel, q0, u, dt_dx, lo, hi, corrupt="stale")
        assert not np.array_equal(got, expected)


# ---- the README says what the code computes -----------------------------------------------

def readme_table(header_start: str) -> list[list[str]]:
    lines = (EXAMPLES.parent / "README.md").read_text().splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith(header_start))
    rows = []
    for line in lines[start + 2:]:
        if not line.startswith("|"):
            break
        rows.append([cell.strip() for cell in line.strip("|").split("|")])
    return rows


def test_readme_exchange_table_matches_the_schedules():
    rows = readme_table("| kernel | q halo per side |")
    assert len(rows) == 5
    for kernel, halo, face_halo, per_step, _ in rows:
        name = re.search(r"\(`(\w+)`\)", kernel).group(1)
        s = exchange_schedule(load_scheme(EXAMPLES / f"{name}.loom"))
        assert (int(halo), int(face_halo), int(per_step)) == (s.halo, s.face_halo, s.per_step)


def test_readme_projection_table_matches_the_benchmark_formula():
    """The projection is arithmetic on the schedule (no measurement): the README's
    figures must be what benchmarks/bench_decomposed.py computes with its defaults."""
    from fluxloom.benchmarks.bench_decomposed import projection

    plain = exchange_schedule(load_scheme(EXAMPLES / "lw_vanleer.loom"))
    fct = exchange_schedule(load_scheme(EXAMPLES / "lw_fct.loom"))
    rows = readme_table("| side (cells per process) |")
    assert [int(r[0].split()[0]) for r in rows] == [32, 64, 128, 256]
    for side_text, plain_ratio, plain_share, fct_ratio, fct_share in rows:
        side = int(side_text.split()[0])
        for schedule, ratio, share in ((plain, plain_ratio, plain_share), (fct, fct_ratio, fct_share)):
            p = projection(schedule, side, memory_gbs=5.0, network_gbs=0.5, latency_us=2.0)
            assert float(ratio.rstrip(" %")) == pytest.approx(100 * p["bytes_ratio"], abs=0.06)
            assert float(share.rstrip(" %")) == pytest.approx(100 * p["time_share"], abs=0.6)
    # the ratio needs nothing but the schedule: 2 halo / (3 side), face halo added for FCT
    for side in (32, 256):
        assert projection(plain, side, 5.0, 0.5, 2.0)["bytes_ratio"] == pytest.approx(
            2 * plain.halo / (3 * side))
        assert projection(fct, side, 5.0, 0.5, 2.0)["bytes_ratio"] == pytest.approx(
            (2 * fct.halo + 2 * fct.face_halo) / (3 * side))


def test_an_empty_block_is_a_clear_error():
    with pytest.raises(LoomError, match="every block needs at least one cell"):
        Layout(((3, 0),), (True,))
