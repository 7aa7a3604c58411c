"""Emitters: Scheme IR -> source text (C99 + header + Fortran interface, numpy).

`c_files(scheme, precision)` gives every file of the C target by name:
NAME.h, NAME.c and NAME_mod.f90.
"""
from __future__ import annotations


def c_files(scheme, precision: str = "double", verdicts: bool = True,
            openmp: bool = False) -> dict[str, str]:
    """{file name: text} of the C kernel, its header and the Fortran interface module."""
    from .c import c_sources
    from .fortran import fortran_source

    return {**c_sources(scheme, precision, verdicts, openmp),
            **fortran_source(scheme, precision, verdicts)}
