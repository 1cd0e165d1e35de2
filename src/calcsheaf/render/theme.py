"""The template theme: the default theme, a project's overrides, filters, static files.

The default theme is the repository's top-level `templates/` folder.  In a
source checkout or editable install it is found beside `src/`; an installed
wheel carries the same files as package data at `calcsheaf/templates/`.  A
project's own `templates/` folder comes first: any template or static file of
the same name replaces the default one.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
import resource
import select
import signal
import time
import traceback
import types
from dataclasses import dataclass
from importlib import resources
from pathlib import Path, PurePath

import jinja2
import jinja2.environment
import jinja2.runtime
import jinja2.utils
from jinja2.sandbox import ImmutableSandboxedEnvironment, SecurityError
from markupsafe import Markup

from calcsheaf import model, settings
from calcsheaf.errors import BuildError
from calcsheaf.render import formatting
from calcsheaf.render.markdown_text import markdown_html
from calcsheaf.calcfile.names import name_html

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



# ---- plain data for templates ---------------------------------------------------------
def plain(value):
    """`value` as data a template may see: str (Markup kept), bool, int, float, None,
    lists, dicts with text keys and attribute records (types.SimpleNamespace).

    Model dataclasses become records of their fields; numpy arrays nested lists of
    floats.  A calc report's file becomes its name only (`source_path.name`), its
    error the message text; a project loses its folder; a derivation step keeps its
    title, symbol and coordinate (the expression is shown through its equation).
    Anything else (a Path, a sympy expression, any object) is refused with TypeError.
    """
    import numpy as np

    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value)
    if isinstance(value, np.ndarray) and value.dtype.kind in "biuf":
        return plain(value.tolist())
    if isinstance(value, (list, tuple)):
        return [plain(v) for v in value]
    if isinstance(value, dict):
        return {_text_key(k): plain(v) for k, v in value.items()}
    if isinstance(value, types.SimpleNamespace):
        return types.SimpleNamespace(**{k: plain(v) for k, v in vars(value).items()})
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return _record(value)
    raise TypeError(f"a {type(value).__name__} cannot be handed to a template")


def _text_key(key) -> str:
    if not isinstance(key, str):
        raise TypeError(f"a template's dict keys must be text, not {type(key).__name__}")
    return key


def _record(value) -> types.SimpleNamespace:
    fields = {f.name: getattr(value, f.name) for f in dataclasses.fields(value)}
    if isinstance(value, model.CalcReport):
        fields["source_path"] = types.SimpleNamespace(name=PurePath(value.source_path).name)
        fields["error"] = None if value.error is None else getattr(value.error, "message", str(value.error))
        fields["passed"] = value.passed
        fields["largest_ratio"] = value.largest_ratio
    elif isinstance(value, model.ProjectInfo):
        del fields["root"]
    elif isinstance(value, model.Step):
        del fields["expr"]
    return types.SimpleNamespace(**{k: plain(v) for k, v in fields.items()})


# ---- the sandbox ------------------------------------------------------------------------
_SAFE_OBJECTS = (str, int, float, bool, type(None), list, tuple, dict, types.SimpleNamespace,
                 types.GeneratorType, jinja2.runtime.LoopContext, jinja2.runtime.Macro,
                 jinja2.runtime.TemplateReference, jinja2.runtime.BlockReference,
                 jinja2.runtime.Undefined, jinja2.environment.TemplateModule,
                 jinja2.utils.Cycler, jinja2.utils.Joiner, jinja2.utils.Namespace)
MAX_POWER_BITS = 100_000


class ThemeSandbox(ImmutableSandboxedEnvironment):
    """The immutable sandbox, reading attributes only of plain data and Jinja2's own
    helpers, and refusing `*` and `**` results larger than the output limit."""

    intercepted_binops = frozenset({"*", "**"})

    def __init__(self, *args, max_output_chars: int, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        self.max_output_chars = max_output_chars

    def is_safe_attribute(self, obj, attr: str, value) -> bool:
        return isinstance(obj, _SAFE_OBJECTS) and super().is_safe_attribute(obj, attr, value)

    def call_binop(self, context, operator: str, left, right):
        if operator == "*":
            for seq, count in ((left, right), (right, left)):
                if isinstance(seq, (str, list, tuple)) and isinstance(count, int) \
                        and len(seq) * count > self.max_output_chars:
                    raise SecurityError(f"'*' would make {len(seq) * count} items, more than the "
                                        f"output limit of {self.max_output_chars} characters")
        elif operator == "**" and isinstance(left, int) and isinstance(right, int) \
                and abs(left) > 1 and right * math.log2(abs(left)) > MAX_POWER_BITS:
            raise SecurityError(f"'{left} ** {right}' is too large a number")
        return super().call_binop(context, operator, left, right)


class _ProjectLoader(jinja2.FileSystemLoader):
    """A project's templates/ folder; a template that resolves outside the project (a link
    made after `check`) is refused when it is loaded."""

    def __init__(self, folder: Path, project_root: Path) -> None:
        super().__init__(str(folder))
        self.project_root = Path(project_root).resolve()

    def get_source(self, environment, template):
        source, filename, uptodate = super().get_source(environment, template)
        _inside_project(Path(filename), self.project_root)
        return source, filename, uptodate


def _inside_project(path: Path, real_root: Path) -> None:
    target = path.resolve()
    if real_root not in target.parents:
        raise BuildError(f"is a link to {target}, outside the project", file=path,
                         fix="copy the file into the project's templates/ folder")


def environment(project_root: Path | None) -> jinja2.Environment:
    """Jinja2 environment: sandboxed, autoescape on, undefined names are errors, theme filters."""
    loaders = [_ProjectLoader(folder, project_root) if project_root is not None and
               folder == project_root / "templates" else jinja2.FileSystemLoader(str(folder))
               for folder in theme_dirs(project_root)]
    loader = jinja2.ChoiceLoader(loaders)
    env = ThemeSandbox(loader=loader, autoescape=True, undefined=jinja2.StrictUndefined,
                       keep_trailing_newline=True, trim_blocks=True, lstrip_blocks=True,
                       max_output_chars=limits().output_chars)
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
            if project_root is not None and folder == project_root / "templates":
                _inside_project(path, Path(project_root).resolve())
            if path.is_file():
                assets[f"{STATIC}/{path.relative_to(static).as_posix()}"] = path.read_bytes()
    return dict(sorted(assets.items()))


# ---- rendering under limits ------------------------------------------------------------
TIME_ENV = "CALCSHEAF_TEMPLATE_TIME_LIMIT"            # seconds per render, default 60
MEMORY_ENV = "CALCSHEAF_TEMPLATE_MEMORY_LIMIT_MB"     # MiB above the renderer's start, default 1024
OUTPUT_ENV = "CALCSHEAF_TEMPLATE_OUTPUT_LIMIT_MB"     # MB of text per rendered page, default 64
_GRACE_S = 5.0                                       # after the time limit, before the kill


@dataclass(frozen=True)
class Limits:
    time_s: float
    memory_bytes: int
    output_chars: int


def limits() -> Limits:
    """The limits of one template render, from the environment (settings: InputError when malformed)."""
    return Limits(time_s=settings.template_time_limit_s(),
                  memory_bytes=settings.template_memory_limit_bytes(),
                  output_chars=settings.template_output_chars())


class _Overrun(Exception):
    """A template went past one of its limits (raised inside the rendering process)."""


def render(env: jinja2.Environment, name: str, **context) -> str:
    """Render template `name` with `context` made plain; template faults and overrun limits
    become BuildError naming the template file and line."""
    bounds = limits()
    data = {key: plain(value) for key, value in context.items()}
    template = None
    try:
        _compile_theme(env)
        template = env.get_template(name)
    except jinja2.TemplateError as exc:
        raise _template_error(name, exc, template) from exc
    outcome = _in_child(template, data, bounds) if hasattr(os, "fork") else _render_here(template, data, bounds)
    if "text" in outcome:
        return outcome["text"]
    raise BuildError(outcome["problem"], file=outcome.get("file") or name, line=outcome.get("line"),
                     fix=outcome["fix"])


def _template_error(name: str, exc: jinja2.TemplateError, template) -> BuildError:
    where = getattr(exc, "filename", None) or getattr(template, "filename", None) or name
    return BuildError(f"template {name} failed: {exc}", file=where, line=getattr(exc, "lineno", None),
                      fix=_FIX)


_FIX = ("correct the template (an override in the project's templates/ folder replaces the "
        "default one of the same name)")


def _compile_theme(env: jinja2.Environment) -> None:
    """Compile every template once in this process, so the rendering children share them
    (found without following links to folders, which could loop)."""
    folders = [Path(path) for loader in getattr(env.loader, "loaders", []) for path in loader.searchpath]
    names = sorted({p.relative_to(f).as_posix() for f in folders for p in f.rglob("*.j2")})
    for template_name in names:
        try:
            env.get_template(template_name)
        except jinja2.TemplateError:
            pass              # reported when (and if) a render uses it


def _render_here(template, data: dict, bounds: Limits) -> dict:
    """Render in this process with the output limit; {"text"} or {"problem", "file", "line", "fix"}."""
    stream = template.generate(**data)
    parts, total = [], 0
    try:
        for chunk in stream:
            total += len(chunk)
            if total > bounds.output_chars:
                file, line = _suspended_template(stream) or (template.filename, None)
                stream.close()
                return _overrun(template, file, line,
                                f"produced more than {bounds.output_chars / 10 ** 6:g} MB of text",
                                OUTPUT_ENV)
            parts.append(chunk)
    except _Overrun as exc:
        file, line = _traceback_template(exc) or (template.filename, None)
        return _overrun(template, file, line, f"ran longer than its time limit of {bounds.time_s:g} s",
                        TIME_ENV)
    except MemoryError as exc:
        file, line = _traceback_template(exc) or (template.filename, None)
        return _overrun(template, file, line, "ran out of its memory limit of "
                        f"{bounds.memory_bytes / 2 ** 20:g} MiB", MEMORY_ENV)
    except jinja2.TemplateError as exc:
        error = _template_error(template.name, exc, template)
        located = _traceback_template(exc)
        return {"problem": error.problem, "file": error.file if located is None else located[0],
                "line": error.line if located is None else located[1], "fix": _FIX}
    except Exception as exc:   # a filter or method given a wrong value: a template fault
        file, line = _traceback_template(exc) or (template.filename, None)
        return {"problem": f"template {template.name} failed: {type(exc).__name__}: {exc}",
                "file": file, "line": line, "fix": _FIX}
    return {"text": "".join(parts)}


def _overrun(template, file, line, what: str, variable: str) -> dict:
    return {"problem": f"template {Path(file).name if file else template.name} {what} and was stopped",
            "file": file, "line": line,
            "fix": "simplify the template (fewer or shorter loops, less repeated text; an override "
                   "in the project's templates/ folder replaces the default one), or raise "
                   f"{variable}"}


def _template_line(frame) -> tuple[str, int] | None:
    template = frame.f_globals.get("__jinja_template__")
    if template is None:
        return None
    return template.filename or template.name, template.get_corresponding_lineno(frame.f_lineno)


def _suspended_template(stream) -> tuple[str, int] | None:
    """The innermost template a suspended render is in (following includes and blocks)."""
    where, gen = None, stream
    for _ in range(200):
        frame = getattr(gen, "gi_frame", None)
        if frame is None:
            break
        where = _template_line(frame) or where
        gen = gen.gi_yieldfrom or frame.f_locals.get("gen")
    return where


def _traceback_template(exc: BaseException) -> tuple[str, int] | None:
    """The innermost template frame of an exception (Jinja2 maps its lines to the template)."""
    where = None
    for entry in traceback.extract_tb(exc.__traceback__):
        if entry.filename.endswith((".j2", ".html")):
            where = (entry.filename, entry.lineno)
    return where


def _in_child(template, data: dict, bounds: Limits) -> dict:
    """Render in a forked process under the time, memory and output limits."""
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:                                    # the child: render, send, exit
        try:
            os.close(read_end)
            _child(template, data, bounds, write_end)
        finally:
            os._exit(0)
    os.close(write_end)
    try:
        raw, finished = _receive(read_end, bounds)
    finally:
        os.close(read_end)
    if not finished:
        os.kill(pid, signal.SIGKILL)
    _, status = os.waitpid(pid, 0)
    if not finished:
        return _overrun(template, template.filename, None,
                        f"ran longer than its time limit of {bounds.time_s:g} s", TIME_ENV)
    if raw[:1] == b"T":
        return {"text": raw[1:].decode("utf-8")}
    if raw[:1] == b"E":
        return json.loads(raw[1:].decode("utf-8"))
    return _overrun(template, template.filename, None,
                    f"stopped unexpectedly (exit status {status})", MEMORY_ENV)


def _child(template, data: dict, bounds: Limits, out: int) -> None:
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    _limit_memory(bounds.memory_bytes)

    def overran(signum, frame):
        raise _Overrun("time")
    signal.signal(signal.SIGALRM, overran)
    signal.setitimer(signal.ITIMER_REAL, bounds.time_s)
    try:
        outcome = _render_here(template, data, bounds)
    except MemoryError:
        outcome = _overrun(template, template.filename, None, "ran out of its memory limit of "
                           f"{bounds.memory_bytes / 2 ** 20:g} MiB", MEMORY_ENV)
    except _Overrun:
        outcome = _overrun(template, template.filename, None,
                           f"ran longer than its time limit of {bounds.time_s:g} s", TIME_ENV)
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
    message = b"T" + outcome["text"].encode("utf-8") if "text" in outcome else \
        b"E" + json.dumps(outcome).encode("utf-8")
    view = memoryview(message)
    while view:
        view = view[os.write(out, view):]


def _limit_memory(allowance: int) -> None:
    """Address-space limit: what the process uses now plus `allowance` (never above the limit
    it inherited)."""
    try:
        with open("/proc/self/statm") as fh:
            current = int(fh.read().split()[0]) * os.sysconf("SC_PAGE_SIZE")
    except (OSError, ValueError, IndexError):
        return
    soft, hard = resource.getrlimit(resource.RLIMIT_AS)
    wanted = current + allowance
    if hard != resource.RLIM_INFINITY:
        wanted = min(wanted, hard)
    try:
        resource.setrlimit(resource.RLIMIT_AS, (wanted, hard))
    except (ValueError, OSError):
        pass


def _receive(fd: int, bounds: Limits) -> tuple[bytes, bool]:
    """Everything the child sends, until it closes the pipe (True) or the deadline (False)."""
    deadline = time.monotonic() + bounds.time_s + _GRACE_S
    cap = 4 * bounds.output_chars + 2 ** 20
    chunks, size = [], 0
    while True:
        left = deadline - time.monotonic()
        if left <= 0:
            return b"", False
        ready, _, _ = select.select([fd], [], [], left)
        if not ready:
            continue
        chunk = os.read(fd, 1 << 20)
        if not chunk:
            return b"".join(chunks), True
        size += len(chunk)
        if size > cap:
            return b"", False
        chunks.append(chunk)
