"""Software identification: tool and dependency versions, read without importing them."""

from __future__ import annotations

import platform
from importlib import metadata

from . import __version__

DEPENDENCIES = ("sympy", "numpy", "scipy", "pint", "matplotlib", "weasyprint", "jinja2",
                "markdown", "pyhanko", "cryptography", "ziamath")


def versions() -> dict[str, str]:
    out = {"calcsheaf": __version__, "python": platform.python_version()}
    for name in DEPENDENCIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out
