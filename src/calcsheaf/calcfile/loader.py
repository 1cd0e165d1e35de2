"""Load and validate one calc file into a frozen CalcSpec.

Validation collects every problem it can find in a file before reporting them
together (errors.ProblemList); each message names the file, the line, the key,
what is wrong and how to fix it.  Unknown keys are errors, with "did you mean".
"""

from __future__ import annotations

import difflib
import re
from pathlib import Path
from typing import Any, Callable

import sympy as sp

from .. import identifiers
from ..errors import CalcsheafError, InputError, ProblemList
from ..model import Assumption, Reference
from . import rates, spec as S
from .expressions import (RESERVED_NAMES, Scope, Where, check_with_values, parse_expression,
                          query_name, velocity)
from .names import display_forms
from .text_links import local_targets
from .toml_source import read_toml, value_column
from .units import (DIMENSIONLESS, DimensionChecker, describe, parse_quantity, parse_unit,
                    si_factor, si_unit_of, si_unit_text, to_si, ureg)

NAME = re.compile(r"[A-Za-z][A-Za-z0-9_]*")   # whole string: fullmatch
HAZARDS = ("suspended_load", "people_under_load", "rotating_machinery")
SECOND_METHODS = ("LSODA", "BDF", "Radau")

TOP_KEYS = {
    "calc": True, "assumption": False, "reference": False, "parameters": False,
    "coordinates": True, "energy": True, "generalized_forces": False, "point_force": False,
    "constraint": False, "initial": True, "analysis": False, "time_history": False,
    "frequency_response": False, "output": False, "result": False, "criterion": False,
    "crosscheck": False,
}
TABLE_KEYS = {
    "calc": ({"number", "title"}, {"purpose", "revision", "hazards"}),
    "assumption": ({"id", "text"}, {"basis", "open"}),
    "reference": ({"id", "text"}, set()),
    "energy": ({"kinetic"}, {"potential", "dissipation"}),
    "point_force": ({"position", "force"}, {"label"}),
    "constraint": ({"name", "equation"}, {"unit", "label"}),
    "analysis": (set(), {"equilibrium", "modes", "energy_tolerance", "expect_unstable"}),
    "time_history": ({"duration"}, {"points", "rtol", "atol", "second_method",
                                    "agreement_tolerance"}),
    "frequency_response": ({"force", "from", "to"}, {"points", "spacing"}),
    "output": ({"name", "expr"}, {"unit", "label"}),
    "result": ({"name", "expr"}, {"unit", "label"}),
    "criterion": ({"name", "demand", "capacity"}, {"reference", "unit"}),
    "crosscheck": ({"case", "compare"}, {"inputs", "tolerance"}),
    "parameter": ({"value"}, {"source", "note"}),
    "coordinate": ({"unit"}, {"label"}),
}
ARRAYS = {"assumption", "reference", "point_force", "constraint", "output", "result",
          "criterion", "crosscheck"}


def closest(name: str, candidates) -> str | None:
    """The candidate nearest to `name` when one is close enough, else None."""
    close = difflib.get_close_matches(name, sorted(candidates), n=1)
    return close[0] if close else None


def did_you_mean(name: str, candidates) -> str:
    """' (did you mean 'x'?)' when a candidate is close to `name`, else ''."""
    close = closest(name, candidates)
    return f" (did you mean '{close}'?)" if close else ""


def _header(key: str) -> str:
    """The TOML header of a key path: 'calc' -> [calc], 'output[2]' -> [[output]]."""
    table = key.split(".")[0]
    return f"[[{table.split('[')[0]}]]" if "[" in table else f"[{table}]"


def load_calc(path: Path, raw: bytes | None = None) -> S.CalcSpec:
    """Validate and convert one calc file; raise ProblemList or InputError.

    `raw`: the file's bytes as the caller already read them (then the file is not
    read again, so what is hashed, analysed and cached is exactly these bytes);
    None reads `path`."""
    text, data, lines = read_toml(path, raw)
    return _CalcLoader(path, text, data, lines).load()


