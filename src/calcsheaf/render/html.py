"""HTML pages of the site: one page per calc and the project index.

`render_calc` turns one `CalcReport` into a `CalcPage`: the site page (MathML
equations), the print page the PDF is made from (SVG equations, sheet rules)
and the files both refer to.  Writers format; they never compute results.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from markupsafe import Markup

from calcsheaf.errors import BuildError
from calcsheaf.model import CalcReport, PackageModel, ProjectInfo, Step
from calcsheaf.render import formatting, plots, site, theme
from calcsheaf.render.cautions import (DRAFT_MARK, GENERAL, HAZARD_MARK_LEAD, HAZARD_MARK_TAIL,
                                       calc_cautions, hazard_cautions, hazard_marks)
from calcsheaf.render.equation import Equation, inline, layout
from calcsheaf.render.mathml import equation_mathml
from calcsheaf.render.mathsvg import EquationImages, equation_key
from calcsheaf.calcfile.names import name_html

SECTIONS = (
    ("revisions", "Revision history"),
    ("contents", "Contents"),
    ("purpose", "Purpose and scope"),
    ("summary", "Summary of results and criteria"),
    ("inputs", "Inputs"),
    ("assumptions", "Assumptions"),
    ("references", "References"),
    ("method", "Method"),
    ("derivation", "Derivation"),
    ("equations", "Equations of motion"),
    ("equilibrium", "Static equilibrium"),
    ("modes", "Linearised modes"),
    ("frequency-response", "Frequency response"),
    ("time-history", "Time history"),
    ("energy", "Energy audit"),
    ("crosschecks", "Cross-checks against closed-form cases"),
    ("criteria", "Acceptance criteria"),
    ("cautions", "Cautions"),
    ("software", "Software identification"),
)
PAPER = {"A4": "A4", "LETTER": "letter"}
LAGRANGE = Equation(
    r"\frac{d}{dt}\frac{\partial L}{\partial \dot{q}_{j}} - \frac{\partial L}{\partial q_{j}}"
    r" + \frac{\partial R}{\partial \dot{q}_{j}}", ("Q_{j}",))
REVISION_KEYS = ("rev", "date", "status", "description", "prepared_by", "checked_by")
SIGNOFF_KEYS = ("prepared_by", "prepared_date", "checked_by", "checked_date", "stale_reason")


@dataclass(frozen=True)
class ShownEquation:
    latex: str
    mathml: Markup
    image: str                    # SVG path relative to the calc folder


@dataclass(frozen=True)
class ShownPlot:
    title: str                    # plain text, for alt text
    caption: Markup               # title with engineers' symbols and unit
    image: str                    # SVG path relative to the calc folder


@dataclass
class CalcPage:
    """A rendered calc: site page, print page and the files they refer to."""
    number: str
    html: str                                    # write to site.calc_page_path(number)
    print_html: str                              # input of pdf.calc_pdf
    assets: dict[str, bytes]                     # site-root paths -> bytes (plots)
    print_assets: dict[str, bytes] = field(default_factory=dict)   # site-root paths the PDF reads
    paper: str = "A4"
    build_date: str = ""


def paper_size(project: ProjectInfo) -> str:
    """CSS page size for the project's paper setting."""
    try:
        return PAPER[project.paper.upper()]
    except KeyError:
        raise BuildError(f"unknown paper size {project.paper!r}", file="project.toml",
                         key="project.paper", fix='use "A4" or "Letter"') from None


class _Collector:
    """Gathers equations and plots of one calc as files under its folder."""

    def __init__(self, number: str, images: EquationImages) -> None:
        self.folder = site.calc_dir(number)
        self.images = images
        self.site_files: dict[str, bytes] = {}
        self.print_files: dict[str, bytes] = {}

    def equation(self, eq: Equation, display: str = "block") -> ShownEquation:
        image = f"eq/{equation_key(eq)}.svg"
        self.print_files[f"{self.folder}/{image}"] = self.images.svg(eq)
        return ShownEquation(eq.latex, Markup(equation_mathml(eq, display=display)), image)

    def step(self, step: Step) -> ShownEquation:
        return self.equation(layout(step.symbol, step.expr))

    def plot(self, plot: plots.Plot) -> ShownPlot:
        image = f"plots/{plot.name}.svg"
        self.site_files[f"{self.folder}/{image}"] = plot.svg
        return ShownPlot(plot.title, _caption(plot), image)


def _caption(plot: plots.Plot) -> Markup:
    if not plot.symbols:
        return Markup.escape(plot.title)
    kind = Markup.escape(plot.title.split(":")[0])
    symbols = Markup(", ").join(Markup(name_html(name)) for name in plot.symbols)
    return Markup("{}: {} [{}]").format(kind, symbols, formatting.unit(plot.unit))


def _plots(report: CalcReport, collect: _Collector) -> dict:
    shown = {"frequency": [], "time": [], "energy": None}
    if report.frequency_response is not None:
        shown["frequency"] = [collect.plot(p) for p in
                              plots.frequency_response_plots(report.frequency_response)]
    if report.time_history is not None:
        shown["time"] = [collect.plot(p) for p in plots.time_history_plots(report.time_history)]
    if report.energy is not None:
        shown["energy"] = collect.plot(plots.energy_plot(report.energy))
    return shown


