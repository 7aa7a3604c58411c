/*
 * Three tracers in a 2-D tidal basin with walls and an open mouth (a scenario of our own).
 *
 * A basin 20 km long (x) and 5 km wide (y): walls along both sides and at the head
 * (x = 20 km), open to the sea at its mouth (x = 0). The tide exchanges water
 * through the mouth: on the flood it comes in along the south shore and goes out
 * along the north shore, on the ebb the other way round, and it dies out towards the
 * head; a residual eddy stirs the basin. Both come from streamfunctions, so every
 * cell's inflow matches its outflow. Three tracers share the flow: salinity (basin
 * 20, sea 35), a dye spill (sea 0) and a nutrient (basin 5, sea 1). Where the water
 * comes in at the mouth the sea's values are prescribed (KERNEL(halo_inflow)), where
 * it goes out the mouth is a zero-gradient outflow (KERNEL(halo_outflow)); the
 * walls take a mirrored halo (KERNEL(halo_wall)) and zero normal velocity
 * (KERNEL(faces_wall)). One step is Strang split: x for dt/2, y for dt, x for dt/2,
 * the ghost cells of the swept axis filled before every sweep.
 *
 * The grid is stretched along the basin (finer cells at the mouth, STRETCH). The
 * sweeps call the generated KERNEL(sweep_edges), which fills the ghost cells of every
 * Runge-Kutta stage inside the step by the same rules: across the basin one call
 * sweeps every line of all three tracers between the two shores (walls); along it,
 * the mouth is an inflow on some lines and an outflow on others, so each line is one
 * call with its own ends. Per-cell dt/dx along x (a face's Courant number from its
 * upwind cell).
 *
 * Build with the Makefile: SCHEME names the generated kernel (tidewater, a `time
 * euler` one, and vanleer_rk3, SSP-RK3: the same host).
 * Usage: tidal_basin_2d [steps]   (default: one tidal period)
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#define GLUE_(a, b) a##_##b
#define GLUE(a, b) GLUE_(a, b)
#define KERNEL(x) GLUE(SCHEME, x) /* KERNEL(step) is tidewater_step for SCHEME=tidewater */
#define QUOTE_(x) #x
#define QUOTE(x) QUOTE_(x)
#include QUOTE(SCHEME.h)

typedef KERNEL(real) real;

enum { TRACERS = 3, NX = 80, NY = 20, STEPS_PER_TIDE = 400 };
static const double LENGTH = 20000.0;      /* m, mouth (x = 0) to head */
static const double WIDTH = 5000.0;        /* m */
static const double TIDE = 44712.0;        /* s, 12.42 h */
static const double MOUTH_CURRENT = 0.6;   /* m/s, the fastest tidal current at the mouth */
static const double EDDY = 0.15;           /* m/s, the residual eddy's scale */
static const double STRETCH = 0.6;         /* x(s) = L (s - STRETCH sin(pi s) / pi) */
static const double SEA[TRACERS] = {35.0, 0.0, 1.0};
static const double pi = 3.14159265358979323846;

/* The basin's state: TRACERS arrays of (NY + 2h) x (NX + 2h) cells, one after another,
 * C order with x contiguous: cell (i, j) of tracer t at q[(t * ey + h + j) * ex + h + i]. */
struct basin {
    size_t halo, ex, ey;            /* ghost cells per side; extents with ghosts */
    double xf[NX + 1], dx[NX], dy;  /* x faces and widths; y is uniform */
    real *q, *next;
    real *u, *v;                    /* u[j * (NX + 1) + f]: x faces; v[f * NX + i]: y faces */
    real dt_dx[NX + 2];             /* dt over the widths of x cells -1 .. NX */
    real *work;
    size_t work_reals;              /* a line's sweep workspace per thread */
};

/* The tidal exchange (in along one shore, out along the other, nothing at the head)
 * and the residual eddy, m^2/s; both vanish along the walls. */
static double streamfunction(double x, double y, double t)
{
    const double head = 1.0 - x / LENGTH;
    return MOUTH_CURRENT * WIDTH / pi * cos(2.0 * pi * t / TIDE) * head * head * sin(pi * y / WIDTH)
           + EDDY * WIDTH / pi * sin(pi * x / LENGTH) * sin(2.0 * pi * y / WIDTH);
}

