"""The safe expression language: text -> sympy by walking a whitelisted ast.

User text never reaches eval, sympify, parse_expr or S(): a calc file may come
from anyone.  Every name becomes a plain real symbol (so E, I, N, S, Q, gamma
are ordinary engineering names) except `pi`.  The velocity of a coordinate q is
the symbol `dot(q)`, its acceleration `ddot(q)`.  Query functions (peak, at,
natural_frequency, ...) become undefined sympy functions, evaluated later.
"""

from __future__ import annotations

import ast
import cmath
import difflib
import math
import unicodedata
import warnings
from dataclasses import dataclass, field

import sympy as sp
from sympy.core.function import AppliedUndef

from ..errors import ExpressionError

MAX_LENGTH = 4000          # characters
MAX_NODES = 800            # syntax-tree nodes
MAX_DEPTH = 60             # nesting depth
MAX_EXPONENT = 64          # |n| of a numeric power
MAX_MAGNITUDE_DIGITS = 300  # |base**n| of numbers stays below 10**300

TIME = sp.Symbol("t", real=True)

MATH_FUNCTIONS = {
    "sin": (sp.sin, 1), "cos": (sp.cos, 1), "tan": (sp.tan, 1),
    "asin": (sp.asin, 1), "acos": (sp.acos, 1), "atan": (sp.atan, 1),
    "atan2": (sp.atan2, 2), "sinh": (sp.sinh, 1), "cosh": (sp.cosh, 1),
    "tanh": (sp.tanh, 1), "exp": (sp.exp, 1), "log": (sp.log, 1),
    "sqrt": (sp.sqrt, 1), "abs": (sp.Abs, 1), "sign": (sp.sign, 1),
    "step": (sp.Heaviside, 1), "min": (sp.Min, None), "max": (sp.Max, None),
}

# Query functions of results: name -> number of arguments, and whether the
# first argument is a time-history expression ("series"), a coordinate name
# ("coordinate") or a mode number ("mode").
QUERY_FUNCTIONS = {
    "peak": (1, "series"), "max": (1, "series"), "min": (1, "series"),
    "at": (2, "series"), "initial": (1, "series"), "final": (1, "series"),
    "rms": (1, "series"), "mean": (1, "series"),
    "period": (1, "coordinate"), "log_decrement": (1, "coordinate"),
    "equilibrium": (1, "coordinate"),
    "natural_frequency": (1, "mode"), "damping_ratio": (1, "mode"),
    "damped_frequency": (1, "mode"), "undamped_frequency": (1, "mode"),
    "frf": (2, "response"), "frf_peak": (1, "response"),
    "frf_peak_frequency": (1, "response"),
}
QUERY_NAMES = frozenset(QUERY_FUNCTIONS)
# Numeric twins of the one-argument functions, to test a call on a number before sympy does.
_NUMERIC = {"sin": cmath.sin, "cos": cmath.cos, "tan": cmath.tan, "asin": cmath.asin,
            "acos": cmath.acos, "atan": cmath.atan, "sinh": cmath.sinh, "cosh": cmath.cosh,
            "tanh": cmath.tanh, "exp": cmath.exp, "log": cmath.log, "sqrt": cmath.sqrt}
_FUNCTION_LIST = ", ".join(sorted(MATH_FUNCTIONS) + ["dot", "ddot"])
_SYNTAX_NAMES = {
    "ListComp": "a list comprehension", "SetComp": "a set comprehension",
    "DictComp": "a dict comprehension", "GeneratorExp": "a generator expression",
    "NamedExpr": "assignment (:=)", "Starred": "'*' unpacking", "Compare": "a comparison",
    "BoolOp": "and/or", "IfExp": "if ... else", "List": "a list [...]", "Tuple": "a tuple (a, b)",
    "Dict": "a dict {...}", "Set": "a set {...}", "JoinedStr": "an f-string",
    "Await": "await", "Yield": "yield", "YieldFrom": "yield", "Slice": "a slice",
    "UnaryOp": "this operator (not, ~)", "BinOp": "this operator (only + - * / ** are allowed)",
}
RESERVED_NAMES = frozenset({"t", "pi", "dot", "ddot"} | set(MATH_FUNCTIONS) | QUERY_NAMES)