def _rows(items: list[dict] | None, keys: tuple[str, ...]) -> list[dict]:
    return [{key: str(item.get(key, "") or "") for key in keys} for item in items or []]


def _revisions(report: CalcReport, revisions: list[dict] | None, build_date: str,
               signoff: dict | None = None) -> list[dict]:
    """Issued revisions, oldest first, plus the revision shown here when it is not one of them
    (its names and date from the current sign-offs)."""
    rows = _rows(revisions, REVISION_KEYS)
    if report.revision not in {row["rev"] for row in rows}:
        signed = signoff or {}
        note = "Working revision, not issued" if report.status == "draft" else "This revision"
        rows.append({"rev": report.revision,
                     "date": signed.get("checked_date") or signed.get("prepared_date") or build_date,
                     "status": report.status, "description": note,
                     "prepared_by": signed.get("prepared_by", ""),
                     "checked_by": signed.get("checked_by", "")})
    return rows


def _links(number: str) -> dict[str, str]:
    return {
        "index": "../" + site.INDEX_PAGE,
        "pdf": site.calc_pdf_name(number),
        "results": "results.json",
        "selftest": "../" + site.SELFTEST_PAGE,
        "static": "../" + site.STATIC_DIR,
    }


def _context(report: CalcReport, project: ProjectInfo, collect: _Collector, *,
             build_date: str, revisions, signoff) -> dict:
    return {
        "calc": report,
        "project": project,
        "sections": SECTIONS,
        "revisions": _revisions(report, revisions, build_date, signoff),
        "signoff": _rows([signoff or {}], SIGNOFF_KEYS)[0],
        "build_date": build_date,
        "draft": report.status == "draft",
        "draft_mark": DRAFT_MARK,
        "hazard_marks": hazard_marks(report.hazards),
        "hazard_lead": HAZARD_MARK_LEAD,
        "hazard_tail": HAZARD_MARK_TAIL,
        "links": _links(report.number),
        "paper": paper_size(project),
    }


def _analysed_context(report: CalcReport, collect: _Collector) -> dict:
    return {
        "lagrange": collect.equation(LAGRANGE),
        "derivation": [(step, collect.step(step)) for step in report.derivation],
        "equations": [(step, collect.step(step)) for step in report.equations],
        "formulas": [collect.equation(inline(row.formula), display="inline")
                     for row in report.crosschecks],
        "plots": _plots(report, collect),
        "cautions": calc_cautions(report),
        "failed_checks": [c for c in report.checks if not c.passed],
    }


def render_calc(report: CalcReport, project: ProjectInfo, *, build_date: str = "",
                revisions: list[dict] | None = None, signoff: dict | None = None,
                images: EquationImages | None = None, changes: dict | None = None) -> CalcPage:
    """Render one calc (a failed one as a short failure page).

    `revisions`: dicts with rev, date, status, description, prepared_by, checked_by
    (oldest first); `changes`: what changed since the latest issued revision
    ({a, b, rows: [{section, item, old, new, change}]}); `signoff`: dict with prepared_by, prepared_date, checked_by,
    checked_date (names and ISO dates as text) and stale_reason (why other
    signatures no longer count, or "").  Other keys are ignored.  `images`
    caches equation SVGs.
    """
    env = theme.environment(project.root)
    collect = _Collector(report.number, images or EquationImages())
    context = _context(report, project, collect, build_date=build_date,
                       revisions=revisions, signoff=signoff)
    context["changes"] = changes
    if report.error is not None:
        template = "calc_failed.html.j2"
        context.update(cautions=[*GENERAL, *hazard_cautions(report.hazards)], error=str(report.error))
    else:
        template = "calc.html.j2"
        context.update(_analysed_context(report, collect))
    screen = theme.render(env, template, medium="screen", prefix="", **context)
    printed = theme.render(env, template, medium="print",
                           prefix=site.anchor_prefix(report.number), **context)
    static = theme.static_assets(project.root)
    return CalcPage(number=report.number, html=screen, print_html=printed,
                    assets=dict(sorted(collect.site_files.items())),
                    print_assets=dict(sorted({**static, **collect.site_files,
                                              **collect.print_files}.items())),
                    paper=paper_size(project), build_date=build_date)


def _index_rows(package: PackageModel) -> list[dict]:
    rows = []
    for report in sorted(package.calcs, key=lambda r: r.number):
        rows.append({
            "calc": report,
            "page": site.calc_page_path(report.number),
            "pdf": site.calc_pdf_path(report.number),
            "results": site.results_path(report.number),
            "checks_passed": sum(1 for c in report.checks if c.passed),
            "checks_failed": sum(1 for c in report.checks if not c.passed),
        })
    return rows


def render_index(package: PackageModel, *, medium: str = "screen") -> str:
    """The project index page (site root); medium "print" gives the combined PDF's cover."""
    env = theme.environment(package.project.root)
    return theme.render(
        env, "index.html.j2", medium=medium, project=package.project,
        rows=_index_rows(package), build_date=package.build_date,
        software=package.software, paper=paper_size(package.project),
        cautions=list(GENERAL),
        links={"project_pdf": site.project_pdf_path(package.project.number),
               "selftest": site.SELFTEST_PAGE, "static": site.STATIC_DIR})


def site_static(project: ProjectInfo) -> dict[str, bytes]:
    """Theme static files (CSS, images) to write under the site root."""
    return theme.static_assets(project.root)
