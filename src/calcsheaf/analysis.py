"""Run every analysis of one calc and assemble its CalcReport.

Order: load -> derive -> mass-matrix check -> equilibrium -> linearisation and
modes -> frequency response -> time history -> energy audit -> outputs ->
results -> criteria -> crosschecks.  Bad input raises; a failed analysis
becomes a failing Check in the report.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np

from . import model as m
from .calcfile.loader import load_calc
from .calcfile.spec import CalcSpec
from .errors import AnalysisError, CalcsheafError, DerivationError
from .isolation import stage
from .mechanics import frequency, linearise as lin, simulate
from .mechanics.codegen import NumericSystem, numeric
from .mechanics.energy import audit
from .mechanics.equilibrium import at_start, find_equilibrium
from .mechanics.lagrange import derive
from .software import versions
from .verification.checks import judge_criteria, run_crosschecks
from .verification.lagrange_check import equations_check
from .verification.queries import Friction, History, QueryContext, friction_values, output_gains


def analyse_calc_file(path: Path, project_toml: Path | None = None) -> m.CalcReport:
    """Load and analyse one calc file; bad input raises an errors.InputError."""
    return analyse(load_calc(Path(path)))


def failed_report(path: Path, error: CalcsheafError, raw: bytes | None = None) -> m.CalcReport:
    """The report of a calc that could not be loaded or derived at all.

    `raw`: the bytes of the calc file as read for this command (None reads the file)."""
    if raw is None:
        raw = path.read_bytes() if path.is_file() else b""
    return m.CalcReport(number=path.stem, title="(calc file could not be read)", source_path=path,
                        source_text=raw.decode("utf-8", "replace"),
                        input_hash=hashlib.sha256(raw).hexdigest(), error=error)


def analyse(spec: CalcSpec) -> m.CalcReport:
    report = _base_report(spec)
    report.software = versions()
    derivation = derive(spec)
    params = spec.parameter_values
    system = NumericSystem(derivation, params)
    initial = dict(spec.initial)
    q0 = np.array([initial[n] for n in spec.coordinate_names])
    qd0 = np.array([initial[f"dot({n})"] for n in spec.coordinate_names])
    _check_mass_matrix(spec, system, q0, qd0)
    _check_initial_constraints(spec, system, q0, qd0)
    report.derivation, report.equations = derivation.steps, derivation.equations
    stage("solve")
    checks = [m.Check("units", "dimensional consistency", True,
                      "every energy, force, output and query expression checked with its units")]
    checks.append(equations_check(spec, system))
    ctx = QueryContext(spec=spec, derivation=derivation, params=params, system=system)

    _equilibrium_and_modes(spec, derivation, system, q0, ctx, report, checks)
    _frequency_response(spec, ctx, report)
    if spec.time_history is not None:
        _time_history(spec, derivation, system, q0, qd0, ctx, report, checks)
    _results(spec, ctx, report, checks)
    rows, criterion_checks = judge_criteria(ctx)
    report.criteria = tuple(rows)
    cross, cross_checks = run_crosschecks(ctx)
    report.crosschecks = tuple(cross)
    open_items = [a.id for a in spec.assumptions if a.open]
    report.checks = tuple(checks + criterion_checks + cross_checks)
    if open_items:
        report.cautions = (f"Open assumptions ({', '.join(open_items)}) must be confirmed before issue.",)
    return report


def _base_report(spec: CalcSpec) -> m.CalcReport:
    raw = spec.source_text.encode("utf-8")     # the bytes loaded (UTF-8 round-trips exactly)
    return m.CalcReport(
        number=spec.number, title=spec.title, source_path=spec.path, source_text=spec.source_text,
        input_hash=hashlib.sha256(raw).hexdigest(), revision=spec.revision, purpose=spec.purpose,
        assumptions=spec.assumptions, references=spec.references,
        inputs=tuple(m.InputRow(p.name, p.given, p.value, p.unit, p.source, p.note) for p in spec.parameters),
        coordinates=tuple(m.CoordinateRow(c.name, c.unit, c.label) for c in spec.coordinates),
        hazards=spec.hazards)


def _check_mass_matrix(spec, system: NumericSystem, q0, qd0) -> None:
    try:
        M, _, _, _ = system.matrices(0.0, q0, qd0)
    except (ValueError, ArithmeticError) as exc:
        raise DerivationError(
            f"the equations of motion cannot be evaluated at the initial state "
            f"({type(exc).__name__}: {exc})", file=str(spec.path), line=spec.line("initial"),
            key="initial", fix="start where every energy, force and constraint expression is "
                               "defined (square roots and logarithms of positive numbers, no division by zero)"
        ) from None
    if not np.all(np.isfinite(M)):
        raise DerivationError(
            "the mass matrix (Hessian of the kinetic energy in the velocities) is not finite at "
            "the initial state", file=str(spec.path), line=spec.line("energy.kinetic"),
            key="energy.kinetic", fix="check the kinetic energy for terms that overflow or divide by zero")
    eig = np.linalg.eigvalsh((M + M.T) / 2)
    if not np.all(np.isfinite(eig)) or eig.min() <= 1e-12 * max(1.0, float(np.max(np.abs(eig)))):
        raise DerivationError(
            f"the mass matrix (Hessian of the kinetic energy in the velocities) is not positive "
            f"definite at the initial state (eigenvalues {', '.join(f'{e:.3g}' for e in eig)})",
            file=str(spec.path), line=spec.line("energy.kinetic"), key="energy.kinetic",
            fix="every coordinate needs a positive inertia: check the kinetic energy and the masses")


def _check_initial_constraints(spec, system, q0, qd0) -> None:
    if not system.m:
        return
    g = system.constraint_values(0.0, q0)
    rate = system.constraint_rate(0.0, q0, qd0)
    scale = max(1.0, float(np.max(np.abs(q0))))
    for i, c in enumerate(spec.constraints):
        if abs(g[i]) > 1e-9 * scale or abs(rate[i]) > 1e-9 * max(1.0, float(np.max(np.abs(qd0)))):
            raise AnalysisError(
                f"the initial values violate constraint '{c.name}': g = {g[i]:.6g}, "
                f"dg/dt = {rate[i]:.6g} at t = 0", file=str(spec.path), line=spec.line("initial"),
                key="initial", fix=f"choose initial positions and velocities that satisfy {c.name} = 0")


def _equilibrium_and_modes(spec, derivation, system, q0, ctx, report, checks) -> None:
    """Equilibrium (static, steady motion or time-frozen), linearisation, stability and modes.

    An unstable equilibrium fails the calc unless [analysis] expect_unstable = true
    (then a stable one fails it)."""
    if not spec.analysis.equilibrium:
        return
    try:
        point = find_equilibrium(system, q0)
    except AnalysisError as exc:
        exc.located(file=spec.path, line=spec.line("analysis") or spec.line("initial"))
        checks.append(m.Check("equilibrium", "static equilibrium", False, exc.message))
        return
    names = spec.coordinate_names
    about = at_start(derivation)        # steps and signs switching at t = 0 taken at t = 0⁺
    try:
        linear = lin.linearise(about, ctx.params, point.q, point.lambdas, point.qd, point.time)
        stability = lin.stability(linear)
        modes = lin.modes(linear, names) if spec.analysis.modes else ()
    except (AnalysisError, np.linalg.LinAlgError) as exc:
        problem = getattr(exc, "problem", f"the linearised system cannot be solved ({exc})")
        linear, modes = None, ()
        stability = lin.Stability(False, f"stability not determined: {problem}", float("nan"))
    expect = spec.analysis.expect_unstable
    report.equilibrium = m.Equilibrium(
        values={c.name: float(v) / c.factor for c, v in zip(spec.coordinates, point.q)},
        units={c.name: c.unit for c in spec.coordinates}, stable=stability.stable,
        verdict=stability.verdict, residual=point.residual,
        multipliers={c.name: float(v) / c.factor for c, v in zip(spec.constraints, point.lambdas)},
        kind=point.kind, time_s=point.time, note=point.note,
        velocities={c.name: float(v) / c.factor for c, v in zip(spec.coordinates, point.qd) if v != 0},
        growth_rate_per_s=stability.growth_rate, doubling_time_s=stability.doubling_time,
        expected_unstable=expect,
        multiplier_units={c.name: c.unit for c in spec.constraints})
    ctx.equilibrium = {n: float(v) for n, v in zip(names, point.q)}
    ctx.equilibrium_kind = point.kind
    checks.append(m.Check("equilibrium", "static equilibrium" if point.kind != "steady motion"
                          else "steady motion (relative equilibrium)", True,
                          f"found ({point.kind}, t = {point.time:g} s), residual {point.residual:.2e}; "
                          f"{point.note}; {stability.verdict}"))
    if linear is None:
        if spec.analysis.modes:
            error = AnalysisError(problem, file=spec.path, key="analysis.modes",
                                  line=spec.line("analysis") or spec.line("energy"),
                                  fix="set [analysis] modes = false, or smooth the offending term")
            checks.append(m.Check("modes", "linearisation and modes", False, error.message))
        return
    checks.append(_stability_check(spec, stability))
    ctx.linear, ctx.linear_point = linear, point.q
    report.linearisation = linear.full
    report.modes = ctx.modes = modes


def _stability_check(spec, stability) -> m.Check:
    """Passes when the equilibrium is as stable as the calc expects ([analysis] expect_unstable).

    A failure names where to act: the expect_unstable line when the file has one, else
    the [analysis] table to add (or, when it exists without the key, the key to add there)."""
    expect = spec.analysis.expect_unstable
    if stability.stable and not expect:
        return m.Check("stability", "stability of the equilibrium", True, stability.verdict)
    if not stability.stable and expect:
        return m.Check("stability", "stability of the equilibrium", True,
                       f"{stability.verdict} (expected: [analysis] expect_unstable = true)")
    if expect:
        where = f"{spec.path}:{spec.line('analysis.expect_unstable')}: analysis.expect_unstable"
        return m.Check("stability", "stability of the equilibrium", False,
                       f"{where}: the calc expects an unstable equilibrium but found {stability.verdict}. "
                       "Fix: check the model, or remove expect_unstable from [analysis]")
    if spec.line("analysis") is not None:
        where, add = (f"{spec.path}:{spec.line('analysis')}: analysis",
                      "add expect_unstable = true under [analysis]")
    else:
        where, add = (f"{spec.path}: analysis", "add an [analysis] table with expect_unstable = true")
    return m.Check("stability", "stability of the equilibrium", False,
                   f"{where}: {stability.verdict}. Fix: change the design so that it is stable, or, "
                   f"when the calc is about an unstable state (e.g. before a control acts), {add}")


def _frequency_response(spec, ctx: QueryContext, report) -> None:
    """Steady amplitudes and phases over the range, each in its display unit (mm, deg, kN).

    Outputs that have no linear response (they depend on time or a constraint force)
    or whose linearisation about the equilibrium is zero are listed as omitted, not plotted.
    """
    fr = spec.frequency_response
    if fr is None or ctx.linear is None:
        return
    names = spec.coordinate_names
    force = np.zeros(len(names))
    for name, expr, _ in fr.force:
        force[names.index(name)] = float(numeric(expr, ctx.params))
    ctx.force = force
    freqs = frequency.grid(fr.start_hz, fr.stop_hz, fr.points, fr.spacing)
    ctx.freqs = freqs
    X = frequency.sweep(ctx.linear, force, freqs)
    amplitude, phase, units, peaks, omitted = {}, {}, {}, {}, {}
    modes = frequency.resonances(ctx.linear)
    for c, row in zip(spec.coordinates, X):
        _response_row(c, row, ctx.amplitude_function(c.name), freqs, modes,
                      amplitude, phase, units, peaks)
    for index, o in enumerate(spec.outputs, start=1):
        try:
            if output_gains(ctx, o.name) is None:
                omitted[o.name] = "depends on time or a constraint force: no linear response"
                continue
            amp = ctx.amplitude_function(o.name)
            values = np.array([amp.complex(f) for f in freqs])
        except (TypeError, ValueError, ArithmeticError) as exc:   # e.g. acos(x/L) with |x| > L
            key = f"output[{index}].expr"
            raise AnalysisError(
                f"'{o.text}' has no finite real value at the rest state about which the frequency "
                f"response is linearised ({exc})", file=str(spec.path), line=spec.line(key), key=key,
                fix="keep every log, sqrt, asin and acos of the output defined at the rest position, "
                    "or remove [frequency_response]") from None
        if not np.any(np.abs(values) > 0):
            omitted[o.name] = "linearises to zero about the equilibrium (no first-order response)"
            continue
        _response_row(o, values, amp, freqs, modes, amplitude, phase, units, peaks)
    report.frequency_response = m.FrequencyResponse(
        frequency_hz=freqs, amplitude=amplitude, phase_deg=phase, units=units,
        excitation={n: text for n, _, text in fr.force}, peaks=peaks, omitted=omitted)


def _response_row(item, complex_si, amplitude_at, freqs, modes, amplitude, phase, units,
                  peaks) -> None:
    """One coordinate or output: |X| and its peak (searched also at the `modes`,
    frequency.resonances) in the display unit, phase in degrees."""
    magnitude = np.abs(complex_si)
    amplitude[item.name] = magnitude / item.factor
    phase[item.name] = np.degrees(np.angle(complex_si))
    units[item.name] = item.unit
    best, where = frequency.peak(amplitude_at, freqs, magnitude, modes)
    peaks[item.name] = m.ResponsePeak(amplitude=best / item.factor, frequency_hz=where)


def _time_history(spec, derivation, system, q0, qd0, ctx, report, checks) -> None:
    th = spec.time_history
    powers = simulate.power_functions(derivation, ctx.params)
    plan = simulate.stick_slip(derivation, ctx.params)
    first, second, grid = simulate.integrate(system, th, np.concatenate([q0, qd0]), powers,
                                             linear_hz=_highest_linear_hz(ctx), plan=plan,
                                             switches=simulate.find_switches(derivation, ctx.params, th, plan))
    for run, role in ((first, "primary"), (second, "independent")):
        s = run.solver
        detail = f"status {s.status}: {s.message}; {s.nfev} evaluations"
        if not s.success:
            line = spec.line("time_history")
            detail = (f"{spec.path}:{line}: time_history: {detail}. Fix: check the energies and forces "
                      "for terms that grow without bound or divide by zero, or shorten the duration")
        checks.append(m.Check("solver", f"{role} integrator ({s.method})", s.success, detail))
    if not first.solver.success:
        report.time_history = m.TimeHistory(t=first.t[:0], series=(), primary=first.solver,
                                            secondary=second.solver, agreement=float("nan"),
                                            agreement_tolerance=th.agreement_tolerance)
        return
    n = system.n
    t, Y = first.t, first.y
    Q, QD = Y[:n], Y[n:2 * n]
    QDD = np.zeros_like(Q)
    LAM = np.zeros((system.m, len(t)))
    accelerations = first.accelerations or system.accelerations
    for k in range(len(t)):
        QDD[:, k], LAM[:, k] = accelerations(t[k], Q[:, k], QD[:, k])
    friction = Friction(first.terms, first.sigma) if first.sigma is not None else None
    ctx.history = History(t=t, Q=Q, QD=QD, QDD=QDD, LAM=LAM, dense=first.dense,
                          grid=simulate.step_grid(first, t), accelerations=accelerations,
                          friction=friction, SIG=friction_values(friction, t, Q, QD))
    agreement = simulate.agreement(first, second, n) if second.solver.success else float("nan")
    if second.solver.success:
        checks.append(m.Check("integrators", "two integrators agree", agreement <= th.agreement_tolerance,
                              f"largest normalised difference {agreement:.2e} "
                              f"(tolerance {th.agreement_tolerance:g}) at {len(grid.t)} times: the samples, "
                              f"every primary step and {simulate.POINTS_PER_PERIOD} per period of "
                              f"{grid.fastest_hz:.4g} Hz ({grid.basis} fastest frequency)"
                              + (f", uniform part capped at {simulate.MAX_UNIFORM}" if grid.capped else "")))
    drift = None
    if system.m:
        G = np.array([system.constraint_values(tk, Q[:, k]) for k, tk in enumerate(t)])
        drift = float(np.max(np.abs(G)))
        scale = max(1e-9, float(np.max(np.abs(Q))))
        checks.append(m.Check("constraint", "constraint drift", drift <= 1e-6 * scale,
                              f"largest |g| = {drift:.2e} (tolerance {1e-6 * scale:.2e})"))
    series = _series(spec, ctx, Q, QD, LAM)
    note = _sampling_note(spec, ctx, series, grid)
    checks.append(m.Check("sampling", "samples resolve the motion", True, note or (
        f"{th.points} samples, at least {simulate.POINTS_PER_PERIOD} per period of {grid.fastest_hz:.4g} Hz "
        f"({grid.basis} fastest frequency); extremes from the dense solution")))
    report.time_history = m.TimeHistory(t=t, series=tuple(series), primary=first.solver,
                                        secondary=second.solver, agreement=agreement,
                                        agreement_tolerance=th.agreement_tolerance,
                                        constraint_drift=drift, comparison_points=len(grid.t),
                                        fastest_hz=grid.fastest_hz, fastest_basis=grid.basis,
                                        sampling_note=note,
                                        phases=tuple((p.t0, p.t1, _phase_label(p.mode)) for p in first.phases))
    report.energy = audit(derivation, ctx.params, t, Q, QD, QDD, LAM, Y[2 * n], Y[2 * n + 1],
                          spec.analysis.energy_tolerance, state=first.dense)
    checks.append(m.Check("energy", "energy audit", report.energy.passed,
                          f"largest relative residual {report.energy.max_relative_residual:.2e} "
                          f"(tolerance {report.energy.tolerance:g})"))
    report.outputs = tuple(_summary(o, ctx.extremes(o.expr)) for o in spec.outputs) + tuple(
        _summary(c, ctx.extremes(derivation.lambdas[i]), label=c.label or "constraint force")
        for i, c in enumerate(spec.constraints))
    if any(not np.isfinite([s.peak, s.max, s.min]).all() for s in report.outputs):
        checks.append(m.Check("outputs", "outputs finite", False, "an output is not finite"))


def _phase_label(mode) -> str:
    """'stuck' when any Coulomb term holds, else 'sliding'."""
    return "stuck" if simulate.STUCK in mode else "sliding"


def _highest_linear_hz(ctx) -> float:
    """Highest natural frequency of the linearised modes, Hz; 0 without modes."""
    values = [float(md.natural_frequency_hz) for md in ctx.modes]
    values = [v for v in values if np.isfinite(v)]
    return max(values, default=0.0)


SAMPLING_DEVIATION = 0.01         # coarse when the samples miss more than this fraction of a range


def _sampling_note(spec, ctx, series, grid) -> str:
    """'' when the samples show the motion; otherwise the coarse-sampling note for the page and `check`.

    Coarse: fewer than POINTS_PER_PERIOD samples per period of the fastest
    frequency seen, or a series whose samples, joined by straight lines, depart
    from the dense solution by more than SAMPLING_DEVIATION of its range.
    """
    th = spec.time_history
    fine = ctx.fine()
    dt = th.duration / (th.points - 1)
    per_period = 1.0 / (grid.fastest_hz * dt) if grid.fastest_hz > 0 else np.inf
    worst, where = 0.0, ""
    for s, values in zip(series, _fine_values(spec, ctx, fine)):
        span = float(np.max(values) - np.min(values))
        if span <= 1e-12 * max(1.0, float(np.max(np.abs(values)))):
            continue
        gap = float(np.max(np.abs(values - np.interp(fine.t, ctx.history.t, s.values)))) / span
        if gap > worst:
            worst, where = gap, s.name
    if per_period >= simulate.POINTS_PER_PERIOD and worst <= SAMPLING_DEVIATION:
        return ""
    wanted = max(int(np.ceil(simulate.POINTS_PER_PERIOD * grid.fastest_hz * th.duration)) + 1,
                 int(np.ceil((th.points - 1) * np.sqrt(max(worst, 1e-300) / SAMPLING_DEVIATION))) + 1)
    departs = (f"between samples the plotted record departs from the solution by up to {100 * worst:.3g} % "
               f"of the range of {where}" if where else
               f"the samples, joined by straight lines, follow the dense solution within "
               f"{100 * SAMPLING_DEVIATION:.3g} % of every range")
    return (f"coarse sampling: {th.points} samples (every {dt:.3g} s) give {per_period:.3g} per period "
            f"of the fastest frequency seen, {grid.fastest_hz:.4g} Hz ({grid.basis}); {departs}. "
            f"Peaks, max, min, criteria and the integrator comparison are taken from the "
            f"dense solution; set [time_history] points = {wanted} or more for plots that show the motion")


def _fine_values(spec, ctx, fine) -> list[np.ndarray]:
    """The series of `_series`, in display units, on the fine grid."""
    out = [fine.Q[i] / c.factor for i, c in enumerate(spec.coordinates)]
    out += [fine.QD[i] / c.factor for i, c in enumerate(spec.coordinates)]
    out += [fine.LAM[i] / c.factor for i, c in enumerate(spec.constraints)]
    out += [ctx.series(o.expr, fine) / o.factor for o in spec.outputs]
    return out


def _series(spec, ctx, Q, QD, LAM) -> list[m.Series]:
    out = []
    for i, c in enumerate(spec.coordinates):
        out.append(m.Series(c.name, Q[i] / c.factor, c.unit, c.label, "coordinate"))
    for i, c in enumerate(spec.coordinates):
        out.append(m.Series(f"dot({c.name})", QD[i] / c.factor, f"{c.unit}/s",
                            f"velocity of {c.name}", "velocity"))
    for i, c in enumerate(spec.constraints):
        out.append(m.Series(c.name, LAM[i] / c.factor, c.unit, c.label or "constraint force", "constraint"))
    for o in spec.outputs:
        out.append(m.Series(o.name, ctx.series(o.expr) / o.factor, o.unit, o.label, "output"))
    return out


def _summary(o, found, label: str | None = None) -> m.OutputSummary:
    """Peak, max and min of an output or constraint force from the dense solution, in its display unit.

    `found` is a verification.extremes.Extremes in SI (display factors are positive).
    """
    return m.OutputSummary(name=o.name, unit=o.unit, label=o.label if label is None else label,
                           peak=found.peak / o.factor, max=found.max / o.factor, min=found.min / o.factor,
                           t_peak=found.t_peak, t_max=found.t_max, t_min=found.t_min)


def _results(spec, ctx: QueryContext, report, checks) -> None:
    rows = []
    for i, r in enumerate(spec.results, start=1):
        try:
            value = ctx.evaluate(r.expr, f"result[{i}].expr")
        except CalcsheafError as exc:
            checks.append(m.Check("result", r.name, False, exc.message))
            ctx.values[r.name] = float("nan")
            continue
        ctx.values[r.name] = value
        rows.append(m.ResultValue(r.name, r.text, value / r.factor, r.unit, r.label))
    report.results = tuple(rows)
