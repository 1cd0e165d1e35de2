"""Where each file of the built site lives, relative to the site root.

The build command writes files at these paths; pages link to them, so both
must agree.  Calc folders are named after the calc number.
"""

from __future__ import annotations

import re

from calcsheaf.errors import BuildError

INDEX_PAGE = "index.html"
SELFTEST_PAGE = "selftest/index.html"
STATIC_DIR = "static"
_SAFE = re.compile(r"[A-Za-z0-9][A-Za-z0-9._-]*")


def calc_dir(number: str) -> str:
    """The calc's folder name; refuses numbers that are not safe as a folder name."""
    if not _SAFE.fullmatch(number) or ".." in number:
        raise BuildError(f"calc number {number!r} cannot name a folder of the site",
                         key="calc.number",
                         fix="use letters, digits, '.', '_' and '-' only, e.g. C-102")
    return number


def calc_page_path(number: str) -> str:
    return f"{calc_dir(number)}/index.html"


def calc_pdf_name(number: str) -> str:
    return f"{calc_dir(number)}.pdf"


def calc_pdf_path(number: str) -> str:
    return f"{calc_dir(number)}/{calc_pdf_name(number)}"


def results_path(number: str) -> str:
    return f"{calc_dir(number)}/results.json"


def project_pdf_path(project_number: str) -> str:
    return f"{calc_dir(project_number)}.pdf"


def anchor_prefix(number: str) -> str:
    """Prefix of element ids in the print page, unique per calc in the combined PDF."""
    return "c-" + re.sub(r"[^a-z0-9]+", "-", number.lower()).strip("-") + "-"
