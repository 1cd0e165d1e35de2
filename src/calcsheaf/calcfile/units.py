"""Units and dimensions: one pint registry; dimension checks on sympy trees.

Inside calcsheaf every number is SI.  A dimension is a pint UnitsContainer of
base dimensions ({'[length]': 1, '[time]': -2}); `ANY` stands for a literal 0,
which takes whatever dimension its context needs.
"""

from __future__ import annotations

import difflib
import math
import re
from functools import lru_cache

import pint
import sympy as sp

from ..errors import DimensionError, UnitError
from .expressions import Where, ascii_fix, describe_character, query_name

ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=False)
ureg.define("rpm = revolution / minute")
Quantity = ureg.Quantity

ANY = None
DIMENSIONLESS = ureg.dimensionless.dimensionality

_BASE_SYMBOLS = {"[mass]": "kg", "[length]": "m", "[time]": "s", "[current]": "A",
                 "[temperature]": "K", "[substance]": "mol", "[luminosity]": "cd"}

_NAMED = {
    "N": "force", "J": "energy", "W": "power", "Pa": "pressure", "N*m": "energy or moment",
    "m": "length", "kg": "mass", "s": "time", "m/s": "velocity", "m/s^2": "acceleration",
    "1/s": "frequency", "kg*m^2": "moment of inertia", "N/m": "stiffness",
    "N*s/m": "damping coefficient",
}
_NAMED_UNITS = ["N", "J", "W", "Pa", "N/m", "N*s/m", "kg*m^2", "m/s^2", "m/s"]


_UNIT_FIX = "use a unit such as m, mm, kg, N, kN, kN*s/m, N*m, rad, deg, Hz, rpm; powers are ^ or **"
_COMMON_UNITS = ("m", "mm", "cm", "km", "kg", "g", "t", "s", "ms", "min", "h", "N", "kN", "MN",
                 "Pa", "kPa", "MPa", "GPa", "J", "kJ", "W", "kW", "rad", "deg", "Hz", "rpm",
                 "revolution", "tonne", "degree", "radian", "newton", "meter", "metre", "second")


def _unit_hint(names) -> str:
    """' ('mx' is not a unit; did you mean 'mm'?)' for the first undefined name."""
    name = next(iter(names), None) if isinstance(names, (list, tuple)) else names
    if not name:
        return ""
    close = difflib.get_close_matches(str(name), _COMMON_UNITS, n=1)
    return f" ('{name}' is not a unit" + (f"; did you mean '{close[0]}'?)" if close else ")")


def parse_unit(text: str, where: Where = Where()) -> pint.Unit:
    """A pint unit from its text, e.g. 'kN', 'mm', '1' (dimensionless)."""
    if text in ("", "1", "-"):
        return ureg.dimensionless
    _check_unit_characters(text, where)
    try:
        unit = ureg.Unit(text)
    except pint.errors.UndefinedUnitError as exc:
        raise UnitError(f"unknown unit '{text}'{_unit_hint(exc.unit_names)}", file=where.file,
                        line=where.line, key=where.key, fix=_UNIT_FIX) from None
    except (pint.errors.DefinitionSyntaxError, AttributeError, TypeError, ValueError,
            SyntaxError, AssertionError, RecursionError) as exc:
        raise UnitError(f"cannot read the unit '{text}' ({_short(exc)})", file=where.file,
                        line=where.line, key=where.key, fix=_UNIT_FIX) from None
    if not ureg.Quantity(1, unit)._is_multiplicative:
        raise UnitError(f"offset unit '{text}' is not supported", file=where.file,
                        line=where.line, key=where.key, fix="use an absolute unit such as K")
    traps = sorted((name, trap) for name in unit._units for trap in _TRAP_UNITS if name.endswith(trap))
    if traps:
        name, trap = traps[0]
        raise UnitError(f"'{text}' reads as {name} ({_TRAP_UNITS[trap]}), "
                        "which is almost never meant in a calc", file=where.file, line=where.line,
                        key=where.key, fix="write newton metres as N*m or kN*m (with the *); "
                                           "spell other units out")
    return unit


_UNIT_SYMBOLS = frozenset("µμΩ°")     # the non-ASCII unit symbols pint reads as written


