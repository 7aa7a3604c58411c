"""Compile generated C with cffi (API mode, out of line) into a cache and load it.

A compiled extension cannot be reloaded in one process, so every build is
named by a hash of its C source and flags: a changed scheme, param value,
precision or flag gives a new module name, the same ones reuse the cached
library.

Each cache entry is a folder holding the library and the SHA-256 digest of its
bytes, recorded when it was built. A build happens in a private temporary
folder that is renamed into place as a whole (atomic: readers see no entry or
a complete one; when two processes race, the first rename wins). Before a
library is loaded its digest is checked; an entry that fails (truncated,
overwritten, half-deleted) is removed and rebuilt. Temporary folders left by
builds that were killed are removed once their process is gone. Compiled code
is loaded into the process, so the cache folder must belong to the user and be
writable by no one else.
"""
from __future__ import annotations

import hashlib
import importlib.machinery
import importlib.util
import os
import shlex
import shutil
import stat
import subprocess
import sys
import tempfile
import threading
import time
import warnings
from pathlib import Path

import cffi

from ..compiler.diagnostics import LoomError
from ..compiler.emit.c import c_declarations, c_sources
from ..compiler.ir import Scheme

BUILD_FLAGS = ("-std=c99",)
DIGEST_FILE = "sha256"
TEMP_PREFIX = ".build-"      # .build-PID-XXXX: a build in progress (or killed)
TRASH_PREFIX = ".discard-"   # an entry that failed its digest, being removed
STALE_SECONDS = 24 * 3600    # a temporary folder this old is stale even if its PID lives
_loaded: dict[str, object] = {}
_lock = threading.Lock()


class CacheError(LoomError):
    """The build cache cannot be used as it is; the message says how to fix it."""

    def __init__(self, path: Path, message: str):
        super().__init__(message, file=f"build cache {path}")


def cache_dir() -> Path:
    """$FLUXLOOM_CACHE, else ~/.cache/fluxloom: created on demand, private to the user."""
    configured = os.environ.get("FLUXLOOM_CACHE")
    root = configured or os.path.join(Path.home(), ".cache", "fluxloom")
    path = Path(root).expanduser()
    how = ("set FLUXLOOM_CACHE to a folder of your own" if not configured else
           "point FLUXLOOM_CACHE at a folder of your own (or unset it for ~/.cache/fluxloom)")
    if path.exists() and not path.is_dir():
        raise CacheError(path, f"this is a file, not a folder; {how}")
    try:
        path.mkdir(parents=True, exist_ok=True, mode=0o700)
        info = path.stat()
    except OSError as err:
        raise CacheError(path, f"cannot create the folder ({err.strerror}); {how}") from None
    _check_private(path, info, how)
    if not os.access(path, os.W_OK | os.X_OK):
        raise CacheError(path, f"the folder is not writable; make it writable (chmod u+rwx) or {how}")
    return path


def _check_private(path: Path, info: os.stat_result, how: str) -> None:
    """Refuse folders (and entries) another user could have written: their code would run here."""
    if hasattr(os, "getuid") and info.st_uid != os.getuid():
        raise CacheError(path, f"it belongs to another user (uid {info.st_uid}); compiled "
                               f"kernels are loaded from here, so it must be yours: {how}")
    if info.st_mode & (stat.S_IWGRP | stat.S_IWOTH):
        raise CacheError(path, f"other users can write to it (mode {stat.filemode(info.st_mode)}) "
                               "and could plant a library that fluxloom would load; make it "
                               f"private with 'chmod go-w {path}' or {how}")


def module_name(scheme: Scheme, source: str, flags: tuple[str, ...]) -> str:
    return _hashed_name(scheme.name, source, flags)


def _hashed_name(label: str, source: str, flags: tuple[str, ...]) -> str:
    digest = hashlib.sha256()
    for part in (source, "\0".join(flags), cffi.__version__, sys.version):
        digest.update(part.encode())
        digest.update(b"\0")
    return f"_fluxloom_{label}_{digest.hexdigest()[:16]}"


def _extension_suffix() -> str:
    return importlib.machinery.EXTENSION_SUFFIXES[0]


def compile_c(scheme: Scheme, precision: str = "double", opt: str = "-O2",
              openmp: bool = False):
    """Compile (or reuse) the C kernel of scheme; returns cffi's (ffi, lib).

    opt holds the optimisation flags, split like a shell would ("-O3 -march=native").
    openmp=True generates the kernel for OpenMP and builds it with OPENMP_FLAG (the
    caller checks `openmp_supported()` first).
    """
    sources = c_sources(scheme, precision, openmp=openmp)
    header, kernel = sources[f"{scheme.name}.h"], sources[f"{scheme.name}.c"]
    # One translation unit: the header text stands in for the #include.
    source = kernel.replace(f'#include "{scheme.name}.h"', header, 1)
    if openmp:
        opt = f"{opt} {OPENMP_FLAG}"
    return compile_source(scheme.name, source, c_declarations(scheme, precision), opt)


