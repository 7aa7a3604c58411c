"""The generated sweep with edges behind `EdgeSweep`'s interface: what verify --boundary runs.

`BoundarySweep(scheme, backend, precision)(axis, q, u_face, dt_dx, edges, time)` fills q's
ghost cells along `axis` with the boundary helpers generated for the back end (the start
of the step), then advances every line in one call of the generated sweep with the axis'
ends (NAME_sweep_edges in C, sweep(low_edge=...) in numpy), which fills every
intermediate stage's ghost cells by the same rules itself. In place, like `EdgeSweep`,
which stays the independent stage-by-stage reference (tests hold the two to round-off).
"""
from __future__ import annotations

import numpy as np

from .boundaries import Edges, check_edges, fill_axis
from .edge_sweeps import EdgeSweep
from .kernel import load_kernel


class BoundarySweep(EdgeSweep):
    path = "generated sweep with edges (one call per axis and step; every stage's ghost cells filled inside it)"

    def __init__(self, scheme, backend: str = "numpy", precision: str = "double"):
        super().__init__(scheme, backend, precision)
        self.kernel = load_kernel(scheme, backend, precision)

    def __call__(self, axis: int, q: np.ndarray, u_face: np.ndarray, dt_dx: float,
                 edges: Edges, time: float = 0.0) -> np.ndarray:
        check_edges(edges)
        fill_axis(self.fills, q, axis, self.halo, edges, time)
        out = self.kernel.sweep(q, u_face, dt_dx, axis, edges=edges[axis], time=time)
        inside = tuple(slice(self.halo, s - self.halo) for s in q.shape)
        q[inside] = out[inside]
        self.calls += 1
        return q