class _CalcLoader:
    def __init__(self, path: Path, text: str, data: dict, lines: dict[str, int]) -> None:
        self.path = path
        self.text = text
        self.data = data
        self.lines = lines
        self.problems: list[CalcsheafError] = []
        self.dims: dict[str, Any] = {"t": ureg.second.dimensionality}
        # declared names whose value or unit was refused: known to expressions, of any
        # dimension, so that one bad unit is reported once and not again at every use
        self.broken: set[str] = set()
        self.values: dict[str, float] = {}     # parameter values, SI
        # [[result]] names whose value is a frequency in Hz, for default units of later uses
        self.hertz: set[str] = set()
        # names shown in a moment unit (N*m, kN*m): energy-dimensioned defaults follow them
        self.moments: set[str] = set()
        # parameters and results that are angular rates or cyclic frequencies (see rates)
        self.rate_kinds: dict[str, str] = {}
        self.angle_units: dict[str, str] = {}  # coordinates given in an angle unit: name -> unit

    # ---- reporting ---------------------------------------------------------
    def where(self, key: str) -> Where:
        line = None
        probe = key
        while probe and line is None:
            line = self.lines.get(probe)
            probe = probe.rpartition(".")[0]
        exact = self.lines.get(key) is not None
        column = value_column(self.text, line, key.rpartition(".")[2].strip('"')) if exact else None
        return Where(file=str(self.path), line=line, key=key, column=column)

    def problem(self, key: str, problem: str, fix: str) -> None:
        w = self.where(key)
        self.problems.append(InputError(problem, file=w.file, line=w.line, key=key, fix=fix))

    def attempt(self, fn: Callable[[], Any], default=None):
        try:
            return fn()
        except ProblemList as many:
            self.problems.extend(many.problems)
        except CalcsheafError as exc:
            self.problems.append(exc)
        return default

    def _broken(self, table: str) -> frozenset[str]:
        """Names declared under [table] whose value or unit was refused."""
        prefix = f"{table}."
        return frozenset(k[len(prefix):] for k in self.broken if k.startswith(prefix))

    # ---- generic shape checks ----------------------------------------------
    def table(self, key: str, value, required: set[str], optional: set[str]) -> dict:
        """Check a table's keys: unknown keys (with "did you mean") and missing required keys.

        A misspelt required key is reported once, as unknown with its correction;
        an absent table (None) gives no problems here (the caller reports it).
        """
        if value is None:
            return {}
        header = _header(key)
        if not isinstance(value, dict):
            self.problem(key, f"must be a table, got {_kind(value)}",
                         f"write it as {header} with keys below it")
            return {}
        allowed = required | optional
        corrected = set()
        for name in sorted(set(value) - allowed):
            close = closest(name, allowed - set(value))
            if close:
                corrected.add(close)
                self.problem(f"{key}.{name}", f"unknown key '{name}' (did you mean '{close}'?)",
                             f"rename '{name}' to '{close}'")
            else:
                self.problem(f"{key}.{name}", f"unknown key '{name}'",
                             f"remove it; the keys of {header} are {', '.join(sorted(allowed))}")
        for name in sorted(required - set(value) - corrected):
            self.problem(key, f"missing key '{name}'", f'add {name} = "..." under {header}')
        return value

    def rows(self, name: str) -> list[tuple[str, dict]]:
        value = self.data.get(name, [])
        if not isinstance(value, list):
            self.problem(name, f"must be an array of tables, got {_kind(value)}",
                         f"write each entry under its own [[{name}]] header")
            return []
        required, optional = TABLE_KEYS[name]
        out = []
        for index, row in enumerate(value, start=1):
            key = f"{name}[{index}]"
            out.append((key, self.table(key, row, required, optional)))
        return out

    def string(self, key: str, value, default: str | None = None) -> str | None:
        if value is None:
            return default
        if not isinstance(value, str):
            self.problem(key, f"must be text, got {_kind(value)}", 'put the value in quotes: "..."')
            return default
        return value

    def label(self, key: str, value) -> str:
        """A plain-text label (plot legends, tables): '$' is refused, since the plot library
        would read $...$ as math (and fail on what it cannot parse) while pages show it as typed."""
        text = self.string(key, value, "") or ""
        if "$" in text:
            self.problem(key, f"label '{text}' contains '$', which the plot library reads as the "
                         "start of a formula ($...$), while the pages show it as typed",
                         "write the label as plain text without '$' (Unicode is fine, e.g. "
                         "'angle θ, positive clockwise'); the symbol of the name is shown beside it")
            return text.replace("$", "")
        return text

    def markdown(self, key: str, value, default: str = "") -> str:
        """Markdown text; links and images to local files are refused (see text_links)."""
        text = self.string(key, value, default)
        for kind, target in local_targets(text or ""):
            w = self.where(key)
            line, column = self._find(target, w.line)
            self.problems.append(InputError(
                f"{kind} to a local file '{target}' in Markdown text: a package may only link to "
                "web addresses", file=w.file, line=line, column=column, key=key,
                fix="link to an https:// address, or cite the document as a [[reference]] "
                    "and attach it to the package by hand"))
        return text

    def _find(self, target: str, start: int | None) -> tuple[int | None, int | None]:
        """Line and column of the first `target` at or after line `start`."""
        lines = self.text.splitlines()
        for number in range(start or 1, len(lines) + 1):
            column = lines[number - 1].find(target)
            if column >= 0:
                return number, column + 1
        return start, None

    def boolean(self, key: str, value, default: bool) -> bool:
        if value is None:
            return default
        if not isinstance(value, bool):
            self.problem(key, f"must be true or false, got {_kind(value)} {value!r}",
                         f"write {key.rpartition('.')[2]} = true or {key.rpartition('.')[2]} = false, "
                         "without quotes")
            return default
        return value

    def number(self, key: str, value, default: float | None, *, positive: bool = True,
               integer: bool = False) -> float | None:
        if value is None:
            return default
        ok = isinstance(value, int) if integer else isinstance(value, (int, float))
        if isinstance(value, bool) or not ok or (positive and value <= 0):
            kind = "a positive whole number" if integer else "a positive number"
            short = key.rpartition(".")[2]
            if isinstance(value, str) and _is_number(value):
                fix = f"remove the quotes: {short} = {value.strip()}"
            else:
                fix = f"write {kind}, e.g. {short} = {4000 if integer else 1e-6}"
            self.problem(key, f"must be {kind}, got {_kind(value)} {value!r}", fix)
            return default
        return value

    def name(self, key: str, value, taken: dict[str, str]) -> str | None:
        value = self.string(key, value)
        if value is None:
            return None
        if not NAME.fullmatch(value):
            self.problem(key, f"'{value}' is not a valid name",
                         "use letters, digits and _ starting with a letter, e.g. F_iso")
            return None
        if value in RESERVED_NAMES:
            self.problem(key, f"'{value}' is a reserved name (time, pi or a function)",
                         "choose another name, e.g. " + value + "_1")
            return None
        if value in taken:
            self.problem(key, f"'{value}' is already defined at {taken[value]}", "choose a unique name")
            return None
        twin = next((other for other in taken if _same_display(other, value)), None)
        if twin is not None:
            self.problem(key, f"'{value}' would be shown as the same symbol as '{twin}' ({taken[twin]}): "
                         f"both display as {_same_display(twin, value)}",
                         f"rename one of them so that each symbol stands for one quantity, "
                         f"e.g. {value}_a or {twin}_b")
            return None
        taken[value] = key
        return value

    def quantity(self, key: str, value, expected=None, what: str = "value"):
        quantity = parse_quantity(value, self.where(key))
        if expected is not None and quantity.dimensionality != expected:
            raise InputError(f"{what} '{value}' is {describe(quantity.dimensionality)}, "
                             f"expected {describe(expected)}", file=str(self.path),
                             line=self.where(key).line, key=key,
                             fix=f"give it in a unit of {describe(expected)}")
        return quantity

    def expr(self, key: str, text, scope: Scope, expected=None, what: str | None = None) -> sp.Expr:
        where = self.where(key)
        expression = parse_expression(text, scope, where)
        check_with_values(expression, self.values, where)
        if expected is not None or what is not None:
            checker = DimensionChecker(self.dims, where)
            if expected is None:
                checker.infer(expression)
            else:
                checker.check(expression, expected, what or key)
        return expression

    # ---- the calc --------------------------------------------------------------
    def load(self) -> S.CalcSpec:
        corrected = set()
        for name in sorted(set(self.data) - set(TOP_KEYS)):
            close = closest(name, set(TOP_KEYS) - set(self.data))
            if close:
                corrected.add(close)
                self.problem(name, f"unknown table '{name}' (did you mean '{close}'?)",
                             f"rename [{name}] to [{close}]")
            else:
                self.problem(name, f"unknown table or key '{name}'",
                             f"remove it; the tables of a calc file are {', '.join(sorted(TOP_KEYS))}")
        for name, required in TOP_KEYS.items():
            if required and name not in self.data and name not in corrected:
                self.problem(name, f"missing [{name}] table",
                             "add it; every calc file needs [calc], [coordinates], [energy] and [initial]")
        calc = self.attempt(self.calc_block, {})
        ids: dict[str, str] = {}
        assumptions = self.attempt(lambda: self.assumptions(ids), ())
        references = self.attempt(lambda: self.references(ids), ())
        names: dict[str, str] = {}
        coordinates = self.attempt(lambda: self.coordinates(names), ())
        parameters = self.attempt(lambda: self.parameters(names, ids), ())
        coord_names = frozenset(c.name for c in coordinates) | self._broken("coordinates")
        param_names = frozenset(p.name for p in parameters) | self._broken("parameters")
        energy = self.attempt(lambda: self.energy(param_names, coord_names), None)
        forces = self.attempt(lambda: self.generalized_forces(param_names, coordinates), ())
        point_forces = self.attempt(lambda: self.point_forces(param_names, coord_names), ())
        constraints = self.attempt(lambda: self.constraints(param_names, coord_names, names), ())
        initial = self.attempt(lambda: self.initial(coordinates), ())
        analysis = self.attempt(self.analysis, S.AnalysisSpec())
        history = self.attempt(self.time_history, None)
        constraint_names = frozenset(c.name for c in constraints)
        response = self.attempt(lambda: self.frequency_response(param_names, coordinates), None)
        outputs = self.attempt(lambda: self.outputs(param_names, coord_names, constraint_names, names), ())
        series = frozenset(o.name for o in outputs) | constraint_names | coord_names
        results = self.attempt(lambda: self.results(param_names, coord_names, series, names), ())
        value_names = param_names | frozenset(r.name for r in results)
        criteria = self.attempt(lambda: self.criteria(value_names, coord_names, series, ids), ())
        crosschecks = self.attempt(lambda: self.crosschecks(value_names, coord_names, series), ())
        if self.problems:
            raise ProblemList(_sorted_problems(self.problems))
        return S.CalcSpec(
            path=self.path, source_text=self.text, number=calc["number"], title=calc["title"],
            purpose=calc["purpose"], revision=calc["revision"], hazards=calc["hazards"],
            assumptions=assumptions, references=references, parameters=parameters,
            coordinates=coordinates, kinetic=energy[0], potential=energy[1],
            dissipation=energy[2], generalized_forces=forces, point_forces=point_forces,
            constraints=constraints, initial=initial, analysis=analysis, time_history=history,
            frequency_response=response, outputs=outputs, results=results, criteria=criteria,
            crosschecks=crosschecks, lines=self.lines)

    def calc_block(self) -> dict:
        block = self.table("calc", self.data.get("calc"), *TABLE_KEYS["calc"])
        number = self.string("calc.number", block.get("number"))
        bad_number = identifiers.problem("calc number", number) if number is not None else None
        if bad_number:
            self.problem("calc.number", bad_number, identifiers.fix("calc number"))
            number = None
        hazards = block.get("hazards", [])
        if not isinstance(hazards, list) or any(h not in HAZARDS for h in hazards):
            self.problem("calc.hazards", f"hazards must be a list drawn from {', '.join(HAZARDS)}",
                         'write e.g. hazards = ["suspended_load"]')
            hazards = []
        return {"number": number or "?", "title": self.string("calc.title", block.get("title"), "?"),
                "purpose": self.markdown("calc.purpose", block.get("purpose"), ""),
                "revision": self.string("calc.revision", block.get("revision"), "A"),
                "hazards": tuple(sorted(set(hazards)))}

    def assumptions(self, ids: dict[str, str]) -> tuple[Assumption, ...]:
        out = []
        for key, row in self.rows("assumption"):
            ident = self.string(f"{key}.id", row.get("id"))
            self._register_id(key, ident, ids)
            out.append(Assumption(id=ident or "?", text=self.markdown(f"{key}.text", row.get("text")),
                                  basis=self.markdown(f"{key}.basis", row.get("basis")),
                                  open=self.boolean(f"{key}.open", row.get("open"), False)))
        return tuple(out)

    def references(self, ids: dict[str, str]) -> tuple[Reference, ...]:
        out = []
        for key, row in self.rows("reference"):
            ident = self.string(f"{key}.id", row.get("id"))
            self._register_id(key, ident, ids)
            out.append(Reference(id=ident or "?", text=self.markdown(f"{key}.text", row.get("text"))))
        return tuple(out)

    def _register_id(self, key: str, ident: str | None, ids: dict[str, str]) -> None:
        if ident is None:
            return
        if ident in ids:
            self.problem(f"{key}.id", f"id '{ident}' is already used by {ids[ident]}",
                         "give every assumption and reference its own id")
        ids[ident] = key

    def coordinates(self, names: dict[str, str]) -> tuple[S.Coordinate, ...]:
        block = self.data.get("coordinates", {})
        if not isinstance(block, dict) or not block:
            self.problem("coordinates", "needs at least one coordinate",
                         'add e.g. x = { unit = "m", label = "..." }')
            return ()
        out = []
        for name, value in block.items():
            key = f"coordinates.{name}"
            if isinstance(value, str):
                value = {"unit": value}
            row = self.table(key, value, *TABLE_KEYS["coordinate"])
            if self.name(key, name, names) is None or "unit" not in row:
                continue
            unit = self.attempt(lambda: parse_unit(self.string(f"{key}.unit", row["unit"], "?"),
                                                   self.where(f"{key}.unit")))
            if unit is None:
                self.broken.add(key)
                for symbol_name in (name, f"dot({name})", f"ddot({name})"):
                    self.dims[symbol_name] = None
                continue
            dim = unit.dimensionality
            self.dims[name] = dim
            if dim == DIMENSIONLESS and "radian" in str(ureg.get_root_units(unit)[1]):
                self.angle_units[name] = row["unit"]
            self.dims[f"dot({name})"] = dim / ureg.second.dimensionality
            self.dims[f"ddot({name})"] = dim / ureg.second.dimensionality ** 2
            out.append(S.Coordinate(name=name, unit=row["unit"], si_unit=si_unit_text(dim),
                                    dimension=dim, factor=si_factor(unit),
                                    label=self.label(f"{key}.label", row.get("label"))))
        return tuple(out)

    def parameters(self, names: dict[str, str], ids: dict[str, str]) -> tuple[S.Parameter, ...]:
        block = self.data.get("parameters", {})
        if not isinstance(block, dict):
            self.problem("parameters", f"must be a table, got {_kind(block)}", "write [parameters]")
            return ()
        out = []
        for name, value in block.items():
            key = f"parameters.{name}"
            if not isinstance(value, dict):
                value = {"value": value}
            row = self.table(key, value, *TABLE_KEYS["parameter"])
            if self.name(key, name, names) is None:
                continue
            if "value" not in row:
                self.broken.add(key)
                self.dims[name] = None
                continue
            source = self.string(f"{key}.source", row.get("source"), "")
            if source and source not in ids:
                self.problem(f"{key}.source", f"source '{source}' is not an assumption or reference id"
                             f"{did_you_mean(source, ids)}",
                             "name the id of an [[assumption]] or [[reference]] of this calc"
                             + (f" ({', '.join(sorted(ids))})" if ids else ""))
            quantity = self.attempt(lambda: self.quantity(key, row["value"]))
            if quantity is None:
                self.broken.add(key)
                self.dims[name] = None
                continue
            self.dims[name] = quantity.dimensionality
            self.values[name] = to_si(quantity)
            if rates.unit_kind(quantity.units):
                self.rate_kinds[name] = rates.unit_kind(quantity.units)
            out.append(S.Parameter(name=name, given=str(row["value"]), value=to_si(quantity),
                                   unit=si_unit_of(quantity),
                                   dimension=quantity.dimensionality, source=source,
                                   note=self.string(f"{key}.note", row.get("note"), "")))
        return tuple(out)

    def _scope(self, params, coords, *, velocities=True, accelerations=False, extra=frozenset(),
               what="expression") -> Scope:
        return Scope(names=params | coords | {"t"} | extra, coordinates=coords,
                     velocities=velocities, accelerations=accelerations, what=what)

    def energy(self, params, coords):
        block = self.table("energy", self.data.get("energy"), *TABLE_KEYS["energy"])
        energy_dim = ureg.joule.dimensionality
        power_dim = ureg.watt.dimensionality
        kinetic = self.attempt(lambda: self.expr(
            "energy.kinetic", block["kinetic"], self._scope(params, coords, what="the kinetic energy"),
            energy_dim, "the kinetic energy")) if "kinetic" in block else None
        potential = self.attempt(lambda: self.expr(
            "energy.potential", block.get("potential", "0"),
            self._scope(params, coords, velocities=False, what="the potential energy"),
            energy_dim, "the potential energy"))
        dissipation = self.attempt(lambda: self.expr(
            "energy.dissipation", block.get("dissipation", "0"),
            self._scope(params, coords, what="the dissipation function"),
            power_dim, "the dissipation function (a power)"))
        if kinetic is None or potential is None or dissipation is None:
            return None
        velocities = {velocity(c) for c in coords}
        if not (kinetic.free_symbols & velocities):
            self.problem("energy.kinetic", "the kinetic energy does not depend on any velocity",
                         "write it in terms of dot(q) of the coordinates, e.g. m/2*dot(x)**2")
        return kinetic, potential, dissipation

    def generalized_forces(self, params, coordinates):
        block = self.data.get("generalized_forces", {})
        if not isinstance(block, dict):
            self.problem("generalized_forces", f"must be a table, got {_kind(block)}",
                         "write [generalized_forces] with one key per coordinate")
            return ()
        coords = frozenset(c.name for c in coordinates)
        out = []
        for name, text in block.items():
            key = f"generalized_forces.{name}"
            if name not in coords:
                self.problem(key, f"'{name}' is not a coordinate{did_you_mean(name, coords)}",
                             "give one generalized force per declared coordinate")
                continue
            expected = ureg.joule.dimensionality / self.dims[name]
            expr = self.attempt(lambda: self.expr(key, text, self._scope(params, coords, what="a generalized force"),
                                                  expected, f"the generalized force on {name}"))
            if expr is not None:
                out.append((name, expr))
        return tuple(out)

    def point_forces(self, params, coords):
        out = []
        length, force = ureg.meter.dimensionality, ureg.newton.dimensionality
        for key, row in self.rows("point_force"):
            position, vector = row.get("position"), row.get("force")
            if not (isinstance(position, list) and isinstance(vector, list)
                    and len(position) == len(vector) and len(position) in (2, 3)):
                self.problem(key, "position and force must be lists of the same length (2 or 3)",
                             'write position = ["x", "y"] and force = ["0", "-F"]')
                continue
            pos = [self.attempt(lambda i=i, p=p: self.expr(
                f"{key}.position", p, self._scope(params, coords, velocities=False, what="a position"),
                length, f"position component {i + 1}")) for i, p in enumerate(position)]
            fvec = [self.attempt(lambda i=i, f=f: self.expr(
                f"{key}.force", f, self._scope(params, coords, what="a force"),
                force, f"force component {i + 1}")) for i, f in enumerate(vector)]
            if None in pos or None in fvec:
                continue
            out.append(S.PointForce(position=tuple(pos), force=tuple(fvec),
                                    label=self.label(f"{key}.label", row.get("label"))))
        return tuple(out)

    def constraints(self, params, coords, names):
        out = []
        for key, row in self.rows("constraint"):
            name = self.name(f"{key}.name", row.get("name"), names)
            if name is None or "equation" not in row:
                continue
            scope = self._scope(params, coords, velocities=False, what="a constraint equation")
            equation = self.attempt(lambda: self.expr(f"{key}.equation", row["equation"], scope, None, "constraint"))
            if equation is None:
                continue
            dim = DimensionChecker(self.dims, self.where(f"{key}.equation")).infer(equation)
            if dim is None:
                self.problem(f"{key}.equation", "the constraint equation is identically zero",
                             "write g(q, t) whose zero set is the constraint, e.g. y1 + y2 - L")
                continue
            force_dim = ureg.joule.dimensionality / dim
            self.dims[name] = force_dim
            unit_text = self.string(f"{key}.unit", row.get("unit"), _force_unit(force_dim))
            unit = self.attempt(lambda: self._display_unit(f"{key}.unit", unit_text, force_dim))
            if unit is None:
                continue
            self._note_moment(name, unit_text, force_dim)
            out.append(S.Constraint(name=name, equation=equation, unit=unit_text,
                                    factor=si_factor(unit),
                                    label=self.label(f"{key}.label", row.get("label"))))
        return tuple(out)

    def _display_unit(self, key: str, text: str, expected):
        unit = parse_unit(text, self.where(key))
        if not _same_dimension(unit.dimensionality, expected) and not (
                expected is None and unit.dimensionality == DIMENSIONLESS):
            raise InputError(f"unit '{text}' is {describe(unit.dimensionality)}, but the value is "
                             f"{describe(expected)}", file=str(self.path),
                             line=self.where(key).line, key=key,
                             fix=f"use a unit of {describe(expected)}, e.g. {si_unit_text(expected)}")
        return unit

    def initial(self, coordinates):
        block = self.data.get("initial", {})
        if not isinstance(block, dict):
            self.problem("initial", f"must be a table, got {_kind(block)}", "write [initial]")
            return ()
        wanted = {}
        for c in coordinates:
            wanted[c.name] = c.dimension
            wanted[f"dot({c.name})"] = c.dimension / ureg.second.dimensionality
        skipped = {n for b in self._broken("coordinates") for n in (b, f"dot({b})")}
        corrected = set()
        for name in sorted(set(block) - set(wanted) - skipped):
            close = closest(name, set(wanted) - set(block))
            if close:
                corrected.add(close)
                self.problem(f"initial.{name}", f"'{name}' is not a coordinate or velocity "
                             f"(did you mean '{close}'?)", f"rename it to {_toml_key(close)}")
            else:
                self.problem(f"initial.{name}", f"'{name}' is not a coordinate or velocity",
                             "remove it; [initial] gives each coordinate q and its velocity \"dot(q)\"")
        units_of = {}
        for c in coordinates:
            units_of[c.name] = c.unit
            units_of[f"dot({c.name})"] = f"{c.unit}/s" if "/" not in c.unit else f"({c.unit})/s"
        out = []
        for name, dim in wanted.items():
            key = f'initial."{name}"' if "(" in name else f"initial.{name}"
            if name not in block and name in corrected:
                continue
            if name not in block:
                self.problem("initial", f"missing initial value of {name}",
                             f'add {key.split(".", 1)[1]} = "0 {units_of[name]}" under [initial]')
                continue
            self.lines.setdefault(key, self.lines.get(f"initial.{name}", self.lines.get("initial", 0)))
            q = self.attempt(lambda: self.quantity(f"initial.{name}", block[name], dim, f"initial {name}"))
            if q is not None:
                out.append((name, to_si(q)))
        return tuple(out)

    def analysis(self) -> S.AnalysisSpec:
        block = self.table("analysis", self.data.get("analysis", {}), *TABLE_KEYS["analysis"])
        return S.AnalysisSpec(
            equilibrium=self.boolean("analysis.equilibrium", block.get("equilibrium"), True),
            modes=self.boolean("analysis.modes", block.get("modes"), True),
            energy_tolerance=self.number("analysis.energy_tolerance", block.get("energy_tolerance"), 1e-6),
            expect_unstable=self.boolean("analysis.expect_unstable", block.get("expect_unstable"), False))

    def time_history(self) -> S.TimeHistorySpec | None:
        if "time_history" not in self.data:
            return None
        block = self.table("time_history", self.data["time_history"], *TABLE_KEYS["time_history"])
        if "duration" not in block:
            return None
        duration = self.quantity("time_history.duration", block["duration"], ureg.second.dimensionality,
                                 "duration")
        if to_si(duration) <= 0:
            raise InputError("duration must be positive", file=str(self.path),
                             line=self.where("time_history.duration").line, key="time_history.duration",
                             fix='write e.g. duration = "5 s"')
        points = self.number("time_history.points", block.get("points"), 2000, integer=True)
        if points is not None and not 10 <= points <= 200_000:
            self.problem("time_history.points", f"points must be between 10 and 200000, got {points}",
                         "choose e.g. points = 4000")
        method = self.string("time_history.second_method", block.get("second_method"), "LSODA")
        if method not in SECOND_METHODS:
            self.problem("time_history.second_method", f"'{method}' is not one of {', '.join(SECOND_METHODS)}",
                         "choose LSODA (default), BDF or Radau")
        return S.TimeHistorySpec(
            duration=to_si(duration), points=int(points or 2000),
            rtol=self.number("time_history.rtol", block.get("rtol"), 1e-10),
            atol=self.number("time_history.atol", block.get("atol"), 1e-12),
            second_method=method or "LSODA",
            agreement_tolerance=self.number("time_history.agreement_tolerance",
                                            block.get("agreement_tolerance"), 1e-6))

    def frequency_response(self, params, coordinates) -> S.FrequencyResponseSpec | None:
        if "frequency_response" not in self.data:
            return None
        block = self.table("frequency_response", self.data["frequency_response"],
                           *TABLE_KEYS["frequency_response"])
        coords = frozenset(c.name for c in coordinates)
        force = block.get("force", {})
        if not isinstance(force, dict) or not force:
            self.problem("frequency_response.force", "needs at least one coordinate = amplitude",
                         'write force = { x = "F0" }')
            force = {}
        rows = []
        scope = Scope(names=params, what="a force amplitude")
        for name, text in force.items():
            key = f"frequency_response.force.{name}"
            if name not in coords:
                self.problem(key, f"'{name}' is not a coordinate{did_you_mean(name, coords)}",
                             "give amplitudes for declared coordinates")
                continue
            expected = ureg.joule.dimensionality / self.dims[name]
            if isinstance(text, str) and re.match(r"^\s*[-+]?[0-9.]+(e[-+]?[0-9]+)?\s+\S", text):
                expr = self.attempt(lambda: sp.Float(to_si(self.quantity(
                    key, text, expected, f"the force amplitude on {name}"))))
            else:
                expr = self.attempt(lambda: self.expr(key, text, scope, expected,
                                                      f"the force amplitude on {name}"))
            if expr is not None:
                rows.append((name, expr, str(text)))
        hz = ureg.hertz.dimensionality
        start = self.attempt(lambda: to_si(self.quantity("frequency_response.from", block["from"], hz, "from"))) \
            if "from" in block else None       # a missing key is reported by table()
        stop = self.attempt(lambda: to_si(self.quantity("frequency_response.to", block["to"], hz, "to"))) \
            if "to" in block else None
        points = self.number("frequency_response.points", block.get("points"), 400, integer=True)
        spacing = self.string("frequency_response.spacing", block.get("spacing"), "linear")
        if spacing not in ("linear", "log"):
            self.problem("frequency_response.spacing", f"'{spacing}' is not linear or log", 'write "linear" or "log"')
        if start is None or stop is None:
            return None
        if not 0 <= start < stop:
            self.problem("frequency_response", f"the range must satisfy 0 <= from < to (got {start} Hz to {stop} Hz)",
                         "give from below to")
            return None
        if spacing == "log" and start <= 0:
            self.problem("frequency_response.from", "log spacing needs from > 0", "give a positive from")
        return S.FrequencyResponseSpec(force=tuple(rows), start_hz=start, stop_hz=stop,
                                       points=int(points or 400), spacing=spacing or "linear")

    def _note_moment(self, name: str, unit_text: str, dim) -> None:
        """Remember `name` as a moment when its energy-dimensioned unit is not written in J."""
        if dim == ureg.joule.dimensionality and "J" not in unit_text:
            self.moments.add(name)

    def _moment_unit(self, expr: sp.Expr, dim) -> str | None:
        """"N*m" for an energy-dimensioned value built from a moment (a constraint on an
        angle, an output in N*m), where the dimension alone would say J; else None."""
        if dim != ureg.joule.dimensionality:
            return None
        return "N*m" if any(s.name in self.moments for s in expr.free_symbols) else None

    def _named(self, key: str, row: dict, name: str, expr: sp.Expr) -> S.NamedExpr | None:
        dim = DimensionChecker(self.dims, self.where(f"{key}.expr")).infer(expr)
        unit_text = self.string(f"{key}.unit", row.get("unit"), None)
        if unit_text is None:
            unit_text = _frequency_unit(expr, self.hertz) if dim == ureg.hertz.dimensionality else None
            unit_text = (unit_text or _angle_unit(expr, self.angle_units)
                         or self._moment_unit(expr, dim) or si_unit_text(dim))
        unit = self.attempt(lambda: self._display_unit(f"{key}.unit", unit_text,
                                                       DIMENSIONLESS if dim is None else dim))
        if unit is None:
            return None
        self._note_moment(name, unit_text, dim)
        self.dims[name] = DIMENSIONLESS if dim is None else dim
        if unit_text == "Hz":
            self.hertz.add(name)
        self._rates(f"{key}.expr", expr, unit, unit_text)
        kind = rates.unit_kind(unit) or rates.kind_of(expr, self.rate_kinds)
        if dim == ureg.hertz.dimensionality and kind in (rates.ANGULAR, rates.CYCLIC):
            self.rate_kinds[name] = kind      # only values of 1/s carry a kind onwards
        return S.NamedExpr(name=name, expr=expr, text=str(row["expr"]), unit=unit_text,
                           factor=si_factor(unit), label=self.label(f"{key}.label", row.get("label")))

    def _rates(self, key: str, expr: sp.Expr, unit, unit_text: str) -> None:
        """A problem when `expr` shown in `unit` mixes angular rates and cyclic frequencies
        without an explicit 2*pi (see rates)."""
        mixed = rates.mixing(expr, unit, unit_text, self.rate_kinds)
        if mixed:
            self.problem(key, *mixed)

    def outputs(self, params, coords, constraints, names):
        out = []
        for key, row in self.rows("output"):
            name = self.name(f"{key}.name", row.get("name"), names)
            if name is None or "expr" not in row:
                continue
            scope = self._scope(params, coords, accelerations=True, extra=constraints, what="an output")
            expr = self.attempt(lambda: self.expr(f"{key}.expr", row["expr"], scope, None, "output"))
            if expr is not None:
                item = self._named(key, row, name, expr)
                if item is not None:
                    out.append(item)
        return tuple(out)

    def _query_scope(self, values, coords, series, what) -> Scope:
        return Scope(names=values, coordinates=coords, velocities=True, accelerations=True,
                     queries=True, series_names=series | {"t"}, what=what)

    def results(self, params, coords, series, names):
        out = []
        values = set(params)
        for key, row in self.rows("result"):
            name = self.name(f"{key}.name", row.get("name"), names)
            if name is None or "expr" not in row:
                continue
            scope = self._query_scope(frozenset(values), coords, series, "a result")
            expr = self.attempt(lambda: self.expr(f"{key}.expr", row["expr"], scope, None, "result"))
            if expr is not None:
                item = self._named(key, row, name, expr)
                if item is not None:
                    out.append(item)
                    values.add(name)
        return tuple(out)

    def criteria(self, values, coords, series, ids):
        out = []
        for key, row in self.rows("criterion"):
            if "demand" not in row or "capacity" not in row:
                continue
            scope = self._query_scope(values, coords, series, "a criterion")
            demand = self.attempt(lambda: self.expr(f"{key}.demand", row["demand"], scope, None, "demand"))
            capacity = self.attempt(lambda: self.expr(f"{key}.capacity", row["capacity"], scope, None, "capacity"))
            reference = self.string(f"{key}.reference", row.get("reference"), "")
            if reference and reference not in ids:
                self.problem(f"{key}.reference", f"reference '{reference}' is not an id of this calc"
                             f"{did_you_mean(reference, ids)}", "name a [[reference]] or [[assumption]] id")
            if demand is None or capacity is None:
                continue
            dd = DimensionChecker(self.dims, self.where(f"{key}.demand")).infer(demand)
            dc = DimensionChecker(self.dims, self.where(f"{key}.capacity")).infer(capacity)
            if dd is not None and dc is not None and dd != dc:
                self.problem(f"{key}.capacity", f"demand is {describe(dd)} but capacity is {describe(dc)}",
                             "compare quantities of the same kind")
                continue
            dim = dd if dd is not None else (dc if dc is not None else DIMENSIONLESS)
            hertz = dim == ureg.hertz.dimensionality and (
                _frequency_unit(demand, self.hertz) or _frequency_unit(capacity, self.hertz)) == "Hz"
            default = "Hz" if hertz else (self._moment_unit(demand, dim) or self._moment_unit(capacity, dim)
                                          or si_unit_text(dim))
            unit_text = self.string(f"{key}.unit", row.get("unit"), default)
            unit = self.attempt(lambda: self._display_unit(f"{key}.unit", unit_text, dim))
            if unit is None:
                continue
            mixed = rates.compared(demand, capacity, self.rate_kinds)
            if mixed:
                self.problem(f"{key}.capacity", *mixed)
            else:
                self._rates(f"{key}.demand", demand, unit, unit_text)
                self._rates(f"{key}.capacity", capacity, unit, unit_text)
            out.append(S.Criterion(name=self.string(f"{key}.name", row.get("name"), "?"),
                                   demand=demand, demand_text=str(row["demand"]), capacity=capacity,
                                   capacity_text=str(row["capacity"]), unit=unit_text,
                                   factor=si_factor(unit), reference=reference))
        return tuple(out)

    def crosschecks(self, values, coords, series):
        out = []
        for key, row in self.rows("crosscheck"):
            case = self.string(f"{key}.case", row.get("case"))
            inputs, compare = row.get("inputs", {}), row.get("compare", {})
            if not isinstance(inputs, dict) or not isinstance(compare, dict) or not compare:
                self.problem(key, "inputs and compare must be tables; compare needs at least one quantity",
                             'write inputs = { m = "m" } and compare = { natural_frequency_hz = "natural_frequency(1)" }')
                continue
            value_scope = self._query_scope(values, coords, series, "a crosscheck input")
            ins = [(n, self.attempt(lambda n=n, v=v: self.expr(f"{key}.inputs.{n}", v, value_scope, None, "input")))
                   for n, v in inputs.items()]
            query_scope = self._query_scope(values, coords, series, "a crosscheck comparison")
            cmp = [(n, self.attempt(lambda n=n, v=v: self.expr(f"{key}.compare.{n}", v, query_scope, None, "compare")), str(v))
                   for n, v in compare.items()]
            tolerance = self.number(f"{key}.tolerance", row.get("tolerance"), None)
            if case is None or any(e is None for _, e in ins) or any(e is None for _, e, _ in cmp):
                continue
            out.append(S.Crosscheck(case=case, inputs=tuple(ins), compare=tuple(cmp), tolerance=tolerance,
                                    input_texts=tuple((n, str(v)) for n, v in inputs.items())))
        return tuple(out)


