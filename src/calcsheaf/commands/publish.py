"""Phase two: turn the package model into the site's files (relative path -> bytes).

Writers only: every number comes from the model.  Sign-off state and revision
history are read from the project's records (archive), never computed here.
"""

from __future__ import annotations

from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

from .. import settings
from ..archive.revisions import issued_pdf, revision_history
from ..cache import Cache, key as cache_key
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
    epoch = settings.source_date_epoch()
    if epoch is None:
        return ""
    return datetime.fromtimestamp(epoch, tz=timezone.utc).date().isoformat()


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
               folder: str | None = None) -> tuple[dict[str, bytes], html.CalcPage]:
    """One calc's page, PDF, results.json and assets, keyed by site-root path."""
    changes = None
    if history and report.status == "draft" and report.error is None:
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


def render_entry(report: CalcReport, project: ProjectInfo, date: str,
                 use_cache: bool = True) -> tuple[CalcReport, dict[str, bytes]]:
    """The report with its issue status, and its site files."""
    stage("render")
    report, history, signoff = with_status(report, project)
    files, _ = calc_files(report, project, date, equation_images(project, use_cache),
                          history=history, signoff=signoff)
    if report.error is None and report.status != "draft":   # serve what was signed
        files[site.calc_pdf_path(report.number)] = issued_pdf(project.root, report.number,
                                                              report.revision)
    return report, files


def analyse_and_render(source, *, project: ProjectInfo, date: str, use_cache: bool = True):
    """Worker: one calc from the bytes read from its file (a pipeline.CalcSource) to its site
    files (runs in an isolated process)."""
    from ..pipeline import analyse_source
    return render_entry(analyse_source(source), project, date, use_cache)


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
               signoff: dict, calc_file: Path | None = None, source: bytes | None = None,
               use_cache: bool = False) -> Path:
    """Write one calc's page, PDF and results.json into `out_dir` (used by `issue`).

    The calc is analysed afresh under the build's time and memory limits and, unless
    `use_cache`, rendered without reading or writing the project's cache (equation
    images included), so nothing the project folder holds besides its inputs reaches
    the output.  `calc_file` + `source`: analyse exactly these bytes (read once by
    the caller, e.g. the bytes being frozen) as that file; otherwise every calc file
    is read once until the one numbered `calc_number` is found.
    """
    from ..project import load_project

    project = load_project(project_root)
    report = fresh_report(project_root, calc_number, calc_file, source)
    report = replace(report, status=status, revision=revision)
    history = revision_history(project.root, calc_number)
    files, _ = calc_files(report, project, build_date(), equation_images(project, use_cache),
                          history=history, signoff=signoff)
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


def fresh_report(project_root: Path, calc_number: str, calc_file: Path | None = None,
                 source: bytes | None = None) -> CalcReport:
    """The report of calc `calc_number`, analysed now in a limited process (never cached).

    `calc_file` (+ its bytes `source`, else read once now) names the file; without it
    the project's calc files are searched.  A calc of another number is refused."""
    from ..errors import InputError
    from ..pipeline import CalcSource, analyse_sources, read_source, read_sources

    if calc_file is not None:
        candidates = [CalcSource(Path(calc_file), source) if source is not None
                      else read_source(Path(calc_file))]
    else:
        candidates = read_sources(project_root)
    for candidate in candidates:
        report, = analyse_sources([candidate], jobs=1)
        if report.number == calc_number:
            return report
    where = calc_file if calc_file is not None else Path(project_root) / "calcs"
    raise InputError(f"no calc numbered '{calc_number}'", file=where,
                     fix="give the calc number from its [calc] number key")
