"""Acceptance criteria (demand/capacity) and handbook crosschecks of one calc."""

from __future__ import annotations

import math

import sympy as sp
from sympy.core.function import AppliedUndef

from ..calcfile.expressions import TIME, query_name, symbol, velocity
from ..errors import CalcsheafError, InputError
from ..mechanics.codegen import numeric
from ..model import Check, CriterionRow, CrosscheckInput, CrosscheckRow
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
    """Compare each listed quantity with the handbook case's closed form.

    A row passes only when its relative error is within tolerance and the comparison
    is independent (see `independence`); a dependent row fails with the reason.
    """
    rows, checks = [], []
    for i, x in enumerate(ctx.spec.crosschecks, start=1):
        key = f"crosscheck[{i}]"
        case = _case(ctx, x, key)
        inputs = {n: ctx.evaluate(e, f"{key}.inputs.{n}") for n, e in x.inputs}
        texts = dict(x.input_texts)
        shown = tuple(CrosscheckInput(n, texts.get(n, sp.sstr(e)), inputs[n], case.inputs[n])
                      for n, e in x.inputs)
        handbook = case.evaluate(inputs)
        limits = tuple(case.check_limits(inputs))
        for quantity, expr, text in x.compare:
            _check_provides(ctx, case, key, quantity)
            tolerance = x.tolerance if x.tolerance is not None else case.tolerance
            reason = "set in the calc" if x.tolerance is not None else case.tolerance_reason
            try:
                computed = ctx.evaluate(expr, f"{key}.compare.{quantity}")
            except CalcsheafError as exc:
                checks.append(Check("crosscheck", f"{case.key}: {quantity}", False, exc.message))
                continue
            dependence = independence(ctx, x, expr, tolerance, f"{key}.compare.{quantity}")
            expected = handbook[quantity]
            error = abs(computed - expected) / abs(expected) if expected != 0 else abs(computed)
            within = bool(math.isfinite(error) and error <= tolerance)
            rows.append(CrosscheckRow(case=case.key, title=case.title, quantity=quantity,
                                      formula=case.provides[quantity].formula, handbook=expected,
                                      computed=computed, relative_error=error, tolerance=tolerance,
                                      tolerance_reason=reason, passed=within and not dependence,
                                      source=case.source, validity=limits, inputs=shown,
                                      query=text, unit=case.provides[quantity].unit,
                                      independent=not dependence, dependence=dependence))
            checks.append(Check("crosscheck", f"{case.key}: {quantity}", within and not dependence,
                                _detail(error, tolerance, limits, dependence)))
    return rows, checks


def _case(ctx: QueryContext, x, key: str):
    """The handbook case of a crosscheck, with its inputs matched; InputError otherwise."""
    from .handbook import get_case

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
    return case


def _check_provides(ctx: QueryContext, case, key: str, quantity: str) -> None:
    if quantity not in case.provides:
        raise InputError(f"case '{case.key}' does not provide '{quantity}'",
                         file=str(ctx.spec.path), line=ctx.spec.line(f"{key}.compare"),
                         key=f"{key}.compare.{quantity}",
                         fix=f"compare one of: {', '.join(sorted(case.provides))}")


def _detail(error: float, tolerance: float, limits, dependence: str) -> str:
    broken = [text for text, holds in limits if not holds]
    note = f"; outside the case's validity limits: {'; '.join(broken)}" if broken else ""
    head = f"not independent: {dependence}; " if dependence else ""
    return f"{head}relative error {error:.2e} (tolerance {tolerance:g}){note}"


# ---- independence ------------------------------------------------------------------
# One family per mode: every query of the same mode's root (undamped_frequency(i) taken
# with mode i); frf_peak_frequency, a resonance, belongs to every mode's family.
_MODE_QUERIES = frozenset({"natural_frequency", "damping_ratio", "damped_frequency",
                           "undamped_frequency"})
_ANY_MODE = frozenset({"frf_peak_frequency"})
# at(q, t) with t at most this fraction of the shortest natural period or of the sample
# step is the initial state: a harmonic motion has moved by at most (2π·0.01)²/2 ≈ 0.2 %
# of its amplitude.
EARLY_FRACTION = 0.01
_EXTREMES = frozenset({"max", "min", "peak"})


