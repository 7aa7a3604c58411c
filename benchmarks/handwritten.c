/*
 * Straightforward hand-written C kernels for `fluxloom bench`, written the way
 * a modeller would write them without fluxloom: one loop computing every face
 * flux with a branch on the velocity sign, then one loop updating the cells.
 * Same contract as a generated NAME_step (double precision): q arrays hold
 * n + 2*halo values, u_face[i] is the face between cells halo + i - 1 and
 * halo + i, flux is caller workspace of n + 1 values.
 */
#include <math.h>
#include <stddef.h>

#include "handwritten.h"

static void update(size_t n, size_t halo, const double *q_in, double *q_out,
                   const double *flux, double dt_dx)
{
    for (size_t j = 0; j < n; ++j) {
        q_out[halo + j] = q_in[halo + j] - dt_dx * (flux[j + 1] - flux[j]);
    }
}

void hand_upwind_step(size_t n, const double *q_in, double *q_out,
                      const double *u_face, double dt_dx, double *flux)
{
    const size_t halo = 1;
    for (size_t i = 0; i <= n; ++i) {
        const double u = u_face[i];
        if (u >= 0) {
            flux[i] = u * q_in[halo + i - 1];
        } else {
            flux[i] = u * q_in[halo + i];
        }
    }
    update(n, halo, q_in, q_out, flux, dt_dx);
}

void hand_lax_wendroff_step(size_t n, const double *q_in, double *q_out,
                            const double *u_face, double dt_dx, double *flux)
{
    const size_t halo = 1;
    for (size_t i = 0; i <= n; ++i) {
        const double u = u_face[i];
        const double c = fabs(u) * dt_dx;
        const double left = q_in[halo + i - 1], right = q_in[halo + i];
        if (u >= 0) {
            flux[i] = u * (left + 0.5 * (1.0 - c) * (right - left));
        } else {
            flux[i] = u * (right + 0.5 * (1.0 - c) * (left - right));
        }
    }
    update(n, halo, q_in, q_out, flux, dt_dx);
}

static double vanleer(double r)
{
    return (r + fabs(r)) / (1.0 + fabs(r));
}

void hand_lw_vanleer_step(size_t n, const double *q_in, double *q_out,
                          const double *u_face, double dt_dx, double *flux)
{
    const size_t halo = 2;
    for (size_t i = 0; i <= n; ++i) {
        const double u = u_face[i];
        const double c = fabs(u) * dt_dx;
        double upwind, downwind, behind;
        if (u >= 0) {
            behind = q_in[halo + i - 2];
            upwind = q_in[halo + i - 1];
            downwind = q_in[halo + i];
        } else {
            behind = q_in[halo + i + 1];
            upwind = q_in[halo + i];
            downwind = q_in[halo + i - 1];
        }
        const double jump = downwind - upwind;
        const double r = jump != 0 ? (upwind - behind) / jump : 0.0;
        flux[i] = u * (upwind + 0.5 * (1.0 - c) * vanleer(r) * jump);
    }
    update(n, halo, q_in, q_out, flux, dt_dx);
}

void stream_copy(size_t n, const double *source, double *target)
{
    for (size_t i = 0; i < n; ++i) {
        target[i] = source[i];
    }
}

/* The streaming reference of a step: reads everything a one-sweep step reads
 * (the state and one velocity per face) and writes the output, once each, with
 * one addition so no read can be dropped. Blocks of a constant size let GCC
 * vectorise it at -O2 as well. */
void stream_sweep(size_t n, const double *restrict state, const double *restrict velocity,
                  double *restrict target)
{
    const size_t block = 256;
    size_t i = 0;
    for (; i + block <= n; i += block) {
        for (size_t j = 0; j < block; ++j) {
            target[i + j] = state[i + j] + velocity[i + j];
        }
    }
    for (; i < n; ++i) {
        target[i] = state[i] + velocity[i];
    }
}