def query_function(name: str) -> sp.FunctionClass:
    """The undefined sympy function that stands for query `name`."""
    return sp.Function(f"query_{name}")


def query_name(func) -> str | None:
    """`peak` for the function made by query_function("peak"), else None."""
    name = getattr(func, "__name__", "")
    return name[6:] if name.startswith("query_") and name[6:] in QUERY_NAMES else None


def symbol(name: str) -> sp.Symbol:
    """The plain real symbol of a calc name."""
    return sp.Symbol(name, real=True)


def velocity(name: str) -> sp.Symbol:
    return sp.Symbol(f"dot({name})", real=True)


def acceleration(name: str) -> sp.Symbol:
    return sp.Symbol(f"ddot({name})", real=True)


@dataclass(frozen=True)
class Scope:
    """What an expression may refer to.

    names: plain names allowed (parameters, coordinates, outputs, `t`, ...).
    coordinates: names allowed inside dot()/ddot().
    velocities/accelerations: whether dot()/ddot() may appear.
    queries: whether query functions may appear (results, criteria).
    series_names: extra names allowed inside a query's series argument.
    """
    names: frozenset[str]
    coordinates: frozenset[str] = frozenset()
    velocities: bool = False
    accelerations: bool = False
    queries: bool = False
    series_names: frozenset[str] = field(default_factory=frozenset)
    what: str = "expression"


@dataclass(frozen=True)
class Where:
    """Where a value sits: file, line, key path, and the file column of its first character."""
    file: str | None = None
    line: int | None = None
    key: str | None = None
    column: int | None = None

    def at(self, offset: int | None) -> int | None:
        """File column of character `offset` (1-based) of the value; None when unknown."""
        if self.column is None or offset is None:
            return None
        return self.column + offset - 1


def parse_expression(text, scope: Scope, where: Where = Where()) -> sp.Expr:
    """Parse `text` in `scope` into a sympy expression, or raise ExpressionError."""
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise _error(where, f"expected an expression as text, got {type(text).__name__}",
                     'write it as a quoted string, e.g. "k/2 * x**2"')
    text = str(text)
    if len(text) > MAX_LENGTH:
        raise _error(where, f"expression is {len(text)} characters long (limit {MAX_LENGTH})",
                     "split it into named outputs or parameters")
    if not text.strip():
        raise _error(where, "expression is empty", 'write an expression, or "0"')
    check_characters(text, where)
    lead = len(text) - len(text.lstrip())
    try:
        with warnings.catch_warnings():        # e.g. "invalid decimal literal": the error says it
            warnings.simplefilter("ignore", SyntaxWarning)
            tree = ast.parse(text.strip(), mode="eval")
    except SyntaxError as exc:
        offset = lead + exc.offset if exc.offset else None
        raise _error(where, f"cannot read the expression: {exc.msg}{_character(where, offset)}",
                     "check the brackets and operators; powers are written **",
                     column=where.at(offset)) from None
    except (RecursionError, MemoryError, ValueError):
        raise _error(where, "expression is nested too deeply",
                     "simplify it or split it into parameters") from None
    _check_size(tree, where)
    return _Converter(scope, where, text.strip(), lead).convert(tree.body, depth=0)


# Look-alikes of operators typed by word processors and keyboards: what to write instead.
_LOOKALIKES = {"\u2212": "-", "\u2013": "-", "\u2014": "-", "\u00d7": "*", "\u00b7": "*",
               "\u22c5": "*", "\u2217": "*", "\u00f7": "/", "\u2044": "/", "\u00b2": "**2",
               "\u00b3": "**3", "\u00a0": "a plain space"}


