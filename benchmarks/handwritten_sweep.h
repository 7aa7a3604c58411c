#include <stddef.h>
void hand_sweep_x(size_t ny, size_t nx, const double *q, double *out, const double *u, double dt_dx, double *flux);
void hand_sweep_y(size_t ny, size_t nx, const double *q, double *out, const double *u, double dt_dx, double *flux);
void stream_copy_2d(size_t count, const double *restrict source, double *restrict target);
void stream_triad_2d(size_t count, const double *restrict first, const double *restrict second,
                     double *restrict target);
