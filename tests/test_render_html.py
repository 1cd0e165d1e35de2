"""Calc pages and the index: sections in order, links, escaping, themes, failed calcs."""

from __future__ import annotations

import posixpath
from html.parser import HTMLParser
from pathlib import Path

import pytest

from calcsheaf.errors import BuildError
from calcsheaf.render import plots, site
from calcsheaf.render.cautions import DRAFT_MARK, GENERAL, HAZARDS, calc_cautions
from calcsheaf.render.html import SECTIONS, render_calc, render_index, site_static
from calcsheaf.render.markdown_text import markdown_html
from test_render_fixtures import (
    BUILD_DATE, THEME_ONLY_ROOT, failed_report, package, project, report, standard_page,
)


class _Page(HTMLParser):
    """Ids, links, images and section order of one page."""

    def __init__(self, text: str) -> None:
        super().__init__()
        self.ids: list[str] = []
        self.hrefs: list[str] = []
        self.srcs: list[str] = []
        self.sections: list[str] = []
        self.maths = 0
        self.feed(text)

    def handle_starttag(self, tag, attrs):
        attrs = dict(attrs)
        if "id" in attrs:
            self.ids.append(attrs["id"])
        if tag == "a" and "href" in attrs:
            self.hrefs.append(attrs["href"])
        if tag in ("img", "script") and "src" in attrs:
            self.srcs.append(attrs["src"])
        if tag == "link" and "href" in attrs:
            self.srcs.append(attrs["href"])
        if tag == "section":
            self.sections.append(attrs.get("id", ""))
        if tag == "math":
            self.maths += 1


@pytest.fixture(scope="module")
def rendered():
    return standard_page(), THEME_ONLY_ROOT


def _site_files(page, root) -> set[str]:
    """Files the site holds: this page's assets, theme files, and what the build writes."""
    written = {site.calc_pdf_path(page.number), site.results_path(page.number),
               site.calc_page_path(page.number), site.INDEX_PAGE, site.SELFTEST_PAGE}
    return written | set(page.assets) | set(site_static(project(root)))


def _assert_links_resolve(html: str, page_path: str, files: set[str]) -> None:
    parsed = _Page(html)
    folder = posixpath.dirname(page_path)
    for href in parsed.hrefs + parsed.srcs:
        if href.startswith("#"):
            assert href[1:] in parsed.ids, f"broken anchor {href}"
        else:
            assert "://" not in href and not href.startswith("/"), href
            target = posixpath.normpath(posixpath.join(folder, href.split("#")[0]))
            assert target in files, f"broken link {href} -> {target}"


def test_every_section_present_in_order(rendered):
    page, _ = rendered
    parsed = _Page(page.html)
    assert parsed.sections == [section_id for section_id, _ in SECTIONS]
    for _, title in SECTIONS:
        assert title in page.html
    assert 'class="title-block"' in page.html
    assert page.html.index('class="title-block"') < page.html.index('id="revisions"')


def test_no_broken_internal_links(rendered):
    page, root = rendered
    _assert_links_resolve(page.html, site.calc_page_path(page.number), _site_files(page, root))
    assert "../selftest/index.html" in _Page(page.html).hrefs


def test_print_page_ids_are_prefixed_and_anchors_resolve(rendered):
    page, _ = rendered
    parsed = _Page(page.print_html)
    prefix = site.anchor_prefix(page.number)
    assert parsed.sections and all(s.startswith(prefix) for s in parsed.sections)
    for href in parsed.hrefs:
        assert href.startswith("#") and href[1:] in parsed.ids, href
    for src in parsed.srcs:
        target = posixpath.normpath(posixpath.join(page.number, src))
        assert target in page.print_assets, src


def test_screen_page_uses_mathml_and_print_page_svg(rendered):
    page, _ = rendered
    calc = report()
    shown = 1 + len(calc.derivation) + len(calc.equations) + len(calc.crosschecks)
    assert _Page(page.html).maths == shown
    assert "<math" not in page.print_html
    equation_images = [s for s in _Page(page.print_html).srcs if s.startswith("eq/")]
    assert len(equation_images) == shown


