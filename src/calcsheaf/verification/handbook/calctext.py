"""Shared pieces of the self-test calc files (TOML text in the keys of design.md)."""

from __future__ import annotations


def header(key: str, title: str, source: str, assumptions: list[tuple[str, str]]) -> str:
    """[calc], [[assumption]] and [[reference]] tables of the self-test calc of `key`.

    `assumptions` are (text, basis) pairs, numbered A1, A2, ...
    """
    lines = [
        "[calc]",
        f'number = "HB-{key.upper().replace("_", "-")}"',
        f'title = "Self-test: {title}"',
        f'purpose = "Models handbook case `{key}` through the general machinery '
        '(symbolic Lagrange derivation and numerical analyses) and compares every '
        'quantity the case provides with its closed form."',
        "",
    ]
    for number, (text, basis) in enumerate(assumptions, start=1):
        lines += ["[[assumption]]", f'id = "A{number}"', f'text = "{text}"',
                  f'basis = "{basis}"', ""]
    lines += ["[[reference]]", 'id = "R1"', f'text = "{source}"', ""]
    return "\n".join(lines)


def number(value: float) -> str:
    """A float written with 15 significant digits for a calc file."""
    return f"{value:.15g}"