def check_characters(text: str, where: Where = Where()) -> None:
    """Refuse what the Python parser would read differently from what a checker sees.

    '#' would start a comment (the rest of the text silently ignored, while the page
    shows it); a non-ASCII character would be folded (NFKC: full-width 'ｍ' reads as 'm',
    '²' as '2') or refused with a less helpful message.  Calc names are ASCII."""
    for offset, char in enumerate(text, start=1):
        if char == "#":
            rest = text[offset - 1:].strip()
            shown = rest if len(rest) <= 40 else rest[:37] + "..."
            raise _error(where, f"'#' inside an expression would start a comment, so '{shown}' "
                         f"would be ignored while the page shows it{_character(where, offset)}",
                         "remove the '#' (and the text after it) from inside the quotes; "
                         "a TOML comment goes after the closing quote",
                         column=where.at(offset))
        if not char.isascii():
            raise _error(where, f"{describe_character(char)} is not allowed in an expression"
                         f"{_character(where, offset)}", ascii_fix(char), column=where.at(offset))


def describe_character(char: str) -> str:
    """`character 'ｍ' (U+FF4D FULLWIDTH LATIN SMALL LETTER M)`."""
    return f"character '{char}' (U+{ord(char):04X} {unicodedata.name(char, 'unnamed')})"


def ascii_fix(char: str) -> str:
    """What to type instead of the non-ASCII `char`."""
    if char in _LOOKALIKES:
        return f"write {_LOOKALIKES[char]} instead"
    if unicodedata.category(char) == "Nd":       # a digit of another script: say its value
        return (f"type the plain ASCII digit '{unicodedata.digit(char)}' (this character is the "
                f"digit {unicodedata.digit(char)} of another script, whatever it looks like)")
    folded = unicodedata.normalize("NFKC", char)
    if folded != char and folded.isascii() and folded.isprintable():
        return f"type it as the plain ASCII '{folded}' (it looks alike but is another character)"
    return ("write names in plain ASCII letters, digits and _ (e.g. theta for θ, omega_n for "
            "ωₙ: they are shown as Greek letters) and operators as + - * / **")


def check_with_values(expr: sp.Expr, values: dict[str, float], where: Where = Where()) -> None:
    """Refuse a function or power of given values only (parameters, SI) that has no finite
    real value, e.g. asin(L2/L) with L2 > L: sympy would keep it complex and a later
    evaluation could drop the imaginary part without a word."""
    known = {symbol(name): value for name, value in values.items()}
    for node in sp.preorder_traversal(expr):
        if not (isinstance(node, (sp.Function, sp.Pow)) and not isinstance(node, AppliedUndef)):
            continue
        if not node.free_symbols or not node.free_symbols <= set(known):
            continue
        value = _value(node.subs(known))
        if cmath.isfinite(value) and abs(value.imag) <= 1e-12 * max(1.0, abs(value.real)):
            continue
        args = ", ".join(_short_number(_value(a.subs(known)).real) for a in node.args)
        what = "not a finite number" if not cmath.isfinite(value) else "not a real number"
        raise _error(where, f"'{node}' is {what} with the parameter values "
                     f"({type(node).__name__.lower()} of {args})",
                     "check the parameter values: asin and acos need arguments from -1 to 1, "
                     "log and sqrt (or a fractional power) positive ones, and no denominator "
                     "may be zero")


def _value(expr: sp.Expr) -> complex:
    """The numeric value of a closed expression; nan when it has none."""
    try:
        return complex(expr.evalf(15))
    except (TypeError, ValueError, OverflowError):
        return complex("nan")


def _short_number(value: float) -> str:
    return f"{value:.6g}"


def _character(where: Where, offset: int | None) -> str:
    """' (character N of the expression)' when the file column is unknown, else ''."""
    if offset is None or where.at(offset) is not None:
        return ""
    return f" (character {offset} of the expression)"


def _check_size(tree: ast.AST, where: Where) -> None:
    count = sum(1 for _ in ast.walk(tree))
    if count > MAX_NODES:
        raise _error(where, f"expression has {count} terms and operators (limit {MAX_NODES})",
                     "split it into named outputs or parameters")


