"""fluxloom.runtime: build and run generated kernels, measure them, and the command line."""
