"""`calcsheaf verify`: prove an issued revision, a project or a site unchanged.

Imports no analysis code unless --recompute is given, so it starts fast.  The report's
first line says what the verdict trusts: the keys as listed in project.toml, or with
`--trust KEYRING` the keys of a keyring the firm keeps outside the project.
"""

from __future__ import annotations

import json
from pathlib import Path

from calcsheaf.archive.verify import load_keyring, trusted_keys, verify_path
from calcsheaf.errors import ArchiveError, VerificationError


def verify(path: Path, *, recompute: bool = False, trust: Path | None = None) -> int:
    """Print a verdict per item; 0 when everything verifies, 1 otherwise."""
    keyring = load_keyring(trust) if trust is not None else None
    sections = verify_path(Path(path), recompute=recompute_revision if recompute else None,
                           trust=keyring)
    if not sections:
        raise VerificationError("nothing to verify here", file=path,
                                fix="give an issued/<CALC>/<REV> folder, a project or a _site")
    print(trusted_keys(Path(path), keyring))
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


def recompute_revision(folder: Path, manifest: dict) -> dict:
    """Re-analyse an issued revision from its frozen inputs, in an isolated process under
    the build's limits, without any cache; and re-render its page, PDF and results.json
    when the revision froze its render context (output/render.json).

    Returns {"results", "files" (output-relative path -> bytes, or None), "note"}.
    """
    from calcsheaf.commands.issue import RENDER_RECORD, render_isolated

    folder = Path(folder)
    calc_file = folder / manifest["calc_file"]
    if folder.resolve() not in calc_file.resolve().parents or not calc_file.is_file():
        raise ArchiveError(f"the frozen calc file {manifest['calc_file']} is missing",
                           file=folder, fix="restore the revision folder from the archive")
    record = folder / "output" / RENDER_RECORD
    context = _render_context(record, manifest)
    if context is None:
        return {"results": results_isolated(calc_file, folder / "inputs"), "files": None,
                "note": f"the revision has no {RENDER_RECORD} (issued by an older calcsheaf): "
                        "only results.json was recomputed"}
    files, _ = render_isolated(calc_file, folder / "inputs", context)
    files[RENDER_RECORD] = record.read_bytes()
    return {"results": json.loads(files["results.json"]), "files": files,
            "note": "results, page, PDF and theme files rendered afresh"}


def _render_context(record: Path, manifest: dict) -> dict | None:
    try:
        context = json.loads(record.read_text(encoding="utf-8"))
    except FileNotFoundError:
        return None
    except (ValueError, UnicodeDecodeError, OSError) as exc:
        raise ArchiveError(f"cannot be read ({exc})", file=record,
                           fix="restore the revision folder from the archive") from None
    needed = {"calc": str, "status": str, "revision": str, "signoff": dict, "history": list,
              "build_date": str}
    if not isinstance(context, dict) or any(not isinstance(context.get(k), t)
                                            for k, t in needed.items()):
        raise ArchiveError("is not a render record", file=record,
                           fix="restore the revision folder from the archive")
    if (context["calc"], context["revision"]) != (manifest["calc"], manifest["revision"]):
        raise ArchiveError("is the render record of another calc or revision", file=record,
                           fix="restore the revision folder from the archive")
    return context


def results_isolated(calc_file: Path, inputs: Path) -> dict:
    """results.json of one calc file analysed afresh in an isolated, limited process."""
    import functools

    from calcsheaf.errors import CalcsheafError
    from calcsheaf.isolation import run_isolated

    work = functools.partial(_results_child, inputs=inputs)
    [outcome] = run_isolated(work, [Path(calc_file)], 1, lambda path, error: error)
    if isinstance(outcome, CalcsheafError):
        raise outcome
    return outcome


def _results_child(path: Path, *, inputs: Path):
    from calcsheaf.pipeline import analyse_one
    from calcsheaf.project import load_project
    from calcsheaf.render.json import results_dict

    report = analyse_one(path)
    if report.error is not None:
        return report.error
    return results_dict(report, load_project(inputs))