def _error(where: Where, problem: str, fix: str | None = None,
           column: int | None = None) -> ExpressionError:
    return ExpressionError(problem, file=where.file, line=where.line, key=where.key,
                           column=column, fix=fix)


def _close(name: str, candidates) -> str | None:
    """The candidate closest to `name`, if any is close."""
    close = difflib.get_close_matches(name, sorted(candidates), n=1)
    return close[0] if close else None


class _Converter:
    _BINOPS = {ast.Add: "+", ast.Sub: "-", ast.Mult: "*", ast.Div: "/", ast.Pow: "**"}

    def __init__(self, scope: Scope, where: Where, text: str, lead: int = 0) -> None:
        self.scope = scope
        self.where = where
        self.text = text
        self.lead = lead

    def offset(self, node: ast.AST) -> int | None:
        """1-based character position of `node` in the text as written (ast counts UTF-8 bytes)."""
        col = getattr(node, "col_offset", None)
        if col is None:
            return None
        lines = self.text.split("\n")
        row = getattr(node, "lineno", 1) - 1
        before = sum(len(line) + 1 for line in lines[:row])
        chars = len(lines[row].encode("utf-8")[:col].decode("utf-8", "ignore"))
        return self.lead + before + chars + 1

    def fail(self, node: ast.AST, problem: str, fix: str | None = None, *, quote: bool = True):
        """Raise ExpressionError at `node`; `quote` adds the offending text when it is short."""
        offset = self.offset(node)
        token = ast.get_source_segment(self.text, node) if hasattr(node, "lineno") else None
        if quote and token:
            problem += f" in '{token}'" if len(token) <= 60 else f" in '{token[:57]}...'"
        problem += _character(self.where, offset)
        raise _error(self.where, problem, fix, column=self.where.at(offset))

    def convert(self, node: ast.AST, depth: int, in_series: bool = False) -> sp.Expr:
        if depth > MAX_DEPTH:
            self.fail(node, f"expression is nested more than {MAX_DEPTH} levels deep",
                      "simplify it or split it into parameters", quote=False)
        if isinstance(node, ast.Constant):
            return self._constant(node)
        if isinstance(node, ast.Name):
            return self._name(node, in_series)
        if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.USub, ast.UAdd)):
            operand = self.convert(node.operand, depth + 1, in_series)
            return -operand if isinstance(node.op, ast.USub) else operand
        if isinstance(node, ast.BinOp) and type(node.op) in self._BINOPS:
            return self._binop(node, depth, in_series)
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.BitXor):
            self.fail(node, "'^' is not a power here", "write powers with **, e.g. x**2")
        if isinstance(node, ast.Call):
            return self._call(node, depth, in_series)
        if isinstance(node, ast.Attribute):
            self.fail(node, "attribute access is not allowed", "use plain names only")
        if isinstance(node, ast.Subscript):
            self.fail(node, "subscripts are not allowed", "use plain names such as x_1")
        if isinstance(node, ast.Lambda):
            self.fail(node, "lambda is not allowed", "write a plain expression")
        what = _SYNTAX_NAMES.get(type(node).__name__, f"'{type(node).__name__}'")
        self.fail(node, f"{what} is not part of the expression language",
                  "use numbers, names, + - * / **, parentheses and the listed functions")

    def _constant(self, node: ast.Constant) -> sp.Expr:
        value = node.value
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            self.fail(node, "only numbers may appear as literals", "remove the quotes or text")
        if isinstance(value, float):
            if not math.isfinite(value):
                self.fail(node, "number is not finite", "use a finite number")
            return sp.Float(value)
        if value.bit_length() > 1000:
            self.fail(node, "integer literal is too large", "use a smaller number")
        return sp.Integer(value)

    def _name(self, node: ast.Name, in_series: bool) -> sp.Expr:
        name = node.id
        if name == "pi":
            return sp.pi
        if name == "t" and "t" in self.scope.names:
            return TIME
        allowed = self.scope.names | (self.scope.series_names if in_series else frozenset())
        if name in allowed:
            return symbol(name)
        if name in self.scope.series_names:
            self.fail(node, f"'{name}' is a time history and cannot stand alone in {self.scope.what}",
                      f"use it inside a query such as peak({name})", quote=False)
        if name in MATH_FUNCTIONS or name in QUERY_NAMES:
            self.fail(node, f"'{name}' is a function but is used as a name in {self.scope.what}",
                      f"call it, e.g. {name}(...)", quote=False)
        close = _close(name, allowed | {"pi"})
        if close:
            self.fail(node, f"unknown name '{name}' in {self.scope.what} (did you mean '{close}'?)",
                      f"write '{close}', or define {name} under [parameters]", quote=False)
        self.fail(node, f"unknown name '{name}' in {self.scope.what}",
                  f"define {name} under [parameters] (or as a coordinate), or correct the name",
                  quote=False)

    def _binop(self, node: ast.BinOp, depth: int, in_series: bool) -> sp.Expr:
        left = self.convert(node.left, depth + 1, in_series)
        right = self.convert(node.right, depth + 1, in_series)
        op = type(node.op)
        if op is ast.Add:
            return left + right
        if op is ast.Sub:
            return left - right
        if op is ast.Mult:
            return left * right
        if op is ast.Div:
            if right.is_zero:
                self.fail(node, "division by zero", "check the denominator")
            return left / right
        self._check_power(node, left, right)
        return left ** right

    def _check_numeric_call(self, node: ast.AST, name: str, args: list[sp.Expr]) -> None:
        """Refuse a call on numbers whose value is not a finite real number (before sympy
        evaluates it: exp(exp(1e5)) would otherwise build a number with 10**43429 digits)."""
        values = [complex(a.evalf(15)) for a in args]
        if any(abs(v.imag) > 1e-12 * max(1.0, abs(v.real)) for v in values):
            self.fail(node, f"an argument of {name}() is not a real number", "check the signs")
        numeric = _NUMERIC.get(name)
        if numeric is None:
            return
        try:
            value = numeric(values[0].real)
        except (OverflowError, ValueError, ZeroDivisionError):
            value = complex("nan")
        if not cmath.isfinite(value):
            self.fail(node, f"{name}() of {_short_number(values[0].real)} is not a finite number",
                      "check the argument: exp, sinh and cosh overflow above about 700, log needs a "
                      "positive value")
        if abs(value.imag) > 1e-12 * max(1.0, abs(value.real)):
            self.fail(node, f"{name}() of {_short_number(values[0].real)} is not a real number",
                      "check the argument: sqrt and log need positive values, asin and acos "
                      "values between -1 and 1")

    def _check_power(self, node: ast.AST, base: sp.Expr, exponent: sp.Expr) -> None:
        if not exponent.is_number:
            return
        value = complex(exponent.evalf(15))
        if abs(value) > MAX_EXPONENT:
            self.fail(node, f"power exponent {exponent} is too large (limit {MAX_EXPONENT})",
                      "use a smaller exponent")
        if base.is_number:
            magnitude = abs(complex(base.evalf(15)))
            if magnitude > 0 and abs(value.real) * abs(math.log10(magnitude)) > MAX_MAGNITUDE_DIGITS:
                self.fail(node, "numeric power is too large", "use a smaller number")
            if magnitude == 0 and value.real < 0:
                self.fail(node, "zero to a negative power", "check the exponent")
            if complex(base.evalf(15)).real < 0 and not exponent.is_integer:
                self.fail(node, "a negative number to a fractional power is not real",
                          "check the signs, or write -(a**b)")

    def _call(self, node: ast.Call, depth: int, in_series: bool) -> sp.Expr:
        if not isinstance(node.func, ast.Name):
            self.fail(node, "only the functions of the expression language may be called",
                      f"use plain calls such as sin(x); the functions are {_FUNCTION_LIST}")
        if node.keywords:
            self.fail(node, "keyword arguments are not allowed", "pass arguments by position")
        name = node.func.id
        if name in ("dot", "ddot"):
            return self._derivative(node, name, in_series)
        if self.scope.queries and name in QUERY_NAMES and not in_series and \
                not (name in ("max", "min") and len(node.args) != 1):
            return self._query(node, name, depth)
        if name in MATH_FUNCTIONS:
            func, arity = MATH_FUNCTIONS[name]
            if arity is not None and len(node.args) != arity:
                self.fail(node, f"{name}() takes {arity} argument(s), got {len(node.args)}",
                          f"call {name} with {arity} argument(s)")
            if arity is None and len(node.args) < 2:
                self.fail(node, f"{name}() takes two or more arguments here",
                          f"write {name}(a, b)")
            args = [self.convert(a, depth + 1, in_series) for a in node.args]
            if all(a.is_number for a in args):
                self._check_numeric_call(node, name, args)
            try:
                return func(*args)
            except (ValueError, TypeError, ArithmeticError) as exc:
                self.fail(node, f"{name}() cannot be applied to these arguments ({exc})",
                          "give it real, finite arguments")
        if name in QUERY_NAMES:
            self.fail(node, f"query function {name}() is only allowed in results, criteria "
                      "and crosscheck comparisons", "move it to a [[result]]")
        candidates = set(MATH_FUNCTIONS) | {"dot", "ddot"}
        if self.scope.queries:
            candidates |= QUERY_NAMES
        close = _close(name, candidates)
        if close:
            self.fail(node, f"unknown function '{name}' (did you mean '{close}'?)",
                      f"write {close}(...)", quote=False)
        self.fail(node, f"unknown function '{name}'",
                  f"use one of the functions {_FUNCTION_LIST}", quote=False)

    def _derivative(self, node: ast.Call, name: str, in_series: bool) -> sp.Expr:
        allowed = self.scope.accelerations if name == "ddot" else self.scope.velocities
        if self.scope.queries and not in_series:
            self.fail(node, f"{name}() is a time history here",
                      f"use it inside a query, e.g. peak({name}(x))")
        if not allowed:
            self.fail(node, f"{name}() is not allowed in {self.scope.what}",
                      "write it without time derivatives")
        if len(node.args) != 1 or not isinstance(node.args[0], ast.Name):
            self.fail(node, f"{name}() takes one coordinate name", f"write e.g. {name}(x)")
        coord = node.args[0].id
        if coord not in self.scope.coordinates:
            close = _close(coord, self.scope.coordinates)
            self.fail(node, f"'{coord}' is not a coordinate" + (f" (did you mean '{close}'?)" if close else ""),
                      f"write {name}({close})" if close else f"declare {coord} under [coordinates]")
        return velocity(coord) if name == "dot" else acceleration(coord)

    def _query(self, node: ast.Call, name: str, depth: int) -> sp.Expr:
        arity, kind = QUERY_FUNCTIONS[name]
        if len(node.args) != arity:
            self.fail(node, f"{name}() takes {arity} argument(s), got {len(node.args)}",
                      f"call {name} with {arity} argument(s)")
        first = node.args[0]
        if kind == "series":
            args = [self.convert(first, depth + 1, in_series=True)]
        elif kind in ("coordinate", "response"):
            if not isinstance(first, ast.Name) or first.id not in self._response_names(kind):
                self.fail(first, f"{name}() takes a "
                          f"{'coordinate' if kind == 'coordinate' else 'coordinate or output'} name",
                          f"write e.g. {name}({next(iter(sorted(self.scope.coordinates)), 'x')})")
            args = [symbol(first.id)]
        else:
            if not (isinstance(first, ast.Constant) and isinstance(first.value, int)
                    and not isinstance(first.value, bool) and first.value >= 1):
                self.fail(first, f"{name}() takes a mode number 1, 2, ...", f"write {name}(1)")
            args = [sp.Integer(first.value)]
        for extra in node.args[1:]:
            args.append(self.convert(extra, depth + 1))
        return query_function(name)(*args)

    def _response_names(self, kind: str) -> frozenset[str]:
        if kind == "coordinate":
            return self.scope.coordinates
        return self.scope.coordinates | self.scope.series_names
