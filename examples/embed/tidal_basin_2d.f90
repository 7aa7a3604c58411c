! Three tracers in a 2-D tidal basin with walls and an open mouth (a scenario of our own):
! the model of tidal_basin_2d.c written in Fortran, with the tidewater kernel through
! tidewater_mod. Arrays use natural indexing, q(1 - h : nx + h, 1 - h : ny + h, tracer)
! with x the first (contiguous) index; the halo helpers of tidewater_mod take the same
! layout (axis 1 = x). One Strang step is x for dt/2, y for dt, x for dt/2; before every
! sweep the ghost cells of the swept axis are filled (walls; at the mouth, line by line,
! the sea's values where the water comes in and zero gradient where it goes out) and
! the wall faces zeroed.
!
! The grid is stretched along the basin (finer cells at the mouth); each sweep is one
! call of tidewater_sweep: every line of all three tracers, per-cell dt/dx along x.
program tidal_basin_2d
  use, intrinsic :: iso_c_binding, only: c_double, c_size_t
  use tidewater_mod
  implicit none

  integer, parameter :: wp = tidewater_real
  integer, parameter :: h = tidewater_halo
  integer, parameter :: tracers = 3, nx = 80, ny = 20, steps_per_tide = 400
  real(c_double), parameter :: length = 20000.0_c_double, width = 5000.0_c_double
  real(c_double), parameter :: tide = 44712.0_c_double, mouth_current = 0.6_c_double
  real(c_double), parameter :: eddy = 0.15_c_double, stretch = 0.6_c_double
  real(c_double), parameter :: pi = 3.14159265358979323846_c_double
  real(c_double), parameter :: sea(tracers) = [35.0_c_double, 0.0_c_double, 1.0_c_double]

  real(wp) :: q(1 - h:nx + h, 1 - h:ny + h, tracers), next(1 - h:nx + h, 1 - h:ny + h, tracers)
  real(wp) :: u(0:nx, ny), v(nx, 0:ny)
  real(wp) :: inflow(h, tracers)
  real(wp), allocatable :: work(:)
  real(wp) :: dt_dx(0:nx + 1)
  real(c_double) :: xf(0:nx), dx(nx), dy, dt, t, x, y, sx, initial(tracers)
  integer :: i, j, k, s, steps, tr, axes(3)
  real(c_double) :: fractions(3)
  character(len=32) :: argument

  dy = width / ny
  do i = 0, nx
    sx = real(i, c_double) / nx
    xf(i) = length * (sx - stretch * sin(pi * sx) / pi)
  end do
  dx = xf(1:nx) - xf(0:nx - 1)
  allocate (work(tidewater_sweep_work(int(max(nx, ny), c_size_t)) + 1))
  do tr = 1, tracers
    inflow(:, tr) = real(sea(tr), wp)
  end do
  q = 0.0_wp
  next = 0.0_wp
  do j = 1, ny
    y = (real(j, c_double) - 0.5_c_double) * dy
    do i = 1, nx
      x = 0.5_c_double * (xf(i - 1) + xf(i))
      q(i, j, 1) = 20.0_wp
      q(i, j, 2) = 0.0_wp
      if (x >= 8000.0_c_double .and. x < 10000.0_c_double .and. &
          y >= 1500.0_c_double .and. y < 3500.0_c_double) q(i, j, 2) = 1.0_wp
      q(i, j, 3) = 5.0_wp
    end do
  end do
  dt = tide / steps_per_tide
  steps = steps_per_tide
  if (command_argument_count() > 0) then
    call get_command_argument(1, argument)
    read (argument, *) steps
  end if
  do tr = 1, tracers
    initial(tr) = total(tr)
  end do
  axes = [1, 2, 1]
  fractions = [0.5_c_double, 1.0_c_double, 0.5_c_double]
  do s = 0, steps - 1
    t = (real(s, c_double) + 0.5_c_double) * dt
    call set_faces(t)
    do k = 1, 3
      call fill_edges(axes(k))
      call sweep_axis(axes(k), fractions(k) * dt)
      q = next
    end do
  end do

  print '(a)', 'scheme tidewater'
  print '(a, i0, 1x, i0, a, i0, a, es25.17, a, i0)', 'cells ', nx, ny, ' steps ', steps, &
      ' dt ', dt, ' tracers ', tracers
  do tr = 1, tracers
    print '(a, i0, a, es25.17)', 'mass', tr - 1, '_initial ', initial(tr)
    print '(a, i0, a, es25.17)', 'mass', tr - 1, '_final ', total(tr)
    print '(a, i0, 1x, es25.17)', 'min', tr - 1, real(minval(q(1:nx, 1:ny, tr)), c_double)
    print '(a, i0, 1x, es25.17)', 'max', tr - 1, real(maxval(q(1:nx, 1:ny, tr)), c_double)
  end do
  print '(a)', 'field'
  do tr = 1, tracers
    do i = 1, nx
      do j = 1, ny
        print '(i0, 1x, i0, 1x, i0, 1x, es25.17)', tr - 1, i - 1, j - 1, &
            real(q(i, j, tr), c_double)
      end do
    end do
  end do

contains

  ! the tidal exchange (in along one shore, out along the other, nothing at the head)
  ! and the residual eddy, m^2/s; both vanish along the walls
  real(c_double) function streamfunction(xp, yp, tp)
    real(c_double), intent(in) :: xp, yp, tp
    real(c_double) :: head
    head = 1.0_c_double - xp / length
    streamfunction = mouth_current * width / pi * cos(2.0_c_double * pi * tp / tide) * head &
        * head * sin(pi * yp / width) &
        + eddy * width / pi * sin(pi * xp / length) * sin(2.0_c_double * pi * yp / width)
  end function streamfunction

  ! face velocities at time tp: differences of the streamfunction across each face
  subroutine set_faces(tp)
    real(c_double), intent(in) :: tp
    real(c_double) :: y0, y1, yf
    integer :: f, jj, ii
    do jj = 1, ny
      y0 = real(jj - 1, c_double) * dy
      y1 = y0 + dy
      do f = 0, nx
        u(f, jj) = real((streamfunction(xf(f), y1, tp) - streamfunction(xf(f), y0, tp)) / dy, wp)
      end do
    end do
    do f = 0, ny
      yf = real(f, c_double) * dy
      do ii = 1, nx
        v(ii, f) = real(-(streamfunction(xf(ii), yf, tp) - streamfunction(xf(ii - 1), yf, tp)) &
            / dx(ii), wp)
      end do
    end do
    call tidewater_faces_wall(u, 1, tidewater_side_high)
    call tidewater_faces_wall(v, 2, tidewater_side_low)
    call tidewater_faces_wall(v, 2, tidewater_side_high)
  end subroutine set_faces

  ! ghost cells of every tracer along axis (1 = x, 2 = y)
  subroutine fill_edges(axis)
    integer, intent(in) :: axis
    integer, parameter :: halo(3) = [h, h, 0]
    integer :: jj, trc
    if (axis == 1) then
      ! the mouth, line by line: the sea's values where the water comes in
      do trc = 1, tracers
        do jj = 1, ny
          if (u(0, jj) >= 0.0_wp) then
            call tidewater_halo_inflow(q(:, jj, trc), [h], 1, tidewater_side_low, inflow(:, trc))
          else
            call tidewater_halo_outflow(q(:, jj, trc), [h], 1, tidewater_side_low)
          end if
        end do
      end do
      call tidewater_halo_wall(q, halo, 1, tidewater_side_high)
    else
      call tidewater_halo_wall(q, halo, 2, tidewater_side_low)
      call tidewater_halo_wall(q, halo, 2, tidewater_side_high)
    end if
  end subroutine fill_edges

  ! every line of every tracer along axis for time step dtp: next from q, in one call
  subroutine sweep_axis(axis, dtp)
    integer, intent(in) :: axis
    real(c_double), intent(in) :: dtp
    integer :: status, c
    if (axis == 1) then
      do c = 0, nx + 1          ! the ghost cells take the end cells' widths
        dt_dx(c) = real(dtp / dx(min(max(c, 1), nx)), wp)
      end do
      status = tidewater_sweep([nx, ny], [h, h], 1, tracers, q, next, u, dt_dx, work)
    else
      status = tidewater_sweep([nx, ny], [h, h], 2, tracers, q, next, v, &
          [real(dtp / dy, wp)], work)
    end if
    if (status /= 0) stop 'the sweep refused its arguments'
  end subroutine sweep_axis

  real(c_double) function total(trc)
    integer, intent(in) :: trc
    integer :: ii, jj
    total = 0.0_c_double
    do jj = 1, ny
      do ii = 1, nx
        total = total + real(q(ii, jj, trc), c_double) * dx(ii) * dy
      end do
    end do
  end function total

end program tidal_basin_2d