def independence(ctx: QueryContext, crosscheck, compared: sp.Expr, tolerance: float,
                 key: str) -> str:
    """Why comparing `compared` with the case cannot fail on its own; "" when it can.

    Not independent: (1) a handbook input is computed from the same analysis result as
    the compared value (the same query; for modes, any query of the same mode's family:
    natural, damped and undamped frequency, damping ratio, and frf_peak_frequency for
    every mode), so the calc's result is fed back into the closed form; (2) the compared
    value is only the initial state: initial(), at(..., t) with t at most EARLY_FRACTION
    of the shortest natural period or of the sample step (t = 0 included), or
    max/min/peak of a state expression whose extreme is its value at t = 0.  [[result]] names are followed to their expressions.
    (3) the compared value uses parameters only (no query: the closed form evaluated
    again, or a design value against the case's optimum), which checks the inputs and not
    the analysis; a design rule of that kind belongs in a [[criterion]].
    """
    compared = _expanded(ctx.spec, compared)
    calls = _query_calls(compared)
    compared_keys = {_quantity_key(c) for c in calls}
    for name, expr in crosscheck.inputs:
        shared = _shared({_quantity_key(c) for c in _query_calls(_expanded(ctx.spec, expr))},
                         compared_keys)
        if shared:
            return (f"handbook input {name} is computed from {_describe(shared[0])}, the calc "
                    "result being compared; give the case the calc's parameters instead")
    if not calls:
        return ("the compared value uses parameters only, no result of the analysis, so it "
                "checks the inputs against the closed form, not the calc; compare a query of "
                "the motion or the modes (e.g. natural_frequency(1)), or make it a [[criterion]]")
    if all(_initial_state(ctx, c, tolerance, key) for c in calls):
        return ("the compared value is the initial state given in the calc (or the state "
                f"at most {EARLY_FRACTION:.0%} of the shortest natural period or sample step "
                "after it), not a computed result; compare a query of the motion or the modes")
    return ""


def _expanded(spec, expr: sp.Expr) -> sp.Expr:
    """`expr` with every [[result]] name replaced by its expression, to any depth."""
    results = {symbol(r.name): r.expr for r in spec.results}
    for _ in range(len(results) + 1):
        replaced = expr.xreplace(results)
        if replaced == expr:
            break
        expr = replaced
    return expr


def _query_calls(expr: sp.Expr) -> set:
    return {a for a in expr.atoms(AppliedUndef) if query_name(a.func) is not None}


def _quantity_key(call) -> tuple:
    """What a query measures: one mode root for the mode queries, ("mode", "*") for a
    resonance frequency (any mode), else the call itself."""
    name = query_name(call.func)
    if name in _MODE_QUERIES:
        return ("mode", sp.sstr(call.args[0]))
    if name in _ANY_MODE:
        return ("mode", "*")
    return (name, *(sp.sstr(a) for a in call.args))


def _shared(a: set, b: set) -> list:
    """The quantities of `a` also measured in `b`, sorted; ("mode", "*") meets every mode."""
    wild = ("mode", "*")
    found = a & b
    if wild in a:
        found |= {k for k in b if k[0] == "mode"}
    if wild in b:
        found |= {k for k in a if k[0] == "mode"}
    return sorted(found)


def _describe(quantity: tuple) -> str:
    if quantity == ("mode", "*"):
        return "a resonance frequency (the frequency family of every mode)"
    if quantity[0] == "mode":
        return f"mode {quantity[1]} (its frequency family)"
    return f"{quantity[0]}({', '.join(quantity[1:])})"


def _initial_state(ctx: QueryContext, call, tolerance: float, key: str) -> bool:
    """True when the query returns only the state given at t = 0."""
    name = query_name(call.func)
    if name not in _EXTREMES | {"initial", "at"}:
        return False
    outputs = {symbol(o.name): o.expr for o in ctx.spec.outputs}
    series = call.args[0].xreplace(outputs)
    if not _state_only(ctx.spec, series):
        return False
    if name == "initial":
        return True
    if name == "at":
        return float(numeric(call.args[1], ctx.params)) <= EARLY_FRACTION * _time_scale(ctx)
    try:
        value = ctx.evaluate(call, key)
        start = float(ctx.series(series)[0])
    except CalcsheafError:
        return False
    start = abs(start) if name == "peak" else start
    return abs(value - start) <= tolerance * max(abs(value), abs(start), 1e-300)


def _time_scale(ctx: QueryContext) -> float:
    """s: the shortest natural period of the modes, or the sample step when shorter or
    there are no modes; 0 when neither is known (then only t = 0 is the start)."""
    scales = [1.0 / md.natural_frequency_hz for md in ctx.modes
              if math.isfinite(md.natural_frequency_hz) and md.natural_frequency_hz > 0]
    th = ctx.spec.time_history
    if th is not None:
        scales.append(th.duration / (th.points - 1))
    return min(scales, default=0.0)


def _state_only(spec, expr: sp.Expr) -> bool:
    """Only coordinates, their velocities, parameters and time (no accelerations or forces)."""
    allowed = {symbol(p.name) for p in spec.parameters} | {TIME}
    for c in spec.coordinates:
        allowed |= {symbol(c.name), velocity(c.name)}
    return expr.free_symbols <= allowed
