"""The extremes finder and the peak/max/min queries on hand-made dense functions.

Fast direct tests of verification/extremes.py and of the parts of
verification/queries.py that feed it (switch arguments, switching times, the
cached max/min along a dense solution), written so that the mutation run
(bench/mutation.sh, EXTREMES=1) leaves no surviving mutant that changes a result.

References: each expected value is a closed form of the hand-made function
(the crest of sin ω t at π/(2ω) with value 1; the root of s³ − c at c^(1/3);
a linear jump whose one-sided limit is its value at the switch).
"""

from __future__ import annotations

import math
from types import SimpleNamespace

import numpy as np
import pytest
import sympy as sp

from calcsheaf.verification.extremes import ONE_SIDED, Extremes, extremes, switching_times
from calcsheaf.verification.queries import History, QueryContext, switch_arguments
from helpers_calc import derivation_of


def sampled(fn, t):
    return np.array([fn(float(s)) for s in t])


# ---- Extremes -------------------------------------------------------------------------
def test_peak_is_the_larger_magnitude_with_its_time():
    low = Extremes(max=2.0, t_max=1.0, min=-3.0, t_min=2.0)
    assert (low.peak, low.t_peak) == (3.0, 2.0)
    high = Extremes(max=3.0, t_max=1.0, min=-2.0, t_min=2.0)
    assert (high.peak, high.t_peak) == (3.0, 1.0)
    negative = Extremes(max=-1.0, t_max=1.0, min=-4.0, t_min=2.0)     # peak of |e|, not of e
    assert (negative.peak, negative.t_peak) == (4.0, 2.0)
    tie = Extremes(max=2.0, t_max=1.0, min=-2.0, t_min=5.0)           # a tie reports the max
    assert (tie.peak, tie.t_peak) == (2.0, 1.0)


# ---- switching_times --------------------------------------------------------------------
def test_switching_time_refined_on_a_curved_argument():
    """s³ − c changes sign between grid points 0 and 1: brentq to 1e-14 at c^(1/3)."""
    c = 0.3
    t = np.array([0.0, 1.0, 2.0])
    times = switching_times(t, [t ** 3 - c], lambda j, s: s ** 3 - c)
    assert len(times) == 1 and times[0] == pytest.approx(c ** (1 / 3), abs=1e-14)


def test_switching_times_of_several_arguments_sorted_and_unique():
    """Argument j is evaluated as argument j; equal roots of two arguments are one time."""
    t = np.linspace(0.0, 1.0, 6)
    roots = (0.73, 0.31, 0.73)
    args = [t - r for r in roots]
    times = switching_times(t, args, lambda j, s: s - roots[j])
    assert times == [pytest.approx(0.31, abs=1e-14), pytest.approx(0.73, abs=1e-14)]


def test_switching_time_at_a_grid_value_that_is_exactly_zero():
    t = np.array([0.0, 0.5, 1.0])
    assert switching_times(t, [np.array([-1.0, 0.0, 1.0])], lambda j, s: s - 0.5) == [0.5]


def test_no_switching_time_without_a_sign_change():
    """Small positive values (products below 1) and negative ones are not switches."""
    t = np.linspace(0.0, 1.0, 5)
    assert switching_times(t, [0.1 + 0.1 * t], lambda j, s: 0.1 + 0.1 * s) == []
    assert switching_times(t, [-0.1 - 0.1 * t], lambda j, s: -0.1 - 0.1 * s) == []
    assert switching_times(t, [2.0 + t], lambda j, s: 2.0 + s) == []


def test_grid_sign_change_the_dense_values_do_not_confirm_takes_the_nearer_grid_time():
    """The grid says −1, +1; the dense value has one sign at both ends: the end nearer zero."""
    t = np.array([0.0, 1.0])
    grid = [np.array([-1.0, 1.0])]
    assert switching_times(t, grid, lambda j, s: s + 0.5) == [0.0]       # |0.5| < |1.5|
    assert switching_times(t, grid, lambda j, s: s - 1.5) == [1.0]       # |−1.5| > |−0.5|
    assert switching_times(t, grid, lambda j, s: 1.0) == [0.0]           # a tie: the first