def _check_unit_characters(text: str, where: Where) -> None:
    """Refuse '#' (pint would read it as a comment and drop the rest) and characters that
    would be folded or misread (full-width letters); µ, Ω and ° are kept."""
    if "#" in text:
        raise UnitError(f"'#' in the unit '{text}' would start a comment, so the text after it "
                        "would be ignored", file=where.file, line=where.line, key=where.key,
                        fix="remove the '#' and what follows from inside the quotes; a TOML "
                            "comment goes after the closing quote")
    odd = next((c for c in text if not c.isascii() and c not in _UNIT_SYMBOLS), None)
    if odd is not None:
        raise UnitError(f"{describe_character(odd)} is not allowed in the unit '{text}'",
                        file=where.file, line=where.line, key=where.key, fix=ascii_fix(odd))


# pint units whose short names catch everyday engineering abbreviations ("Nm", "kNm").
_TRAP_UNITS = {
    "number_meter": "a textile yarn count, not newton metres",
    "number_english": "a textile yarn count",
    "denier": "a textile linear density",
    "tex": "a textile linear density",
}


# A plain ASCII decimal number: no '_' separators, no other scripts' digits (inf and nan
# pass here, to be refused as not finite).
_NUMBER = re.compile(r"[+-]?(?:[0-9]+\.?[0-9]*|\.[0-9]+)(?:[eE][+-]?[0-9]+)?|[+-]?(?:inf|infinity|nan)",
                     re.IGNORECASE)
# Largest magnitude of a value in SI units: squares and fourth powers stay finite in floats.
MAX_MAGNITUDE = 1e50
# Largest power of one unit in a value's unit (kg**1000000000 overflowed).
MAX_UNIT_POWER = 12


def parse_quantity(text, where: Where = Where()) -> pint.Quantity:
    """A value with a unit from text such as '1.2 MN/m' or '0 m/s'.

    The number is plain ASCII (a Bengali '৪', which looks like 8 but is 4, or a
    full-width digit would be read silently otherwise), without '_' separators,
    and its size in SI units is at most MAX_MAGNITUDE."""
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise UnitError(f"expected a value with a unit as text, got {type(text).__name__}",
                        file=where.file, line=where.line, key=where.key,
                        fix='write e.g. "850 kg"')
    if isinstance(text, (int, float)):
        quantity = Quantity(text, ureg.dimensionless)
    else:
        number, _, unit_text = text.strip(" ").partition(" ")
        _check_number(text, number, where)
        unit = parse_unit(unit_text.strip(" "), where)
        quantity = Quantity(float(number), unit)
    _check_size(text, quantity, where)
    return quantity


def _check_number(text: str, number: str, where: Where) -> None:
    """Refuse a number that is not plain ASCII decimal (naming the odd character)."""
    odd = next((c for c in number if not c.isascii()), None)
    if odd is not None:
        raise UnitError(f"{describe_character(odd)} is not allowed in the number of '{text}' "
                        "(numbers are read in plain ASCII digits only)", file=where.file,
                        line=where.line, key=where.key, fix=ascii_fix(odd))
    if "_" in number:
        raise UnitError(f"'_' inside the number '{number}' of '{text}' is not allowed (it would "
                        f"be read silently as {number.replace('_', '')})", file=where.file,
                        line=where.line, key=where.key,
                        fix=f"write the digits without '_', e.g. {number.replace('_', '')}")
    if not _NUMBER.fullmatch(number):
        raise UnitError(f"cannot read '{text}' as a number followed by a unit",
                        file=where.file, line=where.line, key=where.key,
                        fix='write the number first, then the unit, e.g. "1.2 MN/m"')