_HERTZ_QUERIES = frozenset({"natural_frequency", "damped_frequency", "undamped_frequency",
                            "frf_peak_frequency"})


_POSITION_QUERIES = frozenset({"equilibrium", "initial", "final", "at", "max", "min", "peak",
                               "mean", "rms"})


def _angle_unit(expr: sp.Expr, angles: dict[str, str]) -> str | None:
    """Default unit of a query of an angle coordinate (equilibrium(theta), max(theta), ...):
    the coordinate's own unit (rad, deg), where the dimension alone would give "1"."""
    if isinstance(expr, sp.Function) and query_name(expr.func) in _POSITION_QUERIES:
        target = expr.args[0]
        if isinstance(target, sp.Symbol):
            return angles.get(target.name)
    return None


def _same_dimension(a, b) -> bool:
    """Dimensions equal by their exponents as numbers (an inferred exponent may be a sympy
    number, pint's a float: -1 and -1.0 are the same dimension)."""
    if a is None or b is None:
        return a is b
    return {k: float(v) for k, v in a.items()} == {k: float(v) for k, v in b.items()}


def _force_unit(dim) -> str:
    """Default unit of a constraint force: N·m for a constraint on angles (a moment), else SI."""
    return "N*m" if dim == ureg.joule.dimensionality else si_unit_text(dim)