def test_user_text_is_escaped(rendered):
    page, _ = rendered
    assert "<script>" not in page.html and "<script>" not in page.print_html
    assert "&lt;script&gt;" in page.html
    assert "<strong>peak spring force</strong>" in page.html


def test_markdown_drops_local_links_and_images():
    html = markdown_html("[a](file:///etc/passwd) [b](../x.html) [c](https://example.org) "
                         "![logo](file:///tmp/logo.png) <img src=x>")
    assert "file:" not in html and "../x.html" not in html and "<img" not in html
    assert 'href="https://example.org"' in html


def test_open_assumption_flagged(rendered):
    page, _ = rendered
    assert "1 assumption(s) still OPEN" in page.html
    assert '<tr id="assumption-A2" class="open">' in page.html


def test_inputs_table_has_symbols_units_and_sources(rendered):
    page, _ = rendered
    assert "<i>θ</i>" in page.html                       # coordinates table
    assert '<a href="#ref-R1">R1</a>' in page.html       # source links to the reference
    assert "m/s<sup>2</sup>" in page.html


def test_draft_mark_only_on_drafts(tmp_path):
    draft = render_calc(failed_report(), project(tmp_path))
    issued_report = failed_report()
    issued_report.status = "issued"
    issued = render_calc(issued_report, project(tmp_path))
    assert DRAFT_MARK in draft.html and DRAFT_MARK in draft.print_html
    assert DRAFT_MARK not in issued.html and DRAFT_MARK not in issued.print_html


def test_failed_calc_renders_short_failure_page(tmp_path):
    page = render_calc(failed_report(), project(tmp_path))
    assert "This calc failed" in page.html
    assert "mass matrix is singular" in page.html and "calcs/C-666.toml:12" in page.html
    assert 'id="derivation"' not in page.html and page.assets == {}
    for text in GENERAL:
        assert text in page.html
    _assert_links_resolve(page.html, site.calc_page_path(page.number),
                          _site_files(page, tmp_path))


def test_cautions_cover_general_and_hazards():
    calc = report(hazards=("people_under_load", "rotating_machinery"))
    texts = calc_cautions(calc)
    assert texts[:len(GENERAL)] == list(GENERAL)
    assert HAZARDS["people_under_load"] in texts and HAZARDS["rotating_machinery"] in texts
    assert HAZARDS["suspended_load"] not in texts
    with pytest.raises(BuildError, match="unknown hazard"):
        calc_cautions(report(hazards=("lasers",)))


def test_rendering_is_reproducible(rendered, tmp_path):
    page, root = rendered
    again = render_calc(report(), project(root), build_date=BUILD_DATE)
    assert again.html == page.html and again.print_html == page.print_html
    assert again.assets == page.assets and again.print_assets == page.print_assets


def test_project_templates_override_the_theme(tmp_path):
    (tmp_path / "templates" / "sections").mkdir(parents=True)
    (tmp_path / "templates" / "static").mkdir()
    (tmp_path / "templates" / "sections" / "cautions.html.j2").write_text(
        "<p class=\"firm-cautions\">{{ cautions | length }} cautions</p>\n")
    (tmp_path / "templates" / "static" / "calcsheaf.css").write_text("body { color: navy }\n")
    page = render_calc(failed_report(), project(tmp_path))
    assert f'<p class="firm-cautions">{len(GENERAL)} cautions</p>' in page.html
    assert page.print_assets["static/calcsheaf.css"] == b"body { color: navy }\n"
    assert b"@page" in page.print_assets["static/print.css"]       # default still there


def test_undefined_name_in_override_is_a_build_error(tmp_path):
    (tmp_path / "templates" / "sections").mkdir(parents=True)
    (tmp_path / "templates" / "sections" / "software.html.j2").write_text("{{ no_such_name }}\n")
    with pytest.raises(BuildError) as caught:
        render_calc(failed_report(), project(tmp_path))
    assert "no_such_name" in caught.value.problem and caught.value.fix


def test_unknown_paper_size_is_a_build_error(tmp_path):
    with pytest.raises(BuildError, match="paper"):
        render_calc(failed_report(), project(tmp_path, paper="A3"))


