/*
 * Straightforward hand-written C sweeps for `fluxloom bench --dims 2`: the van Leer
 * limited Lax-Wendroff scheme (examples/lw_vanleer.loom) on a 2-D C-ordered array,
 * written the way a modeller would write them without fluxloom: the 1-D loop of
 * hand_lw_vanleer_step applied to every line, a branch on the velocity sign at each
 * face, fluxes of the line into workspace, then the update. The x sweep runs along
 * rows (contiguous); the y sweep runs down each column (stride = row length).
 * Arrays: (ny + 2 h) x (nx + 2 h) reals, h = 2; u_x: ny x (nx + 1); u_y: (ny + 1) x nx.
 */
#include <math.h>
#include <stddef.h>

#include "handwritten_sweep.h"

static double vanleer(double r)
{
    return (r + fabs(r)) / (1.0 + fabs(r));
}

/* one line of n cells: cell j at line[j * stride], ghosts at j = -2, -1, n, n + 1 */
static void line_step(size_t n, ptrdiff_t stride, const double *line, double *out,
                      const double *u, ptrdiff_t u_stride, double dt_dx, double *flux)
{
    for (size_t i = 0; i <= n; ++i) {
        const double v = u[(ptrdiff_t)i * u_stride];
        const double c = fabs(v) * dt_dx;
        const ptrdiff_t f = (ptrdiff_t)i;
        double upwind, downwind, behind;
        if (v >= 0) {
            behind = line[(f - 2) * stride];
            upwind = line[(f - 1) * stride];
            downwind = line[f * stride];
        } else {
            behind = line[(f + 1) * stride];
            upwind = line[f * stride];
            downwind = line[(f - 1) * stride];
        }
        const double jump = downwind - upwind;
        const double r = jump != 0 ? (upwind - behind) / jump : 0.0;
        flux[i] = v * (upwind + 0.5 * (1.0 - c) * vanleer(r) * jump);
    }
    for (size_t j = 0; j < n; ++j) {
        out[(ptrdiff_t)j * stride] = line[(ptrdiff_t)j * stride] - dt_dx * (flux[j + 1] - flux[j]);
    }
}

void hand_sweep_x(size_t ny, size_t nx, const double *q, double *out, const double *u,
                  double dt_dx, double *flux)
{
    const size_t h = 2, row = nx + 2 * h;
    for (size_t y = 0; y < ny; ++y) {
        const size_t start = (y + h) * row + h;
        line_step(nx, 1, q + start, out + start, u + y * (nx + 1), 1, dt_dx, flux);
    }
}

void hand_sweep_y(size_t ny, size_t nx, const double *q, double *out, const double *u,
                  double dt_dx, double *flux)
{
    const size_t h = 2, row = nx + 2 * h;
    for (size_t x = 0; x < nx; ++x) {
        const size_t start = h * row + h + x;
        line_step(ny, (ptrdiff_t)row, q + start, out + start, u + x, (ptrdiff_t)nx, dt_dx, flux);
    }
}

/* The 2-D streaming copy: every value of the array read once and written once. */
void stream_copy_2d(size_t count, const double *restrict source, double *restrict target)
{
    for (size_t i = 0; i < count; ++i) {
        target[i] = source[i];
    }
}

/* A streaming kernel with a sweep's traffic (two arrays read, one written), shared among
 * OpenMP threads when built with OpenMP: the machine's own thread scaling for memory. */
void stream_triad_2d(size_t count, const double *restrict first, const double *restrict second,
                     double *restrict target)
{
    const ptrdiff_t cells = (ptrdiff_t)count;
#if defined(_OPENMP)
#pragma omp parallel for schedule(static)
#endif
    for (ptrdiff_t i = 0; i < cells; ++i) {
        target[i] = first[i] + 0.5 * second[i];
    }
}
