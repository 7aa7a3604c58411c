"""Emitters: Scheme IR -> source text, one module per target (compiler/emit/targets.py).

`c_files(scheme, precision, verdicts)` gives every file `build --target c` writes:
NAME.h, NAME.c and NAME_mod.f90. Emitters never run the analysis: `verdicts` are
the verdict lines for the banner, worded by the caller (compiler/outputs.py).
"""
from __future__ import annotations


def c_files(scheme, precision: str = "double", verdicts=(),
            openmp: bool = False) -> dict[str, str]:
    """{file name: text} of the C kernel, its header and the Fortran interface module."""
    from .targets import files_for

    return files_for("c", scheme, precision, verdicts, openmp=openmp)
