"""`calcsheaf issue`: freeze, sign and record a revision of a checked calc.

The issued files are rendered from the frozen copy of the calc file (the bytes that were
hashed and signed), from fresh analysis in an isolated process under the build's time
and memory limits, with no project cache: equation images are drawn anew.  The context
of that rendering (revision history, sign-off panel, changes since the last issue, build
date) is frozen as `output/render.json`, so `verify --recompute` can render the same
files again and compare them.
"""

from __future__ import annotations

import functools
from dataclasses import replace
from pathlib import Path

from calcsheaf.archive import revisions
from calcsheaf.archive.canonical import pretty_json
from calcsheaf.errors import ArchiveError, CalcsheafError

RENDER_RECORD = "render.json"


def issue(project: Path, calc: str, rev: str, *, description: str = "") -> int:
    """Issue revision `rev` of calc `calc`; needs both sign-offs on the current content.

    `description` (optional, e.g. "Issued for construction") is shown in revision tables.
    Both people's key files must be on this machine; their passphrases come from
    CALCSHEAF_PASSPHRASE_<ID> (or CALCSHEAF_PASSPHRASE, or a prompt for each).
    """
    project = Path(project)
    folder = revisions.issue(project, calc, rev, description=description, render=render_frozen)
    for entry in revisions.revision_history(project, calc):
        if entry["superseded_by"] == rev:
            print(f"Revision {entry['rev']} of calc {calc} is now superseded by {rev}")
    print(f"Issued calc {calc} revision {rev}: {folder}")
    return 0


def render_frozen(frozen_calc: Path, project_root: Path, out_dir: Path, *, calc_number: str,
                  status: str, revision: str, signoff: dict, history: list[dict]) -> Path:
    """Analyse and render the frozen calc file into `out_dir` (index.html, <CALC>.pdf,
    results.json, the theme's static files, render.json).

    The project's templates/ are frozen beside the frozen project.toml first, and the
    project is loaded from there, so the revision folder holds every input of its pages.
    """
    from calcsheaf.commands.publish import build_date

    inputs = Path(frozen_calc).parent.parent
    freeze_templates(Path(project_root), inputs)
    context = {"calc": calc_number, "status": status, "revision": revision,
               "signoff": signoff, "history": history, "build_date": build_date()}
    files, context["changes"] = render_isolated(frozen_calc, inputs, context,
                                                compare_with=Path(project_root))
    files[RENDER_RECORD] = pretty_json(context)
    out_dir = Path(out_dir)
    for rel, data in sorted(files.items()):
        path = out_dir / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)
    return out_dir


def freeze_templates(project_root: Path, inputs: Path) -> None:
    """Copy PROJECT/templates/ (regular files only, sorted) to inputs/templates/."""
    source = project_root / "templates"
    if not source.is_dir():
        return
    real = source.resolve()
    for path in sorted(source.rglob("*")):
        if path.is_symlink() or real not in path.resolve().parents:
            raise ArchiveError("is a link; an issued revision freezes only plain files",
                               file=path, fix="copy the file into templates/ instead of linking")
        if path.is_file():
            target = inputs / "templates" / path.relative_to(source)
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(path.read_bytes())


def render_isolated(frozen_calc: Path, inputs: Path, context: dict, *,
                    compare_with: Path | None = None) -> tuple[dict[str, bytes], dict | None]:
    """(files, changes) of one frozen calc, analysed and rendered in an isolated process
    under the build's limits (isolation.TIME_LIMIT_S, MEMORY_LIMIT_BYTES).

    With `compare_with` (the project root), the changes since the project's latest issued
    revision are worked out and shown; otherwise context["changes"] is shown as it is.
    A calc that fails to load or analyse, or overruns a limit, raises its error here.
    """
    from calcsheaf.isolation import run_isolated

    work = functools.partial(_render_child, inputs=inputs, context=context,
                             compare_with=compare_with)
    [outcome] = run_isolated(work, [Path(frozen_calc)], 1, lambda path, error: error)
    if isinstance(outcome, CalcsheafError):
        raise outcome
    return outcome


def _render_child(path: Path, *, inputs: Path, context: dict, compare_with: Path | None):
    """In the isolated process: (files, changes), or the calc's error (an exception)."""
    from calcsheaf.archive.diff import changes_since_issue
    from calcsheaf.pipeline import analyse_one
    from calcsheaf.project import load_project
    from calcsheaf.render.json import results_dict

    project = load_project(inputs)
    report = analyse_one(path)
    if report.error is not None:
        return report.error
    if report.number != context["calc"]:
        return ArchiveError(f"the frozen calc file is numbered {report.number}, not "
                            f"{context['calc']}", file=path, key="calc.number",
                            fix="issue the calc under its own number")
    report = replace(report, status=context["status"], revision=context["revision"])
    changes = context.get("changes")
    if compare_with is not None:
        changes = changes_since_issue(compare_with, report.number, report.source_text,
                                      results_dict(report, project), label=report.revision)
    return issued_files(report, project, dict(context, changes=changes)), changes


def issued_files(report, project, context: dict) -> dict[str, bytes]:
    """index.html, <CALC>.pdf, results.json and the theme's static files of an issued calc,
    with equation images drawn afresh (no cache).  Paths are relative to output/."""
    from calcsheaf.render import html, pdf, site
    from calcsheaf.render.json import results_json
    from calcsheaf.render.mathsvg import EquationImages

    page = html.render_calc(report, project, build_date=context["build_date"],
                            revisions=context["history"], signoff=context["signoff"],
                            images=EquationImages(None), changes=context.get("changes"))
    results = results_json(report, project)
    attachments = {report.source_path.name: report.source_text.encode("utf-8"),
                   "results.json": results}
    prefix = site.calc_dir(report.number) + "/"
    files = {rel.removeprefix(prefix): data for rel, data in page.assets.items()}
    # A frozen calc folder stands alone: the theme's files go inside it.
    files["index.html"] = page.html.encode("utf-8").replace(b'href="../static/',
                                                            b'href="static/')
    files["results.json"] = results
    files[f"{report.number}.pdf"] = pdf.calc_pdf(page, attachments)
    files.update(html.site_static(project))
    return files

