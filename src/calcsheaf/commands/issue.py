"""`calcsheaf issue`: freeze, sign and record a revision of a checked calc."""

from __future__ import annotations

from pathlib import Path

from calcsheaf.archive import revisions


def issue(project: Path, calc: str, rev: str, *, description: str = "") -> int:
    """Issue revision `rev` of calc `calc`; needs both sign-offs on the current content.

    `description` (optional, e.g. "Issued for construction") is shown in revision tables.
    Both people's key files must be on this machine; their passphrases come from
    CALCSHEAF_PASSPHRASE_<ID> (or CALCSHEAF_PASSPHRASE, or a prompt for each).
    """
    project = Path(project)
    folder = revisions.issue(project, calc, rev, description=description)
    for entry in revisions.revision_history(project, calc):
        if entry["superseded_by"] == rev:
            print(f"Revision {entry['rev']} of calc {calc} is now superseded by {rev}")
    print(f"Issued calc {calc} revision {rev}: {folder}")
    return 0
