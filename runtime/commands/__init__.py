"""One module per `fluxloom` sub-command; each defines `register(subparsers)`.

The command line imports only the module of the command being run (the others
pull in matplotlib, cffi and the harness, which would slow every start), so each
command's one-line help also lives here.
"""

SUMMARIES = {
    "check": "analyse a scheme and print its properties",
    "build": "write the C kernel, header, Fortran module and numpy module",
    "verify": "measure a scheme's kernel against what the analysis predicts",
    "compare": "put several schemes (or --set variants) side by side",
    "bench": "measure kernel speed (cell-updates per second)",
    "demo": "check, build, verify and compare the bundled examples into a report",
}
ORDER = tuple(SUMMARIES)
