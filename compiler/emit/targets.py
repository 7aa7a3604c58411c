"""The target registry: one entry per kind of generated kernel.

A target is one emitter module under compiler/emit/ with
  - `files(scheme, precision, verdicts=()) -> {file name: text}` (its file set,
    rendered from the shared plan through its templates), and
  - `PRINTER`, its sympy code printer subclass, whose `escape_text` is the one
    way user text reaches that target.
The entry says which module that is, which other targets `build --target NAME`
writes with it, and how the target runs inside a Python process (`runs`):
  "python"  the module's text is executed (numpy),
  "cffi"    C compiled by cffi (runtime/build.py: compile_c),
  "shared"  the module's COMPILE command builds a shared library exporting the C
            header's functions, loaded by cffi's dlopen (runtime/build.py:
            compile_shared); the module also gives SOURCE_SUFFIX,
  None      not loaded in-process (an interface for other compilers).
The CLI (`build --target`, `verify --backend`, `demo --backend`),
runtime/kernel.py and the tests read this table; nothing else lists targets.
"""
from __future__ import annotations

import importlib
from dataclasses import dataclass

from ..diagnostics import LoomError


@dataclass(frozen=True)
class Target:
    name: str
    summary: str
    module: str                      # emitter module in compiler/emit/
    companions: tuple[str, ...] = ()  # targets written with this one by `build`
    runs: str | None = None          # "python", "cffi", "shared" or None (see above)
    options: tuple[str, ...] = ()    # keyword options its files() takes (c: openmp)

    def emitter(self):
        return importlib.import_module(f"{__package__}.{self.module}")

    def files(self, scheme, precision: str = "double", verdicts=(), **options) -> dict[str, str]:
        """{file name: text} of this target alone; options it does not take are ignored."""
        taken = {k: v for k, v in options.items() if k in self.options}
        return self.emitter().files(scheme, precision, tuple(verdicts), **taken)

    @property
    def printer(self) -> type:
        return self.emitter().PRINTER


TARGETS: tuple[Target, ...] = (
    Target("c", "C99 kernel NAME.c and header NAME.h (with the Fortran interface)", "c",
           companions=("fortran-interface",), runs="cffi", options=("openmp",)),
    Target("fortran-interface", "Fortran 2003 module NAME_mod.f90 of bind(C) interfaces "
           "to the C kernel", "fortran"),
    Target("numpy", "numpy module NAME.py", "numpy_", runs="python"),
    Target("fortran", "native Fortran 2008 kernel module NAME_kernel.f90 (no C compiler "
           "needed)", "fortran_kernel", runs="shared"),
)
BY_NAME = {t.name: t for t in TARGETS}
NAMES = tuple(BY_NAME)
BACKENDS = tuple(t.name for t in TARGETS if t.runs is not None)
"""Targets a Python process can load and run (`verify --backend`, `load_kernel`)."""


def target(name: str) -> Target:
    try:
        return BY_NAME[name]
    except KeyError:
        raise LoomError(f"unknown target '{name}'; choose one of {', '.join(NAMES)}",
                        file="--target") from None


def build_set(name: str) -> tuple[Target, ...]:
    """The targets `build --target name` writes ('all': every one), in registry order."""
    if name == "all":
        return TARGETS
    chosen = {name, *target(name).companions}
    return tuple(t for t in TARGETS if t.name in chosen)


def files_for(name: str, scheme, precision: str = "double", verdicts=(),
              **options) -> dict[str, str]:
    """{file name: text} of `build --target name`, sorted by file name."""
    found: dict[str, str] = {}
    for each in build_set(name):
        found.update(each.files(scheme, precision, verdicts, **options))
    return dict(sorted(found.items()))
