"""The cautions every package carries, and those for particular hazards.

All caution wording lives here so that pages and PDFs say the same thing.
"""

from __future__ import annotations

from calcsheaf.errors import BuildError
from calcsheaf.model import CalcReport

GENERAL = (
    "This calculation describes an idealised mathematical model of the system, "
    "not the system itself. Its results are only as good as that model and its inputs.",
    "The results hold only under the assumptions stated in this calculation. "
    "If any assumption does not hold for the built system, the results do not apply.",
    "The engineer of record remains responsible for the design, for judging whether "
    "this model represents the system, and for every decision taken on its results.",
    "Local codes, standards and the authority having jurisdiction govern. Where they "
    "call for other loads, factors or methods, they take precedence over this calculation.",
)

HAZARDS = {
    "suspended_load": (
        "Suspended load: a dropped or swinging load can kill. Rigging, hoists and their "
        "supports must be rated, inspected and operated to the governing lifting rules; "
        "dynamic effects (snatch, sudden stop, swing) must be covered by the design."
    ),
    "people_under_load": (
        "People under the load: keep people out from under a moving or suspended load "
        "unless the governing rules for lifting over people are met, including secondary "
        "retention and the higher design factors those rules require."
    ),
    "rotating_machinery": (
        "Rotating machinery: unbalance, resonance and part failure can throw fragments "
        "and transmit large forces. Guard moving parts, check operation away from "
        "natural frequencies including run-up and run-down, and follow the maker's limits."
    ),
}


# The short form of each hazard caution, printed at the foot of every sheet of the calc
# (the full text above is in its Cautions section).
HAZARD_MARKS = {
    "suspended_load": "Suspended load: a dropped or swinging load can kill; rigging and "
                      "supports to the governing lifting rules.",
    "people_under_load": "People under the load: keep people clear unless the rules for "
                         "lifting over people are met.",
    "rotating_machinery": "Rotating machinery: guard moving parts; operate away from "
                          "natural frequencies, run-up and run-down included.",
}
HAZARD_MARK_LEAD = "CAUTION"
HAZARD_MARK_TAIL = "Full text under Cautions."


def hazard_marks(hazards: tuple[str, ...]) -> list[str]:
    """Short caution for each hazard named by the calc, for the foot of every sheet."""
    hazard_cautions(hazards)           # refuses unknown hazards with the same message
    return [HAZARD_MARKS[name] for name in dict.fromkeys(hazards)]


def hazard_cautions(hazards: tuple[str, ...]) -> list[str]:
    """Caution text for each hazard named by the calc, in the order given."""
    unknown = sorted(set(hazards) - set(HAZARDS))
    if unknown:
        raise BuildError(f"unknown hazard {', '.join(unknown)}", key="hazards",
                         fix=f"use one of {', '.join(sorted(HAZARDS))}")
    return [HAZARDS[name] for name in dict.fromkeys(hazards)]


def calc_cautions(report: CalcReport) -> list[str]:
    """General cautions, then hazard cautions, then the calc's own cautions."""
    return [*GENERAL, *hazard_cautions(report.hazards), *report.cautions]


DRAFT_MARK = "DRAFT: not for construction"
