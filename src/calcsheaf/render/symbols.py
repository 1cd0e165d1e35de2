"""Calc names as engineers' symbols: LaTeX for equations, HTML for tables.

A calc name is a plain identifier: `theta` -> θ, `Omega` -> Ω, `omega_n` -> ω
with subscript n, `x1` -> x with subscript 1, `F_iso` -> F with an upright
subscript "iso".  The velocity `dot(x)` and acceleration `ddot(x)` carry one or
two dots over the base letter.  Every math writer prints sympy expressions
through `CalcLatexPrinter`, so HTML and PDF show the same symbols.  The display of
one name lives in calcfile/names.py, where the loader also uses it.
"""

from __future__ import annotations

import re

import sympy
from sympy.printing.latex import LatexPrinter, accepted_latex_functions
from sympy.printing.precedence import PRECEDENCE

from ..calcfile.names import DOTTED, name_latex


def symbol_names(expr) -> dict[sympy.Symbol, str]:
    """The sympy `symbol_names` mapping for every symbol of `expr`."""
    symbols = getattr(expr, "free_symbols", set())
    return {s: name_latex(s.name) for s in sorted(symbols, key=lambda s: s.name)}


class CalcLatexPrinter(LatexPrinter):
    """LaTeX printer with engineers' symbols and plain parentheses around arguments."""

    def _print_Symbol(self, expr, style="plain"):
        return name_latex(expr.name)

    def _function_name(self, name: str) -> str:
        if name in accepted_latex_functions:
            return "\\" + name
        return r"\mathrm{" + re.sub(r"[^A-Za-z0-9]", "", name) + "}"

    def _print_Function(self, expr, exp=None):
        name = self._function_name(expr.func.__name__)
        if exp is not None:
            name = f"{name}^{{{exp}}}"
        args = ", ".join(self._print(arg) for arg in expr.args)
        return f"{name}({args})"

    def _factor_rank(self, factor) -> int:
        """Order of factors in a product: numbers, symbols, sums, rates, then functions."""
        base = factor.base if factor.is_Pow else factor
        if base.is_Number:
            return 0
        if base.is_Symbol:
            return 3 if DOTTED.fullmatch(base.name) else 1
        return 2 if base.is_Add else 4

    def _product(self, expr) -> str:
        """A product without denominator, e.g. `m \\ddot{x}` rather than `\\ddot{x} m`."""
        if not expr.is_Mul:
            return self._print(expr)
        coeff, factors = expr.as_coeff_mul()
        ordered = sorted(factors, key=self._factor_rank)
        text = " ".join(self.parenthesize(f, PRECEDENCE["Mul"]) for f in ordered)
        if coeff == 1:
            return text
        if coeff == -1:
            return "- " + text
        return self.parenthesize(coeff, PRECEDENCE["Mul"]) + " " + text

    def _print_Mul(self, expr):
        sign = ""
        if expr.could_extract_minus_sign():
            sign, expr = "- ", -expr
        numer, denom = sympy.fraction(expr, exact=True)
        if denom == 1:
            return sign + self._product(numer)
        return sign + r"\frac{" + self._product(numer) + "}{" + self._product(denom) + "}"

    def _print_Heaviside(self, expr, exp=None):
        return self._print_Function(sympy.Function("step")(expr.args[0]), exp)

    def _print_Min(self, expr, exp=None):
        return self._print_Function(sympy.Function("min")(*expr.args), exp)

    def _print_Max(self, expr, exp=None):
        return self._print_Function(sympy.Function("max")(*expr.args), exp)

    def _print_Abs(self, expr, exp=None):
        tex = r"\left|" + self._print(expr.args[0]) + r"\right|"
        return f"{tex}^{{{exp}}}" if exp is not None else tex


def latex(expr) -> str:
    """LaTeX of a sympy expression (or Matrix) with calc symbols."""
    return CalcLatexPrinter({"mul_symbol": None}).doprint(expr)


def ordered_terms(expr) -> list:
    """Terms of a sum in the order the printer shows them."""
    return CalcLatexPrinter()._as_ordered_terms(expr)
