"""The exchange schedule: what a host running a kernel on one block of a decomposed
domain must refresh from its neighbours, how wide, and when.

It follows from the kernel plan alone: the stage state q is read `halo` cells
beyond the block on each side by every stage, so its halo is refreshed before
stage 0 (the step's input) and between each pair of stages; the face velocities
are read `face_halo` faces beyond the block's n + 1 faces (flux correction only),
refreshed once per step since every stage of a step uses the same velocities.
`q_start`, the workspace registers and a clamp act on the block's own cells.

Flux correction bounds each cell by its neighbours' low-order solution; instead
of exchanging that solution and the limiter factors (two more exchanges), the
kernel recomputes them for the FCT_EXTRA_FACES cells beyond each block edge from
a halo that much wider. The schedule says so.

The schedule is of one step along one axis; a step split into sweeps along
several axes repeats it per sweep, each along its own axis.
"""
from __future__ import annotations

import textwrap
from dataclasses import dataclass


@dataclass(frozen=True)
class ExchangeSchedule:
    halo: int          # ghost cells of q per side, refreshed by each q exchange
    face_halo: int     # face velocities per side beyond the block's n + 1 faces
    stages: int        # the time method's stages: one q exchange before each
    fct: bool          # the halo includes the flux correction's extra cells

    @property
    def q_exchanges(self) -> int:
        return self.stages if self.halo > 0 else 0

    @property
    def face_exchanges(self) -> int:
        return 1 if self.face_halo > 0 else 0

    @property
    def per_step(self) -> int:
        """Halo exchanges (one array with its neighbours) in one step."""
        return self.q_exchanges + self.face_exchanges

    @property
    def q_when(self) -> tuple[str, ...]:
        """When each exchange of q happens, stages numbered as in NAME_stage."""
        if not self.q_exchanges:
            return ()
        return ("before stage 0 (the step's input)",) + tuple(
            f"between stages {k - 1} and {k}" for k in range(1, self.stages))

    def to_json(self) -> dict:
        """The `exchange` object of `check --json`."""
        return {
            "halo": self.halo,
            "face_halo": self.face_halo,
            "per_step": self.per_step,
            "q_exchanges": list(self.q_when),
            "face_exchanges": self.face_exchanges,
            "arrays": ["q", "u_face"] if self.face_halo else ["q"],
            "note": self.note,
        }

    @property
    def note(self) -> str:
        parts = ["q_start, the workspace and a clamp stay local to the block; the last "
                 "stage's output is refreshed by the next step's first exchange"]
        if self.fct:
            parts.append(f"flux correction: the halo includes {self.face_halo} cells per side in "
                         "which the kernel recomputes the neighbours' low-order solution and "
                         "limiter factors instead of exchanging them")
        return "; ".join(parts)

    @property
    def lines(self) -> tuple[str, ...]:
        """The schedule as comment lines (no comment markers) for generated files."""
        if self.stages == 1:
            q_when = "before stage 0 (the step's input)"
        else:
            pairs = ", ".join(f"{k - 1} and {k}" for k in range(1, self.stages))
            q_when = f"before stage 0 (the step's input) and between stages {pairs}"
        if self.face_halo:
            u_text = (f"u_face: {self.face_halo} velocities per side beyond the block's n + 1 "
                      "faces, refreshed once per step (whenever the velocities change).")
        else:
            u_text = "u_face: no halo; the block's n + 1 faces include both of its end faces."
        counts = f"{self.q_exchanges} of q" + (
            f", {self.face_exchanges} of u_face" if self.face_exchanges else "")
        items = [f"q: {self.halo} ghost cells per side, refreshed {q_when}.", u_text,
                 f"exchanges per step: {self.per_step} ({counts})."]
        if self.fct:
            items.append(f"flux correction: the halo includes {self.face_halo} cells per side "
                         "in which the kernel recomputes the neighbours' low-order solution "
                         "and limiter factors instead of exchanging them.")
        items.append("q_start, the workspace and a clamp stay local to the block.")
        lines = ["Exchange schedule on a decomposed domain (the host refreshes halos from",
                 "the neighbouring blocks; a split multi-dimensional step repeats it per sweep):"]
        for item in items:
            lines += textwrap.wrap(item, 76, initial_indent="  ", subsequent_indent="    ")
        return tuple(lines)


def exchange_schedule(scheme) -> ExchangeSchedule:
    """The schedule of scheme's kernel (the plan's halo, face halo and stages)."""
    from ..time_methods.low_storage import low_storage_form
    from .plan import face_halo, kernel_halo

    return ExchangeSchedule(halo=kernel_halo(scheme), face_halo=face_halo(scheme),
                            stages=len(low_storage_form(scheme.time).updates),
                            fct=scheme.correct == "fct")
