"""Decomposed runs under MPI: a domain split into blocks, one per process, halos
exchanged between the stages of every step, the generated kernel on each block.

blocks.py    the decomposition arithmetic (layouts, block sizes; no MPI)
stages.py    a kernel's stage entry point for either back end (no MPI)
exchange.py  halo exchange on a Cartesian communicator (mpi4py)
driver.py    one rank's blocks stepped stage by stage, with the schedule's exchanges
worker.py    the program `verify --ranks` runs under mpiexec
launch.py    writing a job, running mpiexec, reading the results (no MPI)
finding.py   the decomposed run against the single-domain run, as a verify finding

Only exchange.py, driver.py and worker.py import mpi4py (`pip install fluxloom[mpi]`).
"""