def _check_size(text, quantity: pint.Quantity, where: Where) -> None:
    """Refuse a value that is not finite, has a unit power beyond MAX_UNIT_POWER, or is
    larger than MAX_MAGNITUDE in SI units (the analysis would overflow)."""
    if not math.isfinite(quantity.magnitude):
        raise UnitError(f"value '{text}' is not finite", file=where.file, line=where.line,
                        key=where.key, fix="give a finite number")
    power = max((abs(float(p)) for p in quantity.units._units.values()), default=0.0)
    if power > MAX_UNIT_POWER:
        raise UnitError(f"the unit of '{text}' has a power of {power:g}, beyond the "
                        f"{MAX_UNIT_POWER} calcsheaf accepts", file=where.file, line=where.line,
                        key=where.key, fix="check the unit's exponent (e.g. kN/m, m/s^2)")
    try:
        si = float(quantity.to_base_units().magnitude)
    except OverflowError:
        si = math.inf
    if not abs(si) <= MAX_MAGNITUDE:
        raise UnitError(f"value '{text}' is too large: beyond {MAX_MAGNITUDE:g} in SI units, "
                        "where the analysis would overflow", file=where.file, line=where.line,
                        key=where.key, fix="check the number and its exponent (e.g. 1e5, not 1e308)")


def to_si(quantity: pint.Quantity) -> float:
    """Magnitude of `quantity` in SI base units (angles in rad)."""
    return float(quantity.to_base_units().magnitude)


def si_factor(unit: pint.Unit | str) -> float:
    """Multiply a value in `unit` by this to get SI."""
    if isinstance(unit, str):
        unit = parse_unit(unit)
    return float(Quantity(1.0, unit).to_base_units().magnitude)


def dimension_of(unit: pint.Unit | str):
    if isinstance(unit, str):
        unit = parse_unit(unit)
    return unit.dimensionality


def si_unit_text(dim) -> str:
    """The SI unit of a dimension, named where common: N, J, W, N/m, ..."""
    if dim is ANY or dim == DIMENSIONLESS:
        return "1"
    for name in _NAMED_UNITS:
        if _named_dimension(name) == dim:
            return name
    items = sorted(dim.items(), key=lambda kv: list(_BASE_SYMBOLS).index(kv[0]))
    num = [_BASE_SYMBOLS[k] + _power(v) for k, v in items if v > 0]
    den = [_BASE_SYMBOLS[k] + _power(-v) for k, v in items if v < 0]
    text = "*".join(num) or "1"
    if den:
        text += "/" + ("/".join(den) if len(den) == 1 else "/".join(den))
    return text


def _power(exponent) -> str:
    """'^2' for 2, '^0.5' for 1/2 (a form pint reads back), '' for 1."""
    if exponent == 1:
        return ""
    value = float(exponent)
    return f"^{int(value)}" if value.is_integer() else f"^{value:g}"


@lru_cache(maxsize=None)
def _named_dimension(name: str):
    return ureg.Unit(name).dimensionality


_ANGLES = ("radian", "degree", "revolution", "turn", "arcminute", "arcsecond", "grade",
           "revolutions_per_minute", "rpm")


def si_unit_of(quantity: pint.Quantity) -> str:
    """SI unit text of a quantity, keeping 'rad' for angles, angular rates and accelerations."""
    text = si_unit_text(quantity.dimensionality)
    if any(angle in name for name in quantity.units._units for angle in _ANGLES):
        return {"1": "rad", "1/s": "rad/s", "1/s^2": "rad/s^2"}.get(text, text)
    return text


def describe(dim) -> str:
    """Readable dimension, e.g. 'energy (J)' or 'kg*m/s' ."""
    if dim is ANY:
        return "any dimension"
    if dim == DIMENSIONLESS:
        return "dimensionless"
    text = si_unit_text(dim)
    name = _NAMED.get(text)
    return f"{name} ({text})" if name else text


def same(a, b) -> bool:
    return a is ANY or b is ANY or a == b


