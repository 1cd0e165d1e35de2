"""The safe expression language: injection refused, limits enforced, plain names, columns.

parse_expression must return a sympy expression or raise ExpressionError for
any text, quickly, and must never run the text (no eval/exec/sympify).
"""

from __future__ import annotations

import builtins
import contextlib
import signal
import time
from datetime import timedelta

import pytest
import sympy as sp
import sympy.parsing.sympy_parser as sympy_parser
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from calcsheaf.calcfile.expressions import Scope, Where, check_with_values, parse_expression, symbol
from calcsheaf.errors import ExpressionError

NAMES = frozenset({"x", "k", "m", "c", "E", "I", "N", "S", "Q", "gamma", "t"})
SCOPE = Scope(names=NAMES, coordinates=frozenset({"x"}), velocities=True, accelerations=True)
RESULT_SCOPE = Scope(names=frozenset({"k", "m", "c", "E", "t"}), coordinates=frozenset({"x"}),
                     velocities=True, accelerations=True, queries=True,
                     series_names=frozenset({"x", "F_out"}), what="a result")
HARD_LIMIT_S = 5.0          # no single parse may take longer (SIGALRM)


class ParseTimeout(BaseException):
    """Raised by SIGALRM; a BaseException so that no `except Exception` inside sympy swallows it."""


@contextlib.contextmanager
def time_limit(seconds: float):
    """Fail instead of hanging: SIGALRM interrupts a parse that runs too long."""
    def expire(signum, frame):
        raise ParseTimeout(f"parse took longer than {seconds} s")
    previous = signal.signal(signal.SIGALRM, expire)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def parse(text, scope=SCOPE, where=Where()):
    with time_limit(HARD_LIMIT_S):
        return parse_expression(text, scope, where)


def parses_or_refuses(text, scope=SCOPE) -> None:
    """The property: a sympy expression or an ExpressionError, nothing else."""
    try:
        result = parse(text, scope)
    except ExpressionError as exc:
        assert exc.problem
        return
    assert isinstance(result, sp.Basic)


# ---------------------------------------------------------------------------------------
# Injection
# ---------------------------------------------------------------------------------------
INJECTIONS = [
    "__import__('os').system('touch {sentinel}')",
    "__import__('os')",
    "open('{sentinel}', 'w')",
    "exec(\"open('{sentinel}', 'w')\")",
    "eval(\"open('{sentinel}', 'w')\")",
    "compile('1', 'f', 'eval')",
    "getattr(x, 'real')",
    "globals()",
    "x.__class__.__mro__[1].__subclasses__()",
    "().__class__.__bases__[0]",
    "x.real",
    "sin.__call__(x)",
    "dot(x).real",
    "(lambda: open('{sentinel}', 'w'))()",
    "lambda: 0",
    "x[0]",
    "k[1:2]",
    "'abc'",
    "b'abc'",
    "x + 'a'",
    "[open('{sentinel}', 'w') for i in (1,)]",
    "{{i for i in (1,)}}",
    "{{i: i for i in (1,)}}",
    "(open('{sentinel}', 'w') for i in (1,))",
    "(y := 1)",
    "(x := open('{sentinel}', 'w'))",
    "f'{{open(\"{sentinel}\", \"w\")}}'",
    "f'{{x}}'",
    "sin(x=1)",
    "sin(*[x])",
    "x if k else m",
    "x < k",
    "x and k",
    "not x",
    "~x",
    "x @ k",
    "x % k",
    "x // k",
    "x << 2",
    "x ^ 2",
    "...",
    "1j",
    "None",
    "True",
    "x; import os",
    "import os",
    "yield x",
    "await x",
    "(x, k)",
    "[x]",
    "{{x: 1}}",
    "dot(__import__('os'))",
    "S(1)",
    "N(x)",
    "gamma(2)",
    "sympify('x')",
    "peak(x)",
]


