"""`fluxloom bench`: the hand-written kernels really compute the same schemes, and the
command reports every number it promises. Speed itself is never asserted."""
from __future__ import annotations

import json

import numpy as np
import pytest
from conftest import EXAMPLES

from fluxloom.benchmarks import counterpart
from fluxloom.compiler import load_scheme
from fluxloom.runtime.cli import main
from fluxloom.runtime.kernel import load_kernel
from fluxloom.runtime.speed import handwritten_c, sign_changes, velocity_field


@pytest.mark.parametrize("name", ["upwind", "lax_wendroff", "lw_vanleer"])
def test_handwritten_kernels_match_the_generated_ones(name):
    """A speed ratio only means something if both sides compute the same step."""
    scheme = load_scheme(EXAMPLES / f"{name}.loom")
    hand = counterpart(scheme)
    assert hand is not None and hand.name == name
    kernel = load_kernel(scheme, "numpy")
    rng = np.random.default_rng(8)
    n = 300
    q_in = rng.random(n + 2 * hand.halo)
    u = rng.uniform(-1, 1, n + 1)
    u[::7] = 0.0
    expected = kernel.step(q_in, u, 0.45)
    by_numpy = q_in.copy()
    hand.numpy_step(n, q_in, by_numpy, u, 0.45, hand.halo)
    ffi, lib = handwritten_c("-O2")
    by_c = q_in.copy()
    getattr(lib, hand.c_function)(n, ffi.from_buffer("double[]", q_in),
                                  ffi.from_buffer("double[]", by_c), ffi.from_buffer("double[]", u),
                                  0.45, ffi.from_buffer("double[]", np.zeros(n + 1)))
    h = hand.halo
    np.testing.assert_allclose(by_numpy[h:-h], expected[h:-h], rtol=1e-13, atol=1e-15)
    np.testing.assert_allclose(by_c[h:-h], expected[h:-h], rtol=1e-13, atol=1e-15)


@pytest.mark.parametrize("n", [1, 255, 256, 257, 1000])
def test_streaming_references_touch_every_value_once(n):
    """The sweep reads the state and the face velocities and writes the output (checked
    against numpy), including the ragged tail after its constant-size blocks."""
    ffi, lib = handwritten_c("-O2")
    rng = np.random.default_rng(n)
    state, velocity = rng.random(n), rng.uniform(-1, 1, n + 1)
    swept, copied = np.zeros(n), np.zeros(n)
    lib.stream_sweep(n, ffi.from_buffer("double[]", state), ffi.from_buffer("double[]", velocity),
                     ffi.from_buffer("double[]", swept))
    lib.stream_copy(n, ffi.from_buffer("double[]", state), ffi.from_buffer("double[]", copied))
    np.testing.assert_array_equal(swept, state + velocity[:n])
    np.testing.assert_array_equal(copied, state)


def test_counterparts_only_for_equivalent_schemes():
    assert counterpart(load_scheme(EXAMPLES / "vanleer_clip.loom")) is None  # clip differs
    assert counterpart(load_scheme(EXAMPLES / "lw_minmod.loom")) is None
    assert counterpart(load_scheme(EXAMPLES / "upwind_rk3.loom")) is None


def test_velocity_fields():
    n = 1000
    smooth, constant, noisy = (velocity_field(k, n) for k in ("smooth", "constant", "random"))
    assert sign_changes(smooth) == 4 and sign_changes(constant) == 0
    assert sign_changes(noisy) > n // 4
    for u in (smooth, constant, noisy):
        assert len(u) == n + 1 and u[0] == u[-1]