class DimensionChecker:
    """Infers the dimension of a sympy expression from the dimensions of its symbols.

    `symbols` maps symbol names to dimensions; `series` is an optional
    function giving the dimension of a query's first argument.
    """

    def __init__(self, symbols: dict, where: Where = Where()) -> None:
        self.symbols = symbols
        self.where = where

    def fail(self, problem: str, fix: str) -> None:
        raise DimensionError(problem, file=self.where.file, line=self.where.line,
                             key=self.where.key, fix=fix)

    def check(self, expr: sp.Expr, expected, what: str) -> None:
        """Raise DimensionError unless `expr` has dimension `expected`."""
        dim = self.infer(expr)
        if not same(dim, expected):
            self.fail(f"{what} must be {describe(expected)}, but '{_term(expr)}' is {describe(dim)}",
                      f"check the units of the parameters in it; each term must be {describe(expected)}")

    def infer(self, expr):
        if expr.is_Number:
            return ANY if expr.is_zero else DIMENSIONLESS
        if expr is sp.pi or expr is sp.E or expr.is_NumberSymbol:
            return DIMENSIONLESS
        if expr.is_Symbol:
            if expr.name not in self.symbols:
                self.fail(f"no dimension known for '{expr.name}'", "declare it with a unit")
            return self.symbols[expr.name]
        if expr.is_Add:
            return self._add(expr)
        if expr.is_Mul:
            dim = DIMENSIONLESS
            for arg in expr.args:
                part = self.infer(arg)
                if part is ANY:
                    return ANY
                dim = dim * part
            return dim
        if expr.is_Pow:
            return self._pow(expr)
        return self._function(expr)

    def _add(self, expr):
        dims = [(arg, self.infer(arg)) for arg in expr.args]
        known = [(a, d) for a, d in dims if d is not ANY]
        for arg, dim in known[1:]:
            if dim != known[0][1]:
                self.fail(f"terms of different dimensions are added: '{_term(known[0][0])}' is "
                          f"{describe(known[0][1])} but '{_term(arg)}' is {describe(dim)}",
                          "check the units of the parameters in each term")
        return known[0][1] if known else ANY

    def _pow(self, expr):
        base, exponent = expr.args
        exp_dim = self.infer(exponent)
        if not same(exp_dim, DIMENSIONLESS):
            self.fail(f"exponent '{_term(exponent)}' is {describe(exp_dim)}",
                      "an exponent must be dimensionless")
        base_dim = self.infer(base)
        if base_dim is ANY or base_dim == DIMENSIONLESS:
            return base_dim
        if not exponent.is_number:
            self.fail(f"'{_term(base)}' ({describe(base_dim)}) is raised to a symbolic power",
                      "only dimensionless quantities may have symbolic exponents")
        return base_dim ** sp.Rational(exponent)

    def _function(self, expr):
        func = expr.func
        query = query_name(func)
        if query is not None:
            return self._query(query, expr)
        name = getattr(func, "__name__", str(func))
        dims = [self.infer(a) for a in expr.args]
        if func in (sp.Abs, sp.Min, sp.Max, sp.re, sp.im):
            known = [d for d in dims if d is not ANY]
            if any(d != known[0] for d in known):
                self.fail(f"arguments of {name}() have different dimensions", "give them one unit")
            return known[0] if known else ANY
        if func in (sp.sign, sp.Heaviside):
            return DIMENSIONLESS
        if func is sp.atan2:
            if not same(dims[0], dims[1]):
                self.fail("the two arguments of atan2() have different dimensions",
                          "give them one unit")
            return DIMENSIONLESS
        for arg, dim in zip(expr.args, dims):
            if not same(dim, DIMENSIONLESS):
                self.fail(f"the argument of {name.lower()}() must be dimensionless, but "
                          f"'{_term(arg)}' is {describe(dim)}",
                          "divide by a reference value, e.g. sin(Omega*t) with Omega in rad/s")
        return DIMENSIONLESS

    def _query(self, name: str, expr):
        if name in ("natural_frequency", "damped_frequency", "undamped_frequency"):
            return ureg.hertz.dimensionality
        if name in ("damping_ratio", "log_decrement"):
            return DIMENSIONLESS
        if name == "period":
            return ureg.second.dimensionality
        if name == "frf_peak_frequency":
            return ureg.hertz.dimensionality
        if name in ("at", "frf"):
            second = self.infer(expr.args[1])
            unit = "s" if name == "at" else "Hz"
            own = ureg.Unit(unit).dimensionality
            if not (same(second, DIMENSIONLESS) or second == own):
                self.fail(f"the second argument of {name}() is a number in {unit}, "
                          f"but it is {describe(second)}", f"write a plain number of {unit}")
        return self.infer(expr.args[0])


def _term(expr) -> str:
    text = sp.sstr(expr)
    return text if len(text) <= 60 else text[:57] + "..."


def _short(exc: Exception) -> str:
    text = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return text[:80]