# ---- extremes: smooth crests between grid points -----------------------------------------
def test_crest_between_the_first_two_grid_points():
    """sin t on t = 1.3, 1.9, 2.5: the first grid point is the local maximum (crest at π/2)."""
    t = np.array([1.3, 1.9, 2.5])
    found = extremes(t, np.sin(t), math.sin)
    assert found.max == pytest.approx(1.0, abs=1e-12)
    assert found.t_max == pytest.approx(math.pi / 2, abs=1e-6)
    assert found.min == math.sin(2.5) and found.t_min == 2.5


def test_crest_between_the_last_two_grid_points():
    t = np.array([0.6, 1.2, 1.8])
    found = extremes(t, np.sin(t), math.sin)
    assert found.max == pytest.approx(1.0, abs=1e-12)
    assert found.t_max == pytest.approx(math.pi / 2, abs=1e-6)
    assert found.min == math.sin(0.6) and found.t_min == 0.6


def test_two_grid_points_with_the_crest_between():
    t = np.array([0.1, 2.9])
    found = extremes(t, np.sin(t), math.sin)
    assert found.max == pytest.approx(1.0, abs=1e-12)
    assert found.t_max == pytest.approx(math.pi / 2, abs=1e-6)


def test_one_grid_point():
    found = extremes(np.array([5.0]), np.array([2.0]), lambda s: 2.0, [5.0])
    assert found == Extremes(max=2.0, t_max=5.0, min=2.0, t_min=5.0)


def test_crest_and_trough_midway_between_two_equal_grid_values():
    """cos(t − c) with c and c + π midway between grid points: two equal values at each."""
    c, d = 1.0, 0.2
    t = np.array([c - 3 * d, c - d, c + d, c + 3 * d, c + math.pi - d, c + math.pi + d, 5.0])
    fn = lambda s: math.cos(s - c)
    found = extremes(t, sampled(fn, t), fn)
    assert found.max == pytest.approx(1.0, abs=1e-12) and found.t_max == pytest.approx(c, abs=1e-6)
    assert found.min == pytest.approx(-1.0, abs=1e-12)
    assert found.t_min == pytest.approx(c + math.pi, abs=1e-6)


def test_tiny_values_are_refined_too():
    """The refinement tolerance scales with the values: a crest of 1e-13 is still refined."""
    t = np.array([1.3, 1.9, 2.5])
    found = extremes(t, 1e-13 * np.sin(t), lambda s: 1e-13 * math.sin(s))
    assert found.max == pytest.approx(1e-13, rel=1e-10)
    assert found.t_max == pytest.approx(math.pi / 2, abs=1e-6)


def test_a_crest_within_the_tolerance_of_the_best_grid_value_is_not_refined():
    """Bound (value + rise) within 1e-12 of the best grid value: that value is returned as is.

    The dense function rises 5e-13 above its grid values between t = 0 and 1;
    the crest's bound is 1 + 1e-13, so no refinement is tried.
    """
    t = np.array([0.0, 1.0, 2.0])
    v = np.array([1.0 - 1e-13, 1.0, 1.0 - 1e-13])

    def fn(s):
        return float(np.interp(s, t, v)) + (5e-13 if 0.0 < s < 1.0 else 0.0)

    found = extremes(t, v, fn)
    assert (found.max, found.t_max) == (1.0, 1.0)


def test_every_refined_crest_is_the_max_of_the_function():
    """Several crests: the one refined first (largest bound) is not the highest."""
    # Crest A: grid 0.0, 0.95, 0.0 -> bound 1.9, true top 0.96; crest B: grid 0.5, 0.9, 0.9,
    # 0.5 -> bound 1.3, true top 1.2 (dense values from a piecewise-linear hat with its top
    # between grid points).
    t = np.arange(8.0)
    v = np.array([0.0, 0.95, 0.0, 0.5, 0.9, 0.9, 0.5, 0.0])
    tops = {1: (1.1, 0.96), 4: (4.5, 1.2)}

    def fn(s):
        for k, (tk, top) in tops.items():
            if abs(s - tk) < 1.0:
                base = float(np.interp(s, t, v))
                return max(base, top - 0.5 * abs(s - tk) / 1.0) if k == 4 else max(
                    base, top - 5 * abs(s - tk))
        return float(np.interp(s, t, v))

    found = extremes(t, v, fn)
    assert found.max == pytest.approx(1.2, abs=1e-7)      # a kinked top: Brent to ~1e-8
    assert found.t_max == pytest.approx(4.5, abs=1e-6)


