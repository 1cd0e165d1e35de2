"""`calcsheaf diff`: every input and result of two revisions, side by side.

`current` is the working calc file, analysed afresh (in an isolated process under the
build's limits) from the bytes read for the comparison, never a stale build.
"""

from __future__ import annotations

import tempfile
from pathlib import Path

from calcsheaf.archive.diff import format_diff, revision_diff


def diff(project: Path, calc: str, rev_a: str, rev_b: str) -> int:
    """Print what changed from revision `rev_a` to `rev_b` (`current` = the working file)."""
    project = Path(project)
    print(format_diff(revision_diff(project, calc, rev_a, rev_b,
                                    analyse=_analyser(project))), end="")
    return 0


def _analyser(project: Path):
    def analyse(path: Path, data: bytes) -> dict:
        """Results of exactly `data` (the calc file's bytes as read), analysed afresh."""
        from calcsheaf.commands.verify import results_isolated
        with tempfile.TemporaryDirectory(prefix="calcsheaf-diff-") as tmp:
            copy = Path(tmp) / path.name
            copy.write_bytes(data)
            return results_isolated(copy, project)
    return analyse
