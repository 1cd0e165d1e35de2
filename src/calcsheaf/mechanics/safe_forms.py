"""Forms of an expression that cannot overflow in floating point, with the same value.

Derivatives of smoothed friction laws bring terms that overflow long before
their value does: d/dv log(cosh(v/v_s)) = sinh(v/v_s)/cosh(v/v_s) is inf/inf
once v > 710 v_s (the largest double is about e^709.8), and log(cosh(u))
itself overflows there.  Before any expression is turned into code they are
rewritten exactly:

    sinh(u)^p · cosh(u)^−p  →  tanh(u)^p
    log(cosh(u))            →  |u| + log(1 + e^(−2|u|)) − log 2

(cosh u = e^|u| (1 + e^(−2|u|)) / 2).  Nothing else changes.
"""

from __future__ import annotations

import sympy as sp


def overflow_safe(expr):
    """`expr` with sinh/cosh ratios as tanh and log(cosh(u)) in its non-overflowing form."""
    if not isinstance(expr, sp.Basic) or not expr.has(sp.cosh):
        return expr
    expr = expr.replace(lambda e: e.is_Mul and e.has(sp.sinh) and e.has(sp.cosh), _tanh_ratio)
    return expr.replace(lambda e: isinstance(e, sp.log) and isinstance(e.args[0], sp.cosh), _log_cosh)


def _log_cosh(e):
    u = e.args[0].args[0]
    return sp.Abs(u) + sp.log(1 + sp.exp(-2 * sp.Abs(u))) - sp.log(2)


def _tanh_ratio(e):
    """A product with sinh(u)^p and cosh(u)^(−p) factors, those pairs written as tanh(u)^p."""
    powers = {}
    for factor in e.args:
        base, exponent = factor.as_base_exp()
        powers[base] = powers.get(base, 0) + exponent
    for base in list(powers):
        if isinstance(base, sp.sinh):
            partner = sp.cosh(base.args[0])
            if partner in powers and sp.simplify(powers[partner] + powers[base]) == 0:
                p = powers.pop(base)
                powers.pop(partner)
                powers[sp.tanh(base.args[0])] = p
    return sp.Mul(*[b ** x for b, x in powers.items()])
