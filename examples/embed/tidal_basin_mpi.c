/*
 * The tidal-basin spill of tidal_basin.c, split among MPI processes.
 *
 * The 10 km basin's cells are divided into consecutive blocks, one per process
 * (sizes differ by at most one cell). Each process advances its block with the
 * generated kernel stage by stage; before every stage it exchanges its halo
 * with the neighbouring blocks (non-blocking sends and receives on a Cartesian
 * communicator) and the two end blocks fill the ghost cells at the sluice gates
 * exactly as the serial host does. That is the exchange schedule the kernel's
 * header states: HALO cells of q per side before every stage. The face
 * velocities come from the tidal formula at each block's own faces (FACE_HALO
 * beyond them too), so they need no exchange. Rank 0 gathers the final state
 * and prints it in the serial host's format, which it must match bit for bit.
 *
 * Build with the Makefile (make mpi): SCHEME names the generated kernel.
 * Usage: mpiexec -n P tidal_basin_mpi_SCHEME [steps]
 */
#include <math.h>
#include <mpi.h>
#include <stdio.h>
#include <stdlib.h>

#define GLUE_(a, b) a##_##b
#define GLUE(a, b) GLUE_(a, b)
#define KERNEL(x) GLUE(SCHEME, x)
#define QUOTE_(x) #x
#define QUOTE(x) QUOTE_(x)
#include QUOTE(SCHEME.h)

typedef KERNEL(real) real;

static const size_t CELLS = 200;
static const double LENGTH = 10000.0;      /* m */
static const double PEAK_CURRENT = 0.8;    /* m/s */
static const double TIDE = 44712.0;        /* s, 12.42 h */
static const double COURANT = 0.9;

/* The same current as the serial host: zero at and beyond the gates. */
static real current(long f, size_t n, double dx, double t)
{
    const double pi = 3.14159265358979323846;
    if (f <= 0 || f >= (long)n) {
        return 0;
    }
    return (real)(PEAK_CURRENT * sin(pi * (double)f * dx / LENGTH) * cos(2.0 * pi * t / TIDE));
}

/* Refresh the halo of q: HALO cells from each neighbouring block; at a gate
 * (no neighbour) the ghosts mirror the cells next to it, as in the serial host. */
static void exchange(MPI_Comm cart, int before, int after, size_t n, real *q)
{
    const int halo = (int)KERNEL(HALO);
    const MPI_Datatype type = sizeof(real) == sizeof(double) ? MPI_DOUBLE : MPI_FLOAT;
    MPI_Request requests[4];
    MPI_Irecv(q, halo, type, before, 0, cart, &requests[0]);
    MPI_Irecv(q + halo + n, halo, type, after, 1, cart, &requests[1]);
    MPI_Isend(q + halo, halo, type, before, 1, cart, &requests[2]);
    MPI_Isend(q + n, halo, type, after, 0, cart, &requests[3]);
    MPI_Waitall(4, requests, MPI_STATUSES_IGNORE);
    for (size_t g = 0; g < (size_t)halo; ++g) {
        if (before == MPI_PROC_NULL) {
            q[halo - 1 - (int)g] = q[(size_t)halo + g];
        }
        if (after == MPI_PROC_NULL) {
            q[(size_t)halo + n + g] = q[(size_t)halo + n - 1 - g];
        }
    }
}

