"""Compile generated C with cffi (API mode, out of line) into a cache and load it.

A compiled extension cannot be reloaded in one process, so every build is
named by a hash of its C source and flags: a changed scheme, param value,
precision or flag gives a new module name, the same ones reuse the cached
library. Builds happen in a private temporary directory and the finished
library is moved into the cache with an atomic rename, so two processes
building the same scheme at once both end up loading a complete file.
"""
from __future__ import annotations

import hashlib
import importlib.machinery
import importlib.util
import os
import shlex
import shutil
import sys
import tempfile
import threading
import warnings
from pathlib import Path

import cffi

from ..compiler.diagnostics import LoomError
from ..compiler.emit.c import c_declarations, c_sources
from ..compiler.ir import Scheme

BUILD_FLAGS = ("-std=c99",)
_loaded: dict[str, object] = {}
_lock = threading.Lock()


def cache_dir() -> Path:
    """$FLUXLOOM_CACHE, else ~/.cache/fluxloom (created on demand)."""
    root = os.environ.get("FLUXLOOM_CACHE") or os.path.join(Path.home(), ".cache", "fluxloom")
    path = Path(root)
    path.mkdir(parents=True, exist_ok=True)
    return path


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


def compile_c(scheme: Scheme, precision: str = "double", opt: str = "-O2"):
    """Compile (or reuse) the C kernel of scheme; returns cffi's (ffi, lib).

    opt holds the optimisation flags, split like a shell would ("-O3 -march=native").
    """
    sources = c_sources(scheme, precision, verdicts=False)
    header, kernel = sources[f"{scheme.name}.h"], sources[f"{scheme.name}.c"]
    # One translation unit: the header text stands in for the #include.
    source = kernel.replace(f'#include "{scheme.name}.h"', header, 1)
    return compile_source(scheme.name, source, c_declarations(scheme, precision), opt)


def compile_source(label: str, source: str, declarations: str, opt: str = "-O2"):
    """Compile (or reuse) any C source as a cffi module named by its hash; (ffi, lib)."""
    flags = (*BUILD_FLAGS, *shlex.split(opt))
    name = _hashed_name(label, source, flags)
    with _lock:
        module = _loaded.get(name)
        if module is None:
            library = cache_dir() / f"{name}{_extension_suffix()}"
            if not library.exists():
                _build(name, source, declarations, flags, library)
            module = _load(name, library)
            _loaded[name] = module
    return module.ffi, module.lib


def _build(name: str, source: str, declarations: str, flags, library: Path) -> None:
    ffi = cffi.FFI()
    ffi.cdef(declarations)
    ffi.set_source(name, source, extra_compile_args=list(flags))
    workdir = Path(tempfile.mkdtemp(prefix=f"{name}.", dir=library.parent))
    try:
        try:
            with warnings.catch_warnings():  # setuptools' own deprecation chatter
                warnings.simplefilter("ignore")
                built = Path(ffi.compile(tmpdir=str(workdir), verbose=False))
        except Exception as err:  # distutils/setuptools CompileError and friends
            raise LoomError(f"C compiler failed to build the kernel {name}: {err}",
                            file="<build>") from None
        staged = workdir / library.name
        os.replace(built, staged)
        os.replace(staged, library)  # atomic: readers see no file or a complete one
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
