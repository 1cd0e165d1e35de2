"""`calcsheaf sign`: a preparer's or checker's signature over a calc's current content."""

from __future__ import annotations

from pathlib import Path

from calcsheaf.archive import keys as K
from calcsheaf.archive import projectfiles, signoffs


def sign(project: Path, calc: str, role: str, person: str) -> int:
    """Sign calc `calc` of `project` as `role` (preparer | checker) with `person`'s key."""
    project = Path(project)
    projectfiles.identifiers_check("calc number", calc, "calc")
    projectfiles.identifiers_check("person id", person, "--person")
    record = signoffs.sign(project, calc, role, K.unlock(person))
    statement = record["statement"]
    print(f"Signed calc {calc} as {role}: {statement['name']} ({person}, the name project.toml "
          f"lists), {statement['date']}, "
          f"content SHA-256 {statement['content_hash'][:16]}...")
    print(f"Sign-off stored in {signoffs.signoff_file(project, calc)}")
    return 0
