"""Writing generated files without clobbering what the user wrote.

`generated_files` gives a target's files (compiler/emit/targets.py) as `build`
writes them; `plan_writes` decides per file whether to write it, leave it
(unchanged) or refuse (it exists and differs), before anything is written;
`write_planned` then writes. Used by `build` and the demo.
"""
from __future__ import annotations

from pathlib import Path

from fluxloom.compiler import LoomError
from fluxloom.compiler.outputs import target_files


def generated_files(scheme, target: str, precision: str, verdicts: bool = True) -> dict[str, str]:
    """{file name: text} for one target (and its companions, or 'all'), in a fixed order."""
    return target_files(scheme, target, precision, verdicts)


def plan_writes(directory: Path, files: dict[str, str], force: bool) -> list[tuple[Path, str, str]]:
    """(path, text, action) per file, action 'write' or 'unchanged'; refuses to clobber."""
    if directory.exists() and not directory.is_dir():
        raise LoomError(f"'{directory}' exists and is not a directory", file="-o")
    plan, blocked = [], []
    for name, text in files.items():
        path = directory / name
        action = "write"
        if path.exists():
            if path.is_dir():
                raise LoomError(f"'{path}' is a directory; cannot write a file there", file="-o")
            try:
                current = path.read_text(encoding="utf-8")
            except (UnicodeDecodeError, OSError):
                current = None
            if current == text:
                action = "unchanged"
            elif not force:
                blocked.append(path)
        plan.append((path, text, action))
    if blocked:
        names = ", ".join(str(p) for p in blocked)
        raise LoomError(f"{names} already exist{'s' if len(blocked) == 1 else ''} and "
                        f"differ{'s' if len(blocked) == 1 else ''} from what would be written; "
                        "nothing was written (use --force to overwrite)", file="build")
    return plan


def write_planned(directory: Path, plan: list[tuple[Path, str, str]]) -> None:
    """Write every file the plan marks 'write' (creating directory)."""
    try:
        directory.mkdir(parents=True, exist_ok=True)
        for path, text, action in plan:
            if action == "write":
                path.write_text(text, encoding="utf-8", newline="\n")
    except OSError as err:
        raise LoomError(f"cannot write to '{directory}': {err.strerror or err}", file="build") from None
