"""What changed between two revisions of a calc: every key of the calc file, and the results.

Each side is a calc file (its parsed TOML) and its results dict.  A side is an issued
revision (its frozen calc file and frozen results.json) or `current`: the working calc
file and results analysed afresh from that very file by the caller's `analyse` (never a
build's possibly stale results.json).  Every key of the calc file is compared (tables
flattened to dotted paths, arrays of tables named by their id or name, else numbered),
and every value of results.json except the calc's own status, revision and software
versions.  Numbers are shown in full (shortest round-trip form), in the unit results.json
names beside them; nothing is shortened and a missing value reads "(absent)".
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path
from typing import Callable

from calcsheaf.errors import ArchiveError

from . import projectfiles
from .manifest import MANIFEST
from .layout import ordered_revisions, revision_folder

CURRENT = "current"
SECTIONS = ("inputs", "assumptions", "references", "results", "criteria")
ABSENT = "(absent)"
# results.json keys that describe the run, not the calc's answers
RUN_KEYS = frozenset({"software", "build_date", "input_hash"})
ROW_NAMES = ("id", "name", "case", "parameter")

Analyse = Callable[[Path, bytes], dict]   # (calc file, its bytes) -> results, analysed afresh


def load_side(project_root: Path, calc_number: str, revision: str,
              analyse: Analyse | None = None) -> tuple[dict, dict]:
    """(calc TOML data, results dict) of an issued revision or of `current`."""
    project_root = Path(project_root)
    if revision == CURRENT:
        if analyse is None:
            raise ArchiveError("comparing with `current` needs a fresh analysis", key="rev",
                               fix="use `calcsheaf diff`, which analyses the working calc file")
        path, data, parsed = projectfiles.read_calc(project_root, calc_number)
        return parsed, analyse(path, data)
    projectfiles.identifiers_check("revision", revision, "rev")
    folder = revision_folder(project_root, calc_number, revision)
    if not (folder / MANIFEST).is_file():
        raise ArchiveError(f"revision {revision} of calc {calc_number} is not issued",
                           file=folder, fix="give an issued revision or `current`")
    manifests = {rev: manifest for rev, _, manifest in ordered_revisions(project_root, calc_number)}
    calc_rel = manifests[revision]["calc_file"]
    calc_file, results_file = folder / calc_rel, folder / "output" / "results.json"
    if not _inside(folder, calc_file) or not calc_file.is_file() or not results_file.is_file():
        raise ArchiveError("the revision folder lacks its frozen calc file or results.json",
                           file=folder, fix="run `calcsheaf verify` on it: a file is missing")
    try:
        results = json.loads(results_file.read_text(encoding="utf-8"))
    except (ValueError, UnicodeDecodeError) as exc:
        raise ArchiveError(f"results.json cannot be read ({exc})", file=results_file,
                           fix="run `calcsheaf verify` on the revision") from None
    return projectfiles.read_toml(calc_file), results


def _inside(folder: Path, path: Path) -> bool:
    return folder.resolve() in path.resolve().parents


def text(value) -> str:
    """A value as shown in a diff: full precision, never `None`."""
    if value is None:
        return ABSENT
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    if isinstance(value, (int, str)):
        return str(value)
    return json.dumps(value, sort_keys=True, ensure_ascii=False, default=str)


def flatten(data, path: str = "") -> dict[str, str]:
    """Dotted path -> shown value of every leaf.  {value, unit} pairs stay one item."""
    if isinstance(data, dict):
        if "value" in data and "unit" in data and not isinstance(data["value"], (dict, list)):
            items = {path: f"{text(data['value'])} {text(data['unit'])}".strip()}
            rest = {k: v for k, v in data.items() if k not in ("value", "unit")}
            return items | (flatten(rest, path) if rest else {})
        if not data and path:
            return {path: "{}"}
        out: dict[str, str] = {}
        for key in sorted(data, key=str):
            out |= flatten(data[key], f"{path}.{key}" if path else str(key))
        return out
    if isinstance(data, list) and data and all(isinstance(row, dict) for row in data):
        out = {}
        for label, row in zip(_row_labels(data), data):
            out |= flatten(row, f"{path}[{label}]")
        return out
    return {path: text(data)}


def _row_labels(rows: list[dict]) -> list[str]:
    """Each row's id (or name, case, parameter) when those are unique, else its number."""
    for field in ROW_NAMES:
        labels = [row.get(field) for row in rows]
        if all(isinstance(v, str) and v for v in labels) and len(set(labels)) == len(labels):
            return labels
    return [str(i) for i in range(1, len(rows) + 1)]