# ---- extremes: one-sided limits at switches -----------------------------------------------
def _jump_up(t1: float, slope: float):
    """0 before t1, then 1 − slope (s − t1) down to 0: the max is the right-hand limit 1."""
    return lambda s: 0.0 if s < t1 else max(1.0 - slope * (s - t1), 0.0)


def test_right_hand_limit_is_extrapolated_to_the_switch():
    """A steep linear fall after the jump: the linear extrapolation to t1 is exact."""
    t1 = 0.4321
    fn = _jump_up(t1, 1000.0)
    t = np.linspace(0.0, 1.0, 5)
    found = extremes(t, sampled(fn, t), fn, [t1])
    assert found.max == pytest.approx(1.0, abs=1e-10)
    assert found.t_max == pytest.approx(t1 + ONE_SIDED * 1.0, abs=1e-15)
    assert (found.min, found.t_min) == (0.0, 0.0)


def test_one_sided_offset_scales_with_the_record_length():
    """Record 10..13 s: the one-sided value is taken ONE_SIDED · 3 s beside the switch."""
    t1 = 11.4321
    fn = _jump_up(t1, 1000.0)
    t = np.linspace(10.0, 13.0, 5)
    found = extremes(t, sampled(fn, t), fn, [t1])
    assert found.max == pytest.approx(1.0, abs=1e-9)
    assert found.t_max == pytest.approx(t1 + ONE_SIDED * 3.0, abs=1e-14)


def test_left_hand_limit_is_extrapolated_to_the_switch():
    """The mirror image: a steep linear rise to the switch, then 0; the max is the left limit."""
    t1 = 0.5679
    up = _jump_up(1.0 - t1, 1000.0)
    fn = lambda s: up(1.0 - s) if s != t1 else 0.0
    fn = lambda s, up=up: 0.0 if s >= t1 else up(1.0 - s)
    t = np.linspace(0.0, 1.0, 5)
    found = extremes(t, sampled(fn, t), fn, [t1])
    assert found.max == pytest.approx(1.0, abs=1e-10)
    assert found.t_max == pytest.approx(t1 - ONE_SIDED * 1.0, abs=1e-15)


def test_switch_minimum_is_the_negative_one_sided_limit():
    t1 = 0.4321
    up = _jump_up(t1, 1000.0)
    fn = lambda s: -up(s)
    t = np.linspace(0.0, 1.0, 5)
    found = extremes(t, sampled(fn, t), fn, [t1])
    assert found.min == pytest.approx(-1.0, abs=1e-10)
    assert found.t_min == pytest.approx(t1 + ONE_SIDED, abs=1e-15)
    assert (found.max, found.t_max) == (0.0, 0.0)


def test_one_sided_values_only_inside_the_record():
    """A switch 1.5 offsets before the end: its right-hand points would fall outside."""
    side = ONE_SIDED * 1.0
    ts = 1.0 - 1.5 * side
    calls = []

    def fn(s):
        calls.append(s)
        return 0.0

    t = np.array([0.0, 0.5, 1.0])
    extremes(t, np.zeros(3), fn, [ts])
    assert all(0.0 <= s <= 1.0 for s in calls)
    assert ts + side not in calls and ts - side in calls and ts - 2 * side in calls
    calls.clear()
    extremes(t, np.zeros(3), fn, [1.5 * side])         # and at the start: only the right side
    assert 1.5 * side - side not in calls and 1.5 * side + side in calls


