"""An equation laid out for the sheet: a left side and one or more rows.

Long sums are broken between terms so that each row stays within a readable
width; every row after the first starts with its operator (+ or −).  Both math
writers (MathML for HTML, SVG for the PDF) read this one layout.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import sympy

from calcsheaf.render.symbols import latex, ordered_terms

ROW_WIDTH = 64          # estimated glyph widths per row on an A4 / Letter sheet
FUNCTION_NAMES = ("sin", "cos", "tan", "sinh", "cosh", "tanh", "exp", "log", "ln",
                  "arcsin", "arccos", "arctan", "min", "max")


@dataclass(frozen=True)
class Equation:
    lhs: str                      # LaTeX of the left side, may be ""
    rows: tuple[str, ...]         # LaTeX of the right side, one entry per row

    @property
    def latex(self) -> str:
        """The whole equation as one LaTeX text (also the cache key of its SVG)."""
        if len(self.rows) == 1:
            return f"{self.lhs} = {self.rows[0]}" if self.lhs else self.rows[0]
        body = r" \\ &\quad ".join(self.rows)
        return r"\begin{aligned} " + self.lhs + " &= " + body + r" \end{aligned}"


def visible_width(tex: str) -> int:
    """Rough count of glyphs a LaTeX text shows (a fraction counts both parts)."""
    tex = re.sub(r"\\(left|right|mathrm|dot|ddot|quad|frac|begin\{\w+\}|end\{\w+\})", "", tex)
    tex = re.sub(r"\\(" + "|".join(FUNCTION_NAMES) + r")\b", "fff", tex)
    tex = re.sub(r"\\[A-Za-z]+", "x", tex)
    tex = re.sub(r"[-+=]", "ooo", tex)
    return len(re.sub(r"[{}^_ \\]", "", tex))


def _term_texts(expr) -> list[str]:
    """LaTeX of each term of a sum, each after the first with its leading sign."""
    texts = []
    for index, term in enumerate(ordered_terms(expr)):
        tex = latex(term)
        if index and not tex.startswith("-"):
            tex = "+ " + tex
        texts.append(tex)
    return texts


def _rows(lhs: str, expr, width: int) -> tuple[str, ...]:
    if not isinstance(expr, sympy.Add) or visible_width(lhs + latex(expr)) <= width:
        return (latex(expr),)
    rows: list[str] = []
    current = ""
    budget = width - visible_width(lhs)
    for tex in _term_texts(expr):
        if current and visible_width(current + tex) > budget:
            rows.append(current)
            current, budget = "", width
        current = f"{current} {tex}".strip()
    rows.append(current)
    return tuple(rows)


def layout(lhs: str, expr, width: int = ROW_WIDTH) -> Equation:
    """Lay out `lhs = expr`; a sympy Equality is shown as its own two sides instead."""
    if isinstance(expr, sympy.Equality):
        lhs, expr = latex(expr.lhs), expr.rhs
    return Equation(lhs, _rows(lhs, expr, width))


def inline(tex: str) -> Equation:
    """A LaTeX text shown as it is (e.g. a handbook formula)."""
    return Equation("", (tex,))