OPENMP_FLAG = "-fopenmp"
_openmp_support: list[bool] = []


def openmp_supported() -> bool:
    """True when the C compiler builds and links a program with OPENMP_FLAG (checked once)."""
    with _lock:
        if not _openmp_support:
            probe = ("#include <omp.h>\nint fluxloom_openmp_probe(void) "
                     "{ return omp_get_max_threads(); }\n")
            try:
                _load_or_build(cache_dir(), _hashed_name("openmp_probe", probe, (OPENMP_FLAG,)),
                               probe, "int fluxloom_openmp_probe(void);",
                               (*BUILD_FLAGS, OPENMP_FLAG))
                _openmp_support.append(True)
            except LoomError:
                _openmp_support.append(False)
    return _openmp_support[0]


def compile_source(label: str, source: str, declarations: str, opt: str = "-O2"):
    """Compile (or reuse) any C source as a cffi module named by its hash; (ffi, lib)."""
    flags = (*BUILD_FLAGS, *shlex.split(opt))
    name = _hashed_name(label, source, flags)
    cache = cache_dir()  # checked on every call: a broken FLUXLOOM_CACHE is reported even
    with _lock:          # when this process already holds the kernel
        module = _loaded.get(name)
        if module is None:
            module = _load_or_build(cache, name, source, declarations, flags)
            _loaded[name] = module
    return module.ffi, module.lib


def _load_or_build(cache: Path, name: str, source: str, declarations: str, flags):
    """Load the cached library after checking its digest; build it first where that fails."""
    entry = cache / name
    library = entry / f"{name}{_extension_suffix()}"
    for attempt in (1, 2):
        if not _verified(entry, library):
            _discard(cache, entry)
            _clean_stale(cache)
            _build(cache, name, source, declarations, flags)
            if not _verified(entry, library):
                raise CacheError(cache, f"the kernel just built as {name} failed its digest "
                                        "check there (is another program writing to it?); "
                                        "run again, or point FLUXLOOM_CACHE elsewhere")
        try:
            return _load(name, library)
        except ImportError as err:
            _discard(cache, entry)  # intact bytes that do not load: build afresh once
            if attempt == 2:
                raise LoomError(f"the kernel {name} was built but cannot be loaded: {err}",
                                file="<build>") from None
    raise AssertionError("unreachable")


def _verified(entry: Path, library: Path) -> bool:
    """True when entry holds the library with the digest recorded at build time, all ours."""
    try:
        recorded = (entry / DIGEST_FILE).read_text("ascii").strip()
        for path in (entry, entry / DIGEST_FILE, library):
            _check_private(path, path.lstat(), "remove it and build again")
            if path != entry and not stat.S_ISREG(path.lstat().st_mode):
                return False
        return _digest(library) == recorded
    except (OSError, UnicodeDecodeError):
        return False
    except CacheError:
        return False


