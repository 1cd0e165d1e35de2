"""Calc names as engineers' symbols: LaTeX for equations, HTML for tables.

A calc name is a plain identifier: `theta` -> θ, `Omega` -> Ω, `omega_n` -> ω
with subscript n, `x1` -> x with subscript 1, `F_iso` -> F with an upright
subscript "iso".  The velocity `dot(x)` and acceleration `ddot(x)` carry one or
two dots over the base letter.  Every math writer prints sympy expressions
through `CalcLatexPrinter`, so HTML and PDF show the same symbols.
"""

from __future__ import annotations

import html
import re

import sympy
from sympy.printing.latex import LatexPrinter, accepted_latex_functions
from sympy.printing.precedence import PRECEDENCE

GREEK = (
    "alpha beta gamma delta epsilon varepsilon zeta eta theta vartheta iota kappa "
    "lambda lamda mu nu xi pi varpi rho varrho sigma varsigma tau upsilon phi varphi "
    "chi psi omega"
).split()
GREEK_UPPER = "Gamma Delta Theta Lambda Xi Pi Sigma Upsilon Phi Psi Omega".split()

_UNICODE_GREEK = dict(zip(
    "alpha beta gamma delta epsilon zeta eta theta iota kappa lambda mu nu xi "
    "pi rho sigma tau upsilon phi chi psi omega".split(),
    "αβγδεζηθικλμνξπρστυφχψω"))
_UNICODE_GREEK.update({
    "lamda": "λ", "varepsilon": "ε", "vartheta": "ϑ", "varpi": "ϖ", "varrho": "ϱ",
    "varsigma": "ς", "varphi": "φ"})
_UNICODE_GREEK.update(dict(zip(GREEK_UPPER, "ΓΔΘΛΞΠΣΥΦΨΩ")))

_DOTTED = re.compile(r"(d{1,2})ot\((.+)\)")
_TRAILING_DIGITS = re.compile(r"([A-Za-z]+?)(\d+)")
_IDENTIFIER = re.compile(r"[A-Za-z][A-Za-z0-9]*")


def split_name(name: str) -> tuple[int, str, tuple[str, ...]]:
    """Split a calc name into (number of time derivatives, base, subscripts).

    `ddot(omega_n)` -> (2, "omega", ("n",)); `x12` -> (0, "x", ("12",)).
    """
    dots = 0
    match = _DOTTED.fullmatch(name)
    if match:
        dots = len(match[1])
        name = match[2]
    base, *subs = [part for part in name.split("_") if part]
    digits = _TRAILING_DIGITS.fullmatch(base)
    if digits and not subs:
        base, subs = digits[1], [digits[2]]
    return dots, base, tuple(subs)


def _latex_word(word: str) -> str:
    """One word of a name: greek letter, single italic letter or upright text."""
    if word in GREEK:
        return r"\lambda" if word == "lamda" else "\\" + word
    if word in GREEK_UPPER:
        return "\\" + word
    if word.isdigit() or (len(word) == 1 and word.isalpha()):
        return word
    if not _IDENTIFIER.fullmatch(word):
        return r"\mathrm{" + re.sub(r"[^A-Za-z0-9]", "", word) + "}"
    return r"\mathrm{" + word + "}"


def name_latex(name: str) -> str:
    """LaTeX of a calc name, e.g. `dot(theta_2)` -> r"\\dot{\\theta}_{2}"."""
    dots, base, subs = split_name(name)
    text = _latex_word(base)
    if dots:
        text = ("\\dot{" if dots == 1 else "\\ddot{") + text + "}"
    if subs:
        text += "_{" + ",".join(_latex_word(s) for s in subs) + "}"
    return text


def _html_word(word: str, *, base: bool) -> str:
    if word in _UNICODE_GREEK:
        letter = _UNICODE_GREEK[word]
        return f"<i>{letter}</i>" if base and word not in GREEK_UPPER else letter
    if base and len(word) == 1:
        return f"<i>{html.escape(word)}</i>"
    return html.escape(word)


def name_html(name: str) -> str:
    """HTML of a calc name for tables and text: θ, ω<sub>n</sub>, ẋ (combining dots)."""
    dots, base, subs = split_name(name)
    text = _html_word(base, base=True)
    if dots:
        mark = "\u0307" if dots == 1 else "\u0308"
        text = text.replace("</i>", mark + "</i>") if text.endswith("</i>") else text + mark
    if subs:
        text += "<sub>" + ",".join(_html_word(s, base=False) for s in subs) + "</sub>"
    return text


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
            return 3 if _DOTTED.fullmatch(base.name) else 1
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
