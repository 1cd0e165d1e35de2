"""The software verification suite: every handbook case built as a calc.

Each case's self-test calc goes through the general machinery (symbolic
derivation, numerical analyses, queries), never the closed form, and its
crosscheck rows compare the two.  A case passes when its calc passes every
check and has at least one crosscheck row.
"""

from __future__ import annotations

import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from ..model import CalcReport
from ..software import versions
from .handbook import CASES


@dataclass(frozen=True)
class CaseOutcome:
    key: str
    title: str
    family: str
    source: str
    report: CalcReport

    @property
    def passed(self) -> bool:
        return self.report.passed and bool(self.report.crosschecks)


@dataclass
class SelftestReport:
    outcomes: list[CaseOutcome]
    software: dict[str, str] = field(default_factory=versions)

    @property
    def passed(self) -> bool:
        return all(o.passed for o in self.outcomes)

    def as_dict(self) -> dict:
        rows = []
        for o in self.outcomes:
            r = o.report
            rows.append({
                "case": o.key, "title": o.title, "family": o.family, "source": o.source,
                "pass": o.passed,
                "error": getattr(r.error, "message", None) if r.error else None,
                "comparisons": [{"quantity": x.quantity, "handbook": x.handbook, "computed": x.computed,
                                 "relative_error": x.relative_error, "tolerance": x.tolerance,
                                 "pass": x.passed} for x in r.crosschecks],
                "failed_checks": [f"{c.kind}: {c.name}: {c.detail}" for c in r.checks if not c.passed],
            })
        return {"software": dict(sorted(self.software.items())), "cases": rows,
                "passed": self.passed, "count": len(rows),
                "failed": sum(not r["pass"] for r in rows)}


def run_selftest(analyse_many) -> SelftestReport:
    """Build every case's calc in a temporary project; `analyse_many(paths)` gives reports."""
    with tempfile.TemporaryDirectory(prefix="calcsheaf-selftest-") as tmp:
        root = Path(tmp)
        (root / "calcs").mkdir()
        paths = []
        for key, case in CASES.items():
            path = root / "calcs" / f"{key}.toml"
            path.write_text(case.selftest_calc, encoding="utf-8")
            paths.append(path)
        reports = analyse_many(paths)
        outcomes = [CaseOutcome(key, case.title, case.family, case.source, report)
                    for (key, case), report in zip(CASES.items(), reports)]
    for o in outcomes:
        o.report.source_path = Path(f"{o.key}.toml")
    return SelftestReport(outcomes)
