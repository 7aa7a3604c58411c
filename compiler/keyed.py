"""Caches keyed on a scheme's fingerprint, through functools.lru_cache.

`fingerprint_cache()` decorates `f(scheme, *args)`: lru_cache keyed on the scheme's
fingerprint (a stable hash of everything the scheme means) and the other arguments,
so no sympy tree is hashed and two loads of one spec share an entry.
"""
from __future__ import annotations

import functools

CACHE_SIZE = 256


class SchemeKey:
    """A scheme that hashes and compares by its fingerprint."""

    __slots__ = ("scheme", "fingerprint")

    def __init__(self, scheme):
        self.scheme = scheme
        self.fingerprint = scheme.fingerprint

    def __hash__(self) -> int:
        return hash(self.fingerprint)

    def __eq__(self, other) -> bool:
        return isinstance(other, SchemeKey) and other.fingerprint == self.fingerprint

    def __repr__(self) -> str:
        return f"SchemeKey({self.fingerprint})"


def fingerprint_cache(maxsize: int | None = CACHE_SIZE):
    """lru_cache for f(scheme, *args), keyed on (scheme.fingerprint, *args)."""
    def wrap(function):
        @functools.lru_cache(maxsize=maxsize)
        def keyed(key: SchemeKey, *args):
            return function(key.scheme, *args)

        @functools.wraps(function)
        def call(scheme, *args):
            return keyed(SchemeKey(scheme), *args)

        call.cache_clear = keyed.cache_clear
        call.cache_info = keyed.cache_info
        return call
    return wrap
