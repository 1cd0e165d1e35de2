"""The template theme: the default theme, a project's overrides, filters, static files.

The default theme is the repository's top-level `templates/` folder.  In a
source checkout or editable install it is found beside `src/`; an installed
wheel carries the same files as package data at `calcsheaf/templates/`.  A
project's own `templates/` folder comes first: any template or static file of
the same name replaces the default one.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

import jinja2
from jinja2.sandbox import ImmutableSandboxedEnvironment
from markupsafe import Markup

from calcsheaf.errors import BuildError
from calcsheaf.render import formatting
from calcsheaf.render.markdown_text import markdown_html
from calcsheaf.render.symbols import name_html

MARKER = "calc.html.j2"
STATIC = "static"


def default_theme_dir() -> Path:
    """Folder of the default theme (source tree first, then installed package data)."""
    source_tree = Path(__file__).resolve().parents[3] / "templates"
    if (source_tree / MARKER).is_file():
        return source_tree
    packaged = Path(str(resources.files("calcsheaf") / "templates"))
    if (packaged / MARKER).is_file():
        return packaged
    raise BuildError("the default theme is missing from this installation",
                     fix="reinstall calcsheaf; its templates/ folder must be present")


def theme_dirs(project_root: Path | None) -> list[Path]:
    """Template folders in lookup order: the project's own, then the default theme."""
    dirs = []
    if project_root is not None and (project_root / "templates").is_dir():
        dirs.append(project_root / "templates")
    dirs.append(default_theme_dir())
    return dirs


def environment(project_root: Path | None) -> jinja2.Environment:
    """Jinja2 environment: autoescape on, undefined names are errors, theme filters."""
    loaders = [jinja2.FileSystemLoader(str(folder)) for folder in theme_dirs(project_root)]
    loader = jinja2.ChoiceLoader(loaders)
    env = ImmutableSandboxedEnvironment(loader=loader, autoescape=True, undefined=jinja2.StrictUndefined,
                             keep_trailing_newline=True, trim_blocks=True, lstrip_blocks=True)
    env.filters.update({
        "num": formatting.number,
        "sci": formatting.scientific,
        "unit": formatting.unit,
        "ratio": formatting.ratio,
        "verdict": formatting.verdict,
        "symbol": lambda name: Markup(name_html(name)),
        "markdown": markdown_html,
    })
    return env


def static_assets(project_root: Path | None) -> dict[str, bytes]:
    """Static files of the theme as {"static/<name>": bytes}; project files win by name."""
    assets: dict[str, bytes] = {}
    for folder in reversed(theme_dirs(project_root)):
        static = folder / STATIC
        if not static.is_dir():
            continue
        for path in sorted(static.rglob("*")):
            if path.is_file():
                assets[f"{STATIC}/{path.relative_to(static).as_posix()}"] = path.read_bytes()
    return dict(sorted(assets.items()))


def render(env: jinja2.Environment, name: str, **context) -> str:
    """Render template `name`; template faults become BuildError with the template named."""
    template = None
    try:
        template = env.get_template(name)
        return template.render(**context)
    except jinja2.TemplateError as exc:
        where = getattr(exc, "filename", None) or getattr(template, "filename", None) or name
        raise BuildError(f"template {name} failed: {exc}", file=where,
                         line=getattr(exc, "lineno", None),
                         fix="correct the template (an override in the project's templates/ "
                             "folder replaces the default one of the same name)") from exc