@pytest.mark.parametrize("template", INJECTIONS)
def test_injection_is_refused_and_nothing_runs(template, tmp_path):
    sentinel = tmp_path / "sentinel"
    with pytest.raises(ExpressionError):
        parse(template.format(sentinel=sentinel))
    assert not sentinel.exists()


def test_the_parser_never_calls_eval_exec_or_string_sympify(monkeypatch, tmp_path):
    """Every path (accepted and refused) runs with eval, exec and parse_expr booby-trapped."""
    def trapped(real):
        def run(source, *args, **kwargs):
            if isinstance(source, (str, bytes)):      # code objects (module imports) pass
                raise AssertionError(f"text reached {real.__name__}: {source!r}")
            return real(source, *args, **kwargs)
        return run

    def trap(*args, **kwargs):
        raise AssertionError("text reached parse_expr")
    monkeypatch.setattr(builtins, "eval", trapped(builtins.eval))
    monkeypatch.setattr(builtins, "exec", trapped(builtins.exec))
    monkeypatch.setattr(sympy_parser, "parse_expr", trap)
    for text in ("m/2*dot(x)**2 + k/2*x**2", "E*I*sin(pi*t) + sqrt(abs(x))", "max(x, k, 2) - step(x)"):
        assert isinstance(parse(text), sp.Basic)
    for template in INJECTIONS:
        with pytest.raises(ExpressionError):
            parse(template.format(sentinel=tmp_path / "sentinel"))
    assert isinstance(parse("peak(F_out) / k + at(ddot(x), 0.5) * m", RESULT_SCOPE), sp.Basic)


# ---------------------------------------------------------------------------------------
# Denial-of-service limits
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("text", ["9**9**9", "9**9**9**9", "(9**9)**9**9", "9.0**9**9", "-9**9**9",
                                  "x**9**9**9", "10**10**10", "2**2**2**2**2**2", "(10**60)**60",
                                  "((10**60)**60)**60", "1e300**2", "9" * 2000, "2**-10000"])
def test_huge_numeric_powers_are_refused_quickly(text):
    start = time.perf_counter()
    with pytest.raises(ExpressionError):
        parse(text)
    assert time.perf_counter() - start < 1.0


@pytest.mark.parametrize("text", [
    "(" * 1000 + "x" + ")" * 1000,
    "-" * 3000 + "x",
    "sin(" * 100 + "x" + ")" * 100,
    "x" + "**x" * 300,
    "1+" * 1999 + "1",
    "[" * 300 + "]" * 300,
    "x" * 5000,
    "abs(" * 61 + "x" + ")" * 61,
])
def test_deeply_nested_or_oversized_input_is_refused(text):
    start = time.perf_counter()
    with pytest.raises(ExpressionError):
        parse(text)
    assert time.perf_counter() - start < 2.0


def test_nested_exponential_of_a_float_is_refused_within_a_second():
    """Regression: sympy evaluates exp() of a Float eagerly; exp(exp(1e5)) built a number with a
    43 000-digit exponent and did not return."""
    with time_limit(1.0), pytest.raises(ExpressionError):
        parse_expression("exp(exp(1e5))", SCOPE)


@pytest.mark.parametrize("text", ["min(x, sqrt(-1))", "max(1, log(0))", "step(sqrt(-1))",
                                  "min(x, log(-1))"])
def test_non_real_arguments_of_min_max_step_are_refused(text):
    """Regression: sympy's Min/Max/Heaviside raised ValueError for complex or infinite arguments,
    which escaped the parser (min(x, log(-1)) was found by the fuzz test below)."""
    with pytest.raises(ExpressionError):
        parse(text)


