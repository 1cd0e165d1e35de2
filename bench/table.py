"""Rows of the benchmark table and their text and Markdown forms.

Every ratio is calcsheaf's time over the baseline's time: lower is better.
A target is a largest allowed ratio (and, for the no-op rebuild, also a
largest time in seconds).  A measurement stopped at its cap is shown as
"> cap"; its ratio is then a bound and is judged as such.
"""

from __future__ import annotations

from dataclasses import dataclass

HEADER = ("measurement", "calcsheaf", "baseline", "ratio", "target", "met?")


@dataclass(frozen=True)
class Time:
    """A measured time; `capped` means the run was stopped at `value` and took longer."""
    value: float
    unit: str = "s"
    capped: bool = False

    def text(self) -> str:
        shown = f"{self.value:.3g} {self.unit}" if self.value < 1000 else f"{self.value:.0f} {self.unit}"
        return f"> {shown}" if self.capped else shown


@dataclass(frozen=True)
class Row:
    measurement: str
    calcsheaf: Time | None
    baseline: Time | None
    baseline_name: str = ""
    max_ratio: float | None = None            # target: ratio at most this
    max_seconds: float | None = None          # target: calcsheaf time at most this
    target_text: str = ""
    note: str = ""                            # replaces the figures (e.g. "pending")

    def ratio_text(self) -> str:
        if self.note or self.calcsheaf is None or self.baseline is None:
            return ""
        ratio = self.calcsheaf.value / self.baseline.value
        if self.calcsheaf.capped and not self.baseline.capped:
            return f"> {ratio:.3g}"
        if self.baseline.capped and not self.calcsheaf.capped:
            return f"< {ratio:.3g}"
        return "?" if self.calcsheaf.capped else f"{ratio:.3g}"

    def met(self) -> str:
        if self.note:
            return self.note
        if self.max_ratio is None and self.max_seconds is None:
            return ""
        if self.calcsheaf is None or self.baseline is None or self.calcsheaf.capped:
            return "no"
        ratio = self.calcsheaf.value / self.baseline.value
        ok = self.max_ratio is None or ratio <= self.max_ratio
        if self.max_seconds is not None:
            ok = ok and self.calcsheaf.value < self.max_seconds
        return "yes" if ok else "no"

    def cells(self) -> tuple[str, ...]:
        baseline = self.baseline.text() if self.baseline else ""
        if baseline and self.baseline_name:
            baseline = f"{baseline} ({self.baseline_name})"
        return (self.measurement, self.calcsheaf.text() if self.calcsheaf else "", baseline,
                self.ratio_text(), self.target_text, self.met())


def text_table(rows: list[Row]) -> str:
    cells = [HEADER] + [r.cells() for r in rows]
    widths = [max(len(c[i]) for c in cells) for i in range(len(HEADER))]
    lines = ["  ".join(c[i].ljust(widths[i]) for i in range(len(HEADER))).rstrip() for c in cells]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def markdown_table(rows: list[Row]) -> str:
    lines = ["| " + " | ".join(HEADER) + " |", "|" + "---|" * len(HEADER)]
    lines += ["| " + " | ".join(c.replace("|", "\\|") for c in r.cells()) + " |" for r in rows]
    return "\n".join(lines)
