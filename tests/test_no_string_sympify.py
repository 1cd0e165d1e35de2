"""No user text reaches code execution: an ast scan of every module under src/.

sympy's sympify, parse_expr and S() turn text into code with eval, and lambdify
sympifies a string argument the same way; eval/exec/compile run text directly.
Rules, checked on the syntax tree of every .py file under src/calcsheaf:

1. sympify, parse_expr, S(...) and anything from sympy.parsing are never called
   nor imported (simplest robust rule: the safe parser in calcfile/expressions.py
   builds sympy trees itself and needs none of them);
2. eval, exec, compile and __import__ are never called;
3. no argument of lambdify is text: not a string literal, an f-string, a
   str()/format()/join() call, a %-format, nor a name assigned text in the same
   function.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[1] / "src" / "calcsheaf"
FILES = sorted(SRC.rglob("*.py"))
FORBIDDEN_SYMPY = {"sympify", "parse_expr", "S", "parse_latex", "parse_mathematica"}
FORBIDDEN_BUILTINS = {"eval", "exec", "compile", "__import__"}
SYMPY_MODULES = {"sympy", "sp"}


def _called_name(call: ast.Call) -> tuple[str | None, str]:
    """(module alias or None, function name) of a call such as sp.lambdify(...) or S(...)."""
    func = call.func
    if isinstance(func, ast.Name):
        return None, func.id
    if isinstance(func, ast.Attribute):
        owner = func.value
        base = owner.id if isinstance(owner, ast.Name) else None
        return base, func.attr
    return None, ""


def _is_text(node: ast.AST, text_names: set[str]) -> bool:
    """True when `node` is, or is plainly built from, a string."""
    if isinstance(node, ast.Constant):
        return isinstance(node.value, (str, bytes))
    if isinstance(node, ast.JoinedStr):
        return True
    if isinstance(node, ast.Name):
        return node.id in text_names
    if isinstance(node, ast.BinOp) and isinstance(node.op, (ast.Mod, ast.Add)):
        return _is_text(node.left, text_names) or _is_text(node.right, text_names)
    if isinstance(node, ast.Call):
        _, name = _called_name(node)
        return name in {"str", "format", "join", "repr", "read_text", "decode"}
    if isinstance(node, (ast.List, ast.Tuple)):
        return any(_is_text(e, text_names) for e in node.elts)
    return False


def _text_names(scope: ast.AST) -> set[str]:
    """Names assigned text anywhere in `scope` (a function or module)."""
    names: set[str] = set()
    for node in ast.walk(scope):
        if isinstance(node, ast.Assign) and _is_text(node.value, names):
            names |= {t.id for t in node.targets if isinstance(t, ast.Name)}
        elif isinstance(node, ast.AnnAssign) and node.value is not None \
                and isinstance(node.target, ast.Name) and _is_text(node.value, names):
            names.add(node.target.id)
    return names


def violations(source: str, filename: str = "<src>") -> list[str]:
    """Every breach of the rules above in `source`, as 'file:line: what'."""
    tree = ast.parse(source, filename=filename)
    found = []

    def report(node: ast.AST, what: str) -> None:
        found.append(f"{filename}:{node.lineno}: {what}")

    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module:
            if node.module.startswith("sympy.parsing"):
                report(node, f"imports {node.module}")
            if node.module.split(".")[0] == "sympy":
                for alias in node.names:
                    if alias.name in FORBIDDEN_SYMPY or alias.name == "*":
                        report(node, f"imports {alias.name} from sympy")
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("sympy.parsing"):
                    report(node, f"imports {alias.name}")
        elif isinstance(node, ast.Attribute) and node.attr == "parsing" \
                and isinstance(node.value, ast.Name) and node.value.id in SYMPY_MODULES:
            report(node, "uses sympy.parsing")

    scopes = [tree] + [n for n in ast.walk(tree) if isinstance(n, (ast.FunctionDef, ast.AsyncFunctionDef))]
    for scope in scopes:
        text_names = _text_names(scope)
        for node in ast.walk(scope):
            if not isinstance(node, ast.Call):
                continue
            owner, name = _called_name(node)
            if name in FORBIDDEN_SYMPY and (owner is None or owner in SYMPY_MODULES):
                report(node, f"calls {name}()")
            elif owner is None and name in FORBIDDEN_BUILTINS:
                report(node, f"calls {name}()")
            elif name == "lambdify" and (owner is None or owner in SYMPY_MODULES):
                arguments = list(node.args) + [k.value for k in node.keywords
                                               if k.arg not in ("modules", "printer")]
                if any(_is_text(a, text_names) for a in arguments):
                    report(node, "passes text to lambdify()")
    return sorted(set(found))


def test_src_has_files_to_scan():
    assert len(FILES) > 20
    assert SRC / "calcfile" / "expressions.py" in FILES


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(SRC)))
def test_no_text_reaches_sympify_lambdify_or_eval(path):
    assert violations(path.read_text(encoding="utf-8"), str(path.relative_to(SRC))) == []


# The scanner itself must catch each breach (else the test above could never fail).
BREACHES = [
    "import sympy as sp\nsp.sympify('x + 1')",
    "import sympy as sp\nsp.sympify(expr)",
    "import sympy\nsympy.S('x')",
    "from sympy import S\nS(1)",
    "from sympy import sympify\n",
    "from sympy import *\n",
    "from sympy.parsing.sympy_parser import parse_expr\nparse_expr(t)",
    "import sympy.parsing.sympy_parser\n",
    "import sympy as sp\nsp.parsing.sympy_parser.parse_expr(t)",
    "eval(text)",
    "exec(code)",
    "compile(text, 'f', 'eval')",
    "__import__('os')",
    "import sympy as sp\nsp.lambdify(x, 'x + 1')",
    "import sympy as sp\nsp.lambdify(x, f'{name} + 1')",
    "import sympy as sp\nsp.lambdify(x, str(e))",
    "import sympy as sp\nsp.lambdify(x, '%s' % e)",
    "import sympy as sp\nsp.lambdify('x', expr)",
    "import sympy as sp\ndef f(e):\n    text = 'x' + e\n    return sp.lambdify(x, text)",
    "from sympy import lambdify\nlambdify([x], [e, 'y'])",
    "import sympy as sp\nsp.lambdify(x, expr=' '.join(parts))",
]


@pytest.mark.parametrize("source", BREACHES)
def test_scanner_catches_each_breach(source):
    assert violations(source), source


ALLOWED = [
    "import sympy as sp\nf = sp.lambdify([x, y], [expr], modules='math', cse=True)",
    "import sympy as sp\nsp.Symbol('x', real=True)",
    "import sympy as sp\nsp.S.Zero",
    "import ast\nast.literal_eval",
    "import sympy as sp\nsp.Function(f'query_{name}')",
]


@pytest.mark.parametrize("source", ALLOWED)
def test_scanner_allows_safe_uses(source):
    assert violations(source) == [], source
