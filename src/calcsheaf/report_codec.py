"""A calc's report as JSON-safe data for the build cache, and back.

A cache hit reuses the calc's rendered files (page, PDF, results.json, plots)
as bytes; the report is needed only for what is made from all calcs together
(the index, the project PDF, the build's summary lines).  So the stored form
keeps the report's plain fields (numbers, text, the rows of inputs, modes,
results, criteria, checks ...) and leaves out the symbolic derivation and the
numerical arrays: a report read back has `derivation`, `equations`,
`linearisation`, `frequency_response`, `time_history` and `energy` empty.

Decoding builds only the model's own frozen dataclasses and the errors of
`calcsheaf.errors`, by name from fixed lists: nothing is evaluated.
"""

from __future__ import annotations

import dataclasses
import hashlib
from pathlib import Path

import numpy as np

from . import errors, model as m

ROWS = {cls.__name__: cls for cls in (
    m.Assumption, m.Reference, m.InputRow, m.CoordinateRow, m.Check, m.Equilibrium, m.Mode,
    m.OutputSummary, m.ResultValue, m.CriterionRow, m.CrosscheckRow, m.CrosscheckInput)}
KEPT = ("number", "title", "input_hash", "revision", "status", "purpose", "assumptions",
        "references", "inputs", "coordinates", "equilibrium", "modes", "outputs", "results",
        "criteria", "crosschecks", "checks", "cautions", "hazards", "software")
ERROR_FIELDS = ("problem", "file", "line", "column", "key", "fix")


class NotStorable(Exception):
    """The report holds something the cache cannot store exactly (it is then not cached)."""


def encode_report(report: m.CalcReport) -> dict:
    data = {name: _encode(getattr(report, name)) for name in KEPT}
    data["error"] = None if report.error is None else _encode_error(report.error)
    return data


def decode_report(data: dict, path: Path, source: bytes) -> m.CalcReport:
    """The report stored by encode_report, for the calc file `path` whose bytes are `source`."""
    fields = {name: _decode(data[name]) for name in KEPT}
    if fields["input_hash"] != hashlib.sha256(source).hexdigest():
        raise ValueError("the cache entry belongs to other content")
    error = None if data["error"] is None else _decode_error(data["error"])
    return m.CalcReport(source_path=path, source_text=source.decode("utf-8", "replace"),
                        error=error, **fields)


def _encode(value):
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value)
    if value is None or isinstance(value, str):
        return value
    if dataclasses.is_dataclass(value) and type(value).__name__ in ROWS:
        return {"row": type(value).__name__,
                "fields": {f.name: _encode(getattr(value, f.name)) for f in dataclasses.fields(value)}}
    if isinstance(value, tuple):
        return {"tuple": [_encode(v) for v in value]}
    if isinstance(value, dict) and all(isinstance(k, str) for k in value):
        return {"dict": {k: _encode(v) for k, v in value.items()}}
    raise NotStorable(f"cannot store a {type(value).__name__} in the cache")


def _decode(value):
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    if set(value) == {"tuple"}:
        return tuple(_decode(v) for v in value["tuple"])
    if set(value) == {"dict"}:
        return {k: _decode(v) for k, v in value["dict"].items()}
    if set(value) == {"row", "fields"}:
        return ROWS[value["row"]](**{k: _decode(v) for k, v in value["fields"].items()})
    raise ValueError("malformed cache entry")


def _error_classes() -> dict[str, type]:
    return {name: cls for name, cls in vars(errors).items()
            if isinstance(cls, type) and issubclass(cls, errors.CalcsheafError)}


def _encode_error(error: Exception) -> dict:
    if not isinstance(error, errors.CalcsheafError) or type(error).__name__ not in _error_classes():
        raise NotStorable(f"cannot store a {type(error).__name__} in the cache")
    if isinstance(error, errors.ProblemList):
        return {"class": "ProblemList", "problems": [_encode_error(p) for p in error.problems]}
    return {"class": type(error).__name__, **{f: _encode(getattr(error, f)) for f in ERROR_FIELDS}}


def _decode_error(data: dict) -> errors.CalcsheafError:
    if data["class"] == "ProblemList":
        return errors.ProblemList([_decode_error(p) for p in data["problems"]])
    cls = _error_classes()[data["class"]]
    problem = data["problem"]
    if not isinstance(problem, str):
        raise ValueError("malformed cache entry")
    return cls(problem, **{f: data[f] for f in ERROR_FIELDS[1:]})
