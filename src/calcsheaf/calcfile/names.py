"""Calc names and how they display: LaTeX for equations, HTML for tables.

A calc name is a plain identifier: `theta` -> θ, `Omega` -> Ω, `omega_n` -> ω
with subscript n, `x1` -> x with subscript 1, `F_iso` -> F with an upright
subscript "iso".  The velocity `dot(x)` and acceleration `ddot(x)` carry one or
two dots over the base letter.  The loader refuses two names of one calc that
display alike (`m1` and `m_1` are both m₁; `phi` and `varphi` are both φ in HTML),
so a checker never reads one symbol for two quantities.
"""

from __future__ import annotations

import html
import re

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

DOTTED = re.compile(r"(d{1,2})ot\((.+)\)")
_TRAILING_DIGITS = re.compile(r"([A-Za-z]+?)(\d+)")
_IDENTIFIER = re.compile(r"[A-Za-z][A-Za-z0-9]*")


def split_name(name: str) -> tuple[int, str, tuple[str, ...]]:
    """Split a calc name into (number of time derivatives, base, subscripts).

    `ddot(omega_n)` -> (2, "omega", ("n",)); `x12` -> (0, "x", ("12",)).
    """
    dots = 0
    match = DOTTED.fullmatch(name)
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


def display_forms(name: str) -> tuple[str, str]:
    """The LaTeX and the HTML of a calc name: two names clash when either form is the same."""
    return name_latex(name), name_html(name)
