"""The Jinja2 environment of the HTML views: templates shipped in this package, autoescaped.

Partials under ``templates/partials/`` lay out rows a caller has already formatted; the live
what-if page (``trimtab explore``) renders its sections from them.
"""

from __future__ import annotations

import functools
from typing import Any

from jinja2 import Environment, PackageLoader, StrictUndefined


@functools.cache
def environment() -> Environment:
    """One environment per process: package templates, every value escaped, undefined names an error."""
    return Environment(
        loader=PackageLoader("trimtab.report", "templates"),
        autoescape=True,
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=False,
    )


def render(name: str, **context: Any) -> str:
    """Render the template ``name`` (a path under ``templates/``) with ``context``."""
    return environment().get_template(name).render(**context)
