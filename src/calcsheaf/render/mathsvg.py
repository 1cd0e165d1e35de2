"""Equations as vector SVG (glyph outlines) for the PDF, which cannot lay out MathML.

The SVG is drawn by ziamath from the same MathML the HTML pages use, so both
media show one layout.  Output is deterministic; each equation is cached by its
LaTeX text in memory and, when a folder is given, on disk.
"""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import ziamath

from calcsheaf.render.equation import Equation
from calcsheaf.render.mathml import equation_mathml

FONT_SIZE_PX = 14.0           # matches the 10.5 pt body text of the print theme
_CACHE_VERSION = f"ziamath-{ziamath.__version__}-{FONT_SIZE_PX}"


def equation_key(eq: Equation) -> str:
    """Stable short name of an equation, from its LaTeX text."""
    return hashlib.sha256(f"{_CACHE_VERSION}\n{eq.latex}".encode()).hexdigest()[:20]


def draw(eq: Equation) -> bytes:
    """SVG bytes of one equation (no caching)."""
    math = ziamath.Math(equation_mathml(eq), size=FONT_SIZE_PX)
    return math.svg().encode("utf-8")


class EquationImages:
    """SVG images of equations, cached by LaTeX text.

    `folder`, when given, keeps `<key>.svg` files between builds (e.g. the
    project's `.calcsheaf-cache/equations`); it is created on first write.
    """

    def __init__(self, folder: Path | None = None) -> None:
        self.folder = folder
        self._memory: dict[str, bytes] = {}

    def svg(self, eq: Equation) -> bytes:
        key = equation_key(eq)
        if key in self._memory:
            return self._memory[key]
        data = self._read(key)
        if data is None:
            data = draw(eq)
            self._write(key, data)
        self._memory[key] = data
        return data

    def _read(self, key: str) -> bytes | None:
        if self.folder is None:
            return None
        path = self.folder / f"{key}.svg"
        return path.read_bytes() if path.is_file() else None

    def _write(self, key: str, data: bytes) -> None:
        if self.folder is None:
            return
        self.folder.mkdir(parents=True, exist_ok=True)
        partial = self.folder / f"{key}.svg.part-{os.getpid()}"
        partial.write_bytes(data)
        partial.replace(self.folder / f"{key}.svg")
