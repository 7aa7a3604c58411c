"""The build cache under damage and misuse: damaged libraries are rebuilt, never loaded;
killed builds leave nothing behind; unusable or shared cache folders are refused with a
message saying how to fix them (exit status 2).

Damaged libraries are loaded by fresh processes, as a user would meet them: loading a
truncated shared object can kill the process (SIGBUS), so it must never get that far.
The reference for each run is the first-order upwind update computed by numpy.
"""
from __future__ import annotations

import os
import signal
import stat
import subprocess
import sys
import time
import uuid

import pytest
from conftest import EXAMPLES

from fluxloom.compiler import LoomError, load_scheme, scheme_from_text
from fluxloom.runtime import build
from fluxloom.runtime.build import compile_c
from fluxloom.runtime.cli import main

STEPPER = """
import sys
import numpy as np
from fluxloom.compiler import scheme_from_text
from fluxloom.runtime.build import compile_c
ffi, lib = compile_c(scheme_from_text(open(sys.argv[1]).read()))
n = 40
q = np.cos(np.arange(n + 2.0)); out = np.zeros_like(q); u = np.full(n + 1, 0.5)
work = np.empty(max(1, lib.spill_workspace_size_f64(n)))
lib.spill_step_f64(n, ffi.from_buffer("double[]", q), ffi.from_buffer("double[]", out),
               ffi.from_buffer("double[]", u), 0.8, ffi.from_buffer("double[]", work))
# first-order upwind, u > 0: q_j - c (q_j - q_{j-1}) with c = 0.5 * 0.8 (common practice)
expected = q[1:n + 1] - 0.4 * (q[1:n + 1] - q[0:n])
print("agree" if np.allclose(out[1:n + 1], expected, rtol=0, atol=1e-14) else "DISAGREE")
"""


@pytest.fixture
def cache(tmp_path, monkeypatch):
    folder = tmp_path / "cache"
    monkeypatch.setenv("FLUXLOOM_CACHE", str(folder))
    return folder


@pytest.fixture
def spec(tmp_path):
    path = tmp_path / "spill.loom"
    path.write_text(f'scheme spill {{\n  about "{uuid.uuid4().hex}"\n  flux = u * q[0]\n}}\n')
    return path


def step_in_fresh_process(spec, cache, timeout=180):
    env = dict(os.environ, FLUXLOOM_CACHE=str(cache))
    done = subprocess.run([sys.executable, "-c", STEPPER, str(spec)], env=env, text=True,
                          capture_output=True, timeout=timeout)
    return done.returncode, done.stdout.strip(), done.stderr


def the_library(cache):
    (library,) = cache.glob("_fluxloom_spill_*/*.so")
    return library


