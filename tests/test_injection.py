"""Nothing a user writes changes generated code: an injection corpus through every target.

User text reaches generated files in two places: the `about` string and the spec's
file name (banners and docstrings). Each payload goes in through both, and then:
- C: gcc compiles every kernel with strict warnings; with comments stripped by gcc
  itself, each file is token for token the file a harmless text gives; the objects
  define no symbol outside the kernel's names and no constructor section.
- Fortran: gfortran compiles every interface module; outside comment lines each is
  the harmless text's module, line for line.
- Python: every module parses and runs; its docstring holds the payload exactly
  (the escaping reads back as the text), its code is the harmless module's.
- Loading: the C kernel built and loaded in this process, and the generated module
  imported from its file, leave no marker file behind.
The payloads are of our own making: comment terminators, preprocessor lines after
a lone carriage return, Python triple quotes and escapes, Fortran lines after a
newline, NUL, form feed, vertical tab, NEL, line and paragraph separators, bidi
and zero-width characters, lone surrogates, trigraphs and long text.
"""
from __future__ import annotations

import ast
import importlib.util
import re
import subprocess
from pathlib import PurePath

import numpy as np
import pytest

from fluxloom.compiler import scheme_from_text
from fluxloom.compiler.emit import c_files
from fluxloom.compiler.emit.targets import target
from fluxloom.compiler.emit.numpy_ import numpy_source
from fluxloom.runtime.kernel import load_kernel

from test_emit_c import STRICT, need

MARKER = "FLUXLOOM_INJECTED_MARKER"
PAYLOADS = [
    "x */ int INJECTED; /* y",
    "*/\n#include <stdlib.h>\n__attribute__((constructor)) static void pwn(void) "
    f'{{ system("touch {MARKER}"); }}\n/*',
    "\r#include <stdlib.h>\r__attribute__((constructor)) static void pwn(void) "
    f'{{ system("touch {MARKER}"); }}\r/*',
    f'"""\nimport os; os.system("touch {MARKER}")\n"""',
    f"'''\nopen('{MARKER}', 'w')\n'''",
    "\nend module x\ninclude 'evil.f90'\nmodule y",
    "\rinclude 'evil.f90'\r",
    "C:\\Users\\N\\x41\\u1234\\N{BULLET}\\",
    "trailing backslash \\",
    "nul \x00 inside",
    "form\x0cfeed and vertical\x0btab",
    "next\x85line",
    "line\u2028separator\u2029paragraph",
    "bidi \u202e\u2066reversed\u2069 zero\u200bwidth \ufeffbom",
    "lone \udc80 surrogate \ud800",
    "??/ ??= ??( trigraphs ??'",
    "// not a comment /* nor this */ # nor ! this & nor this",
    "end of */ comment */ /* /* again",
    "\\\n#define flux 0\n",
    "é ü 中文 emoji \U0001F600 and \x7f delete",
    "x" * 1000 + "*/",
    "\t\ttabs\tand\x1bescape[31m",
]
HARMLESS = "harmless text"


def spec(about: str, name: str) -> str:
    return f"""scheme {name} {{
  about "{about}"
  let r = ratio(q[0] - q[-1], q[1] - q[0])
  limiter vanleer(x) = (x + abs(x)) / (1 + abs(x))
  flux = u * (q[0] + (1 - c) / 2 * vanleer(r) * (q[1] - q[0]))
}}"""


def as_about(payload: str) -> str:
    """The payload as far as an `about` string can carry it (no quote, no newline)."""
    return payload.replace('"', "'").replace("\n", "\r")


def variants():
    """(scheme, the text its files must show) per payload and channel; a file name shows
    as its last path component, as banners print it."""
    out = []
    for i, payload in enumerate(PAYLOADS):
        about = as_about(payload)
        out.append((scheme_from_text(spec(about, f"about{i}"), file="spec.loom"), about))
        out.append((scheme_from_text(spec(HARMLESS, f"file{i}"), file=payload),
                    PurePath(payload).name))
    return out


VARIANTS = variants()


def harmless(name: str):
    return scheme_from_text(spec(HARMLESS, name), file="spec.loom")


def module_text(scheme) -> str:
    """The numpy module with the banner of run-time builds (no analysis: faster, and the
    user's text is all there)."""
    return numpy_source(scheme, "double")


def without_comments_c(path, cwd) -> str:
    """The C file's tokens with comments removed by gcc itself (no macro expansion)."""
    done = subprocess.run([need("gcc"), "-fpreprocessed", "-dD", "-E", "-P", path],
                          cwd=cwd, capture_output=True, text=True, check=True)
    return done.stdout


