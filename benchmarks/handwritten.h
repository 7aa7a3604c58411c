void hand_upwind_step(size_t n, const double *q_in, double *q_out, const double *u_face, double dt_dx, double *flux);
void hand_lax_wendroff_step(size_t n, const double *q_in, double *q_out, const double *u_face, double dt_dx, double *flux);
void hand_lw_vanleer_step(size_t n, const double *q_in, double *q_out, const double *u_face, double dt_dx, double *flux);
void stream_copy(size_t n, const double *source, double *target);
void stream_sweep(size_t n, const double *state, const double *velocity, double *target);
