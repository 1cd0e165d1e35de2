"""`calcsheaf diff`: inputs, assumptions, results and criteria of two revisions side by side."""

from __future__ import annotations

from pathlib import Path

from calcsheaf.archive.diff import format_diff, revision_diff


def diff(project: Path, calc: str, rev_a: str, rev_b: str) -> int:
    """Print what changed from revision `rev_a` to `rev_b` (`current` = the latest build)."""
    print(format_diff(revision_diff(Path(project), calc, rev_a, rev_b)), end="")
    return 0