@pytest.mark.slow
def test_c_files_compile_strictly_and_are_the_harmless_code(tmp_path):
    files = []
    for scheme, _ in VARIANTS:
        for name, text in c_files(scheme, "double").items():
            (tmp_path / name).write_text(text, encoding="utf-8", errors="surrogatepass")
            files.append(name)
    flags = [f for f in STRICT if not f.startswith("-O")] + ["-O0"]  # the text, not the code
    done = subprocess.run([need("gcc"), *flags, "-c", *[f for f in files if f.endswith(".c")]],
                          cwd=tmp_path, capture_output=True, text=True)
    assert done.returncode == 0 and done.stderr == "", done.stderr[:2000]
    for scheme, _ in VARIANTS:
        reference = harmless(scheme.name)
        (tmp_path / "ref").mkdir(exist_ok=True)
        for name, text in c_files(reference, "double").items():
            (tmp_path / "ref" / name).write_text(text)
        for name in (f"{scheme.name}.c", f"{scheme.name}.h"):
            assert (without_comments_c(name, tmp_path)
                    == without_comments_c(name, tmp_path / "ref")), (scheme.name, name)
        symbols = subprocess.run([need("nm"), f"{scheme.name}.o"], cwd=tmp_path,
                                 capture_output=True, text=True, check=True).stdout.split("\n")
        for line in filter(None, symbols):
            kind, symbol = line.split()[-2:]
            if kind not in "Uw":  # defined here: only the kernel's own names
                assert symbol.startswith(f"{scheme.name}_") or symbol.startswith("."), line
        sections = subprocess.run([need("objdump"), "-h", f"{scheme.name}.o"], cwd=tmp_path,
                                  capture_output=True, text=True, check=True).stdout
        assert ".init_array" not in sections and ".ctors" not in sections


FORTRAN_FILES = (("_mod.f90", "-std=f2003", lambda scheme: c_files(scheme, "double")),
                 ("_kernel.f90", "-std=f2008",
                  lambda scheme: target("fortran").files(scheme, "double")))
"""The Fortran interface module and the native Fortran kernel: file suffix, standard, files."""


@pytest.mark.parametrize("suffix, standard, files", FORTRAN_FILES, ids=["interface", "native"])
def test_fortran_modules_compile_and_are_the_harmless_code(tmp_path, suffix, standard, files):
    names = []
    for scheme, _ in VARIANTS:
        name = f"{scheme.name}{suffix}"
        text = files(scheme)[name]
        assert text.isascii()
        (tmp_path / name).write_text(text)
        names.append(name)
        code = [line for line in text.splitlines() if not line.lstrip().startswith("!")]
        reference = files(harmless(scheme.name))[name]
        assert code == [line for line in reference.splitlines()
                        if not line.lstrip().startswith("!")]
        assert all(len(line) <= 132 for line in text.splitlines())
    done = subprocess.run([need("gfortran"), standard, "-Wall", "-Wextra", "-Werror", "-c",
                           *names], cwd=tmp_path, capture_output=True, text=True)
    assert done.returncode == 0 and done.stderr == "", done.stderr[:2000]


def test_python_modules_read_back_the_text_and_run(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    for scheme, text in VARIANTS:
        source = module_text(scheme)
        tree = ast.parse(source)
        docstring = ast.get_docstring(tree, clean=False)
        assert text in docstring, scheme.name
        reference = ast.parse(module_text(harmless(scheme.name)))
        assert ast.dump(ast.Module(tree.body[1:], [])) == \
            ast.dump(ast.Module(reference.body[1:], []))
        namespace: dict = {}
        exec(compile(source, scheme.name, "exec"), namespace)  # noqa: S102 - our own output
        assert namespace["NAME"] == scheme.name
    assert not (tmp_path / MARKER).exists()


@pytest.mark.parametrize("index", [1, 2, 3, 4])
def test_loading_the_kernels_runs_nothing_else(tmp_path, monkeypatch, index):
    """The C kernel built and loaded here (cffi) and the module imported from its file."""
    monkeypatch.chdir(tmp_path)
    payload = PAYLOADS[index]
    for scheme in (scheme_from_text(spec(as_about(payload), f"load{index}"), file="x.loom"),
                   scheme_from_text(spec(HARMLESS, f"loadf{index}"), file=payload)):
        kernel = load_kernel(scheme, "c")
        q = np.linspace(0.0, 1.0, 8 + 2 * kernel.halo)
        kernel.step(q, np.ones(9), 0.5)
        path = tmp_path / f"{scheme.name}.py"
        path.write_text(module_text(scheme), encoding="utf-8")
        spec_ = importlib.util.spec_from_file_location(scheme.name, path)
        module = importlib.util.module_from_spec(spec_)
        spec_.loader.exec_module(module)
        assert module.NAME == scheme.name
    assert not (tmp_path / MARKER).exists()
    assert not any(re.search("INJECTED|pwn", p.name) for p in tmp_path.iterdir())
