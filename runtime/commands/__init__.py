"""One module per `fluxloom` sub-command; each defines `register(subparsers)`.

The command line finds them by name (see runtime/cli.py), so adding a command
means adding a module here and its name to `ORDER`.
"""

ORDER = ("check", "build", "verify", "compare", "bench", "demo")
