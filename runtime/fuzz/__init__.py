"""The fuzz harness: hostile and odd specs through fluxloom under time and memory limits.

`python -m fluxloom.runtime.fuzz --count N` (see DEVELOPERS.md). Every input must end in
success or a located error with exit status 2; anything else is an escape.
"""