# ---------------------------------------------------------------------------------------
# Plain engineering names
# ---------------------------------------------------------------------------------------
def test_engineering_names_are_plain_real_symbols():
    expr = parse("E*I + N*S/Q + gamma")
    names = ("E", "I", "N", "S", "Q", "gamma")
    assert expr.free_symbols == {symbol(n) for n in names}
    assert all(s.is_real for s in expr.free_symbols)
    values = dict(zip(names, (2.0, 3.0, 5.0, 7.0, 4.0, 0.25)))
    assert float(expr.xreplace({symbol(k): v for k, v in values.items()})) == 2 * 3 + 5 * 7 / 4 + 0.25
    assert not expr.has(sp.E) and not expr.has(sp.I) and not expr.has(sp.EulerGamma)
    assert parse("I**2") == symbol("I") ** 2          # not the imaginary unit (I**2 = -1)
    assert parse("E") != sp.E
    assert parse("pi") == sp.pi
    assert parse("2*pi*t") == 2 * sp.pi * sp.Symbol("t", real=True)


# ---------------------------------------------------------------------------------------
# Error positions
# ---------------------------------------------------------------------------------------
POSITIONS = [
    ("k*x + foo", 7),           # unknown name
    ("x + 'a'", 5),             # string literal
    ("x + k.real", 5),          # attribute access starts at its object
    ("x + blah(2)", 5),         # unknown function
    ("x + * 2", 5),             # syntax error
    ("   x + foo", 8),          # leading blanks count: positions are in the text as written
    ("sin(x) + x[0]", 10),      # subscript
    ("m*dot(k)", 3),            # dot() of a non-coordinate
]


@pytest.mark.parametrize("text, offset", POSITIONS)
def test_error_positions_point_at_the_offending_token(text, offset):
    with pytest.raises(ExpressionError) as info:
        parse(text)
    assert f"character {offset} of the expression" in info.value.problem
    # With the value's file column known, the error carries the file column of the token.
    with pytest.raises(ExpressionError) as info:
        parse(text, where=Where(file="c.toml", line=7, key="energy.kinetic", column=13))
    assert info.value.column == 13 + offset - 1
    assert info.value.location == f"c.toml:7:{13 + offset - 1}"


def test_a_non_ascii_character_is_refused_at_its_position():
    """Names are ASCII; a non-ASCII letter is refused where it stands (counted in characters)."""
    scope = Scope(names=NAMES | {"θ"}, coordinates=frozenset({"x"}), velocities=True)
    with pytest.raises(ExpressionError) as info:
        parse("k + θ", scope)
    assert "character 'θ' (U+03B8 GREEK SMALL LETTER THETA) is not allowed" in info.value.problem
    assert "character 5 of the expression" in info.value.problem
    assert "theta for θ" in info.value.fix


# ---------------------------------------------------------------------------------------
# Property-based fuzzing
# ---------------------------------------------------------------------------------------
TOKENS = ["x", "k", "m", "E", "I", "t", "pi", "F_out", "0", "1", "2", "9", "64", "0.5", "1e308", "1e-300",
          "-1", "+", "-", "*", "/", "**", "^", "%", "//", "@", "(", ")", "[", "]", "{", "}", ",", ".",
          ":", ":=", "=", "==", "<", "'", '"', "f'", "\\", "#", "\n", " ", "lambda", "if", "else",
          "for", "in", "not", "and", "__import__", "__class__", "os", "system", "sin", "cos", "atan2",
          "exp", "log", "sqrt", "abs", "sign", "step", "min", "max", "dot", "ddot", "peak", "at",
          "natural_frequency", "period", "frf", "frf_peak", "equilibrium", "1j", "...", "*x", "**9"]

FUZZ = settings(max_examples=150, deadline=timedelta(seconds=3), database=None, derandomize=True,
                suppress_health_check=[HealthCheck.too_slow])


@FUZZ
@given(st.text(max_size=120))
def test_fuzz_random_text(text):
    parses_or_refuses(text)


@FUZZ
@given(st.lists(st.sampled_from(TOKENS), max_size=30).map("".join))
def test_fuzz_token_soup(text):
    parses_or_refuses(text)


