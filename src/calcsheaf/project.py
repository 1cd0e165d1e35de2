"""The project folder: project.toml and the calc files under calcs/."""

from __future__ import annotations

from pathlib import Path

from .calcfile.loader import did_you_mean
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
        problem(f"project.{key}", f"unknown key '{key}'{did_you_mean(key, PROJECT_KEYS)}",
                f"allowed: {', '.join(sorted(PROJECT_KEYS))}")
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
            problem(f"{key}.{k}", f"unknown key '{k}'{did_you_mean(k, PERSON_KEYS)}",
                    f"allowed: {', '.join(sorted(PERSON_KEYS))}")
        if not all(isinstance(row.get(k, ""), str) for k in PERSON_KEYS) or not row.get("id") or not row.get("name"):
            problem(key, "a person needs text id and name", 'write id = "jdoe" and name = "..."')
            continue
        if row["id"] in seen:
            problem(f"{key}.id", f"person id '{row['id']}' appears twice", "give each person a unique id")
        seen.add(row["id"])
        out.append(Person(**{k: row.get(k, "") for k in PERSON_KEYS}))
    return tuple(out)


def calc_files(root: Path) -> list[Path]:
    """The calc files of a project, sorted; symlinks that leave the project are refused."""
    folder = Path(root) / "calcs"
    if not folder.is_dir():
        raise InputError("has no calcs/ folder", file=root, fix="put the calc files under PROJECT/calcs/*.toml")
    files = sorted(folder.glob("*.toml"))
    real_root = Path(root).resolve()
    for f in files:
        target = f.resolve()
        if f.is_symlink() and real_root not in target.parents:
            raise InputError(f"is a link to {target}, outside the project", file=f,
                             fix="copy the calc into the project instead of linking to it")
    return files
