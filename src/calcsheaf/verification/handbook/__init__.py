"""The handbook library: closed-form cases with their sources, by family.

`CASES` maps every case key to its `Case`, sorted by key; `get_case` looks one
up and suggests the nearest key when it is unknown.  Every value in and out is
SI; see docs/handbook.md for the table of cases.
"""

from __future__ import annotations

import difflib
from types import MappingProxyType
from typing import Mapping

from calcsheaf.errors import InputError

from . import free_vibration, forced_vibration, multi_dof, pendulums, pulleys_rolling, rotating
from .case import Case, Quantity, ValidityLimit

FAMILIES = (free_vibration, forced_vibration, pendulums, pulleys_rolling, rotating, multi_dof)


def _collect() -> Mapping[str, Case]:
    cases: dict[str, Case] = {}
    for family in FAMILIES:
        for case in family.CASES:
            if case.key in cases:
                raise ValueError(f"duplicate handbook case key {case.key}")
            cases[case.key] = case
    return MappingProxyType(dict(sorted(cases.items())))


CASES: Mapping[str, Case] = _collect()


def get_case(key: str) -> Case:
    """The case with this key; an unknown key raises InputError naming the nearest keys."""
    try:
        return CASES[key]
    except KeyError:
        pass
    close = difflib.get_close_matches(key, list(CASES), n=3, cutoff=0.5)
    hint = f"did you mean {' or '.join(repr(c) for c in close)}? " if close else ""
    raise InputError(f"unknown handbook case '{key}'", key="crosscheck.case",
                     fix=f"{hint}Known cases: {', '.join(CASES)}.")


__all__ = ["CASES", "Case", "Quantity", "ValidityLimit", "get_case"]
