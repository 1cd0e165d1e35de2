"""Phase two: turn the package model into the site's files (relative path -> bytes).

Writers only: every number comes from the model.  Sign-off state and revision
history are read from the project's records (archive), never computed here.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import datetime, timezone

from .. import settings
from ..archive.revisions import issued_changes, issued_pdf, revision_history
from ..cache import Cache, key as cache_key
from ..identifiers import next_revision
from ..errors import BuildError
from ..isolation import stage
from ..archive.signoffs import signoff_status
from ..model import CalcReport, PackageModel, ProjectInfo
from ..render import html, pdf, site
from ..archive.diff import changes_since_issue
from ..render.json import results_dict, results_json
from ..render.mathsvg import EquationImages


def build_date() -> str:
    """ISO date from SOURCE_DATE_EPOCH, or "" (no wall-clock dates in the output)."""
    epoch = settings.source_date_epoch()
    if epoch is None:
        return ""
    return datetime.fromtimestamp(epoch, tz=timezone.utc).date().isoformat()


def with_status(report: CalcReport, project: ProjectInfo) -> tuple[CalcReport, list[dict], dict]:
    """The report with its status and revision from the issue records, plus history and sign-offs."""
    history = revision_history(project.root, report.number) if report.error is None else []
    signoff = signoff_status(project.root, report.number, report.input_hash) if report.error is None else {}
    current = [h for h in history if h["verified"] and h["content_hash"] == report.input_hash]
    if current:   # only a revision whose signatures verify counts as issued (and is served)
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


class CachedEquationImages(EquationImages):
    """Equation SVGs kept between builds in the project's authenticated cache."""

    def __init__(self, store: Cache) -> None:
        super().__init__(None)
        self.store = store

    def _read(self, name: str) -> bytes | None:
        hit = self.store.get("equations", cache_key("equation", name))
        return None if hit is None else hit[1].get("svg")

    def _write(self, name: str, data: bytes) -> None:
        self.store.put("equations", cache_key("equation", name), {}, {"svg": data})


def equation_images(project: ProjectInfo, use_cache: bool = True) -> EquationImages:
    """Equation images, kept in the project's cache only when `use_cache`."""
    return CachedEquationImages(Cache(project.root)) if use_cache else EquationImages()


def render_entry(report: CalcReport, project: ProjectInfo, date: str, use_cache: bool = True,
                 images: EquationImages | None = None) -> tuple[CalcReport, dict[str, bytes]]:
    """The report with its issue status, and its site files."""
    stage("render")
    report, history, signoff = with_status(report, project)
    issued = report.error is None and report.status != "draft"
    changes = issued_changes(project.root, report.number, report.revision) if issued else None
    images = equation_images(project, use_cache) if images is None else images
    files, _ = calc_files(report, project, date, images,
                          history=history, signoff=signoff, changes=changes)
    if issued:   # serve what was signed
        files[site.calc_pdf_path(report.number)] = issued_pdf(project.root, report.number,
                                                              report.revision)
    return report, files


def analyse_and_render(source, *, project: ProjectInfo, date: str, use_cache: bool = True):
    """Worker: one calc from the bytes read from its file (a pipeline.CalcSource) to
    (report, site files or None when the page could not be made, paths of cache entries
    that failed authentication); runs in an isolated process."""
    from ..pipeline import analyse_source
    report = analyse_source(source)
    images = equation_images(project, use_cache)
    rejected = images.store.rejected if isinstance(images, CachedEquationImages) else []
    try:
        report, files = render_entry(report, project, date, use_cache, images)
    except BuildError as exc:     # e.g. a template override: the calc fails under its own number
        report, files = replace(report, error=exc), None
    return report, files, [str(p) for p in rejected]


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
