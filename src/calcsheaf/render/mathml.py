"""Equations as presentation MathML for the HTML pages (browser-native, selectable).

A one-row equation becomes one `<math>`; a broken one becomes an `<mtable>`
aligned on the equals sign, one `<mtr>` per row.  The LaTeX text travels in
`alttext` for screen readers and copying.
"""

from __future__ import annotations

import html
import re

from latex2mathml.converter import convert

from calcsheaf.render.equation import Equation

_NAMESPACE = "http://www.w3.org/1998/Math/MathML"
_OUTER = re.compile(r"^<math[^>]*>(.*)</math>$", re.S)


def fragment(tex: str) -> str:
    """MathML content (no `<math>` wrapper) of a LaTeX fragment."""
    if not tex.strip():
        return "<mrow></mrow>"
    match = _OUTER.match(convert(tex))
    return match[1] if match else "<mrow></mrow>"


def _table(eq: Equation) -> str:
    rows = []
    for index, row in enumerate(eq.rows):
        left = fragment(eq.lhs) if index == 0 else "<mrow></mrow>"
        lead = "<mo>=</mo>" if index == 0 else '<mspace width="1em"></mspace>'
        rows.append(f"<mtr><mtd>{left}</mtd><mtd>{lead}{fragment(row)}</mtd></mtr>")
    return ('<mtable columnalign="right left" columnspacing="0.2em" displaystyle="true">'
            + "".join(rows) + "</mtable>")


def equation_mathml(eq: Equation, *, display: str = "block") -> str:
    """One `<math>` element for `eq`; `display` is "block" or "inline"."""
    body = _table(eq) if len(eq.rows) > 1 else fragment(eq.latex)
    alt = html.escape(eq.latex, quote=True)
    return f'<math xmlns="{_NAMESPACE}" display="{display}" alttext="{alt}">{body}</math>'