@FUZZ
@given(st.lists(st.sampled_from(TOKENS), max_size=30).map(" ".join))
def test_fuzz_token_soup_in_result_scope(text):
    parses_or_refuses(text, RESULT_SCOPE)


ATOMS = st.sampled_from(["x", "k", "m", "t", "pi", "1", "2", "0.5", "dot(x)", "ddot(x)", "1e300", "-1"])


def _combine(children):
    pair = st.tuples(children, children)
    return st.one_of(
        st.builds(lambda a: f"-({a})", children),
        st.builds(lambda p, o: f"({p[0]}) {o} ({p[1]})", pair, st.sampled_from(["+", "-", "*", "/", "**"])),
        st.builds(lambda f, a: f"{f}({a})", st.sampled_from(
            ["sin", "cos", "tan", "asin", "acos", "atan", "sinh", "cosh", "tanh", "exp", "log", "sqrt",
             "abs", "sign", "step"]), children),
        st.builds(lambda f, p: f"{f}({p[0]}, {p[1]})", st.sampled_from(["atan2", "min", "max"]), pair),
    )


@FUZZ
@given(st.recursive(ATOMS, _combine, max_leaves=12))
def test_fuzz_well_formed_expressions(text):
    parses_or_refuses(text)


# ---------------------------------------------------------------------------------------
# What a checker would read differently from the parser (issue 13, item 9)
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("text, words", [
    ("k*x #*1.5", "'#' inside an expression would start a comment, so '#*1.5' would be ignored"),
    ("k*x  # DAF 1.5", "'#' inside an expression would start a comment"),
    ("ｋ*x", "U+FF4B FULLWIDTH LATIN SMALL LETTER K"),
    ("k*x²", "U+00B2 SUPERSCRIPT TWO"),
    ("k*x − m", "U+2212 MINUS SIGN"),
    ("k\u00a0*x", "U+00A0 NO-BREAK SPACE"),
])
def test_text_the_parser_would_read_differently_is_refused(text, words):
    with pytest.raises(ExpressionError) as info:
        parse(text)
    assert words in info.value.problem


def test_a_fullwidth_letter_is_not_folded_into_a_declared_name():
    """Python's parser NFKC-folds identifiers: 'ｍ' would silently become the parameter 'm'."""
    with pytest.raises(ExpressionError) as info:
        parse("ｍ*x")
    assert "type it as the plain ASCII 'm'" in info.value.fix


@pytest.mark.parametrize("text, values", [
    ("sqrt(k/m)", {"k": 1000.0, "m": 10.0}),
    ("asin(c/k)*x", {"c": 0.5, "k": 1.0}),
    ("(c - k)**2", {"c": 1.0, "k": 3.0}),              # a negative base to an integer power
    ("log(k)*x + acos(c)", {"k": 2.0, "c": -1.0}),
])
def test_functions_of_parameters_with_real_values_pass(text, values):
    check_with_values(parse(text), values)


@pytest.mark.parametrize("text, values, words", [
    ("asin(c/k)*x", {"c": 2.0, "k": 1.0}, "'asin(c/k)' is not a real number with the parameter values (asin of 2)"),
    ("acos(c)", {"c": -1.5}, "(acos of -1.5)"),
    ("log(c - k)", {"c": 1.0, "k": 2.0}, "(log of -1)"),
    ("sqrt(c - k)*x", {"c": 1.0, "k": 2.0}, "is not a real number"),
    ("(c - k)**0.5", {"c": 1.0, "k": 2.0}, "is not a real number"),
    ("x/(c - k)", {"c": 2.0, "k": 2.0}, "is not a finite number"),
])
def test_functions_of_parameters_without_a_real_value_are_refused(text, values, words):
    with pytest.raises(ExpressionError) as info:
        check_with_values(parse(text), values, Where(file="c.toml", line=4, key="energy.potential"))
    assert words in info.value.problem
    assert info.value.location == "c.toml:4" and info.value.key == "energy.potential"
    assert "asin and acos need arguments from -1 to 1" in info.value.fix
