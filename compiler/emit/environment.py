"""The one jinja2 Environment every emitter renders its templates with.

Templates receive strings already printed and small data objects, so the
environment is strict (an undefined name is a fluxloom bug, not empty text)
and leaves whitespace exactly as written apart from block tags.
"""

from __future__ import annotations

import functools

import jinja2

from .boundaries import boundaries

TEMPLATE_PACKAGE = "fluxloom.compiler.emit"
TEMPLATE_FOLDER = "templates"


@functools.lru_cache(maxsize=None)
def template_environment() -> jinja2.Environment:
    """Return the shared Environment loading ``compiler/emit/templates/``.

    `boundaries` (the halo fill helpers' rules, compiler/emit/boundaries.py) is a
    global: the same data for every target and scheme, read by the boundaries_*
    templates each kernel template includes."""
    environment = jinja2.Environment(
        loader=jinja2.PackageLoader(TEMPLATE_PACKAGE, TEMPLATE_FOLDER),
        undefined=jinja2.StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        autoescape=False,
    )
    environment.globals["boundaries"] = boundaries()
    return environment


def render(template_name: str, **context: object) -> str:
    """Render one template with the shared Environment."""
    return template_environment().get_template(template_name).render(**context)
