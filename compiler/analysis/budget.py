"""A time and memory budget for each analysis pass.

Exact symbolic work can run away on a large face (a `cancel` of a big rational
expression takes minutes and hundreds of MB), and sympy cannot be interrupted
cooperatively everywhere. So a pass runs inside `deadline(seconds)`:

- in the main thread, a profiling timer (SIGPROF, process CPU time) ticks every
  TICK seconds while a deadline is open; each tick checks the CPU time spent and
  the growth of resident memory since the deadline opened, and raises
  `BudgetExceeded` in whatever code is running once either is over;
- everywhere (and in other threads, where signals cannot be used) long loops
  call `check()` between steps.

`BudgetExceeded` derives from BaseException, so the `except Exception` blocks
of sympy or of a pass cannot swallow it; if it is swallowed anyway, the next
tick raises it again. CPU time rather than wall time keeps the verdicts the
same on a busy machine: with budget enough, a pass's result never depends on
timing. `attempt()` runs one pass with its fallbacks, each under its own
deadline, and says which one answered.
"""
from __future__ import annotations

import os
import signal
import threading
import time
from dataclasses import dataclass

DEFAULT_SECONDS = 4.0        # CPU seconds per analysis pass (`fluxloom check --budget`)
WHOLE_FACTOR = 2.0           # the passes together get at most this many budgets: `check`
                             # ends within seconds however many passes run long
FLOOR_SECONDS = 0.05         # a pass started after the whole budget is spent gets this much
MEMORY_LIMIT_MB = 300.0      # growth of resident memory allowed within one pass
TICK = 0.05                  # CPU seconds between checks by the timer


class BudgetExceeded(BaseException):
    """A pass went past its time or memory budget (raised inside the pass)."""

    def __init__(self, deadline: "_Deadline", why: str):
        super().__init__(why)
        self.deadline = deadline
        self.why = why


class _Deadline:
    """One open budget; `with deadline(seconds) as d:` enters it."""

    def __init__(self, seconds: float):
        self.seconds = seconds
        self.end = 0.0             # time.process_time() at which the budget is spent
        self.rss_limit = None      # bytes of resident memory past which the pass stops
        self.expired = ""          # the reason, once exceeded
        self.closed = False
        self.signalled = False

    def __enter__(self) -> "_Deadline":
        global _PREVIOUS_HANDLER
        rss = _resident_bytes()
        self.rss_limit = None if rss is None else rss + MEMORY_LIMIT_MB * 2 ** 20
        self.end = time.process_time() + self.seconds
        self.signalled = _in_main_thread()
        if self.signalled and not any(d.signalled for d in _ACTIVE):
            _PREVIOUS_HANDLER = signal.signal(signal.SIGPROF, _on_tick)
            signal.setitimer(signal.ITIMER_PROF, TICK, TICK)
        _ACTIVE.append(self)
        return self

    def __exit__(self, *exc) -> bool:
        global _PREVIOUS_HANDLER
        self.closed = True         # first: from here on no tick raises for this deadline
        if self in _ACTIVE:
            _ACTIVE.remove(self)
        if self.signalled and not any(d.signalled for d in _ACTIVE):
            signal.setitimer(signal.ITIMER_PROF, 0, 0)
            signal.signal(signal.SIGPROF, _PREVIOUS_HANDLER or signal.SIG_DFL)
            _PREVIOUS_HANDLER = None
        return False


_ACTIVE: list[_Deadline] = []
_PREVIOUS_HANDLER = None
_BOOKKEEPING = (_Deadline.__enter__.__code__, _Deadline.__exit__.__code__)


def _resident_bytes() -> float | None:
    try:
        with open("/proc/self/statm") as f:
            return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError, AttributeError):
        return None  # not Linux: the memory check is left out, the time check stays


def check(memory: bool = False) -> None:
    """Raise BudgetExceeded when an open deadline has run out (cheap: call it often)."""
    if not _ACTIVE:
        return
    now = time.process_time()
    rss = _resident_bytes() if memory else None
    for d in list(_ACTIVE):
        if d.closed:
            continue
        if not d.expired:
            if now >= d.end:
                d.expired = f"more than {d.seconds:g} s of CPU time"
            elif rss is not None and d.rss_limit is not None and rss > d.rss_limit:
                d.expired = f"more than {MEMORY_LIMIT_MB:g} MB of extra memory"
        if d.expired:
            raise BudgetExceeded(d, d.expired)


def _on_tick(signum, frame) -> None:
    if frame is not None and frame.f_code in _BOOKKEEPING:
        return  # never inside the deadline's own set-up or clean-up; the next tick comes
    check(memory=True)


def _in_main_thread() -> bool:
    return threading.current_thread() is threading.main_thread() and hasattr(signal, "setitimer")


def deadline(seconds: float) -> _Deadline:
    """`with deadline(s):` runs the body with at most s CPU seconds and MEMORY_LIMIT_MB more memory."""
    return _Deadline(seconds)


@dataclass(frozen=True)
class Outcome:
    value: object
    how: str        # "exact", "fallback" or "undecided"
    note: str       # "" when the exact step answered within budget, else what happened


def attempt(seconds: float, exact, fallback=None, fallback_how: str = "",
            undecided=None, fallback_seconds=None) -> Outcome:
    """exact() within `seconds`; past it fallback() (its own `seconds`, or what the
    callable `fallback_seconds` gives when it starts), then undecided()."""
    try:
        with deadline(seconds) as d:
            return Outcome(exact(), "exact", "")
    except BudgetExceeded as stop:
        if stop.deadline is not d:
            raise
        why = stop.why
    note = f"budget exceeded (the exact step took {why}; budget {seconds:g} s per pass)"
    if fallback is not None:
        try:
            with deadline(seconds if fallback_seconds is None else fallback_seconds()) as d:
                return Outcome(fallback(), "fallback", f"{note}; {fallback_how}")
        except BudgetExceeded as stop:
            if stop.deadline is not d:
                raise
            note += f"; the fallback ({fallback_how}) took {stop.why} too"
    return Outcome(undecided() if undecided is not None else None, "undecided", note)
