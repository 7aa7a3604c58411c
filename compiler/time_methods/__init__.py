"""The time-method registry: one table per method, every fact derived from it.

registry.py holds the tables (the only place coefficients are written);
table.py the TimeMethod type and its Butcher form; properties.py R(z), the
orders and the SSP coefficient; low_storage.py the stage updates kernels run.
"""
from __future__ import annotations

from .properties import Z
from .registry import METHODS
from .table import TimeMethod, butcher, shu_osher

NAMES: tuple[str, ...] = tuple(METHODS)
"""The names a spec may write after `time`, in registry order."""


def method(name: str) -> TimeMethod:
    return METHODS[name]


__all__ = ["METHODS", "NAMES", "TimeMethod", "Z", "butcher", "method", "shu_osher"]