def test_bench_json_reports_every_kernel_and_target(capsys):
    assert main(["bench", str(EXAMPLES / "lw_vanleer.loom"), "--cells", "500", "--steps", "1",
                 "--json"]) == 0
    report = json.loads(capsys.readouterr().out)
    assert report["counterpart"] == "lw_vanleer" and report["cells"] == 500
    assert [f["velocity"] for f in report["fields"]] == ["smooth", "constant", "random"]
    for f in report["fields"]:
        for group in ("generated_c", "handwritten_c", "sweep", "stream"):
            assert set(f[group]) == {"-O2", "-O3", "-O2 -march=native", "-O3 -march=native"} and all(v > 0 for v in f[group].values())
        assert f["generated_numpy"] > 0 and f["handwritten_numpy"] > 0
    assert all(v >= 0 for v in report["numpy_peak_extra_arrays"].values())
    kinds = " ".join(t["what"] for t in report["targets"])
    assert "hand-written C" in kinds and "streaming sweep" in kinds and "memory" in kinds
    for t in report["targets"]:
        # the plain copy is shown for comparison only; every other line is a judged target
        assert t["binding"] == ("streaming copy" not in t["what"])
        assert (t["met"] is None) == (not t["binding"])


def test_bench_without_counterpart_and_bad_options(capsys):
    assert main(["bench", str(EXAMPLES / "lw_fct.loom"), "--cells", "300", "--steps", "1"]) == 0
    out = capsys.readouterr().out
    assert "none (generated kernels only)" in out and "generated numpy" in out
    assert main(["bench", str(EXAMPLES / "upwind.loom"), "--cells", "3"]) == 2
    assert "--cells must be at least" in capsys.readouterr().err


def test_handwritten_sweeps_compute_the_generated_sweeps():
    """The 2-D bench compares like with like: the hand-written plain C sweeps of the van
    Leer scheme give the generated sweep's values along both axes (numpy back end)."""
    from fluxloom.runtime.sweep_bench import _handwritten, rotation_faces

    kernel = load_kernel(load_scheme(EXAMPLES / "lw_vanleer.loom"), "numpy")
    n = 40
    rng = np.random.default_rng(3)
    q = rng.random((n + 4, n + 4))
    u_y, u_x = rotation_faces(n, np.float64)
    ffi, lib = _handwritten()
    ptr = lambda a: ffi.from_buffer("double[]", a)    # noqa: E731
    for axis, faces, function in ((1, u_x, lib.hand_sweep_x), (0, u_y, lib.hand_sweep_y)):
        want = kernel.sweep(q, faces, 0.45, axis)
        got = q.copy()
        function(n, n, ptr(q), ptr(got), ptr(faces), 0.45, ptr(np.zeros(n + 1)))
        np.testing.assert_allclose(got[2:-2, 2:-2], want[2:-2, 2:-2], rtol=1e-13, atol=1e-15)


def test_bench_dims_2_reports_every_ratio(capsys):
    assert main(["bench", str(EXAMPLES / "lw_vanleer.loom"), "--dims", "2", "--size", "64",
                 "--threads", "2", "--tracers", "3", "--json"]) == 0
    found = json.loads(capsys.readouterr().out)
    assert found["n"] == 64 and found["tracers"] == 3 and found["threads"] == 2
    whats = [t["what"] for t in found["targets"]]
    assert len(whats) == 10 and all(t["value"] is not None for t in found["targets"])
    assert {"generated_x", "handwritten_y", "copy", "threads_x", "tracers_one_call_y",
            "float_x"} <= set(found["seconds"])
    assert "shared" in found["note"]
    assert found["memory_threads"] > 0 and found["seconds"]["stream_triad"] > 0


@pytest.mark.parametrize("stem", ["kappa_rk3", "lw_fct"])
def test_bench_dims_2_runs_multi_stage_and_flux_corrected_sweeps(stem, capsys):
    # schemes with a wider halo than the van Leer example's and a workspace per thread
    # (a fixed halo of 2 once made the flux-corrected sweep refuse its arguments)
    assert main(["bench", str(EXAMPLES / f"{stem}.loom"), "--dims", "2", "--size", "24",
                 "--threads", "2", "--tracers", "2", "--json"]) == 0
    found = json.loads(capsys.readouterr().out)
    assert found["halo"] == load_kernel(load_scheme(EXAMPLES / f"{stem}.loom"), "c").halo
    assert all(v > 0 for v in found["seconds"].values())
