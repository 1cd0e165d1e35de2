"""Acceptance criteria (demand/capacity) and handbook crosschecks of one calc."""

from __future__ import annotations

import math

from ..errors import CalcsheafError, InputError
from ..model import Check, CriterionRow, CrosscheckRow
from .queries import QueryContext


def judge_criteria(ctx: QueryContext) -> tuple[list[CriterionRow], list[Check]]:
    """D/C ratio = demand / capacity; a criterion passes when the ratio is at most 1."""
    rows, checks = [], []
    for i, c in enumerate(ctx.spec.criteria, start=1):
        key = f"criterion[{i}]"
        try:
            demand = ctx.evaluate(c.demand, f"{key}.demand")
            capacity = ctx.evaluate(c.capacity, f"{key}.capacity")
        except CalcsheafError as exc:
            checks.append(Check("criterion", c.name, False, exc.message))
            continue
        if capacity <= 0:
            checks.append(Check("criterion", c.name, False,
                                f"capacity {capacity:g} is not positive; a D/C ratio needs a positive capacity"))
            continue
        ratio = abs(demand) / capacity
        passed = ratio <= 1.0
        rows.append(CriterionRow(name=c.name, demand_expr=c.demand_text, capacity_expr=c.capacity_text,
                                 demand=demand / c.factor, capacity=capacity / c.factor, unit=c.unit,
                                 ratio=ratio, passed=passed, reference=c.reference))
        checks.append(Check("criterion", c.name, passed, f"D/C = {ratio:.3f}"))
    return rows, checks


def run_crosschecks(ctx: QueryContext) -> tuple[list[CrosscheckRow], list[Check]]:
    """Compare each listed quantity with the handbook case's closed form."""
    from .handbook import get_case

    rows, checks = [], []
    for i, x in enumerate(ctx.spec.crosschecks, start=1):
        key = f"crosscheck[{i}]"
        try:
            case = get_case(x.case)
        except InputError as exc:
            exc.file, exc.line, exc.key = str(ctx.spec.path), ctx.spec.line(f"{key}.case"), f"{key}.case"
            raise exc.located()
        missing = sorted(set(case.inputs) - {n for n, _ in x.inputs})
        unknown = sorted({n for n, _ in x.inputs} - set(case.inputs))
        if missing or unknown:
            raise InputError(f"case '{case.key}' takes inputs {', '.join(sorted(case.inputs))}"
                             + (f"; missing {', '.join(missing)}" if missing else "")
                             + (f"; unknown {', '.join(unknown)}" if unknown else ""),
                             file=str(ctx.spec.path), line=ctx.spec.line(f"{key}.inputs"),
                             key=f"{key}.inputs", fix="map every input of the case to an expression")
        inputs = {n: ctx.evaluate(e, f"{key}.inputs.{n}") for n, e in x.inputs}
        handbook = case.evaluate(inputs)
        limits = tuple(case.check_limits(inputs))
        for quantity, expr, text in x.compare:
            if quantity not in case.provides:
                raise InputError(f"case '{case.key}' does not provide '{quantity}'",
                                 file=str(ctx.spec.path), line=ctx.spec.line(f"{key}.compare"),
                                 key=f"{key}.compare.{quantity}",
                                 fix=f"compare one of: {', '.join(sorted(case.provides))}")
            tolerance = x.tolerance if x.tolerance is not None else case.tolerance
            reason = "set in the calc" if x.tolerance is not None else case.tolerance_reason
            try:
                computed = ctx.evaluate(expr, f"{key}.compare.{quantity}")
            except CalcsheafError as exc:
                checks.append(Check("crosscheck", f"{case.key}: {quantity}", False, exc.message))
                continue
            expected = handbook[quantity]
            error = abs(computed - expected) / abs(expected) if expected != 0 else abs(computed)
            passed = bool(math.isfinite(error) and error <= tolerance)
            rows.append(CrosscheckRow(case=case.key, title=case.title, quantity=quantity,
                                      formula=case.provides[quantity].formula, handbook=expected,
                                      computed=computed, relative_error=error, tolerance=tolerance,
                                      tolerance_reason=reason, passed=passed, source=case.source,
                                      validity=limits))
            broken = [text for text, holds in limits if not holds]
            note = f"; outside the case's validity limits: {'; '.join(broken)}" if broken else ""
            checks.append(Check("crosscheck", f"{case.key}: {quantity}", passed,
                                f"relative error {error:.2e} (tolerance {tolerance:g}){note}"))
    return rows, checks
