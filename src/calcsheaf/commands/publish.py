"""Phase two: turn the package model into the site's files (relative path -> bytes).

Writers only: every number comes from the model.  Sign-off state and revision
history are read from the project's records (archive), never computed here.
"""

from __future__ import annotations

import os
from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

from ..archive.revisions import issued_changes, issued_pdf, revision_history
from ..fingerprint import code_fingerprint
from ..identifiers import next_revision
from ..isolation import stage
from ..archive.signoffs import signoff_status
from ..model import CalcReport, PackageModel, ProjectInfo
from ..render import html, pdf, site
from ..archive.diff import changes_since_issue
from ..render.json import results_dict, results_json
from ..render.mathsvg import EquationImages


def build_date() -> str:
    """ISO date from SOURCE_DATE_EPOCH, or "" (no wall-clock dates in the output)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if not epoch:
        return ""
    return datetime.fromtimestamp(int(epoch), tz=timezone.utc).date().isoformat()


def with_status(report: CalcReport, project: ProjectInfo) -> tuple[CalcReport, list[dict], dict]:
    """The report with its status and revision from the issue records, plus history and sign-offs."""
    history = revision_history(project.root, report.number) if report.error is None else []
    signoff = signoff_status(project.root, report.number, report.input_hash) if report.error is None else {}
    current = [h for h in history if h["content_hash"] == report.input_hash]
    if current:
        report = replace(report, status=current[-1]["status"], revision=current[-1]["rev"])
    elif report.error is None:   # a draft: the revision it would become, from the records
        report = replace(report, revision=next_revision(history[-1]["rev"] if history else None))
    return report, history, {k: v for k, v in signoff.items() if k != "records"}


def calc_files(report: CalcReport, project: ProjectInfo, date: str, images: EquationImages, *,
               history: list[dict] | None = None, signoff: dict | None = None,
               folder: str | None = None,
               changes: dict | None = None) -> tuple[dict[str, bytes], html.CalcPage]:
    """One calc's page, PDF, results.json and assets, keyed by site-root path.

    `changes`: what changed since the previous issue, as an issued revision's signed pages
    show it; for a draft it is worked out here from the latest issued revision."""
    if changes is None and history and report.status == "draft" and report.error is None:
        changes = changes_since_issue(project.root, report.number, report.source_text,
                                      results_dict(report, project))
    page = html.render_calc(report, project, build_date=date, revisions=history, signoff=signoff,
                            images=images, changes=changes)
    results = results_json(report, project)
    attachments = {report.source_path.name if report.source_path.name.endswith(".toml")
                   else f"{report.number}.toml": report.source_text.encode("utf-8"),
                   "results.json": results}
    files = dict(page.assets)
    files[site.calc_page_path(report.number)] = page.html.encode("utf-8")
    files[site.results_path(report.number)] = results
    files[site.calc_pdf_path(report.number)] = pdf.calc_pdf(page, attachments)
    return files, page


RECORDS = ("project.toml", "signoffs", "issued", "templates")


def equation_images(project: ProjectInfo) -> EquationImages:
    return EquationImages(project.root / ".calcsheaf-cache" / "equations" / code_fingerprint())


def render_entry(report: CalcReport, project: ProjectInfo, date: str) -> tuple[CalcReport, dict[str, bytes]]:
    """The report with its issue status, and its site files."""
    stage("render")
    report, history, signoff = with_status(report, project)
    issued = report.error is None and report.status != "draft"
    changes = issued_changes(project.root, report.number, report.revision) if issued else None
    files, _ = calc_files(report, project, date, equation_images(project), history=history,
                          signoff=signoff, changes=changes)
    if issued:   # serve what was signed
        files[site.calc_pdf_path(report.number)] = issued_pdf(project.root, report.number,
                                                              report.revision)
    return report, files


def analyse_and_render(path: Path, *, project: ProjectInfo, date: str):
    """Worker: one calc from its file to its site files (runs in an isolated process)."""
    from ..pipeline import analyse_one
    return render_entry(analyse_one(path), project, date)


def site_files(package: PackageModel, calc_files_list: list[dict[str, bytes]],
               selftest: dict[str, bytes] | None = None) -> dict[str, bytes]:
    """Every file of the site except SHA256SUMS: calcs, static theme, index, project PDF."""
    files: dict[str, bytes] = {}
    for calc in calc_files_list:
        files.update(calc)
    attachments = {f"{r.number}/{r.number}.toml": r.source_text.encode("utf-8") for r in package.calcs}
    files.update(html.site_static(package.project))
    files[site.INDEX_PAGE] = html.render_index(package).encode("utf-8")
    calc_pdfs = [files[site.calc_pdf_path(r.number)] for r in package.calcs]
    files[site.project_pdf_path(package.project.number)] = pdf.project_pdf(package, calc_pdfs, attachments)
    files.update(selftest or {})
    return files


def build_calc(project_root: Path, calc_number: str, out_dir: Path, *, status: str, revision: str,
               signoff: dict) -> Path:
    """Write one calc's page, PDF and results.json into `out_dir` (used by `issue`)."""
    from ..pipeline import analyse_one
    from ..project import calc_files as project_calcs, load_project

    project = load_project(project_root)
    for path in project_calcs(project_root):
        report = analyse_one(path)
        if report.number == calc_number:
            break
    else:
        from ..errors import InputError
        raise InputError(f"no calc numbered '{calc_number}'", file=project_root / "calcs",
                         fix="give the calc number from its [calc] number key")
    report = replace(report, status=status, revision=revision)
    history = revision_history(project.root, calc_number)
    files, _ = calc_files(report, project, build_date(), equation_images(project), history=history,
                          signoff=signoff)
    out_dir = Path(out_dir)
    prefix = site.calc_dir(calc_number) + "/"
    page = site.calc_page_path(calc_number)
    # A frozen calc folder stands alone: the theme's files go inside it.
    files[page] = files[page].replace(b'href="../static/', b'href="static/')
    files.update(html.site_static(project))
    for rel, data in sorted(files.items()):
        local = rel[len(prefix):] if rel.startswith(prefix) else rel
        path = out_dir / local
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)
    return out_dir
