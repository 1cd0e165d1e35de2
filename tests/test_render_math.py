"""Symbols, equation layout, MathML and SVG equations."""

from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest
import sympy as sp

from calcsheaf.render import mathsvg
from calcsheaf.render.equation import ROW_WIDTH, layout, visible_width
from calcsheaf.render.mathml import equation_mathml
from calcsheaf.render.mathsvg import EquationImages, equation_key
from calcsheaf.calcfile.names import name_html, name_latex
from calcsheaf.render.symbols import latex

MATHML = "{http://www.w3.org/1998/Math/MathML}"


@pytest.mark.parametrize("name, expected", [
    ("theta", r"\theta"),
    ("omega_n", r"\omega_{n}"),
    ("Omega", r"\Omega"),
    ("dot(x)", r"\dot{x}"),
    ("ddot(x)", r"\ddot{x}"),
    ("dot(theta_2)", r"\dot{\theta}_{2}"),
    ("x1", "x_{1}"),
    ("F_iso", r"F_{\mathrm{iso}}"),
    ("k_theta", r"k_{\theta}"),
    ("L_rope", r"L_{\mathrm{rope}}"),
])
def test_name_latex(name, expected):
    assert name_latex(name) == expected


def test_name_html_uses_greek_letters_and_combining_dots():
    assert name_html("omega_n") == "<i>ω</i><sub>n</sub>"
    assert name_html("dot(x)") == "<i>x\u0307</i>"
    assert name_html("ddot(theta)") == "<i>θ\u0308</i>"
    assert name_html("Omega") == "Ω"


def test_function_arguments_in_plain_parentheses():
    theta, t, omega = sp.Symbol("theta"), sp.Symbol("t"), sp.Symbol("Omega")
    text = latex(sp.sin(theta) + sp.cos(omega * t) + sp.atan2(theta, t))
    assert r"\left(" not in text
    assert r"\sin(\theta)" in text and r"\cos(\Omega t)" in text
    assert r"\mathrm{atan2}(\theta, t)" in text


def test_products_put_rates_after_coefficients():
    m, ddx = sp.Symbol("m"), sp.Symbol("ddot(x)")
    assert latex(m * ddx) == r"m \ddot{x}"
    assert latex(m / 2 * sp.Symbol("dot(x)") ** 2) == r"\frac{m \dot{x}^{2}}{2}"


def _long_sum():
    syms = sp.symbols("a0:14")
    theta = sp.Symbol("theta")
    return sum(s * sp.Symbol("dot(theta)") ** 2 * sp.cos(theta) for s in syms)


def test_long_sum_is_broken_into_rows_within_width():
    expr = _long_sum()
    eq = layout("Q_{z}", expr)
    assert len(eq.rows) > 1
    assert all(visible_width(row) <= ROW_WIDTH for row in eq.rows)
    assert all(row.startswith(("+", "-")) for row in eq.rows[1:])
    # Breaking only moves terms between rows: joined back, it is the unbroken equation.
    assert " ".join(eq.rows) == latex(expr)


def test_short_equation_stays_on_one_row():
    eq = layout("T", sp.Symbol("m") / 2 * sp.Symbol("dot(x)") ** 2)
    assert eq.rows == (r"\frac{m \dot{x}^{2}}{2}",)
    assert eq.latex == r"T = \frac{m \dot{x}^{2}}{2}"


def test_equality_shows_both_sides():
    x = sp.Symbol("x")
    eq = layout("ignored", sp.Eq(sp.Symbol("k") * x, 0))
    assert eq.latex == "k x = 0"


def test_mathml_of_broken_equation_is_an_aligned_table():
    eq = layout(r"Q_{\theta}", _long_sum())
    root = ET.fromstring(equation_mathml(eq))
    assert root.tag == MATHML + "math" and root.get("display") == "block"
    table = root.find(MATHML + "mtable")
    assert table is not None and len(table.findall(MATHML + "mtr")) == len(eq.rows)
    letters = {el.text for el in root.iter(MATHML + "mi")}
    assert "θ" in letters                      # theta printed as the Greek letter
    assert root.find(f".//{MATHML}mover") is not None   # the dot of dot(theta)
    assert root.get("alttext") == eq.latex


def test_svg_is_deterministic_vector_glyphs():
    eq = layout(r"\ddot{x}", -sp.Symbol("omega_n") ** 2 * sp.Symbol("x"))
    first, second = mathsvg.draw(eq), mathsvg.draw(eq)
    assert first == second
    root = ET.fromstring(first)
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert root.find(".//{http://www.w3.org/2000/svg}path") is not None
    assert b"<text" not in first                # glyphs are outlines, no font needed


def test_svg_cache_in_memory_and_on_disk(tmp_path, monkeypatch):
    eq = layout("V", sp.Symbol("k") / 2 * sp.Symbol("x") ** 2)
    images = EquationImages(tmp_path / "eq")
    data = images.svg(eq)
    assert (tmp_path / "eq" / f"{equation_key(eq)}.svg").read_bytes() == data

    def refuse(_eq):
        raise AssertionError("drawn again although cached")

    monkeypatch.setattr(mathsvg, "draw", refuse)
    assert images.svg(eq) == data                          # memory
    assert EquationImages(tmp_path / "eq").svg(eq) == data  # disk, fresh instance


def test_sums_come_before_rates_in_products():
    m, big_m, ddz = sp.Symbol("m"), sp.Symbol("M"), sp.Symbol("ddot(z)")
    assert latex((big_m + m) * ddz) == r"\left(M + m\right) \ddot{z}"
    assert latex(m * ddz * sp.cos(sp.Symbol("theta"))) == r"m \ddot{z} \cos(\theta)"


@pytest.mark.parametrize("value, text", [
    (20000.0, "20000"), (0.0069523, "0.006952"), (-1.2e6, "−1.2×10<sup>6</sup>"),
    (3e-9, "3×10<sup>−9</sup>"), (12.0, "12"), (9.80665, "9.807"), (0.5, "0.5"),
    (999999.0, "999999"), (0.0, "0"), (None, "—"),
])
def test_number_formatting(value, text):
    from calcsheaf.render.formatting import number
    assert number(value) == text
