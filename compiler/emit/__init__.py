"""Emitters: Scheme IR -> source text (C99 + header + Fortran interface, numpy)."""