int main(int argc, char **argv)
{
    MPI_Init(&argc, &argv);
    int size, rank, before, after;
    MPI_Comm cart;
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    const int dims[1] = {size}, periods[1] = {0};
    MPI_Cart_create(MPI_COMM_WORLD, 1, dims, periods, 0, &cart);
    MPI_Comm_rank(cart, &rank);
    MPI_Cart_shift(cart, 0, 1, &before, &after);

    const size_t halo = KERNEL(HALO), face_halo = KERNEL(FACE_HALO);
    const double dx = LENGTH / (double)CELLS;
    const double dt = COURANT * dx / PEAK_CURRENT;
    const long steps = argc > 1 ? atol(argv[1]) : (long)(TIDE / dt + 0.5);
    /* this rank's block: the first CELLS % size blocks are one cell wider */
    const size_t base = CELLS / (size_t)size, extra = CELLS % (size_t)size;
    const size_t n = base + ((size_t)rank < extra ? 1 : 0);
    const size_t start = (size_t)rank * base + ((size_t)rank < extra ? (size_t)rank : extra);
    if (n < halo) {
        if (rank == 0) {
            fprintf(stderr, "blocks of %zu cells are narrower than the halo (%zu)\n", n, halo);
        }
        MPI_Abort(MPI_COMM_WORLD, 2);
    }
    real *q = calloc(n + 2 * halo, sizeof *q);
    real *next = calloc(n + 2 * halo, sizeof *next);
    real *stage_a = calloc(n + 2 * halo, sizeof *stage_a);
    real *stage_b = calloc(n + 2 * halo, sizeof *stage_b);
    real *u_face = calloc(n + 1 + 2 * face_halo, sizeof *u_face);
    real *work = calloc(KERNEL(workspace_size)(n), sizeof *work);
    real *whole = calloc(CELLS, sizeof *whole);
    if (!q || !next || !stage_a || !stage_b || !u_face || !work || !whole) {
        fprintf(stderr, "out of memory\n");
        MPI_Abort(MPI_COMM_WORLD, 1);
    }
    for (size_t i = 0; i < n; ++i) {
        const double x = ((double)(start + i) + 0.5) * dx;
        q[halo + i] = (x >= 3000.0 && x < 4000.0) ? 1 : 0;
    }
    double mass_initial = 0.0;
    for (size_t i = 0; i < CELLS; ++i) { /* in the serial host's order: the same sum */
        const double x = ((double)i + 0.5) * dx;
        mass_initial += (x >= 3000.0 && x < 4000.0) ? 1.0 : 0.0;
    }
    mass_initial *= dx;

    for (long s = 0; s < steps; ++s) {
        const double t = ((double)s + 0.5) * dt;
        for (size_t i = 0; i < n + 1 + 2 * face_halo; ++i) {
            u_face[i] = current((long)(start + i) - (long)face_halo, CELLS, dx, t);
        }
        real *source = q;
        for (int k = 0; k < KERNEL(STAGES); ++k) {
            real *target = k == KERNEL(STAGES) - 1 ? next : (k % 2 ? stage_b : stage_a);
            exchange(cart, before, after, n, source);
            KERNEL(stage)(k, n, q, source, target, u_face, (real)(dt / dx), work);
            source = target;
        }
        real *swap = q;
        q = next;
        next = swap;
    }

    int *counts = calloc((size_t)size, sizeof *counts);
    int *offsets = calloc((size_t)size, sizeof *offsets);
    if (!counts || !offsets) {
        fprintf(stderr, "out of memory\n");
        MPI_Abort(MPI_COMM_WORLD, 1);
    }
    for (int r = 0; r < size; ++r) {
        counts[r] = (int)(base + ((size_t)r < extra ? 1 : 0));
        offsets[r] = (int)((size_t)r * base + ((size_t)r < extra ? (size_t)r : extra));
    }
    const MPI_Datatype type = sizeof(real) == sizeof(double) ? MPI_DOUBLE : MPI_FLOAT;
    MPI_Gatherv(q + halo, (int)n, type, whole, counts, offsets, type, 0, cart);
    if (rank == 0) {
        double lowest = (double)whole[0], highest = (double)whole[0], mass = 0.0;
        for (size_t i = 0; i < CELLS; ++i) {
            lowest = fmin(lowest, (double)whole[i]);
            highest = fmax(highest, (double)whole[i]);
            mass += (double)whole[i];
        }
        printf("scheme %s\n", QUOTE(SCHEME));
        printf("cells %zu steps %ld dt %.17g dx %.17g\n", CELLS, steps, dt, dx);
        printf("ranks %d\n", size);
        printf("mass_initial %.17g\n", mass_initial);
        printf("mass_final %.17g\n", mass * dx);
        printf("min %.17g\nmax %.17g\n", lowest, highest);
        printf("profile\n");
        for (size_t i = 0; i < CELLS; ++i) {
            printf("%zu %.17g\n", i, (double)whole[i]);
        }
    }
    free(q);
    free(next);
    free(stage_a);
    free(stage_b);
    free(u_face);
    free(work);
    free(whole);
    free(counts);
    free(offsets);
    MPI_Comm_free(&cart);
    MPI_Finalize();
    return 0;
}
