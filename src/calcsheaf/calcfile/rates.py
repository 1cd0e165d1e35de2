"""Angular rates and cyclic frequencies are never mixed without an explicit 2π.

pint reads rpm as 2π/60 rad/s, and Hz and rad/s share the dimension 1/s, so
`f_run = "1480 rpm"` shown in Hz would read 154.985 Hz (ω, not f) with no unit
error.  This module tracks the *kind* of every 1/s value:

* ``angular``: a parameter given in a unit built on an angle (rad/s, rpm, deg/s,
  turn/s: pint's root unit is radian/second), or a [[result]] shown in one;
* ``cyclic``: a parameter given in hertz (Hz, kHz), a frequency query
  (natural_frequency, damped_frequency, undamped_frequency, frf_peak_frequency),
  1/period(q), or a [[result]] shown in Hz;
* neither: 1/s, 1/min and expressions such as sqrt(k/m), whose kind the units
  cannot tell.

A product term takes the kind of its tracked factors, turned by the power of π
it carries: f/(2π) of an angular rate is cyclic, 2π·f of a cyclic frequency is
angular.  `mixing` names the first problem of an expression shown in a unit:
a term with both kinds and no π (natural_frequency(1)/f_run), a sum of the two
kinds, an angular value shown in Hz, a cyclic one shown in rad/s or rpm, or the
frequency argument of frf() given as an angular rate.  `kind_of` gives the kind
a [[result]] carries to later expressions.
"""

from __future__ import annotations

import sympy as sp

from .expressions import query_name
from .units import ureg

ANGULAR, CYCLIC = "angular", "cyclic"
CYCLIC_QUERIES = frozenset({"natural_frequency", "damped_frequency", "undamped_frequency",
                            "frf_peak_frequency"})
_RATE = ureg.hertz.dimensionality


def unit_kind(unit) -> str | None:
    """ANGULAR, CYCLIC or None for a pint unit (None for every unit that is not 1/s)."""
    if unit.dimensionality != _RATE:
        return None
    if "radian" in str(ureg.get_root_units(unit)[1]):
        return ANGULAR
    return CYCLIC if "hertz" in str(unit) else None


def kind_of(expr: sp.Expr, kinds: dict[str, str]) -> str | None:
    """The kind of an expression (see the module text); "mixed" when it mixes the two
    kinds without a π conversion.  `kinds`: name -> kind of parameters and results."""
    if isinstance(expr, (sp.Add, sp.Abs, sp.Min, sp.Max)):
        found = {kind_of(a, kinds) for a in expr.args} - {None}
        if "mixed" in found or len(found) > 1:
            return "mixed"
        return found.pop() if found else None
    return _term_kind(expr, kinds)


def _term_kind(term: sp.Expr, kinds: dict[str, str]) -> str | None:
    """Kind of one product term: its tracked factors, turned by the power of π it carries."""
    found, pi_power = set(), 0
    for factor in sp.Mul.make_args(term):
        base, exponent = factor.as_base_exp()
        if base == sp.pi:
            pi_power += 1 if exponent.is_positive else -1
            continue
        kind = _atom_kind(base, exponent, kinds)
        if kind == "mixed":
            return "mixed"
        if kind is not None:
            found.add(kind)
    if len(found) > 1:
        return None if pi_power else "mixed"
    if not found:
        return None
    kind = found.pop()
    if kind == ANGULAR and pi_power < 0:
        return CYCLIC
    if kind == CYCLIC and pi_power > 0:
        return ANGULAR
    return kind


def _atom_kind(base: sp.Expr, exponent: sp.Expr, kinds: dict[str, str]) -> str | None:
    if isinstance(base, sp.Symbol):
        return kinds.get(base.name)
    name = query_name(base.func) if isinstance(base, sp.Function) else None
    if name in CYCLIC_QUERIES:
        return CYCLIC
    if name == "period" and exponent.is_negative:
        return CYCLIC
    if isinstance(base, (sp.Add, sp.Abs, sp.Min, sp.Max)):
        return kind_of(base, kinds)
    return None


def mixing(expr: sp.Expr, unit, unit_text: str, kinds: dict[str, str]) -> tuple[str, str] | None:
    """(problem, fix) when `expr` shown in `unit` (written `unit_text`) mixes angular rates and cyclic
    frequencies without an explicit 2π; None when it does not."""
    names = sorted(n for n in (s.name for s in expr.free_symbols) if kinds.get(n) == ANGULAR)
    rate = f"'{names[0]}' (an angular rate: pint reads rpm as 2π/60 rad/s)" if names else "an angular rate"
    fix = (f"divide by 2*pi for a frequency in Hz, e.g. {names[0] if names else 'w'}/(2*pi), or give "
           "the speed in Hz (a speed in rpm / 60 is in Hz); multiply a frequency by 2*pi for rad/s or rpm")
    for call in sorted(expr.atoms(sp.Function), key=sp.default_sort_key):
        if query_name(call.func) == "frf" and kind_of(call.args[1], kinds) == ANGULAR:
            return (f"the frequency of frf() is in Hz, but '{sp.sstr(call.args[1])}' is an angular "
                    "rate", fix)
    kind = kind_of(expr, kinds)
    shown = unit_kind(unit)
    if kind == "mixed":
        return (f"the expression mixes {rate} with a cyclic frequency in Hz without a 2*pi "
                "conversion", fix)
    if shown == CYCLIC and kind == ANGULAR:
        return (f"the value is shown in {unit_text} (cycles per second) but is {rate}", fix)
    if shown == ANGULAR and kind == CYCLIC:
        return (f"the value is shown in {unit_text}, an angular rate, but is a cyclic frequency in Hz "
                "(a frequency query, 1/period or a value in Hz)",
                "multiply by 2*pi for rad/s or rpm, e.g. 2*pi*natural_frequency(1), or show it in Hz")
    return None


def compared(demand: sp.Expr, capacity: sp.Expr, kinds: dict[str, str]) -> tuple[str, str] | None:
    """(problem, fix) when a criterion compares an angular rate with a cyclic frequency."""
    a, b = kind_of(demand, kinds), kind_of(capacity, kinds)
    if {a, b} == {ANGULAR, CYCLIC}:
        angular = capacity if b == ANGULAR else demand
        return (f"the criterion compares a cyclic frequency in Hz with an angular rate "
                f"('{sp.sstr(angular)}': pint reads rpm as 2π/60 rad/s), which differ by 2π",
                f"divide the angular rate by 2*pi, e.g. ({sp.sstr(angular)})/(2*pi), or give the "
                "speed in Hz")
    return None