def test_one_sided_points_reaching_exactly_the_ends_are_used():
    side = ONE_SIDED * 1.0
    calls = []

    def fn(s):
        calls.append(s)
        return 0.0

    t = np.array([0.0, 0.5, 1.0])
    extremes(t, np.zeros(3), fn, [2 * side])        # ts − 2·side = 0 exactly
    assert 2 * side - side in calls
    calls.clear()
    ts = 1.0 - 2 * side
    assert ts + 2 * side == 1.0
    extremes(t, np.zeros(3), fn, [ts])
    assert ts + side in calls


# ---- queries: switch arguments ------------------------------------------------------------
def _fake_derivation(f=(), gamma=(), M=()):
    x, xd, xdd, lam = sp.symbols("x xd xdd lam", real=True)
    return SimpleNamespace(q=(x,), qd=(xd,), qdd=(xdd,), lambdas=(lam,), f=list(f), gamma=list(gamma),
                           M=list(M)), (x, xd, xdd, lam)


def test_switch_arguments_of_step_sign_abs_min_and_max():
    d, (x, xd, _, _) = _fake_derivation()
    a, b = sp.symbols("a b", real=True)
    expr = (sp.Heaviside(x - 1) + sp.sign(xd) + sp.Abs(x + 2) + sp.Min(x, a, b)
            + sp.Max(a, xd) + sp.Heaviside(x - 1) * a)
    found = switch_arguments(expr, d)
    assert set(found) == {x - 1, xd, x + 2, *(p - q for p, q in zip(sp.Min(x, a, b).args,
                                                                     sp.Min(x, a, b).args[1:])),
                          *(p - q for p, q in zip(sp.Max(a, xd).args, sp.Max(a, xd).args[1:]))}
    assert len(found) == len(set(found)) == 6


def test_switch_arguments_without_symbols_are_left_out():
    d, (x, _, _, _) = _fake_derivation()
    expr = sp.Abs(sp.Integer(-2), evaluate=False) * x + sp.Heaviside(x)
    assert switch_arguments(expr, d) == [x]


def test_switch_arguments_of_the_equations_only_when_accelerations_are_read():
    x, xd, xdd, lam = sp.symbols("x xd xdd lam", real=True)
    d, (x, xd, xdd, lam) = _fake_derivation(f=[sp.Heaviside(x - 3)], gamma=[sp.sign(xd)],
                                           M=[1 + sp.Abs(x - 5)])
    assert switch_arguments(x ** 2, d) == []
    for reading in (xdd, lam):
        assert set(switch_arguments(reading * sp.Heaviside(x - 7), d)) == {x - 7, x - 3, xd, x - 5}


# ---- queries: max, min, peak along a dense solution ---------------------------------------------
SPRING = """
[calc]
number = "X-U"
title = "hand-made motions for the extremes queries"

[parameters]
m = "1 kg"
k = "4 N/m"
F0 = "3 N"
t1 = "0.4321 s"

[coordinates]
x = { unit = "m" }

[energy]
kinetic = "m/2*dot(x)**2"
potential = "k/2*x**2"

[initial]
x = "1 m"
"dot(x)" = "0 m/s"

[[output]]
name = "F"
expr = "k*x + F0*step(t - t1)"
unit = "N"

[[output]]
name = "acc"
expr = "ddot(x)"
unit = "m/s^2"

[[result]]
name = "x_max"
expr = "max(x)"
unit = "m"

[[result]]
name = "x_min"
expr = "min(x)"
unit = "m"

[[result]]
name = "x_peak"
expr = "peak(x)"
unit = "m"

[[result]]
name = "F_max"
expr = "max(F)"
unit = "N"
"""


