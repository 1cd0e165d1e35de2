"""The project folder: project.toml and the calc files under calcs/."""

from __future__ import annotations

import re
from pathlib import Path

from . import identifiers, person_names as names
from .calcfile.loader import closest, did_you_mean
from .calcfile.toml_source import read_toml
from .errors import InputError, ProblemList
from .model import Person, ProjectInfo

PROJECT_KEYS = {"number", "name", "client", "site", "paper"}
PERSON_KEYS = {"id", "name", "role", "public_key", "certificate"}
PAPERS = ("A4", "Letter")


def load_project(root: Path) -> ProjectInfo:
    """Read PROJECT/project.toml; InputError/ProblemList when it is malformed."""
    root = Path(root)
    path = root / "project.toml"
    if not root.is_dir():
        raise InputError("is not a project folder", file=root,
                         fix="give the folder that holds project.toml (make one with 'calcsheaf new PATH')")
    if not path.exists():
        raise InputError("project.toml is missing", file=path,
                         fix='create it with [project] number = "P-1" and name = "..."')
    _, data, lines = read_toml(path)
    problems = []

    def problem(key, text, fix):
        problems.append(InputError(text, file=path, line=lines.get(key, lines.get(key.split(".")[0])),
                                   key=key, fix=fix))

    for key in sorted(set(data) - {"project", "person"}):
        problem(key, f"unknown table '{key}'{did_you_mean(key, ['project', 'person'])}", "remove it")
    block = data.get("project")
    if not isinstance(block, dict):
        problem("project", "missing [project] table", 'add [project] with number and name')
        block = {}
    for key in sorted(set(block) - PROJECT_KEYS):
        close = closest(key, PROJECT_KEYS - set(block))
        problem(f"project.{key}", f"unknown key '{key}'" + (f" (did you mean '{close}'?)" if close else ""),
                f"rename it to {close}" if close else
                f"remove it; the keys of [project] are {', '.join(sorted(PROJECT_KEYS))}")
    for key in ("number", "name"):
        if not isinstance(block.get(key), str) or not block.get(key).strip():
            problem(f"project.{key}" if key in block else "project", f"project {key} is missing or not text",
                    f'add {key} = "..." under [project]')
    for key in ("client", "site"):
        if key in block and not isinstance(block[key], str):
            problem(f"project.{key}", f"{key} must be text", 'put it in quotes')
    paper = block.get("paper", "A4")
    if paper not in PAPERS:
        problem("project.paper", f"paper '{paper}' is not A4 or Letter", 'write paper = "A4" or "Letter"')
    people = _people(data.get("person", []), problem)
    problems.extend(template_problems(root))
    if problems:
        raise ProblemList(problems)
    return ProjectInfo(number=block["number"], name=block["name"], root=root,
                       client=block.get("client", ""), site=block.get("site", ""),
                       paper=paper, people=people)


def _people(rows, problem) -> tuple[Person, ...]:
    if not isinstance(rows, list):
        problem("person", "person must be an array of tables", "write each person under [[person]]")
        return ()
    out, seen = [], set()
    for i, row in enumerate(rows, start=1):
        key = f"person[{i}]"
        if not isinstance(row, dict):
            problem(key, "must be a table", "write [[person]] with id and name")
            continue
        for k in sorted(set(row) - PERSON_KEYS):
            close = closest(k, PERSON_KEYS - set(row))
            problem(f"{key}.{k}", f"unknown key '{k}'" + (f" (did you mean '{close}'?)" if close else ""),
                    f"rename it to {close}" if close else
                    f"remove it; the keys of [[person]] are {', '.join(sorted(PERSON_KEYS))}")
        if not all(isinstance(row.get(k, ""), str) for k in PERSON_KEYS) or not row.get("id") or not row.get("name"):
            problem(key, "a person needs text id and name", 'write id = "jdoe" and name = "..."')
            continue
        bad_id = identifiers.problem("person id", row["id"])
        if bad_id:
            problem(f"{key}.id", bad_id, identifiers.fix("person id"))
        bad_name = names.name_problem(row["name"])
        if bad_name:
            problem(f"{key}.name", f"the name of {key} ('{row['id']}') {bad_name}", names.FIX)
        for field in ("id", "name", "public_key"):
            value = names.skeleton(row[field]) if field == "name" else row.get(field, "")
            if value and (field, value) in seen:
                problem(f"{key}.{field}", f"the {field.replace('_', ' ')} of person[{i}] "
                        f"repeats that of an earlier person",
                        "each person appears once, with their own id, name and key; remove the "
                        "duplicate [[person]] entry")
            seen.add((field, value))
        out.append(Person(**{k: row.get(k, "") for k in PERSON_KEYS}))
    return tuple(out)


