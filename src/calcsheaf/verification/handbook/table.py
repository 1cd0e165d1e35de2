"""The Markdown table of every handbook case, as kept in docs/handbook.md."""

from __future__ import annotations

from typing import Mapping

from .case import Case

BEGIN = "<!-- BEGIN generated case table: calcsheaf.verification.handbook.table -->"
END = "<!-- END generated case table -->"


def _cell(text: str) -> str:
    return text.replace("|", r"\|").replace("\n", " ")


def case_section(case: Case) -> str:
    """One case: heading, then a table of its quantities, then limits, source, tolerance."""
    inputs = ", ".join(f"`{name}` [{unit}]" for name, unit in case.inputs.items())
    lines = [f"### `{case.key}`: {case.title}", "",
             f"Family: {case.family}. Inputs: {inputs}.", "",
             "| quantity | unit | formula |", "|---|---|---|"]
    for q in case.provides.values():
        lines.append(f"| `{q.name}` | {q.unit} | ${_cell(q.formula)}$ |")
    lines += ["", "Validity limits: " + "; ".join(lim.text for lim in case.limits) + ".", "",
              f"Source (as printed on the sheets): {case.source}.", "",
              f"Note on the source: {case.source_note}", "",
              f"Tolerance: {case.tolerance:g} ({case.tolerance_reason}).", ""]
    return "\n".join(lines)


def markdown(cases: Mapping[str, Case]) -> str:
    """Summary table and one section per case, between the BEGIN and END markers."""
    lines = [BEGIN, "", "| key | title | family | inputs | quantities | tolerance |",
             "|---|---|---|---|---|---|"]
    for case in cases.values():
        lines.append(f"| `{case.key}` | {case.title} | {case.family} | "
                     f"{', '.join(case.inputs)} | {', '.join(case.provides)} | "
                     f"{case.tolerance:g} |")
    lines.append("")
    lines += [case_section(case) for case in cases.values()]
    lines.append(END)
    return "\n".join(lines) + "\n"
