"""`calcsheaf check PROJECT`: load, validate, derive and analyse every calc; one line each."""

from __future__ import annotations

import sys
from pathlib import Path

from ..pipeline import analyse_project


def check(project_root: Path, out=None, err=None) -> int:
    """Print one line per calc; 0 when every calc passes, 1 otherwise."""
    out = out or sys.stdout
    err = err or sys.stderr
    project, outcomes = analyse_project(Path(project_root))
    failed = 0
    for outcome in outcomes:
        report = outcome.report
        if report.error is not None:
            failed += 1
            print(f"FAIL  {outcome.path.name}: could not be analysed", file=out)
            print(_indent(getattr(report.error, "message", str(report.error))), file=err)
            continue
        passed = sum(c.passed for c in report.checks)
        ratio = report.largest_ratio
        dc = f"{ratio:.2f}" if ratio is not None else "n/a"
        energy = f"{report.energy.max_relative_residual:.1e}" if report.energy else "n/a"
        verdict = "PASS" if report.passed else "FAIL"
        failed += not report.passed
        print(f"{verdict}  {report.number:<10} {report.title}  checks {passed}/{len(report.checks)}"
              f"  max D/C {dc}  energy residual {energy}", file=out)
        if report.equilibrium is not None and not report.equilibrium.stable:
            print(_indent(f"{outcome.path.name}: {_instability(report.equilibrium)}"), file=out)
        _dependent_crosschecks(report, out)
        for c in report.checks:
            if not c.passed:
                print(_indent(f"{outcome.path.name}: {c.kind}: {c.name}: {c.detail}"), file=err)
            elif "outside the case's validity limits" in c.detail:
                print(_indent(f"{outcome.path.name}: note: {c.name}: {c.detail}"), file=out)
    total = len(outcomes)
    print(f"{total - failed} of {total} calc(s) passed ({project.number} {project.name})", file=out)
    return 1 if failed else 0


def _instability(eq) -> str:
    """'unstable: growth rate ... 1/s, doubling time ... s' (or why stability is unknown)."""
    if eq.growth_rate_per_s != eq.growth_rate_per_s:          # NaN: no growing root found
        return f"stability: {eq.verdict}"
    expected = " (expected: [analysis] expect_unstable = true)" if eq.expected_unstable else ""
    return (f"unstable: growth rate {eq.growth_rate_per_s:.4g} 1/s, doubling time "
            f"{eq.doubling_time_s:.4g} s{expected}")


def _dependent_crosschecks(report, out) -> None:
    """Say which crosschecks cannot fail on their own (they count as failed checks)."""
    for x in report.crosschecks:
        if not x.independent:
            print(_indent(f"crosscheck not independent: {x.case}: {x.quantity} = {x.query}: "
                          f"{x.dependence}"), file=out)


def _indent(text: str) -> str:
    return "\n".join("    " + line for line in text.splitlines())

