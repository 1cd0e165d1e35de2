"""What changed between two revisions of a calc: inputs, assumptions, results, criteria.

Each side is a calc file (parsed TOML) and its results.json.  A side is an issued revision
(its frozen files) or `current`: the working calc file and the latest build's
PROJECT/_site/<CALC>/results.json.  Values are shown as given (inputs) or in the unit
results.json names beside them.
"""

from __future__ import annotations

import json
import tomllib
from pathlib import Path

from calcsheaf.errors import ArchiveError

from . import projectfiles
from .manifest import MANIFEST
from .revisions import revision_folder

CURRENT = "current"
SECTIONS = ("inputs", "assumptions", "results", "criteria")


def load_side(project_root: Path, calc_number: str, revision: str) -> tuple[dict, dict]:
    """(calc TOML data, results dict) of an issued revision or of `current`."""
    project_root = Path(project_root)
    if revision == CURRENT:
        calc_file = projectfiles.find_calc_file(project_root, calc_number)
        results_file = project_root / "_site" / calc_number / "results.json"
        fix = "run `calcsheaf build PROJECT` first"
    else:
        folder = revision_folder(project_root, calc_number, revision)
        if not (folder / MANIFEST).is_file():
            raise ArchiveError(f"revision {revision} of calc {calc_number} is not issued",
                               file=folder, fix="give an issued revision or `current`")
        manifest = json.loads((folder / MANIFEST).read_text(encoding="utf-8"))
        calc_file = folder / manifest["calc_file"]
        results_file = folder / "output" / "results.json"
        fix = "verify the revision folder: a file is missing"
    if not results_file.is_file():
        raise ArchiveError("no results.json to compare", file=results_file, fix=fix)
    return (tomllib.loads(calc_file.read_text(encoding="utf-8")),
            json.loads(results_file.read_text(encoding="utf-8")))


def _fmt(value) -> str:
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:.6g}"
    return str(value)


def _quantity(entry: dict) -> str:
    return f"{_fmt(entry.get('value'))} {entry.get('unit', '')}".strip()


def input_items(calc: dict) -> dict[str, str]:
    """Parameters, energy expressions and initial state as written in the calc file."""
    items = {}
    for name, given in (calc.get("parameters") or {}).items():
        if isinstance(given, dict):
            text = str(given.get("value", ""))
            if given.get("source"):
                text += f" [{given['source']}]"
        else:
            text = str(given)
        items[f"parameter {name}"] = text
    for part in ("kinetic", "potential", "dissipation"):
        if part in (calc.get("energy") or {}):
            items[f"energy {part}"] = str(calc["energy"][part])
    for name, expr in (calc.get("generalized_forces") or {}).items():
        items[f"generalized force {name}"] = str(expr)
    for name, given in (calc.get("initial") or {}).items():
        items[f"initial {name}"] = str(given)
    return items


def assumption_items(calc: dict) -> dict[str, str]:
    items = {}
    for entry in calc.get("assumption", []) or []:
        text = str(entry.get("text", ""))
        if entry.get("open"):
            text += " (OPEN)"
        items[str(entry.get("id", "?"))] = text
    return items


def result_items(results: dict) -> dict[str, str]:
    """Named results, output peaks, equilibrium values, modes and the overall verdict."""
    items = {f"result {k}": _quantity(v) for k, v in (results.get("results") or {}).items()}
    for name, out in (results.get("outputs") or {}).items():
        items[f"output {name} peak"] = f"{_fmt(out.get('peak'))} {out.get('unit', '')}".strip()
    for name, entry in (results.get("equilibrium") or {}).items():
        if isinstance(entry, dict) and "value" in entry:
            items[f"equilibrium {name}"] = _quantity(entry)
    for index, mode in enumerate(results.get("modes") or [], start=1):
        items[f"mode {index} frequency"] = f"{_fmt(mode.get('natural_frequency_hz'))} Hz"
        items[f"mode {index} damping ratio"] = _fmt(mode.get("damping_ratio"))
    items["all checks pass"] = _fmt(results.get("passed"))
    return items


def criterion_items(results: dict) -> dict[str, str]:
    items = {}
    for row in results.get("criteria") or []:
        items[str(row.get("name", "?"))] = (
            f"{_fmt(row.get('demand'))} / {_fmt(row.get('capacity'))} = ratio "
            f"{_fmt(row.get('ratio'))} {'pass' if row.get('pass') else 'FAIL'}")
    return items


def compare_sides(old_calc: dict, old_results: dict, new_calc: dict, new_results: dict) -> list[dict]:
    """Rows {section, item, old, new, change}; change is same, changed, added or removed."""
    pairs = {"inputs": (input_items(old_calc), input_items(new_calc)),
             "assumptions": (assumption_items(old_calc), assumption_items(new_calc)),
             "results": (result_items(old_results), result_items(new_results)),
             "criteria": (criterion_items(old_results), criterion_items(new_results))}
    rows = []
    for section in SECTIONS:
        old, new = pairs[section]
        for item in list(old) + [k for k in new if k not in old]:
            a, b = old.get(item), new.get(item)
            change = ("added" if a is None else "removed" if b is None
                      else "same" if a == b else "changed")
            rows.append({"section": section, "item": item, "old": a or "", "new": b or "",
                         "change": change})
    return rows


def revision_diff(project_root: Path, calc_number: str, rev_a: str, rev_b: str) -> dict:
    """{calc, a, b, rows} comparing revision rev_a with rev_b (which may be `current`)."""
    old = load_side(project_root, calc_number, rev_a)
    new = load_side(project_root, calc_number, rev_b)
    return {"calc": calc_number, "a": rev_a, "b": rev_b,
            "rows": compare_sides(old[0], old[1], new[0], new[1])}


def changes_since_issue(project_root: Path, calc_number: str, calc_text: str,
                        results: dict) -> dict | None:
    """For a draft's page: {calc, a, b, rows} from the latest issued revision to the draft.

    `calc_text` is the working calc file's text and `results` its results dict from this
    build (not yet written).  None when the calc has no issued revision.
    """
    from .revisions import latest_revision
    latest = latest_revision(project_root, calc_number)
    if latest is None:
        return None
    old_calc, old_results = load_side(project_root, calc_number, latest)
    return {"calc": calc_number, "a": latest, "b": CURRENT,
            "rows": compare_sides(old_calc, old_results, tomllib.loads(calc_text), results)}


def format_diff(diff: dict, *, width: int = 34) -> str:
    """Plain-text side-by-side table; changed rows are marked `*`, added `+`, removed `-`."""
    marks = {"same": " ", "changed": "*", "added": "+", "removed": "-"}
    lines = [f"calc {diff['calc']}: revision {diff['a']} -> {diff['b']}"]
    changed = sum(r["change"] != "same" for r in diff["rows"])
    for section in SECTIONS:
        rows = [r for r in diff["rows"] if r["section"] == section]
        lines += ["", section.upper(), f"  {'':1} {'item':<{width}} {diff['a']:<{width}} {diff['b']}"]
        if not rows:
            lines.append("    (none)")
        for r in rows:
            lines.append(f"  {marks[r['change']]} {_clip(r['item'], width):<{width}} "
                         f"{_clip(r['old'], width):<{width}} {r['new']}")
    lines += ["", f"{changed} item(s) differ" if changed else "no differences"]
    return "\n".join(lines) + "\n"


def _clip(text: str, width: int) -> str:
    return text if len(text) <= width else text[: width - 1] + "…"
