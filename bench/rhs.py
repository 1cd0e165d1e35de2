"""(b) Time per right-hand-side call: NumericSystem.rhs against a hand-written numpy RHS.

Both functions are first checked to give the same y' at random states (so the
comparison is between two correct codes), then timed with timeit: the best of
`repeat` runs of `number` calls each, reported in µs per call.
"""

from __future__ import annotations

import tempfile
import timeit
from pathlib import Path

import numpy as np

import chain

AGREEMENT_RTOL = 1e-9


def generated_rhs(n: int, form: str = "cartesian"):
    """calcsheaf's NumericSystem.rhs for the n-link chain calc."""
    from calcsheaf.calcfile.loader import load_calc
    from calcsheaf.mechanics.codegen import NumericSystem
    from calcsheaf.mechanics.lagrange import derive

    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "chain.toml"
        path.write_text(chain.calc_toml(n, form=form), encoding="utf-8")
        spec = load_calc(path)
    return NumericSystem(derive(spec), spec.parameter_values).rhs


def check_agreement(n: int, a, b, states: int = 20) -> float:
    """Largest relative difference of a and b over random states; raises when they disagree."""
    rng = np.random.default_rng(9)
    worst = 0.0
    for _ in range(states):
        y = rng.uniform(-1.5, 1.5, 2 * n)
        ya, yb = np.asarray(a(0.0, y)), np.asarray(b(0.0, y))
        worst = max(worst, float(np.max(np.abs(ya - yb)) / np.max(np.abs(yb))))
    if worst > AGREEMENT_RTOL:
        raise AssertionError(f"n={n}: generated and hand-written RHS differ by {worst:.1e}")
    return worst


def microseconds_per_call(fn, n: int, number: int, repeat: int) -> float:
    y = np.linspace(-0.7, 0.9, 2 * n)
    best = min(timeit.repeat(lambda: fn(0.0, y), number=number, repeat=repeat))
    return best / number * 1e6


def measure(n: int, number: int, repeat: int, form: str = "cartesian") -> dict:
    generated, hand = generated_rhs(n, form), chain.numpy_rhs(n)
    difference = check_agreement(n, generated, hand)
    return {"calcsheaf_us": microseconds_per_call(generated, n, number, repeat),
            "numpy_us": microseconds_per_call(hand, n, number, repeat),
            "max_relative_difference": difference}