def calc_items(calc: dict) -> dict[str, dict[str, str]]:
    """Section -> {item: shown value} over every key of a calc file."""
    sections = {"inputs": {}, "assumptions": {}, "references": {}}
    for item, value in flatten(calc).items():
        section = ("assumptions" if item.startswith("assumption[") else
                   "references" if item.startswith("reference[") else "inputs")
        sections[section][item] = value
    return sections


def result_items(results: dict) -> dict[str, dict[str, str]]:
    """Section -> {item: shown value}: criteria by name, every other answer of results.json."""
    kept = {k: v for k, v in (results or {}).items() if k not in RUN_KEYS}
    calc = {k: v for k, v in (kept.pop("calc", None) or {}).items()
            if k not in ("status", "revision")}
    criteria = kept.pop("criteria", None) or []
    return {"results": flatten(dict(kept, calc=calc) if calc else kept),
            "criteria": flatten({"criterion": criteria}) if criteria else {}}


def compare_sides(old_calc: dict, old_results: dict, new_calc: dict,
                  new_results: dict) -> list[dict]:
    """Rows {section, item, old, new, change}; change is same, changed, added or removed."""
    old = calc_items(old_calc) | result_items(old_results)
    new = calc_items(new_calc) | result_items(new_results)
    rows = []
    for section in SECTIONS:
        a_items, b_items = old[section], new[section]
        for item in list(a_items) + [k for k in b_items if k not in a_items]:
            a, b = a_items.get(item), b_items.get(item)
            change = ("added" if a is None else "removed" if b is None
                      else "same" if a == b else "changed")
            rows.append({"section": section, "item": item, "old": ABSENT if a is None else a,
                         "new": ABSENT if b is None else b, "change": change})
    return rows


def revision_diff(project_root: Path, calc_number: str, rev_a: str, rev_b: str,
                  analyse: Analyse | None = None) -> dict:
    """{calc, a, b, rows} comparing revision rev_a with rev_b (either may be `current`)."""
    projectfiles.identifiers_check("calc number", calc_number, "calc")
    old = load_side(project_root, calc_number, rev_a, analyse)
    new = load_side(project_root, calc_number, rev_b, analyse)
    return {"calc": calc_number, "a": rev_a, "b": rev_b,
            "rows": compare_sides(old[0], old[1], new[0], new[1])}


def changes_since_issue(project_root: Path, calc_number: str, calc_text: str,
                        results: dict, *, label: str = CURRENT) -> dict | None:
    """{calc, a, b, rows} from the latest issued revision to the given calc text and results.

    `calc_text` is the calc file's text and `results` its results dict from this build or
    issue (not yet written); `label` names that side (`current` for a draft, the new
    revision when issuing).  None when the calc has no issued revision.
    """
    revs = ordered_revisions(project_root, calc_number)
    if not revs:
        return None
    latest = revs[-1][0]
    old_calc, old_results = load_side(project_root, calc_number, latest)
    return {"calc": calc_number, "a": latest, "b": label,
            "rows": compare_sides(old_calc, old_results, tomllib.loads(calc_text), results)}


def format_diff(diff: dict) -> str:
    """Plain text: per section, each item that differs with both values in full, then a count.

    Changed rows are marked `*`, added `+`, removed `-`; unchanged items are counted only.
    """
    marks = {"changed": "*", "added": "+", "removed": "-"}
    lines = [f"calc {diff['calc']}: revision {diff['a']} -> {diff['b']}"]
    differ = [r for r in diff["rows"] if r["change"] != "same"]
    for section in SECTIONS:
        rows = [r for r in diff["rows"] if r["section"] == section]
        changed = [r for r in rows if r["change"] != "same"]
        lines += ["", f"{section.upper()} ({len(rows)} item(s), {len(changed)} differ)"]
        for r in changed:
            lines += [f"  {marks[r['change']]} {r['item']}",
                      f"      {diff['a']}: {r['old']}", f"      {diff['b']}: {r['new']}"]
    lines += ["", f"{len(differ)} item(s) differ" if differ else "no differences"]
    return "\n".join(lines) + "\n"