def _digest(path: Path) -> str:
    digest = hashlib.sha256()
    with path.open("rb") as stream:
        for block in iter(lambda: stream.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def _discard(cache: Path, entry: Path) -> None:
    """Move a failed entry out of the way (atomically), then delete it."""
    if not os.path.lexists(entry):
        return
    trash = cache / f"{TRASH_PREFIX}{os.getpid()}-{time.monotonic_ns()}"
    try:
        os.replace(entry, trash)
    except OSError:
        return  # someone else moved it first
    if trash.is_dir() and not trash.is_symlink():
        shutil.rmtree(trash, ignore_errors=True)
    else:
        trash.unlink(missing_ok=True)


def _clean_stale(cache: Path) -> None:
    """Remove temporary folders of builds whose process is gone (killed mid-compile)."""
    now = time.time()
    for path in cache.iterdir():
        if not path.name.startswith((TEMP_PREFIX, TRASH_PREFIX)):
            continue
        try:
            pid = int(path.name.split("-")[1])
            age = now - path.lstat().st_mtime
        except (ValueError, IndexError, OSError):
            continue
        if age > STALE_SECONDS or not _alive(pid):
            shutil.rmtree(path, ignore_errors=True)


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _build(cache: Path, name: str, source: str, declarations: str, flags) -> None:
    ffi = cffi.FFI()
    ffi.cdef(declarations)
    # OpenMP is a link flag too (the runtime library)
    ffi.set_source(name, source, extra_compile_args=list(flags),
                   extra_link_args=[f for f in flags if f == OPENMP_FLAG])
    try:
        workdir = Path(tempfile.mkdtemp(prefix=f"{TEMP_PREFIX}{os.getpid()}-", dir=cache))
    except OSError as err:
        raise CacheError(cache, f"cannot create a build folder in it ({err.strerror}); make it "
                                "writable or point FLUXLOOM_CACHE elsewhere") from None
    try:
        try:
            with warnings.catch_warnings():  # setuptools' own deprecation chatter
                warnings.simplefilter("ignore")
                built = Path(ffi.compile(tmpdir=str(workdir / "src"), verbose=False))
        except Exception as err:  # distutils/setuptools CompileError and friends
            raise LoomError(f"C compiler failed to build the kernel {name}: {err}",
                            file="<build>") from None
        _install(cache, workdir, name, built, f"{name}{_extension_suffix()}")
    except OSError as err:
        raise CacheError(cache, f"cannot write a build into it ({err.strerror}); free some "
                                "space, make it writable, or point FLUXLOOM_CACHE elsewhere") from None
    finally:
        shutil.rmtree(workdir, ignore_errors=True)


def _install(cache: Path, workdir: Path, name: str, built: Path, file_name: str) -> None:
    """Move a finished library into the cache entry NAME/ with its digest (atomically)."""
    staged = workdir / name
    staged.mkdir(mode=0o700)
    library = staged / file_name
    os.replace(built, library)
    os.chmod(library, 0o700)  # private whatever the umask, as _verified expects
    (staged / DIGEST_FILE).write_text(_digest(library) + "\n", "ascii")
    os.chmod(staged / DIGEST_FILE, 0o600)
    try:
        os.rename(staged, cache / name)  # atomic; fails if another build got there first
    except OSError:
        pass  # the other entry is checked like any cached one


# ---- targets that build their own shared library (compiler/emit/targets.py: "shared") --

def compile_shared(label: str, source: str, suffix: str, command: tuple[str, ...],
                   declarations: str):
    """Compile (or reuse) a source with its target's own compiler command into a shared
    library exporting the C header's functions; cffi's (ffi, lib) over it (ABI mode).
    Cached and checked like the C builds (same folder, digest, atomic rename)."""
    name = _hashed_name(label, source, tuple(command))
    cache = cache_dir()  # checked on every call, as in compile_source
    with _lock:
        found = _loaded.get(name)
        if found is None:
            entry = cache / name
            library = entry / f"{name}.so"
            if not _verified(entry, library):
                _discard(cache, entry)
                _clean_stale(cache)
                _build_shared(cache, name, source, suffix, command)
                if not _verified(entry, library):
                    raise CacheError(cache, f"the kernel just built as {name} failed its "
                                            "digest check there; run again, or point "
                                            "FLUXLOOM_CACHE elsewhere")
            ffi = cffi.FFI()
            ffi.cdef(declarations)
            try:
                found = (ffi, ffi.dlopen(str(library)))
            except OSError as err:
                raise LoomError(f"the kernel {name} was built but cannot be loaded: {err}",
                                file="<build>") from None
            _loaded[name] = found
    return found


def _build_shared(cache: Path, name: str, source: str, suffix: str, command) -> None:
    compiler = shutil.which(command[0])
    if compiler is None:
        raise LoomError(f"'{command[0]}' is needed to build this kernel and was not found "
                        "on PATH", file="<build>")
    try:
        workdir = Path(tempfile.mkdtemp(prefix=f"{TEMP_PREFIX}{os.getpid()}-", dir=cache))
    except OSError as err:
        raise CacheError(cache, f"cannot create a build folder in it ({err.strerror}); make it "
                                "writable or point FLUXLOOM_CACHE elsewhere") from None
    try:
        (workdir / f"{name}{suffix}").write_text(source, encoding="utf-8")
        built = workdir / f"{name}.so"
        done = subprocess.run([compiler, *command[1:], f"-J{workdir}", f"{name}{suffix}",
                               "-o", str(built)], cwd=workdir, capture_output=True, text=True)
        if done.returncode != 0:
            raise LoomError(f"{command[0]} failed to build the kernel {name}: "
                            f"{done.stderr.strip()[:2000]}", file="<build>")
        _install(cache, workdir, name, built, f"{name}.so")
    except OSError as err:
        raise CacheError(cache, f"cannot write a build into it ({err.strerror}); free some "
                                "space, make it writable, or point FLUXLOOM_CACHE elsewhere") from None
    finally:
        shutil.rmtree(workdir, ignore_errors=True)


def _load(name: str, library: Path):
    loader = importlib.machinery.ExtensionFileLoader(name, str(library))
    spec = importlib.util.spec_from_file_location(name, str(library), loader=loader)
    module = importlib.util.module_from_spec(spec)
    loader.exec_module(module)
    return module


def as_pointer(ffi, array, precision: str = "double"):
    """A C pointer into a numpy array without a copy (the array must be contiguous)."""
    ctype = "float[]" if precision == "float" else "double[]"
    return ffi.from_buffer(ctype, array, require_writable=False)
