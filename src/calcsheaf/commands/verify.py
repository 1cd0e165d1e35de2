"""`calcsheaf verify`: prove an issued revision, a project or a site unchanged.

Imports no analysis code unless --recompute is given, so it starts fast.
"""

from __future__ import annotations

from pathlib import Path

from calcsheaf.archive.verify import verify_path
from calcsheaf.errors import VerificationError


def verify(path: Path, *, recompute: bool = False) -> int:
    """Print a verdict per item; 0 when everything verifies, 1 otherwise."""
    sections = verify_path(Path(path), recompute=recompute_results if recompute else None)
    if not sections:
        raise VerificationError("nothing to verify here", file=path,
                                fix="give an issued/<CALC>/<REV> folder, a project or a _site")
    failed = total = 0
    for title, rows in sections:
        print(title)
        for item, passed, detail in rows:
            total += 1
            failed += not passed
            print(f"  {'ok  ' if passed else 'FAIL'}  {item}: {detail}")
    if failed:
        print(f"NOT VERIFIED: {failed} of {total} checks failed")
        return 1
    print(f"VERIFIED: all {total} checks passed")
    return 0


def recompute_results(calc_file: Path, project_toml: Path) -> dict:
    """Re-run the calc from frozen inputs and return its results.json dict."""
    from calcsheaf.analysis import analyse_calc_file
    from calcsheaf.project import load_project
    from calcsheaf.render.json import results_dict

    report = analyse_calc_file(calc_file, project_toml)
    return results_dict(report, load_project(project_toml.parent))