/* Face velocities at time t: differences of the streamfunction across each face. */
static void set_faces(struct basin *b, double t)
{
    for (size_t j = 0; j < NY; ++j) {
        const double y0 = (double)j * b->dy, y1 = y0 + b->dy;
        for (size_t f = 0; f <= NX; ++f) {
            b->u[j * (NX + 1) + f] = (real)((streamfunction(b->xf[f], y1, t)
                                             - streamfunction(b->xf[f], y0, t)) / b->dy);
        }
    }
    for (size_t f = 0; f <= NY; ++f) {
        const double y = (double)f * b->dy;
        for (size_t i = 0; i < NX; ++i) {
            b->v[f * NX + i] = (real)(-(streamfunction(b->xf[i + 1], y, t)
                                        - streamfunction(b->xf[i], y, t)) / b->dx[i]);
        }
    }
    /* the walls: no normal velocity at the head and along both shores */
    const size_t interior[2] = {NY, NX};
    KERNEL(faces_wall)(2, interior, 1, KERNEL(SIDE_HIGH), b->u);
    KERNEL(faces_wall)(2, interior, 0, KERNEL(SIDE_LOW), b->v);
    KERNEL(faces_wall)(2, interior, 0, KERNEL(SIDE_HIGH), b->v);
}

/* Ghost cells of every tracer along `axis` (1 = x, 0 = y, as axes of one tracer). */
static void fill_edges(struct basin *b, int axis)
{
    const size_t shape[3] = {TRACERS, NY, NX}, halo[3] = {0, b->halo, b->halo};
    if (axis == 1) {
        /* the mouth, line by line: the sea's values where the water comes in */
        const size_t line[1] = {NX}, width[1] = {b->halo};
        for (size_t t = 0; t < TRACERS; ++t) {
            const real sea[8] = {(real)SEA[t], (real)SEA[t], (real)SEA[t], (real)SEA[t],
                                 (real)SEA[t], (real)SEA[t], (real)SEA[t], (real)SEA[t]};
            for (size_t j = 0; j < NY; ++j) {
                real *row = b->q + (t * b->ey + b->halo + j) * b->ex;
                if (b->u[j * (NX + 1)] >= 0) {
                    KERNEL(halo_inflow)(1, line, width, 0, KERNEL(SIDE_LOW), row, sea);
                } else {
                    KERNEL(halo_outflow)(1, line, width, 0, KERNEL(SIDE_LOW), row);
                }
            }
        }
        KERNEL(halo_wall)(3, shape, halo, 2, KERNEL(SIDE_HIGH), b->q);
    } else {
        KERNEL(halo_wall)(3, shape, halo, 1, KERNEL(SIDE_LOW), b->q);
        KERNEL(halo_wall)(3, shape, halo, 1, KERNEL(SIDE_HIGH), b->q);
    }
}

/* Every line of every tracer along `axis` for time step dt: b->next from b->q (interior
 * cells of interior lines). Across the basin one call with walls at both shores; along
 * it one call per line: the mouth an inflow of the sea's values where the water comes
 * in, a zero-gradient outflow where it goes out, the head a wall. */
static void sweep_axis(struct basin *b, int axis, double dt)
{
    int status = 0;
    if (axis == 1) {
        const size_t line[1] = {NX}, width[1] = {b->halo};
        for (size_t c = 0; c < NX + 2; ++c) {   /* the ghost cells take the end cells' widths */
            b->dt_dx[c] = (real)(dt / b->dx[c == 0 ? 0 : c > NX ? NX - 1 : c - 1]);
        }
        for (size_t t = 0; t < TRACERS && status == 0; ++t) {
            const real sea[8] = {(real)SEA[t], (real)SEA[t], (real)SEA[t], (real)SEA[t],
                                 (real)SEA[t], (real)SEA[t], (real)SEA[t], (real)SEA[t]};
            for (size_t j = 0; j < NY && status == 0; ++j) {
                const size_t row = (t * b->ey + b->halo + j) * b->ex;
                const real *u = b->u + j * (NX + 1);
                const int mouth = u[0] >= 0 ? KERNEL(EDGE_INFLOW) : KERNEL(EDGE_OUTFLOW);
                status = KERNEL(sweep_edges)(1, line, width, 0, 1, b->q + row, b->next + row, u,
                                             b->dt_dx, 1, NULL, NULL, mouth, KERNEL(EDGE_WALL),
                                             u[0] >= 0 ? sea : NULL, NULL, b->work, b->work_reals);
            }
        }
    } else {
        const size_t shape[2] = {NY, NX}, halo[2] = {b->halo, b->halo};
        const real dt_dy = (real)(dt / b->dy);
        status = KERNEL(sweep_edges)(2, shape, halo, 0, TRACERS, b->q, b->next, b->v, &dt_dy, 0,
                                     NULL, NULL, KERNEL(EDGE_WALL), KERNEL(EDGE_WALL), NULL, NULL,
                                     b->work, b->work_reals);
    }
    if (status != 0) {
        fprintf(stderr, "the sweep refused its arguments (status %d)\n", status);
        exit(1);
    }
}

