"""(c) A calc PDF with ~50 equations and 5 plots against a text-only PDF of the same pages.

The calc is the spring chain of springs.py with a time history, a frequency
response and one output: its derivation shows 6 n + 3 equations (n = 8 gives
51) and its pages carry the plots of displacements, velocities, the output,
the energy audit and the frequency response.
The report comes from `pipeline.analyse_one` (not timed).  Then:

- calcsheaf: `html.render_calc` with an empty equation cache (templating,
  every equation drawn as SVG glyphs, plots) plus `pdf.calc_pdf`;
- baseline: the same print HTML with every equation image replaced by its
  LaTeX text and every plot by its caption, laid out by WeasyPrint through the
  same `pdf.calc_pdf` (same CSS, fonts, title blocks and PDF/A writer).
"""

from __future__ import annotations

import dataclasses
import re
import tempfile
import time
from pathlib import Path

import springs

IMAGE = re.compile(r'<img class="eq" src="[^"]*" alt="([^"]*)">')
PLOT = re.compile(r'<img src="plots/[^"]*" alt="([^"]*)">')
PROJECT_TOML = '[project]\nnumber = "P-BENCH"\nname = "Benchmark project (generated)"\n'


def equations_as_text(print_html: str) -> str:
    """The print page with every equation image replaced by its LaTeX text."""
    return IMAGE.sub(lambda m: f'<code class="eq">{m.group(1)}</code>', print_html)


def text_only(print_html: str) -> str:
    """The print page with equations as LaTeX text and plots as their captions."""
    return PLOT.sub(lambda m: f'<p class="plot">{m.group(1)}</p>', equations_as_text(print_html))


def _page_count(pdf: bytes) -> int:
    import io

    from pypdf import PdfReader
    return len(PdfReader(io.BytesIO(pdf)).pages)


def analysed_calc(n: int, folder: Path):
    from calcsheaf.pipeline import analyse_one
    from calcsheaf.project import load_project

    (folder / "project.toml").write_text(PROJECT_TOML, encoding="utf-8")
    calcs = folder / "calcs"
    calcs.mkdir()
    path = calcs / "b-pdf.toml"
    path.write_text(springs.calc_toml(n, "B-PDF"), encoding="utf-8")
    report = analyse_one(path)
    if report.error is not None:
        raise RuntimeError(f"benchmark calc failed: {report.error}")
    return report, load_project(folder)


def measure(n: int, repeat: int) -> dict:
    from calcsheaf.render.html import render_calc
    from calcsheaf.render.mathsvg import EquationImages
    from calcsheaf.render.pdf import calc_pdf

    with tempfile.TemporaryDirectory() as folder:
        report, project = analysed_calc(n, Path(folder))
        attachments = {"b-pdf.toml": report.source_text.encode("utf-8")}
        full, plain = [], []
        for _ in range(repeat):
            started = time.perf_counter()
            page = render_calc(report, project, images=EquationImages())
            rendered = time.perf_counter()
            pdf = calc_pdf(page, attachments)
            full.append((time.perf_counter() - started, rendered - started))
            baseline_page = dataclasses.replace(page, print_html=text_only(page.print_html))
            started = time.perf_counter()
            baseline = calc_pdf(baseline_page, attachments)
            plain.append(time.perf_counter() - started)
        with_plots = dataclasses.replace(page, print_html=equations_as_text(page.print_html))
        started = time.perf_counter()
        calc_pdf(with_plots, attachments)
        plots_kept = time.perf_counter() - started
    equations = len(IMAGE.findall(page.print_html))
    plot_count = len(PLOT.findall(page.print_html))
    best = min(full)
    return {"calcsheaf_s": best[0], "render_s": best[1], "baseline_s": min(plain),
            "plots_kept_s": plots_kept,
            "pages": _page_count(pdf), "baseline_pages": _page_count(baseline),
            "equations": equations, "plots": plot_count}
