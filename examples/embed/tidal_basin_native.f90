! A pollutant spill in a closed tidal basin, carried back and forth by the tide:
! the scenario of tidal_basin.c, in Fortran alone: the generated native Fortran
! kernel module tidewater_kernel (fluxloom build --target fortran; no C compiler).
!
! Usage: tidal_basin_native [steps]   (default: one tidal period)
program tidal_basin_native
  use, intrinsic :: iso_c_binding, only: c_size_t
  use tidewater_kernel
  implicit none

  integer, parameter :: wp = tidewater_real
  integer, parameter :: cells = 200
  integer, parameter :: h = tidewater_halo, fh = tidewater_face_halo
  real(wp), parameter :: length = 10000.0_wp, peak_current = 0.8_wp
  real(wp), parameter :: tide = 44712.0_wp, courant = 0.9_wp

  real(wp) :: q(1 - h:cells + h), next(1 - h:cells + h)
  real(wp) :: u_face(-fh:cells + fh)     ! u_face(f): the face at f * dx
  real(wp), allocatable :: work(:)
  real(wp) :: dx, dt, t, x, pi, mass_initial
  integer :: i, f, s, steps
  character(len=32) :: argument

  pi = 4.0_wp * atan(1.0_wp)
  dx = length / cells
  dt = courant * dx / peak_current
  steps = nint(tide / dt)
  if (command_argument_count() > 0) then
    call get_command_argument(1, argument)
    read (argument, *) steps
  end if
  allocate (work(tidewater_workspace_size(int(cells, c_size_t))))

  q = 0.0_wp
  do i = 1, cells
    x = (i - 0.5_wp) * dx
    if (x >= 3000.0_wp .and. x < 4000.0_wp) q(i) = 1.0_wp
  end do
  mass_initial = sum(q(1:cells)) * dx

  do s = 0, steps - 1
    t = (s + 0.5_wp) * dt
    do f = -fh, cells + fh
      if (f <= 0 .or. f >= cells) then
        u_face(f) = 0.0_wp
      else
        u_face(f) = peak_current * sin(pi * f * dx / length) * cos(2.0_wp * pi * t / tide)
      end if
    end do
    call fill_gates(q)
    call tidewater_step(int(cells, c_size_t), q, next, u_face, dt / dx, work)
    q(1:cells) = next(1:cells)
  end do

  write (*, '(a)') 'scheme tidewater'
  write (*, '(a, i0, a, i0)') 'cells ', cells, ' steps ', steps
  write (*, '(a, es25.17)') 'mass_initial ', mass_initial
  write (*, '(a, es25.17)') 'mass_final ', sum(q(1:cells)) * dx
  write (*, '(a, es25.17)') 'min ', minval(q(1:cells))
  write (*, '(a, es25.17)') 'max ', maxval(q(1:cells))
  write (*, '(a)') 'profile'
  do i = 1, cells
    write (*, '(i0, es25.17)') i - 1, q(i)
  end do

contains

  ! The gates reflect: ghost cells mirror the cells next to each gate.
  subroutine fill_gates(values)
    real(wp), intent(inout) :: values(1 - h:cells + h)
    integer :: g
    do g = 1, h
      values(1 - g) = values(g)
      values(cells + g) = values(cells + 1 - g)
    end do
  end subroutine fill_gates

end program tidal_basin_native