static void swap(struct basin *b)
{
    real *keep = b->q;
    b->q = b->next;
    b->next = keep;
}

static double cell(const struct basin *b, size_t t, size_t i, size_t j)
{
    return (double)b->q[(t * b->ey + b->halo + j) * b->ex + b->halo + i];
}

static double mass(const struct basin *b, size_t t)
{
    double sum = 0.0;
    for (size_t j = 0; j < NY; ++j) {
        for (size_t i = 0; i < NX; ++i) {
            sum += cell(b, t, i, j) * b->dx[i] * b->dy;
        }
    }
    return sum;
}

int main(int argc, char **argv)
{
    struct basin b;
    b.halo = KERNEL(HALO);
    b.ex = NX + 2 * b.halo;
    b.ey = NY + 2 * b.halo;
    b.dy = WIDTH / NY;
    for (size_t f = 0; f <= NX; ++f) {
        const double s = (double)f / NX;
        b.xf[f] = LENGTH * (s - STRETCH * sin(pi * s) / pi);
    }
    for (size_t i = 0; i < NX; ++i) {
        b.dx[i] = b.xf[i + 1] - b.xf[i];
    }
    const size_t cells = TRACERS * b.ex * b.ey;
    b.q = calloc(cells, sizeof *b.q);
    b.next = calloc(cells, sizeof *b.next);
    b.u = calloc(NY * (NX + 1), sizeof *b.u);
    b.v = calloc((NY + 1) * NX, sizeof *b.v);
    b.work_reals = KERNEL(sweep_workspace_size)(NX > NY ? NX : NY) * (size_t)KERNEL(sweep_threads)();
    b.work = calloc(b.work_reals + 1, sizeof *b.work);
    if (!b.q || !b.next || !b.u || !b.v || !b.work || !KERNEL(SWEEP_WIDTHS) || KERNEL(HALO) > 8) {
        fprintf(stderr, "out of memory, or a kernel whose sweep takes no per-cell widths\n");
        return 1;
    }
    for (size_t t = 0; t < TRACERS; ++t) {
        for (size_t j = 0; j < NY; ++j) {
            const double y = ((double)j + 0.5) * b.dy;
            for (size_t i = 0; i < NX; ++i) {
                const double x = 0.5 * (b.xf[i] + b.xf[i + 1]);
                const int spill = x >= 8000.0 && x < 10000.0 && y >= 1500.0 && y < 3500.0;
                const double value = t == 0 ? 20.0 : t == 1 ? (spill ? 1.0 : 0.0) : 5.0;
                b.q[(t * b.ey + b.halo + j) * b.ex + b.halo + i] = (real)value;
            }
        }
    }
    const double dt = TIDE / STEPS_PER_TIDE;
    const long steps = argc > 1 ? atol(argv[1]) : STEPS_PER_TIDE;
    double initial[TRACERS];
    for (size_t t = 0; t < TRACERS; ++t) {
        initial[t] = mass(&b, t);
    }
    static const int axes[3] = {1, 0, 1};            /* Strang: x/2, y, x/2 */
    static const double fractions[3] = {0.5, 1.0, 0.5};
    for (long s = 0; s < steps; ++s) {
        set_faces(&b, ((double)s + 0.5) * dt);       /* the flow at mid-step */
        for (int k = 0; k < 3; ++k) {
            fill_edges(&b, axes[k]);
            sweep_axis(&b, axes[k], fractions[k] * dt);
            swap(&b);
        }
    }
    printf("scheme %s\n", QUOTE(SCHEME));
    printf("cells %d %d steps %ld dt %.17g tracers %d\n", NX, NY, steps, dt, TRACERS);
    for (size_t t = 0; t < TRACERS; ++t) {
        double lowest = INFINITY, highest = -INFINITY;
        for (size_t j = 0; j < NY; ++j) {
            for (size_t i = 0; i < NX; ++i) {
                lowest = fmin(lowest, cell(&b, t, i, j));
                highest = fmax(highest, cell(&b, t, i, j));
            }
        }
        printf("mass%zu_initial %.17g\nmass%zu_final %.17g\n", t, initial[t], t, mass(&b, t));
        printf("min%zu %.17g\nmax%zu %.17g\n", t, lowest, t, highest);
    }
    printf("field\n");
    for (size_t t = 0; t < TRACERS; ++t) {
        for (size_t i = 0; i < NX; ++i) {
            for (size_t j = 0; j < NY; ++j) {
                printf("%zu %zu %zu %.17g\n", t, i, j, cell(&b, t, i, j));
            }
        }
    }
    free(b.q);
    free(b.next);
    free(b.u);
    free(b.v);
    free(b.work);
    return 0;
}