def _frequency_unit(expr: sp.Expr, hertz: set[str] = frozenset()) -> str | None:
    """Default unit of a value that is a frequency: "Hz" for a frequency query
    (natural_frequency, damped_frequency, frf_peak_frequency), 1/period(q) or a result in
    `hertz`, alone, scaled by a plain number, summed, differenced or through abs/min/max;
    "rad/s" for 2*pi times such a frequency; None when the expression is not recognisably
    one (then the SI unit, 1/s)."""
    if isinstance(expr, sp.Mul):
        numbers = sp.Mul(*[a for a in expr.args if a.is_number])
        rest = sp.Mul(*[a for a in expr.args if not a.is_number])
        if _in_hertz(rest, hertz) and numbers.has(sp.pi):
            return "rad/s" if (numbers / (2 * sp.pi)).is_rational else None
    return "Hz" if _in_hertz(expr, hertz) else None


def _in_hertz(expr: sp.Expr, hertz) -> bool:
    if isinstance(expr, sp.Symbol):
        return expr.name in hertz
    if query_name(expr.func) in _HERTZ_QUERIES:
        return True
    if isinstance(expr, sp.Pow) and expr.exp == -1:
        return query_name(expr.base.func) == "period"
    if isinstance(expr, sp.Mul):
        numbers = [a for a in expr.args if a.is_number]
        rest = [a for a in expr.args if not a.is_number]
        return len(rest) == 1 and not any(a.has(sp.pi) for a in numbers) and _in_hertz(rest[0], hertz)
    if isinstance(expr, (sp.Add, sp.Abs, sp.Min, sp.Max)):
        return all(_in_hertz(a, hertz) for a in expr.args)
    return False


def _same_display(a: str, b: str) -> str:
    """The shared display of two calc names (LaTeX, else HTML as plain text), or ""."""
    (latex_a, html_a), (latex_b, html_b) = display_forms(a), display_forms(b)
    if latex_a == latex_b:
        return latex_a
    return re.sub(r"<[^>]+>", "", html_a) if html_a == html_b else ""


def _toml_key(name: str) -> str:
    return f'"{name}"' if "(" in name else name


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _kind(value) -> str:
    return {dict: "a table", list: "a list", str: "text", bool: "true/false", int: "a number",
            float: "a number"}.get(type(value), type(value).__name__)


def _sorted_problems(problems: list[CalcsheafError]) -> list[CalcsheafError]:
    return sorted(problems, key=lambda p: (p.line or 0, p.key or ""))
