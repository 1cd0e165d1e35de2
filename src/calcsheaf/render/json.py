"""results.json: the machine-readable results of one calc (a writer: no computation).

Every value is in the unit named beside it; non-finite numbers are written null.
"""

from __future__ import annotations

import json
import math

from ..model import CalcReport, ProjectInfo


def _num(x):
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def results_dict(report: CalcReport, project: ProjectInfo | None = None) -> dict:
    data: dict = {
        "calc": {"number": report.number, "title": report.title, "revision": report.revision,
                 "status": report.status},
        "project": {"number": project.number, "name": project.name} if project else {},
        "input_hash": report.input_hash,
    }
    if report.error is not None:
        data["error"] = getattr(report.error, "message", str(report.error))
        data["passed"] = False
        return data
    if report.equilibrium is not None:
        eq = report.equilibrium
        data["equilibrium"] = {name: {"value": _num(value), "unit": eq.units[name]}
                               for name, value in eq.values.items()}
        data["equilibrium_state"] = {
            "kind": eq.kind, "time_s": _num(eq.time_s), "note": eq.note,
            "velocities": {name: {"value": _num(v), "unit": f"{eq.units[name]}/s"}
                           for name, v in eq.velocities.items()}}
        data["stability"] = {"stable": eq.stable, "verdict": eq.verdict,
                             "growth_rate_per_s": _num(eq.growth_rate_per_s),
                             "doubling_time_s": _num(eq.doubling_time_s),
                             "expect_unstable": eq.expected_unstable}
        data["constraint_forces_at_rest"] = {
            name: {"value": _num(value), "unit": eq.multiplier_units.get(name, "")}
            for name, value in eq.multipliers.items()}
    data["modes"] = [_mode(m) for m in report.modes]
    data["results"] = {r.name: {"value": _num(r.value), "unit": r.unit, "label": r.label, "expr": r.expr}
                       for r in report.results}
    data["outputs"] = {o.name: {"peak": _num(o.peak), "max": _num(o.max), "min": _num(o.min),
                                "unit": o.unit, "label": o.label} for o in report.outputs}
    if report.frequency_response is not None:
        data["frequency_response"] = _frequency_response(report.frequency_response)
    if report.energy is not None:
        e = report.energy
        data["energy_audit"] = {"max_relative_residual": _num(e.max_relative_residual),
                                "tolerance": e.tolerance, "pass": e.passed, "natural": e.natural,
                                "notes": list(e.notes)}
    if report.time_history is not None:
        th = report.time_history
        data["time_history"] = {
            "duration_s": _num(th.t[-1]) if len(th.t) else None, "points": int(len(th.t)),
            "integrators": [{"method": s.method, "success": s.success, "status": s.status,
                             "message": s.message, "nfev": s.nfev} for s in (th.primary, th.secondary)],
            "agreement": _num(th.agreement), "agreement_tolerance": th.agreement_tolerance,
            "constraint_drift": _num(th.constraint_drift)}
    data["criteria"] = [{"name": c.name, "demand": _num(c.demand), "capacity": _num(c.capacity),
                         "unit": c.unit, "ratio": _num(c.ratio), "pass": c.passed,
                         "reference": c.reference, "demand_expr": c.demand_expr,
                         "capacity_expr": c.capacity_expr} for c in report.criteria]
    data["crosschecks"] = [{"case": x.case, "quantity": x.quantity, "handbook": _num(x.handbook),
                            "computed": _num(x.computed), "relative_error": _num(x.relative_error),
                            "tolerance": x.tolerance, "pass": x.passed, "source": x.source,
                            "formula": x.formula, "tolerance_reason": x.tolerance_reason,
                            "validity": [{"limit": text, "holds": holds} for text, holds in x.validity],
                            "unit": x.unit, "query": x.query,
                            "inputs": {i.name: {"expr": i.expr, "value": _num(i.value), "unit": i.unit}
                                       for i in x.inputs},
                            "independent": x.independent, "dependence": x.dependence}
                           for x in report.crosschecks]
    data["checks"] = [{"kind": c.kind, "name": c.name, "pass": c.passed, "detail": c.detail}
                      for c in report.checks]
    data["software"] = dict(sorted(report.software.items()))
    data["passed"] = report.passed
    return data


def _mode(m) -> dict:
    """One mode: f_n = |λ|/2π, ζ = −Re λ/|λ|, f_d = |Im λ|/2π of the same root; complex shapes
    add magnitude and phase beside the real shape (its real part)."""
    return {"index": m.index, "kind": m.kind, "natural_frequency_hz": _num(m.natural_frequency_hz),
            "natural_frequency_rad_s": _num(m.natural_frequency_rad_s),
            "damping_ratio": _num(m.damping_ratio), "damped_frequency_hz": _num(m.damped_frequency_hz),
            "shape": {k: _num(v) for k, v in m.shape.items()},
            "roots_per_s": [{"re": _num(re), "im": _num(im)} for re, im in m.roots],
            "growth_rate_per_s": _num(m.growth_rate_per_s), "doubling_time_s": _num(m.doubling_time_s),
            "shape_complex": m.shape_magnitude is not None,
            "shape_magnitude": None if m.shape_magnitude is None
            else {k: _num(v) for k, v in m.shape_magnitude.items()},
            "shape_phase_deg": None if m.shape_phase_deg is None
            else {k: _num(v) for k, v in m.shape_phase_deg.items()}}
def _frequency_response(fr) -> dict:
    """Range, excitation, each quantity's largest amplitude (display unit) and what is omitted."""
    freqs = fr.frequency_hz
    return {"from_hz": _num(freqs[0]) if len(freqs) else None,
            "to_hz": _num(freqs[-1]) if len(freqs) else None, "points": int(len(freqs)),
            "excitation": dict(fr.excitation),
            "peaks": {name: {"amplitude": _num(p.amplitude), "unit": fr.units.get(name, ""),
                             "frequency_hz": _num(p.frequency_hz)} for name, p in fr.peaks.items()},
            "omitted": dict(fr.omitted)}


def results_json(report: CalcReport, project: ProjectInfo | None = None) -> bytes:
    """Canonical bytes of results.json (sorted keys, two-space indent, trailing newline)."""
    text = json.dumps(results_dict(report, project), indent=2, sort_keys=True,
                      ensure_ascii=False, allow_nan=False)
    return (text + "\n").encode("utf-8")