def test_index_lists_calcs_with_working_links(tmp_path):
    calcs = [report("C-201"), failed_report("C-666")]
    pkg = package(tmp_path, calcs)
    html = render_index(pkg)
    for calc in calcs:
        assert f'<a href="{site.calc_page_path(calc.number)}">{calc.number}</a>' in html
    assert "0.640" in html                       # largest D/C of C-201
    assert "(failed: not analysed)" in html
    files = {site.INDEX_PAGE, site.SELFTEST_PAGE, site.project_pdf_path("P-9001")}
    for calc in calcs:
        files |= {site.calc_page_path(calc.number), site.calc_pdf_path(calc.number),
                  site.results_path(calc.number)}
    _assert_links_resolve(html, site.INDEX_PAGE, files | set(site_static(pkg.project)))


def test_calc_number_must_be_safe_as_folder():
    with pytest.raises(BuildError):
        site.calc_dir("../etc")
    with pytest.raises(BuildError):
        site.calc_dir("C 1/2")


def test_plots_label_axes_with_units_grid_and_legend(monkeypatch):
    figures = []
    monkeypatch.setattr(plots, "_svg", lambda figure: figures.append(figure) or b"")
    calc = report()
    plots.time_history_plots(calc.time_history)
    plots.energy_plot(calc.energy)
    plots.frequency_response_plots(calc.frequency_response)
    assert len(figures) == 3 + 1 + 2              # three units; energy; two FRF units
    for figure in figures:
        for axes in figure.axes:
            assert "[" in axes.get_ylabel() and "]" in axes.get_ylabel()
            assert axes.get_legend() is not None
            assert any(line.get_visible() for line in axes.get_xgridlines())
        assert "[s]" in figure.axes[-1].get_xlabel() or "[Hz]" in figure.axes[-1].get_xlabel()


def test_plot_svg_is_reproducible_without_dates():
    history = report().time_history
    first = plots.time_history_plots(history)
    second = plots.time_history_plots(history)
    assert [p.svg for p in first] == [p.svg for p in second]
    assert all(b"<dc:date>" not in p.svg for p in first)


def test_theme_is_found_from_the_package():
    from calcsheaf.render.theme import default_theme_dir
    theme_dir = default_theme_dir()
    assert (theme_dir / "calc.html.j2").is_file()
    assert theme_dir == Path(__file__).resolve().parents[1] / "templates"


def test_revision_history_and_signoff_in_title_block(tmp_path):
    calc = failed_report()
    calc.revision = "C"
    history = [{"rev": "A", "date": "2024-01-10", "status": "superseded",
                "description": "First issue",
                "prepared_by": "Ann Example", "checked_by": "Ben Example", "content_hash": "x"},
               {"rev": "B", "date": "2024-03-02", "status": "issued", "description": "New buffer",
                "prepared_by": "Ann Example", "checked_by": "Ben Example"}]
    signoff = {"prepared_by": "Ann Example", "prepared_date": "2024-04-01", "checked_by": "",
               "checked_date": "", "stale_reason": "checker signed an older content", "records": {}}
    html = render_calc(calc, project(tmp_path), revisions=history, signoff=signoff).html
    table = html[html.index('id="revisions"'):html.index('id="failure"')]
    rows = ("First issue", "New buffer", "Working revision, not issued")
    positions = [table.index(row) for row in rows]
    assert positions == sorted(positions)
    block = html[html.index('class="title-block"'):html.index('id="revisions"')]
    assert "Ann Example" in block and "2024-04-01" in block and "not signed" in block
    assert "checker signed an older content" in block


def test_plot_captions_use_symbols_and_units(rendered):
    page, _ = rendered
    assert "<figcaption>Time history: <i>z</i> [m]</figcaption>" in page.html
    assert "<figcaption>Frequency response: <i>θ</i> [rad]</figcaption>" in page.html
    assert len([p for p in page.assets if p.endswith(".svg")]) == 6


def test_linearised_matrices_shown_without_zero_skew_parts(rendered):
    page, _ = rendered
    modes = page.html[page.html.index('id="modes"'):page.html.index('id="frequency-response"')]
    captions = [c.split("<i>")[1].split("</i>")[0] for c in modes.split("<caption>")[1:]]
    assert captions == ["M", "C", "K"]                    # G and N are zero here
    assert ">20000<" in modes and ">176.5<" in modes