def _context(tmp_path, motion, dense: bool, grid=None):
    """QueryContext over x(t) = motion(t) = (x, ẋ, ẍ) sampled at 0, 0.5, ..., 3 s."""
    spec, derivation = derivation_of(tmp_path, SPRING)
    t = np.linspace(0.0, 3.0, 7)
    Q, QD, QDD = (np.array([[motion(s)[i] for s in t]]) for i in range(3))
    history = History(t=t, Q=Q, QD=QD, QDD=QDD, LAM=np.zeros((0, len(t))))
    system = None
    if dense:
        history.dense = lambda times: np.array([[motion(s)[i] for s in np.atleast_1d(times)]
                                                for i in range(2)])
        history.grid = t if grid is None else grid
        system = SimpleNamespace(n=1, m=0, accelerations=lambda s, q, qd: (
            np.array([motion(s)[2]]), np.zeros(0)))
    ctx = QueryContext(spec=spec, derivation=derivation, params=spec.parameter_values,
                       history=history, system=system)
    return spec, ctx


def _value(spec, ctx, name):
    r = next(r for r in spec.results if r.name == name)
    return ctx.evaluate(r.expr, name)


def shifted_cosine(s):
    """x = 0.2 + cos(2 (s − 0.1)): crest 1.2 at 0.1, trough −0.8 at 0.1 + π/2 (not on the grid)."""
    p = 2 * (s - 0.1)
    return 0.2 + math.cos(p), -2 * math.sin(p), -4 * math.cos(p)


def test_max_min_peak_queries_from_the_dense_solution(tmp_path):
    spec, ctx = _context(tmp_path, shifted_cosine, dense=True)
    assert _value(spec, ctx, "x_max") == pytest.approx(1.2, abs=1e-12)
    assert _value(spec, ctx, "x_min") == pytest.approx(-0.8, abs=1e-12)
    assert _value(spec, ctx, "x_peak") == pytest.approx(1.2, abs=1e-12)
    found = ctx.extremes(derivation_symbol(ctx))
    assert found.t_max == pytest.approx(0.1, abs=1e-6)
    assert found.t_min == pytest.approx(0.1 + math.pi / 2, abs=1e-6)
    assert ctx.extremes(derivation_symbol(ctx)) is found          # computed once per expression


def derivation_symbol(ctx):
    return ctx.derivation.q[0]


def test_peak_query_takes_the_larger_magnitude(tmp_path):
    spec, ctx = _context(tmp_path, lambda s: (-0.2 + math.cos(2 * (s - 0.1)),) + shifted_cosine(s)[1:],
                         dense=True)
    assert _value(spec, ctx, "x_peak") == pytest.approx(1.2, abs=1e-12)      # |min|, the trough
    assert _value(spec, ctx, "x_max") == pytest.approx(0.8, abs=1e-12)


def test_max_query_of_an_output_with_a_step_in_time_is_found_at_the_switch(tmp_path):
    """F = k x + F0 step(t − t1), x = e^(−t) cos 2t falling at t1: the max k x(t1) + F0 at t1+."""
    def motion(s):
        e, c, n = math.exp(-s), math.cos(2 * s), math.sin(2 * s)
        return e * c, e * (-c - 2 * n), e * (-3 * c + 4 * n)

    spec, ctx = _context(tmp_path, motion, dense=True)
    assert ctx.switches(spec.outputs[0].expr) == [pytest.approx(0.4321, abs=1e-13)]
    assert _value(spec, ctx, "F_max") == pytest.approx(4 * motion(0.4321)[0] + 3.0, abs=1e-8)
    found = ctx.extremes(sp.Symbol("F", real=True))
    assert found.t_max == pytest.approx(0.4321, abs=1e-8)


def test_accelerations_are_evaluated_between_samples(tmp_path):
    """ẍ = −4 cos(2 (t − 0.1)) from the equations at each time: its max 4 between samples."""
    spec, ctx = _context(tmp_path, shifted_cosine, dense=True)
    found = ctx.extremes(spec.outputs[1].expr)
    assert found.max == pytest.approx(4.0, abs=1e-10)
    assert found.t_max == pytest.approx(0.1 + math.pi / 2, abs=1e-6)


def test_the_fine_grid_is_examined_not_only_the_samples(tmp_path):
    """A crest the 7 samples straddle widely is caught from a finer grid of 61 times."""
    spec, ctx = _context(tmp_path, lambda s: (math.cos(9 * s), 0.0, 0.0), dense=True,
                         grid=np.linspace(0.0, 3.0, 61))
    assert _value(spec, ctx, "x_max") == pytest.approx(1.0, abs=1e-12)
    assert _value(spec, ctx, "x_min") == pytest.approx(-1.0, abs=1e-12)