def calc_files(root: Path) -> list[Path]:
    """The calc files of a project, sorted; files that resolve outside the project are refused."""
    folder = Path(root) / "calcs"
    if not folder.is_dir():
        raise InputError("has no calcs/ folder", file=root, fix="put the calc files under PROJECT/calcs/*.toml")
    files = sorted(folder.glob("*.toml"))
    real_root = Path(root).resolve()
    for f in [folder, *files]:
        target = f.resolve()
        if target != real_root and real_root not in target.parents:
            raise InputError(f"is a link to {target}, outside the project", file=f,
                             fix="copy the calc into the project instead of linking to it")
    if not files:
        others = sorted(p.name for p in folder.iterdir() if not p.name.startswith("."))
        hint = f" (found {', '.join(others[:5])}: a calc file's name must end in .toml)" if others else ""
        raise InputError(f"has no calc files{hint}", file=folder,
                         fix="add calc files named calcs/<name>.toml")
    return files


_TEMPLATE_REFERENCE = re.compile(r"{%-?\s*(?:include|import|extends|from)\s+(['\"])(?P<name>[^'\"]*)\1")
_TEMPLATE_TAG = re.compile(r"({{.*?}}|{%.*?%})", re.DOTALL)
_ATTR_FILTER = re.compile(r"\|\s*attr\s*\(")


def template_problems(root: Path) -> list[InputError]:
    """Problems of PROJECT/templates/: links leaving the project, templates naming files
    outside the theme, or reaching into Python internals (names with '__')."""
    folder = Path(root) / "templates"
    if not folder.is_dir():
        return []
    real_root = Path(root).resolve()
    problems = []
    for path in [folder, *sorted(folder.rglob("*"))]:
        target = path.resolve()
        if target != real_root and real_root not in target.parents:
            problems.append(InputError(f"is a link to {target}, outside the project", file=path,
                                       fix="copy the file into the project's templates/ folder"))
        elif path.is_file() and path.suffix in (".j2", ".html", ".css", ".txt", ".svg"):
            problems.extend(_template_text_problems(path))
    return problems


def _template_text_problems(path: Path) -> list[InputError]:
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        return [InputError(f"cannot be read as UTF-8 text ({exc})", file=path,
                           fix="save the template with UTF-8 encoding")]
    problems = []
    for match in _TEMPLATE_REFERENCE.finditer(text):
        name = match.group("name")
        if name.startswith(("/", "\\")) or ".." in name.replace("\\", "/").split("/") or ":" in name:
            problems.append(InputError(
                f"refers to '{name}', outside the theme", file=path, line=_line_of(text, match.start()),
                fix="name templates by their path inside templates/, e.g. 'macros.html.j2'"))
    for match in _TEMPLATE_TAG.finditer(text):
        tag = match.group(0)
        if "__" in tag or _ATTR_FILTER.search(tag):
            shown = tag if len(tag) <= 60 else tag[:57] + "..."
            problems.append(InputError(
                f"'{shown}' reaches into Python internals (a name with '__' or the attr filter)",
                file=path, line=_line_of(text, match.start()),
                fix="use only the values the theme passes to templates (calc, project, ...)"))
    return problems


def _line_of(text: str, index: int) -> int:
    return text.count("\n", 0, index) + 1