@pytest.mark.slow
def test_damaged_libraries_are_rebuilt_not_loaded(spec, cache):
    assert step_in_fresh_process(spec, cache)[:2] == (0, "agree")
    library = the_library(cache)
    good = library.read_bytes()
    damage = {
        "truncated": good[: len(good) // 3],
        "garbage": os.urandom(len(good)),
        "empty": b"",
        "another library": (EXAMPLES.parent / "examples" / "upwind.loom").read_bytes(),
    }
    for what, data in damage.items():
        library.write_bytes(data)
        status, out, err = step_in_fresh_process(spec, cache)
        assert (status, out) == (0, "agree"), (what, err)
        assert build._digest(the_library(cache)) == (library.parent / "sha256").read_text().strip()
    (library.parent / "sha256").unlink()  # a digest that went missing: rebuilt too
    assert step_in_fresh_process(spec, cache)[:2] == (0, "agree")
    assert (library.parent / "sha256").exists()


def test_a_library_not_owned_by_us_is_rebuilt(spec, cache):
    assert step_in_fresh_process(spec, cache)[:2] == (0, "agree")
    library = the_library(cache)
    library.chmod(0o777)  # writable by anyone: it may have been planted
    assert step_in_fresh_process(spec, cache)[:2] == (0, "agree")
    assert stat.S_IMODE(the_library(cache).stat().st_mode) & 0o022 == 0


def test_a_build_killed_mid_compile_leaves_nothing_for_long(spec, cache):
    env = dict(os.environ, FLUXLOOM_CACHE=str(cache))
    victim = subprocess.Popen([sys.executable, "-c", STEPPER, str(spec)], env=env,
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 120
    while not list(cache.glob(".build-*")) and time.monotonic() < deadline:
        assert victim.poll() is None, "the build finished before it could be killed"
        time.sleep(0.02)
    victim.send_signal(signal.SIGKILL)
    victim.wait()
    assert list(cache.glob(".build-*")), "the killed build left its folder (as expected)"
    assert step_in_fresh_process(spec, cache)[:2] == (0, "agree")
    assert [p.name for p in cache.iterdir() if p.name.startswith(".")] == []


def test_stale_folders_of_dead_processes_are_removed_live_ones_kept(cache):
    cache.mkdir(mode=0o700)
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    (cache / f".build-{dead}-abc" / "src").mkdir(parents=True)
    (cache / f".discard-{dead}-1").mkdir()
    live = cache / f".build-{os.getpid()}-xyz"
    live.mkdir()
    build._clean_stale(cache)
    assert sorted(p.name for p in cache.iterdir()) == [live.name]


def test_cache_pointing_at_a_file_is_a_clear_error(tmp_path, monkeypatch, capsys):
    target = tmp_path / "not-a-folder"
    target.write_text("x")
    monkeypatch.setenv("FLUXLOOM_CACHE", str(target))
    with pytest.raises(LoomError) as caught:
        compile_c(load_scheme(EXAMPLES / "upwind.loom"))
    assert caught.value.render() == (
        f"build cache {target}: error: this is a file, not a folder; point FLUXLOOM_CACHE at a "
        "folder of your own (or unset it for ~/.cache/fluxloom)")
    assert main(["verify", str(EXAMPLES / "upwind.loom"), "--backend", "c"]) == 2
    err = capsys.readouterr().err
    assert "this is a file, not a folder" in err and "internal error" not in err


def test_cache_that_cannot_be_created_is_a_clear_error(tmp_path, monkeypatch):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    monkeypatch.setenv("FLUXLOOM_CACHE", str(blocker / "cache"))
    with pytest.raises(LoomError, match=r"cannot create the folder \(Not a directory\); point "
                                        "FLUXLOOM_CACHE at a folder of your own"):
        build.cache_dir()


def test_read_only_cache_is_a_clear_error(cache, monkeypatch):
    cache.mkdir(mode=0o500)
    if os.geteuid() == 0:  # root writes anywhere: ask as if permissions applied
        monkeypatch.setattr(build.os, "access", lambda path, mode: False)
    with pytest.raises(LoomError, match="the folder is not writable; make it writable"):
        build.cache_dir()


@pytest.mark.parametrize("mode", [0o777, 0o775, 0o757, 0o1777])
def test_cache_writable_by_others_is_refused(cache, mode):
    cache.mkdir()
    cache.chmod(mode)
    with pytest.raises(LoomError) as caught:
        build.cache_dir()
    assert "other users can write to it" in caught.value.message
    assert f"chmod go-w {cache}" in caught.value.message


def test_cache_of_another_user_is_refused(cache, monkeypatch):
    cache.mkdir(mode=0o700)
    if os.geteuid() == 0:
        os.chown(cache, 65534, 65534)  # nobody
    else:
        monkeypatch.setattr(build.os, "getuid", lambda: os.stat(cache).st_uid + 1)
    with pytest.raises(LoomError, match="it belongs to another user"):
        build.cache_dir()


def test_new_cache_folders_are_private(cache):
    build.cache_dir()
    assert stat.S_IMODE(cache.stat().st_mode) & 0o077 == 0


def test_an_in_process_build_records_a_matching_digest(cache):
    scheme = scheme_from_text(f'scheme spill {{\n  about "{uuid.uuid4().hex}"\n'
                              '  flux = u * q[0]\n}\n')
    compile_c(scheme)
    library = the_library(cache)
    import hashlib  # the digest computed another way than build._digest
    assert hashlib.sha256(library.read_bytes()).hexdigest() == \
        (library.parent / "sha256").read_text().strip()
