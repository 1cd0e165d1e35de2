"""Phase two: turn the package model into the site's files (relative path -> bytes).

Writers only: every number comes from the model.  Sign-off state and revision
history are read from the project's records (archive), never computed here.
"""

from __future__ import annotations

import json
import os
from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

from ..archive.revisions import revision_history
from ..cache import key
from ..archive.signoffs import signoff_status
from ..model import CalcReport, PackageModel, ProjectInfo
from ..render import html, pdf, site
from ..render.json import results_json
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
    return report, history, {k: v for k, v in signoff.items() if k != "records"}


def calc_files(report: CalcReport, project: ProjectInfo, date: str, images: EquationImages, *,
               history: list[dict] | None = None, signoff: dict | None = None,
               folder: str | None = None) -> tuple[dict[str, bytes], html.CalcPage]:
    """One calc's page, PDF, results.json and assets, keyed by site-root path."""
    page = html.render_calc(report, project, build_date=date, revisions=history, signoff=signoff,
                            images=images)
    results = results_json(report, project)
    attachments = {report.source_path.name if report.source_path.name.endswith(".toml")
                   else f"{report.number}.toml": report.source_text.encode("utf-8"),
                   "results.json": results}
    files = dict(page.assets)
    files[site.calc_page_path(report.number)] = page.html.encode("utf-8")
    files[site.results_path(report.number)] = results
    files[site.calc_pdf_path(report.number)] = pdf.calc_pdf(page, attachments)
    return files, page


def site_files(package: PackageModel, selftest: dict[str, bytes] | None = None,
               cache=None) -> dict[str, bytes]:
    """Every file of the site except SHA256SUMS; unchanged calcs come from `cache`."""
    images = EquationImages(package.project.root / ".calcsheaf-cache" / "equations")
    files: dict[str, bytes] = {}
    pages, shown, attachments = [], [], {}
    project_text = (package.project.root / "project.toml").read_bytes()
    for report in package.calcs:
        report, history, signoff = with_status(report, package.project)
        shown.append(report)
        entry = key("calc-files", report.input_hash, report.source_path.name, project_text,
                    json.dumps([history, signoff], sort_keys=True, default=str), package.build_date)
        cached = cache.get("calc-files", entry) if cache is not None else None
        if cached is None:
            cached = calc_files(report, package.project, package.build_date, images,
                                history=history, signoff=signoff)
            if cache is not None:
                cache.put("calc-files", entry, cached)
        calc, page = cached
        files.update(calc)
        pages.append(page)
        attachments[f"{report.number}/{report.number}.toml"] = report.source_text.encode("utf-8")
    package = replace(package, calcs=shown)
    files.update(html.site_static(package.project))
    files[site.INDEX_PAGE] = html.render_index(package).encode("utf-8")
    files[site.project_pdf_path(package.project.number)] = pdf.project_pdf(package, pages, attachments)
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
    files, _ = calc_files(report, project, build_date(), EquationImages(), history=history,
                          signoff=signoff)
    out_dir = Path(out_dir)
    prefix = site.calc_dir(calc_number) + "/"
    for rel, data in sorted(files.items()):
        local = rel[len(prefix):] if rel.startswith(prefix) else rel
        path = out_dir / local
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(data)
    return out_dir