def test_without_a_dense_solution_the_samples_are_interpolated(tmp_path):
    """No dense output: extremes are the sampled ones (straight lines between samples)."""
    spec, ctx = _context(tmp_path, shifted_cosine, dense=False)
    x = np.array([shifted_cosine(s)[0] for s in np.linspace(0.0, 3.0, 7)])
    assert _value(spec, ctx, "x_max") == float(np.max(x))
    assert _value(spec, ctx, "x_min") == float(np.min(x))
    found = ctx.extremes(derivation_symbol(ctx))
    assert found.t_max == pytest.approx(0.5 * int(np.argmax(x)), abs=1e-6)
    # The step of F is not located without a dense solution: the sampled max stands.
    F = 4 * x + 3.0 * (np.linspace(0.0, 3.0, 7) > 0.4321)
    assert _value(spec, ctx, "F_max") == pytest.approx(float(np.max(F)), abs=1e-9)


def test_max_query_needs_a_time_history(tmp_path):
    from calcsheaf.errors import AnalysisError
    spec, ctx = _context(tmp_path, shifted_cosine, dense=False)
    ctx.history = None
    with pytest.raises(AnalysisError, match=r"max\(\) needs a time history"):
        _value(spec, ctx, "x_max")


# ---- survivors of the first mutation run ----------------------------------------------------
def test_dense_value_exactly_zero_at_a_bracket_end_is_the_switching_time():
    """Grid −1, +1 but the dense value is 0 at an end: that end, without dividing by it."""
    t = np.array([0.0, 1.0])
    grid = [np.array([-1.0, 1.0])]
    assert switching_times(t, grid, lambda j, s: s - 1.0) == [1.0]
    assert switching_times(t, grid, lambda j, s: s) == [0.0]


def test_switching_time_of_a_flat_crossing_to_the_stated_tolerance():
    """∛(s − c) crosses zero with infinite slope, so brentq ends on its tolerance: 1e-15 + 1e-14·t.

    (With brentq's default xtol of 2e-12 the time is 1e-13 off.)
    """
    c = 0.3
    t = np.array([0.0, 1.0])
    times = switching_times(t, [np.cbrt(t - c)], lambda j, s: float(np.cbrt(s - c)))
    assert abs(times[0] - c) <= 1e-15 + 1e-14 * c


def _plateau(crest_between: int):
    """Grid values 0, 0.5, 0.5, 0.5, 0 at t = 0..4 and a smooth crest of 1 in (k, k + 1).

    The bump sin²(π (s − k)) · 0.5 is zero at the grid times, so three equal grid
    values hide it; only refining the plateau point whose bracket holds it finds 1.
    """
    t = np.arange(5.0)
    v = np.array([0.0, 0.5, 0.5, 0.5, 0.0])
    k = crest_between

    def fn(s):
        bump = 0.5 * math.sin(math.pi * (s - k)) ** 2 if k < s < k + 1 else 0.0
        return float(np.interp(s, t, v)) + bump

    return t, v, fn


@pytest.mark.parametrize("k", [1, 2])
def test_crest_hidden_in_a_plateau_of_three_equal_grid_values(k):
    t, v, fn = _plateau(k)
    found = extremes(t, v, fn)
    assert found.max == pytest.approx(1.0, abs=1e-9)
    assert found.t_max == pytest.approx(k + 0.5, abs=1e-4)


def test_a_grid_without_a_dense_solution_is_interpolated(tmp_path):
    """A fine grid recorded but no dense solution: the samples are used, not the dense path."""
    spec, ctx = _context(tmp_path, shifted_cosine, dense=False)
    ctx.history.grid = np.linspace(0.0, 3.0, 61)
    x = np.array([shifted_cosine(s)[0] for s in np.linspace(0.0, 3.0, 7)])
    assert _value(spec, ctx, "x_max") == float(np.max(x))
