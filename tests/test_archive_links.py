"""Unsigned and linked revision folders, and deep or malformed records (issue 13, attack
round 13: F1, F5, F7, F8, F10).

A revision counts as issued on the site only when its signatures verify; symbolic links
under issued/ are refused; malformed records give failed rows or messages.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
from pathlib import Path

import pytest

from calcsheaf.archive import revisions
from calcsheaf.archive.manifest import MANIFEST
from calcsheaf.archive.verify import verify_path
from calcsheaf.errors import ArchiveError
from test_archive import _failures, _sign_both, env, fake_render, project, tiny_pdf  # noqa: F401


def _issue(project, rev, pdf):
    return revisions.issue(project, "C-1", rev, render=fake_render(pdf))


def _forge(folder: Path, rev: str, pdf: bytes) -> Path:
    """A copy of `folder` as revision `rev` with a hand-edited manifest (signatures stale)."""
    forged = Path(shutil.copytree(folder, folder.parent / rev))
    manifest = json.loads((forged / MANIFEST).read_text())
    (forged / "output" / "C-1.pdf").write_bytes(pdf)
    manifest["files"]["output/C-1.pdf"] = hashlib.sha256(pdf).hexdigest()
    manifest.update(revision=rev, description="FORGED issue", supersedes={
        "revision": folder.name,
        "manifest_sha256": hashlib.sha256((folder / MANIFEST).read_bytes()).hexdigest()})
    manifest["prepared_by"]["name"] = "Director Big"
    (forged / MANIFEST).write_text(json.dumps(manifest, indent=2))
    return forged


def test_an_unsigned_revision_folder_is_never_shown_or_served_as_issued(project, tiny_pdf):
    _sign_both(project)
    good = _issue(project, "A", tiny_pdf)
    _forge(good, "B", tiny_pdf + b"% forged\n")
    history = revisions.revision_history(project, "C-1")
    assert [(h["rev"], h["status"][:13]) for h in history] == [("A", "issued"),
                                                                ("B", "NOT VERIFIED:")]
    assert history[1]["status"].startswith("NOT VERIFIED: manifest signature (checker): Ed25519")
    shown = json.dumps([dict(h, status="") for h in history])
    assert "Director Big" not in shown and "FORGED" not in shown
    assert history[0]["prepared_by"] == "Alice Able" and history[0]["superseded_by"] is None
    assert revisions.issued_pdf(project, "C-1", "A").startswith(tiny_pdf[:4])
    with pytest.raises(ArchiveError, match="revision B of calc C-1 does not verify"):
        revisions.issued_pdf(project, "C-1", "B")
    with pytest.raises(ArchiveError, match="no revision can supersede it"):
        revisions.check_new_revision(project, "C-1", "C")


def test_history_names_come_from_the_roster_not_the_manifest(project, tiny_pdf):
    _sign_both(project)
    _issue(project, "A", tiny_pdf)
    (entry,) = revisions.revision_history(project, "C-1")
    assert (entry["prepared_by"], entry["checked_by"]) == ("Alice Able", "Chris Dale")
    assert entry["status"] == "issued" and entry["verified"] is True


def test_a_linked_revision_folder_is_another_calcs_and_fails(project, tiny_pdf):
    _sign_both(project)
    good = _issue(project, "A", tiny_pdf)
    other = project / "issued" / "C-2"
    other.mkdir()
    os.symlink("../C-1/A", other / "A")
    ((section, rows),) = verify_path(other / "A")
    assert dict(_failures(rows))["revision folder"].endswith(
        "is a symbolic link: an issued revision is a real folder under its own calc (a link "
        "can make one calc's revision pass as another's); replace the link by the archived copy")
    failed = [detail for title, rows in verify_path(project) for _, detail in _failures(rows)]
    assert any("C-2/A is a symbolic link" in d for d in failed)
    (entry,) = revisions.revision_history(project, "C-2")
    assert entry["status"].startswith("NOT VERIFIED: revision folder: ") and not entry["verified"]
    assert revisions.revision_history(project, "C-1")[0]["status"] == "issued"
    assert good.is_dir()


def test_issue_and_sign_refuse_links_in_issued(project, tiny_pdf, tmp_path):
    from calcsheaf.archive import keys as K, signoffs
    _sign_both(project)
    base = project / "issued" / "C-1"
    base.mkdir(parents=True)
    victim = tmp_path / "victim"
    (victim / ".staging-keep").mkdir(parents=True)
    (victim / ".staging-keep" / "f").write_text("precious")
    os.symlink(victim / ".staging-keep", base / ".staging-x")
    with pytest.raises(ArchiveError) as caught:
        _issue(project, "A", tiny_pdf)
    assert str(caught.value.file) == str(base / ".staging-x")
    assert caught.value.problem.startswith("is a symbolic link; calcsheaf never follows links")
    (base / ".staging-x").unlink()
    base.rmdir()
    (victim / "C-1" / ".staging-keep2").mkdir(parents=True)
    os.symlink(victim / "C-1", base)
    with pytest.raises(ArchiveError, match="is a symbolic link"):
        _issue(project, "A", tiny_pdf)
    with pytest.raises(ArchiveError, match="is a symbolic link"):
        signoffs.sign(project, "C-1", "preparer", K.unlock("ab"))
    assert (victim / "C-1" / ".staging-keep2").is_dir()
    assert (victim / ".staging-keep" / "f").read_text() == "precious"
    assert sorted(p.name for p in (victim / "C-1").iterdir()) == [".staging-keep2"]


def test_a_deeply_nested_manifest_is_a_message_in_history_sign_and_issue(project, tiny_pdf):
    from calcsheaf.archive import keys as K, signoffs
    _sign_both(project)
    _issue(project, "A", tiny_pdf)
    deep = project / "issued" / "C-1" / "B"
    deep.mkdir()
    (deep / MANIFEST).write_text("[" * 100000 + "]" * 100000)
    for attempt in (lambda: revisions.revision_history(project, "C-1"),
                    lambda: signoffs.sign(project, "C-1", "preparer", K.unlock("ab")),
                    lambda: _issue(project, "C", tiny_pdf)):
        with pytest.raises(ArchiveError) as caught:
            attempt()
        assert caught.value.problem == ("is not a calcsheaf manifest (not a JSON object)")
        assert str(caught.value.file) == str(deep / MANIFEST)


def test_issue_removes_only_the_staging_folders_an_issue_made(project, tiny_pdf):
    _sign_both(project)
    base = project / "issued" / "C-1"
    (base / ".staging-keep").mkdir(parents=True)
    (base / ".staging-keep" / "f").write_text("precious")
    (base / ".staging-old").mkdir()
    (base / ".staging-old" / revisions.STAGING_MARKER).write_bytes(b"")
    folder = _issue(project, "A", tiny_pdf)
    assert (base / ".staging-keep" / "f").read_text() == "precious"
    assert not (base / ".staging-old").exists()
    assert not (folder / revisions.STAGING_MARKER).exists()
    assert not _failures(verify_path(folder)[0][1])
